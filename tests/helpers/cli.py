"""Run the command line in a fresh process, and check one-line refusals."""

from __future__ import annotations

import subprocess
import sys

__all__ = ["cli", "refused"]


def cli(*args, cwd=None):
    """``geo-reach ARGS`` as ``python -m geo_reach``; returns (exit code, stdout, stderr)."""
    p = subprocess.run([sys.executable, "-m", "geo_reach", *map(str, args)], capture_output=True, text=True,
                       cwd=cwd)
    return p.returncode, p.stdout, p.stderr


def refused(args, *words):
    """Run ``args`` and check the refusal: exit 2, exactly one line on stderr, holding every word."""
    code, out, err = cli(*args)
    assert code == 2, err
    lines = [ln for ln in err.splitlines() if ln.strip()]
    assert len(lines) == 1, err
    for w in words:
        assert w in lines[0], (w, lines[0])
    return lines[0]
