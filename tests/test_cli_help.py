"""Every command and every argument explains itself in ``--help`` (common practice for command-line tools)."""

import argparse

from geo_reach.cli import build_parser


def _subparsers():
    p = build_parser()
    for a in p._actions:
        if isinstance(a, argparse._SubParsersAction):
            return a.choices
    raise AssertionError("no subcommands")


def test_every_argument_of_every_command_has_help():
    missing = [f"{name} {x.option_strings or x.dest}" for name, sp in _subparsers().items()
               for x in sp._actions if not isinstance(x, argparse._HelpAction) and not (x.help or "").strip()]
    assert missing == []


def test_outputs_are_named_alike_and_optional_where_a_default_exists():
    # -o/--output means the output in every command that writes one; run and compare both default it
    subs = _subparsers()
    for name in ("run", "compare"):
        o = [x for x in subs[name]._actions if "-o" in x.option_strings]
        assert len(o) == 1 and "--output" in o[0].option_strings and not o[0].required, name
