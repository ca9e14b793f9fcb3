"""A second core's search beside HiGHS's branch and bound.

HiGHS proves the bound with one thread; the start heuristic of :mod:`cogendispatch.solve`
(LP relaxation rounded, then fix-and-optimise window by window and unit by unit) runs
meanwhile on a copy of the loaded model in a second thread. Each better schedule either
side finds is handed to the other: HiGHS takes the helper's through its user-solution
callback (pruning with it and searching around it), and the helper improves from HiGHS's
newest incumbent. HiGHS releases the Python lock while it solves, so the two threads run
on two cores. While the helper runs, HiGHS leaves finding schedules to it (no primal
heuristics of its own; ``BESIDE_HIGHS_OPTIONS`` in :mod:`cogendispatch.solve`).
"""

from __future__ import annotations

import math
import threading
import time
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:
    from .solve import LoadedModel


class Incumbent:
    """The best schedule found so far by either thread (column values and objective)."""

    def __init__(self) -> None:
        self._lock = threading.Lock()
        self.x: np.ndarray | None = None
        self.objective = math.inf
        self.version = 0  # counts improvements, so a reader knows whether it has the newest
        self.source = ""
        self.first_start: float | None = None  # [EUR] the rounding start's objective, for the report
        self.stop = threading.Event()
        self.started = threading.Event()  # set once the helper's start is made (or failed)
        self.error: str | None = None  # what stopped the helper early, if anything
        self.lp_bound: float | None = None  # [EUR] the helper's LP relaxation, a valid bound

    def offer(self, x: np.ndarray, objective: float, source: str) -> int:
        """Keep ``x`` if it beats the incumbent by more than round-off; the version it
        became, 0 if not kept."""
        with self._lock:
            if objective < self.objective - 1e-9 * max(1.0, abs(objective)):
                self.x, self.objective, self.source = np.array(x, dtype=float), float(objective), source
                self.version += 1
                return self.version
        return 0

    def get(self) -> tuple[np.ndarray | None, float, int]:
        """The best schedule shared so far: (column values, objective, version)."""
        with self._lock:
            return self.x, self.objective, self.version


# the helper's improvement passes, in turn: (hours per window, hours between windows, first
# window's hour) for fix-and-optimise over time, or None for unit by unit over the week
PASSES: tuple[tuple[int, int, int] | None, ...] = ((24, 12, 0), (48, 24, 0), None, (24, 12, 6))


# [s] below this time limit the helper first sweeps 12 h windows (6 h apart) over the rounded
# start: 0.1 to 0.3 s each, about 5 s in all on the demo week. It halves the gap at 15 s (0.61
# to 0.27 %) and at 30 s (0.17 to 0.24 % down to 0.14 %), but when HiGHS has time to prove
# 0.1 % it made that proof slower and erratic (76 to 202 s in eight runs against 67 to 76 s),
# so only limits too short for the proof get it (measured here, 2 cores; DEVELOPERS.md)
QUICK_SWEEP_LIMIT = 45.0
QUICK_SWEEP = (12, 6, 0)  # (hours per window, hours between windows, first window's hour)

# share of the time left that a start may take when the LP relaxation itself is short
# (LoadedModel.rounding_start)
SHORT_START_SHARE = 0.75
# [s] the start's LP relaxation runs at least this long, whatever the time limit: without it
# there is no schedule at all (on a busy machine a 10 s plan of the demo week ran out in it)
START_LP_MIN = 60.0
SHORT_START_MAX = 120.0  # [s] at most, whatever the time limit
START_GAP = 1e-2  # [-] the rounded start's MILP over the drivers: 1.7 s on the demo week (5.6 s at 1e-3)


def helper_search(helper: LoadedModel, best: Incumbent, deadline: float, quick_sweep: bool = False) -> None:
    """The second thread's work until ``deadline`` [perf_counter s] or ``best.stop``: the
    LP relaxation's commitment rounded (drivers by a MILP at :data:`START_GAP`), with
    ``quick_sweep`` one sweep of 12 h windows over it (see :data:`QUICK_SWEEP_LIMIT`), then
    improvement passes (:data:`PASSES`) from the newest incumbent; when a whole round of
    passes finds nothing, it waits for HiGHS's next. An error ends the helper only; it is
    kept in ``best.error``."""
    try:
        left = deadline - time.perf_counter()
        # a quick start at a loose gap: the passes below improve on it faster than HiGHS closes it
        try:
            x = helper.rounding_start(min(left / 2, 60.0), gap=START_GAP, lp_time_limit=max(left, START_LP_MIN),
                                      short_time_limit=min(SHORT_START_SHARE * left, SHORT_START_MAX))
            best.lp_bound = helper.lp_bound  # a valid bound for HiGHS's report, should it have none
            if x is not None and helper.start_objective is not None:
                best.first_start = helper.start_objective
                best.offer(x, helper.start_objective, "start")
        finally:
            best.started.set()
        x, obj, _ = best.get()
        if quick_sweep and x is not None:
            helper.improve_windows(x, obj, deadline - time.perf_counter(), *QUICK_SWEEP, best=best)
        stale, seen, turn = 0, -1, 0
        while not best.stop.is_set() and deadline - time.perf_counter() > 0.5:
            x, obj, version = best.get()
            stale = stale + 1 if version == seen else 0
            if x is None or stale >= len(PASSES):  # nothing new to search around: wait
                best.stop.wait(0.5)
                continue
            seen = version
            kind = PASSES[turn % len(PASSES)]
            turn += 1
            if kind is None:
                helper.improve(x, obj, deadline - time.perf_counter(), best=best)
            else:
                helper.improve_windows(x, obj, deadline - time.perf_counter(), *kind, best=best)
    except Exception as exc:  # noqa: BLE001  the helper only ever adds schedules; HiGHS goes on alone
        best.error = f"{type(exc).__name__}: {exc}"
