"""The ``cogen`` console script.

The command line is imported inside :func:`run`, so that Ctrl-C during start-up (a second or
two of imports: pandas, Pyomo, HiGHS) ends as quietly as Ctrl-C later does, with exit code
130 and no traceback.
"""

from __future__ import annotations

import sys

INTERRUPTED = 130  # exit code after Ctrl-C, as cli.EXIT_INTERRUPT


def run() -> None:
    """Import the command line and run it with the process's arguments."""
    try:
        from .cli import main
    except KeyboardInterrupt:
        print("interrupted while starting; nothing was done", file=sys.stderr)
        sys.exit(INTERRUPTED)
    sys.exit(main())
