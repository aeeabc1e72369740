"""Run every benchmark script in this folder (``make bench``); not part of CI.

Each ``bench_*.py`` runs at its default (full) size in a process of its own and
prints a Markdown block for ``benchmarks/RESULTS.md``.  Pass names to run
some only: ``python benchmarks/run_all.py routing surface``.  Scripts that
fail are listed at the end and the exit status is 1.
"""

from __future__ import annotations

import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent


def main(argv: list[str]) -> int:
    scripts = sorted(HERE.glob("bench_*.py"))
    if argv:
        scripts = [s for s in scripts if s.stem.removeprefix("bench_") in argv]
    failed = []
    for s in scripts:
        print(f"\n## {s.stem} ({time.strftime('%Y-%m-%d %H:%M')})\n", flush=True)
        if subprocess.run([sys.executable, str(s)], cwd=HERE.parent).returncode != 0:
            failed.append(s.name)
    if failed:
        print(f"\nfailed: {', '.join(failed)}", file=sys.stderr)
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
