"""The ``geo-reach`` command line: thin fronts that parse, call and report.

Each subcommand lives in its own module exposing ``register(subparsers)``;
:func:`main` turns any :class:`~geo_reach.errors.InputError` into one line on
stderr and exit status 2.
"""

from __future__ import annotations

import argparse
import importlib
import re
import sys

from ..errors import GeoReachError, InputError

__all__ = ["main", "build_parser"]

#: Subcommand modules, in the order ``--help`` lists them.
COMMANDS = ["build", "check", "access", "route", "od", "metrics", "profile", "surface", "criticality", "run", "init", "demo"]


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


#: Options whose value may start with a minus sign (coordinates west or south of 0).
_SIGNED = ("--from", "--to", "--extent")
_NUMBERS = re.compile(r"^-\d|^-\.\d")


def _join_signed(argv):
    """``--from -21.0,-31.0`` -> ``--from=-21.0,-31.0`` (argparse would read the value as an option)."""
    out = []
    it = iter(range(len(argv)))
    for i in it:
        a = argv[i]
        if a in _SIGNED and i + 1 < len(argv) and _NUMBERS.match(argv[i + 1]):
            out.append(f"{a}={argv[i + 1]}")
            next(it, None)
        else:
            out.append(a)
    return out


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(_join_signed(list(sys.argv[1:] if argv is None else argv)))
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
