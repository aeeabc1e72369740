"""What the user sees while a run works: a tqdm bar on a terminal, timed lines otherwise (logs, CI).

The library reports steps through a callback and the ``geo_reach`` logger;
only the command line turns them into text, here.
"""

from __future__ import annotations

import logging
import sys
import time

__all__ = ["StepDisplay", "setup_logging"]


class StepDisplay:
    """A progress callback for :func:`geo_reach.pipeline.run_study` (``enabled=False``: silent)."""

    def __init__(self, enabled: bool = True, total: int | None = None, out=None):
        self.enabled = enabled
        self.t0 = time.perf_counter()
        self.out = out or sys.stderr
        self.bar = None
        if enabled and total and getattr(self.out, "isatty", lambda: False)():
            from tqdm import tqdm

            self.bar = tqdm(total=total, file=self.out, unit="step", leave=False,
                            bar_format="{desc:<34.34} {bar} {n_fmt}/{total_fmt} [{elapsed}]")

    def __call__(self, step: str) -> None:
        if not self.enabled:
            return
        if self.bar is not None:
            if self.bar.n < self.bar.total:
                self.bar.update(1)
            self.bar.set_description_str(step)
        else:
            print(f"[{time.perf_counter() - self.t0:6.1f} s] {step} ...", file=self.out, flush=True)

    def close(self) -> None:
        if not self.enabled:
            return
        if self.bar is not None:
            self.bar.close()
        print(f"[{time.perf_counter() - self.t0:6.1f} s] done", file=self.out, flush=True)


class _OneLine(logging.Formatter):
    def format(self, record):
        return "geo-reach: " + " ".join(record.getMessage().split())


def setup_logging() -> None:
    """Warnings from the library go to stderr as ``geo-reach: ...`` lines (once per process)."""
    logger = logging.getLogger("geo_reach")
    if any(getattr(h, "_geo_reach", False) for h in logger.handlers):
        return
    h = logging.StreamHandler(sys.stderr)
    h.setFormatter(_OneLine())
    h.setLevel(logging.WARNING)
    h._geo_reach = True
    logger.addHandler(h)
    logger.setLevel(logging.INFO)
    logger.propagate = False
