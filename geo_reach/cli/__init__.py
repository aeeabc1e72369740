"""The ``geo-reach`` command line: thin fronts that parse, call and report.

Each subcommand lives in its own module exposing ``register(subparsers)``;
:func:`main` turns any :class:`~geo_reach.errors.InputError` into one line on
stderr and exit status 2.
"""

from __future__ import annotations

import argparse
import importlib
import sys

from ..errors import GeoReachError, InputError

__all__ = ["main", "build_parser"]

#: Subcommand modules, in the order ``--help`` lists them.
COMMANDS = ["build", "check", "access", "route", "od", "metrics", "profile", "surface", "run", "init", "demo"]


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # one line, exit 2, like every other refusal
        self.exit(2, f"geo-reach: error: {message} (see geo-reach {self.prog.split()[-1]} --help)\n")


def build_parser() -> argparse.ArgumentParser:
    from .. import __version__

    parser = _Parser(prog="geo-reach", description="How well places are connected over road, rail and cable networks.")
    parser.add_argument("--version", action="version", version=f"geo-reach {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    sub.required = True
    for name in COMMANDS:
        importlib.import_module(f".{name}", __name__).register(sub)
    return parser


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return int(args.func(args) or 0)
    except InputError as err:
        msg = " ".join(str(err).split())
        print(f"geo-reach: error: {msg}", file=sys.stderr)
        return 2
    except GeoReachError as err:
        print(f"geo-reach: internal error: {' '.join(str(err).split())}", file=sys.stderr)
        return 1
    except KeyboardInterrupt:
        print("geo-reach: interrupted; outputs were not written", file=sys.stderr)
        return 130
