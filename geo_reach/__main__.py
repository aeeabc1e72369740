import os
import signal
import sys


def _interrupted_at_start(signum, _frame):
    # SIGINT/SIGTERM before main() has set its own handlers (while the command line is imported):
    # nothing has been read or written yet, so leave at once with one line, not a traceback.
    os.write(2, b"geo-reach: interrupted; nothing was written (outputs are replaced only when complete)\n")
    os._exit(128 + signum)


for _s in (signal.SIGINT, signal.SIGTERM):
    signal.signal(_s, _interrupted_at_start)

from .cli import main  # noqa: E402

sys.exit(main())
