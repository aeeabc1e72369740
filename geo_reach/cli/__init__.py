"""The ``geo-reach`` command line: thin fronts that parse, call and report.

Each subcommand lives in its own module exposing ``register(subparsers)``;
:func:`main` turns any :class:`~geo_reach.errors.InputError` into one line on
stderr and exit status 2.
"""

from __future__ import annotations

import argparse
import importlib
import os
import re
import signal
import sys

from ..errors import GeoReachError, InputError

__all__ = ["main", "build_parser"]

#: Subcommand modules, in the order ``--help`` lists them.
COMMANDS = ["build", "check", "access", "route", "od", "metrics", "profile", "surface", "criticality", "indices",
            "sites", "run", "init", "demo"]


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # one line, exit 2, like every other refusal
        self.exit(2, f"geo-reach: error: {message} (see geo-reach {self.prog.split()[-1]} --help)\n")


def build_parser() -> argparse.ArgumentParser:
    from .._meta import __version__

    parser = _Parser(prog="geo-reach", description="How well places are connected over road, rail and cable networks.")
    parser.add_argument("--version", action="version", version=f"geo-reach {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    sub.required = True
    for name in COMMANDS:
        importlib.import_module(f".{name}", __name__).register(sub)
    for cmd in sub.choices.values():
        cmd.set_defaults(_flags=_flags_of(cmd))
    return parser


def _flags_of(parser) -> dict:
    """Option name as the library calls it (argparse ``dest``) -> the flag the user types."""
    out = {}
    for a in parser._actions:
        longs = [o for o in a.option_strings if o.startswith("--")]
        if longs:
            out[a.dest] = longs[0]
    return out


def blame_flag(err: InputError, flags: dict) -> str:
    """The message of ``err`` with its option (``err.key``) named as the command's flag.

    Library messages name options in neutral words (``walk_kmh 0: must be
    ...``); on the command line the user typed ``--walk-kmh``.  Only the
    option's own name is replaced, never text quoted from the user's data.

    >>> from geo_reach.errors import OptionError
    >>> blame_flag(OptionError("walk_kmh 0: must be positive", key="walk_kmh"), {"walk_kmh": "--walk-kmh"})
    '--walk-kmh 0: must be positive'
    """
    msg = " ".join(str(err).split())
    key = getattr(err, "key", None)
    flag = flags.get(key) if key else None
    if flag:
        msg = re.sub(rf"(?<![\w'./-]){re.escape(key)}(?![\w'./-])", flag, msg)
    return msg


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


class _Signalled(KeyboardInterrupt):
    """Raised in the main thread when SIGINT or SIGTERM arrives (the temporaries are then removed)."""

    def __init__(self, signum: int):
        super().__init__(signum)
        self.signum = signum


def _on_signal(signum, _frame):
    # A second signal while the first unwinds must not interrupt the clean-up.
    for s in (signal.SIGINT, signal.SIGTERM):
        signal.signal(s, signal.SIG_IGN)
    raise _Signalled(signum)


def main(argv=None) -> int:
    """Run one command; return its exit status (0 done, 2 refused, 130/143 interrupted, 1 internal error)."""
    old = {s: signal.signal(s, _on_signal) for s in (signal.SIGINT, signal.SIGTERM)}
    try:
        return _main(argv)
    except KeyboardInterrupt as err:
        signum = getattr(err, "signum", signal.SIGINT)
        print("geo-reach: interrupted; nothing was written (outputs are replaced only when complete)",
              file=sys.stderr)
        sys.stderr.flush()
        sys.stdout.flush()
        if argv is None:   # the console command: leave at once, without running library finalisers
            os._exit(128 + signum)
        return 128 + signum
    finally:
        for s, h in old.items():
            signal.signal(s, h)


def _main(argv) -> int:
    from ._progress import setup_logging

    parser = build_parser()
    args = parser.parse_args(_join_signed(list(sys.argv[1:] if argv is None else argv)))
    setup_logging()
    try:
        return int(args.func(args) or 0)
    except InputError as err:
        print(f"geo-reach: error: {blame_flag(err, getattr(args, '_flags', {}))}", file=sys.stderr)
        return 2
    except GeoReachError as err:
        print(f"geo-reach: internal error: {' '.join(str(err).split())}", file=sys.stderr)
        return 1
