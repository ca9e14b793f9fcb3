"""Solve a site model with HiGHS: a rounding start, the MILP, status, gap and timings.

Pyomo builds the model and hands it to HiGHS once (``load``). HiGHS's own heuristics find
it hard to commit boilers so that every header is supplied in every hour, so the solve
first builds a start: the LP relaxation, its commitment rounded up and repaired to honour
minimum up/down times, the rest re-optimised, then improved unit by unit.
The MILP then starts from that schedule and closes the gap. With two threads or more the
start is built and improved beside HiGHS instead (:mod:`cogendispatch.beside`).
"""

from __future__ import annotations

import contextlib
import copy
import math
import multiprocessing
import os
import signal
import sys
import threading
import time
import weakref
from dataclasses import dataclass, field
from typing import Callable, Iterator

import highspy
import numpy as np
import pyomo.environ as pyo
from pyomo.contrib.solver.solvers.highs import Highs

from .beside import QUICK_SWEEP_LIMIT, SHORT_START_MAX, SHORT_START_SHARE, START_LP_MIN, Incumbent, helper_search
from .equipment.common import CommitInfo, held_value, repair_commitment, whole_hours
from .errors import SolveError
from .results import TOL as SLACK_TOL
from .site import SiteModel
from .strengthen import add_reserve_rows

Progress = Callable[[str], None]
SEARCH_SHARE_MAX = 30.0  # [s] most of a plan's time limit held back for HiGHS's own search
SEARCH_LP_TIMES = 2.5  # held back at least this many times the LP relaxation's time [-]
QUICK_LIMIT = 10.0  # [s] below this, a solve from a guessed start adds no reserve rows
# [s] of silence from HiGHS after which the plan says it is still at work: HiGHS calls back
# between its steps but not within its own sub-searches (sub-MIPs) or an LP, which on the
# demo week ran 7 to 36 s (measured here)
QUIET_NOTE = 10.0
# [h] either side of a shortfall freed by LoadedModel.settle_shortfalls, widest last: the
# site's longest minimum time (the demo's air blower keeps its driver 24 h) may need the wider
SETTLE_PADS = (12, 24)
COVER_PAD = 2  # [h] either side of a reserve shortfall where every boiler is tried on
COVER_SHARE = 0.7  # of the settling time, first spent on trying every boiler on (cover_reserve)
HINT_FREE_HOURS = 6  # [h] first hours a guessed start leaves free to join the initial state (ramps)
# HiGHS's options for the main branch and bound. No restart: on the demo week HiGHS restarts
# once, after its root cuts, when under 1 % of the columns are fixed, and then solves the
# root's LPs again; without it one thread proves 0.1 % in 171 to 179 s, not 208 to 213 s
# (measured here, two runs each).
MIP_OPTIONS: dict[str, float | bool] = {"mip_allow_restart": False}
# and while the helper searches beside it, none of HiGHS's own primal heuristics: they then
# cost the bound more than they give. Proving 0.1 % on the demo week from the best schedule
# took HiGHS 126 s with them and 66 s without (its sub-MIPs took 39 s of the root node); the
# schedules come from the helper instead (measured here, 2 cores). A one-thread solve keeps
# them: there, no helper finds schedules (without them it took 236 s instead of 171 to 179 s).
BESIDE_HIGHS_OPTIONS: dict[str, float | bool] = {
    "mip_heuristic_effort": 0.0, "mip_heuristic_run_rins": False, "mip_heuristic_run_rens": False,
    "mip_heuristic_run_root_reduced_cost": False, "mip_heuristic_run_feasibility_jump": False,
    **MIP_OPTIONS,
}


def _rel_gap(obj: float, bound: float) -> float:
    """Relative gap of a schedule of cost ``obj`` to a proven ``bound`` [-], as HiGHS gives
    it; infinite without a finite bound or schedule."""
    if not (math.isfinite(obj) and math.isfinite(bound)) or obj == 0:
        return float("inf")
    return (obj - bound) / abs(obj)


def settle_limit(time_limit: float) -> float:
    """[s] allowed to :meth:`LoadedModel.settle_shortfalls` after a search of
    ``time_limit`` [s]: a quarter of it, at least 2 s (or the whole limit, when shorter: a
    study's windows get 1.5 s) and at most 10 s."""
    return min(10.0, max(min(2.0, time_limit), time_limit / 4))


@dataclass(frozen=True)
class SolveOptions:
    """gap : relative MIP gap [-]; time_limit : [s]; threads : threads of the solve (with
    two or more and ``warm_start``, one goes to the helper search beside HiGHS);
    warm_start : build the rounding start first; strengthen : add the reserve rows
    of :mod:`cogendispatch.strengthen`; search_share : share of the time limit a solve
    without a guessed start keeps for HiGHS's own search rather than for improving the
    start (at least SEARCH_LP_TIMES times the LP relaxation's time, at most
    SEARCH_SHARE_MAX; 0 keeps nothing) [-]: a plan wants the proven bound that search
    gives, a study window's schedule matters more than its bound; settle : look for a
    schedule within the tolerance that meets every demand and the reserve when the one
    found leaves a slack in use (:meth:`LoadedModel.settle_shortfalls`)."""

    gap: float = 1e-3
    time_limit: float = 120.0
    threads: int = 1
    warm_start: bool = True
    strengthen: bool = True
    search_share: float = 0.25
    settle: bool = True

    @property
    def beside(self) -> bool:
        """Whether a helper thread builds and improves the start beside HiGHS (two or
        more threads and a start wanted; :mod:`cogendispatch.beside`)."""
        return self.threads >= 2 and self.warm_start

    @property
    def highs_threads(self) -> int:
        """HiGHS's own threads: one goes to the helper when there is one."""
        return self.threads - 1 if self.beside else self.threads


@dataclass
class SolveReport:
    status: str  # "optimal", "time limit", "infeasible", ...
    objective: float
    bound: float
    gap: float
    seconds: dict[str, float] = field(default_factory=dict)
    start_objective: float | None = None
    found_by: str = ""  # what found the schedule: "HiGHS", "start", "window by window", "unit by unit"
    # [currency] objective change of settle_shortfalls (new less old; None: not settled).
    # Positive: a dearer schedule, within the gap, taken to meet demand and reserve
    settle_change: float | None = None
    # what went wrong beside the search without stopping it (the helper failed, a callback
    # raised): said in summary.json and on standard error, --quiet or not
    notes: list[str] = field(default_factory=list)

    @property
    def has_solution(self) -> bool:
        """True when the solve returned a schedule (a finite objective)."""
        return math.isfinite(self.objective)


_STATUS = {
    highspy.HighsModelStatus.kOptimal: "optimal",
    highspy.HighsModelStatus.kTimeLimit: "time limit",
    highspy.HighsModelStatus.kInfeasible: "infeasible",
    highspy.HighsModelStatus.kUnboundedOrInfeasible: "infeasible",
    highspy.HighsModelStatus.kUnbounded: "unbounded",
    highspy.HighsModelStatus.kInterrupt: "interrupted",
    highspy.HighsModelStatus.kIterationLimit: "iteration limit",
    highspy.HighsModelStatus.kSolutionLimit: "solution limit",
}


def _ordered(seqs: list[list[float]]) -> bool:
    """Whether the driver sequences of identical machines keep machine k on steam only
    where machine k-1 is (their symmetry order); sequences of unequal length never do."""
    return all(len(b) == len(a) and all(y <= x for x, y in zip(a, b)) for a, b in zip(seqs, seqs[1:]))


# HiGHS's MIP callbacks a plan uses: progress, schedules handed in, schedules handed out
_MIP_CALLBACKS = (highspy.cb.HighsCallbackType.kCallbackMipInterrupt,
                  highspy.cb.HighsCallbackType.kCallbackMipUserSolution,
                  highspy.cb.HighsCallbackType.kCallbackMipImprovingSolution)
# the callbacks through which any run (LP or MIP) can be stopped; always on: calling back
# every simplex iteration cost nothing measurable on the demo week's LP (3.1 to 3.7 s either way)
_INTERRUPTS = (highspy.cb.HighsCallbackType.kCallbackSimplexInterrupt,
               highspy.cb.HighsCallbackType.kCallbackIpmInterrupt,
               highspy.cb.HighsCallbackType.kCallbackMipInterrupt)
_SCHEDULER = threading.local()
# set by Ctrl-C during a run: HiGHS calls back into Python, where a KeyboardInterrupt
# raised inside a callback would become a solver error and be lost
_INTERRUPTED = threading.Event()


def _on_ctrl_c(signum: int, frame: object) -> None:
    """First Ctrl-C: set the flag, for HiGHS to stop at its next call back. A second
    one ends the process at once: HiGHS's sub-MIPs (and the MIP's own LPs) never call
    back, and a user pressing again does not want to wait for them. Nothing is being
    written while HiGHS runs, so nothing is left half-written."""
    if _INTERRUPTED.is_set():
        _exit_at_once()
    _INTERRUPTED.set()


def _exit_at_once() -> None:
    """End the process with exit code 130 after a second Ctrl-C, saying so."""
    if multiprocessing.parent_process() is None:  # a study's workers go quietly
        sys.stderr.write("\ncogen: stopped at once (second Ctrl-C); nothing written\n")
        sys.stderr.flush()
    os._exit(130)


@contextlib.contextmanager
def _ctrl_c_as_flag() -> Iterator[threading.Event]:
    """Within the block, Ctrl-C (SIGINT) sets ``_INTERRUPTED`` instead of raising; HiGHS's
    interrupt callbacks (:meth:`LoadedModel._on_callback`) then stop the run, LP or MIP,
    and the block raises KeyboardInterrupt as it ends. Only the main
    thread can take signals; elsewhere (the helper search, which stops when the main run
    does), or where Ctrl-C is ignored or handled by someone else (a background job of a
    shell script), the block changes nothing."""
    if (threading.current_thread() is not threading.main_thread()
            or signal.getsignal(signal.SIGINT) is not signal.default_int_handler):
        yield threading.Event()
        return
    _INTERRUPTED.clear()
    previous = signal.signal(signal.SIGINT, _on_ctrl_c)
    try:
        yield _INTERRUPTED
    finally:
        signal.signal(signal.SIGINT, previous)
        hit = _INTERRUPTED.is_set()
        # cleared on every way out: a later run in this process (the helper's, a test's)
        # starts unstopped
        _INTERRUPTED.clear()
    if hit:
        raise KeyboardInterrupt


def _scheduler_for(threads: int) -> None:
    """HiGHS keeps one task scheduler per OS thread, sized by the first run in that thread,
    and refuses a later run that asks for another size (a plan on several threads followed
    by its one-thread baseline, say): reset it when the size changes."""
    if getattr(_SCHEDULER, "threads", threads) != threads:
        highspy.Highs.resetGlobalScheduler(True)
    _SCHEDULER.threads = threads


def _newest(x: np.ndarray, obj: float, best: Incumbent | None) -> tuple[np.ndarray, float]:
    """The shared incumbent when it beats ``x`` (objective ``obj``), else ``x``."""
    if best is not None:
        bx, bobj, _ = best.get()
        if bx is not None and bobj < obj:
            return bx, bobj
    return x, obj


class LoadedModel:
    """A site model loaded into a persistent HiGHS instance, with the column map."""

    def __init__(self, sm: SiteModel, threads: int = 1) -> None:
        t0 = time.perf_counter()
        self.sm = sm
        self.opt = Highs()
        self.opt.config.threads = threads
        self.opt.set_instance(sm.model)
        self.h: highspy.Highs = self.opt._solver_model
        self.h.setOptionValue("output_flag", False)
        self.h.setOptionValue("threads", threads)
        self.threads = threads
        colmap = self.opt._pyomo_var_to_solver_var_map
        self.vars = [entry[0] for entry in self.opt._vars.values()]
        self.cols = np.array([colmap[id(v)] for v in self.vars], dtype=np.int64)
        lp = self.h.getLp()
        self.integrality = np.array(lp.integrality_, dtype=np.int64) if len(lp.integrality_) else np.zeros(lp.num_col_, dtype=np.int64)
        self.int_cols = np.flatnonzero(self.integrality != 0)
        self.col_lower = np.array(lp.col_lower_, dtype=float)
        self.col_upper = np.array(lp.col_upper_, dtype=float)
        self.colmap = colmap
        self.base_rows = lp.num_row_  # rows of the Pyomo model; reserve rows come after
        self._relaxed = False
        self._int_names: dict[str, int] | None = None
        self._col_hours: np.ndarray | None = None
        self.schedule: np.ndarray | None = None  # column values of the last solve_mip's schedule
        self.start_objective: float | None = None
        self.lp_seconds: float | None = None  # [s] of the last rounding start's LP relaxation
        # objective of the last rounding start's LP relaxation, a valid bound for this data
        self.lp_bound: float | None = None
        self.fixed_duals: np.ndarray | None = None  # row duals of the last _fixed_run(keep_duals=True)
        self.stop: threading.Event | None = None  # set: every run of this instance stops soon
        self.last_callback = time.perf_counter()  # [perf_counter s] of HiGHS's last call back
        self._mip_cb: Callable[..., None] | None = None  # a plan's MIP callback (_callbacks)
        self.callback_error: str | None = None  # what stopped the plan's MIP callback, if anything
        self._listen()
        self.load_seconds = time.perf_counter() - t0

    def _listen(self) -> None:
        """Route HiGHS's callbacks of this instance through :meth:`_on_callback`.

        HiGHS holds the callback on the C++ side, out of the garbage collector's sight: it
        must hold this model weakly, or each model (and its Pyomo model) lives as long as
        its HiGHS instance, which it keeps alive itself."""
        me = weakref.ref(self)

        def relay(callback_type, message, data_out, data_in, user_data) -> None:  # noqa: ANN001
            model = me()
            if model is not None:
                model._on_callback(callback_type, message, data_out, data_in, user_data)

        self.h.setCallback(relay, None)
        for kind in _INTERRUPTS:
            self.h.startCallback(kind)

    def _on_callback(self, callback_type, message, data_out, data_in, user_data) -> None:  # noqa: ANN001
        """Stop any run on Ctrl-C or when :attr:`stop` is set (the helper search, when the
        main search ends); hand a MIP's callbacks on to the plan's (:meth:`_callbacks`)."""
        self.last_callback = time.perf_counter()
        if callback_type in _INTERRUPTS:
            # set either way: HiGHS keeps the flag from an interrupted run into the next one
            data_in.user_interrupt = _INTERRUPTED.is_set() or (self.stop is not None and self.stop.is_set())
            if data_in.user_interrupt:
                return
        if self._mip_cb is not None and callback_type in _MIP_CALLBACKS:
            try:
                self._mip_cb(callback_type, message, data_out, data_in, user_data)
            except Exception as exc:  # noqa: BLE001
                # an exception raised into HiGHS ends its run as an error and is lost (a
                # progress line on a closed pipe, say): the search goes on without that
                # callback, and the plan says so
                self.callback_error = f"{type(exc).__name__}: {exc}"
                self._mip_cb = None

    def spare(self) -> "LoadedModel":
        """A copy of this loaded model (rows added so far included) in a HiGHS instance of
        its own with one thread, for a search in another thread; same column numbers."""
        other = copy.copy(self)
        other.h = highspy.Highs()
        other.h.setOptionValue("output_flag", False)
        other.h.setOptionValue("threads", 1)
        other.h.passModel(self.h.getLp())
        other.threads = 1
        other._relaxed = False
        other.stop, other._mip_cb = None, None
        other._listen()
        return other

    def refresh(self) -> None:
        """After the Pyomo model's data changed in place (:mod:`cogendispatch.reuse`): drop
        the reserve rows of the last solve and re-read the column bounds."""
        n = self.h.getNumRow()
        if n > self.base_rows:
            extra = np.arange(self.base_rows, n, dtype=np.int32)
            self.h.deleteRows(len(extra), extra)
        lp = self.h.getLp()
        self.col_lower = np.array(lp.col_lower_, dtype=float)
        self.col_upper = np.array(lp.col_upper_, dtype=float)
        self.start_objective = None

    def col(self, v: pyo.Var) -> int | None:
        return self.colmap.get(id(v))

    def _set_integrality(self, integral: bool) -> None:
        self._relaxed = not integral
        if len(self.int_cols) == 0:
            return
        kind = self.integrality[self.int_cols] if integral else np.zeros(len(self.int_cols), dtype=np.int64)
        self.h.changeColsIntegrality(len(self.int_cols), self.int_cols.astype(np.int32),
                                     np.array([highspy.HighsVarType(int(k)) for k in kind]))

    def _run(self, time_limit: float, gap: float | None = None) -> None:
        # HiGHS compares an LP's time limit with the instance's run time summed over every
        # earlier run (HiGHS issue #1477), so a re-used instance would stop its LPs at once;
        # a MIP's limit is its own
        offset = self.h.getRunTime() if (self._relaxed or len(self.int_cols) == 0) else 0.0
        self.h.setOptionValue("time_limit", offset + max(0.1, float(time_limit)))
        if gap is not None:
            self.h.setOptionValue("mip_rel_gap", gap)
        _scheduler_for(self.threads)
        with _ctrl_c_as_flag():  # raises KeyboardInterrupt after a run stopped by Ctrl-C
            status = self.h.run()
        if status == highspy.HighsStatus.kError:
            raise SolveError(f"HiGHS refused to run (status {self.h.getModelStatus()}); see its log with output_flag")

    def solution(self) -> np.ndarray:
        """Column values of HiGHS's current solution, in its column order."""
        return np.array(self.h.getSolution().col_value, dtype=float)

    def rounding_start(self, time_limit: float, threshold: float = 0.01, gap: float = 1e-3,
                       lp_time_limit: float | None = None, short_time_limit: float | None = None) -> np.ndarray | None:
        """LP relaxation, its commitment rounded up and repaired, the rest (drivers included)
        re-optimised as a small MILP. The LP may take up to ``lp_time_limit`` (default
        ``time_limit``) [s]: without it there is nothing to round. When the LP relaxation
        itself uses a slack (demand or the reserve short, steam or power in surplus), the
        whole may take ``short_time_limit`` [s] instead, when given and longer.

        Returns the full column vector of a feasible schedule, or None.
        """
        t_start = time.perf_counter()
        t_end = t_start + time_limit
        self._set_integrality(False)
        try:  # integral again on every way out: a Ctrl-C in the LP must not leave it relaxed
            t_lp = time.perf_counter()
            self._run(max(time_limit, lp_time_limit or 0.0))
            self.lp_seconds = time.perf_counter() - t_lp
            lp_ok = self.h.getModelStatus() == highspy.HighsModelStatus.kOptimal
            self.lp_bound = float(self.h.getInfo().objective_function_value) if lp_ok else None
            x = self.solution()
        finally:
            self._set_integrality(True)
        if not lp_ok:
            return None
        if short_time_limit is not None and (x[self.slack_cols()] > SLACK_TOL).any():
            # a week that cannot meet everything even relaxed (a boiler out, say): the MILP
            # over the drivers then decides how short it ends, and HiGHS's own search
            # after it cannot prove much in the time; measured on the demo study's outage
            # week, 5 s of it left 9 M EUR of penalties, 8 s 1.2 M (LP relaxation: 1.0 M)
            t_end = max(t_end, t_start + short_time_limit)
        # the LP may have used most of the time; the small MILP still gets a share of it
        left = max(t_end - time.perf_counter(), 0.3 * time_limit)
        # round up: a unit partly on in the relaxation is there for its capacity (reserve,
        # minimum loads elsewhere); committing it keeps the start feasible
        guess = lambda c: int(x[c] >= threshold)  # noqa: E731
        start = self.commitment_start(guess, left, gap)
        if start is None and lp_time_limit is not None and lp_time_limit > time_limit:
            # a limit too short for the drivers' MILP: its first schedule, however long that
            # takes (within lp_time_limit), rather than none
            kept = self._set_options({"mip_max_improving_sols": 1})
            try:
                start = self.commitment_start(guess, lp_time_limit, gap)
            finally:
                self._set_options(kept)
        return start

    def commitment_start(self, guess: Callable[[int], int], time_limit: float,
                         gap: float = 1e-3, drivers: bool = False, free_until: int = 0) -> np.ndarray | None:
        """A schedule from a guessed commitment: ``guess(column)`` gives each on/off column's
        wanted status; the guess is repaired to honour held statuses and minimum up/down
        times, fixed, and the rest optimised as a small MILP. With ``drivers`` the guess
        also fixes each machine's driver (repaired to the minimum time between switches),
        which leaves an LP; should that LP be infeasible, the drivers are freed again.
        Hours before ``free_until`` are left to the solver (where a guess taken from another
        window meets this window's initial state, e.g. a shutdown a ramp limit forbids).

        Returns the full column vector of a feasible schedule (objective in
        ``start_objective``), or None.
        """
        t_end = time.perf_counter() + time_limit
        fix_cols: list[int] = []
        fix_vals: list[float] = []
        drv_cols: list[int] = []
        drv_vals: list[float] = []
        m = self.sm.model
        for blk in m.component_data_objects(pyo.Block, descend_into=False):
            info = getattr(blk, "commit_info", None)
            if info is not None:
                self._repaired([blk.on[t] for t in m.T], info, guess, free_until, fix_cols, fix_vals)
            elif drivers and blk.component("on_steam") is not None:
                d = blk.unit
                L = whole_hours(d.min_hours_between_switches)
                positions: list[tuple[list[int], list[float]]] = []
                for k in range(d.count):
                    if d.initial_on_steam is None:  # no history: take the guess's first hour as it
                        was = CommitInfo(L, L, bool(guess(self.col(blk.on_steam[k, 0]))), float(L))
                    else:
                        was = CommitInfo(L, L, k < d.initial_on_steam, d.hours_since_switch(k))
                    positions.append(([], []))
                    self._repaired([blk.on_steam[k, t] for t in m.T], was, guess, free_until, *positions[-1])
                # positions repaired one by one may break the order of identical machines
                # (machine k on steam only if machine k-1 is): then the search decides them
                if _ordered([vals for _, vals in positions]):
                    for cols, vals in positions:
                        drv_cols += cols
                        drv_vals += vals
        seed = None
        if drv_cols:
            # drivers as guessed: an LP; its schedule seeds the MILP over the drivers below
            seed = self._fixed_run(fix_cols + drv_cols, fix_vals + drv_vals, t_end - time.perf_counter(), gap)
            seed_obj = self.start_objective
            if seed is not None and t_end - time.perf_counter() < 0.5:
                return seed
        if not fix_cols:
            self._run(max(0.5, t_end - time.perf_counter()), gap=gap)
            ok = self.h.getInfo().primal_solution_status == 2
            self.start_objective = float(self.h.getInfo().objective_function_value) if ok else None
            return self.solution() if ok else None
        if seed is not None:
            self._set_start(seed)
        x = self._fixed_run(fix_cols, fix_vals, t_end - time.perf_counter(), gap)
        if seed is not None and (x is None or self.start_objective is None or self.start_objective > seed_obj):
            self.start_objective = seed_obj
            return seed
        return x

    def _repaired(self, status: list[pyo.Var], info: CommitInfo, guess: Callable[[int], int], free_until: int,
                  cols: list[int], vals: list[float]) -> None:
        """Append to ``cols``/``vals`` one unit's (or driver position's) guessed hourly
        status, repaired for held hours and minimum times, from hour ``free_until`` on."""
        fixed = {t: h for t, h in enumerate(held_value(v) for v in status) if h is not None}
        wanted = [fixed[t] if t in fixed else guess(self.col(v)) for t, v in enumerate(status)]
        for t, (v, s) in enumerate(zip(status, repair_commitment(wanted, fixed, info))):
            c = self.col(v)
            if c is not None and t >= free_until:
                cols.append(c)
                vals.append(float(s))

    def _set_start(self, x: np.ndarray) -> None:
        sol = highspy.HighsSolution()
        sol.col_value = list(x)
        sol.value_valid = True
        self.h.setSolution(sol)

    def _fixed_run(self, cols: list[int], vals: list[float], time_limit: float, gap: float | None,
                   keep_duals: bool = False) -> np.ndarray | None:
        """Solve with ``cols`` held at ``vals``; the bounds are restored afterwards. With
        ``keep_duals``, the row duals of an optimal LP (every integer held) are kept in
        ``fixed_duals`` (None otherwise): restoring the bounds clears them in HiGHS."""
        idx = np.array(cols, dtype=np.int32)
        v = np.array(vals)
        self.h.changeColsBounds(len(idx), idx, v, v)
        # every integer held: solve it as the LP it is (quicker than HiGHS's MIP path, and
        # under the LP time-limit offset of _run)
        lp = len(self.int_cols) > 0 and np.isin(self.int_cols, idx).all()
        if lp:
            self._set_integrality(False)
        try:
            self._run(max(0.5, time_limit), gap=gap)
            ok = self.h.getModelStatus() == highspy.HighsModelStatus.kOptimal or (
                self.h.getInfo().primal_solution_status == 2)
            start = self.solution() if ok else None
            self.start_objective = float(self.h.getInfo().objective_function_value) if ok else None
            if keep_duals:
                optimal = lp and self.h.getModelStatus() == highspy.HighsModelStatus.kOptimal
                self.fixed_duals = np.array(self.h.getSolution().row_dual, dtype=float) if optimal else None
        finally:
            if lp:
                self._set_integrality(True)
            self.h.changeColsBounds(len(idx), idx, self.col_lower[idx], self.col_upper[idx])
        return start

    def reserve_rows(self) -> np.ndarray:
        """Rows that hold the steam reserve: those of :mod:`cogendispatch.reserve` and the
        running-set rows added after the model's own (:mod:`cogendispatch.strengthen`)."""
        res = self.sm.model.component("reserve")
        if res is None:
            return np.array([], dtype=np.int32)
        cmap = self.opt._pyomo_con_to_solver_con_map
        return np.array(sorted({cmap[c] for c in res.values() if c in cmap}
                               | set(range(self.base_rows, self.h.getNumRow()))), dtype=np.int32)

    def duals_with_rows_free(self, rows: np.ndarray, x: np.ndarray, time_limit: float) -> np.ndarray | None:
        """Row duals of the LP with every integer held at ``x`` (rounded) and ``rows`` free:
        how the prices would read without them (e.g. the reserve's part of a price is the
        difference). None when that LP has no optimum. Row bounds and ``fixed_duals`` are
        restored afterwards."""
        kept = self.fixed_duals
        lp = self.h.getLp()
        lo, up = np.asarray(lp.row_lower_)[rows], np.asarray(lp.row_upper_)[rows]
        n = len(rows)
        self.h.changeRowsBounds(n, rows, np.full(n, -highspy.kHighsInf), np.full(n, highspy.kHighsInf))
        try:
            self._fixed_run(self.int_cols.tolist(), np.round(x[self.int_cols]).tolist(), time_limit, gap=None,
                            keep_duals=True)
            return self.fixed_duals
        finally:
            self.h.changeRowsBounds(n, rows, lo, up)
            self.fixed_duals = kept

    def int_names(self) -> dict[str, int]:
        """Integer columns by the name of their Pyomo variable."""
        if self._int_names is None:
            ints = set(self.int_cols.tolist())
            self._int_names = {v.name: int(c) for v, c in zip(self.vars, self.cols) if int(c) in ints}
        return self._int_names

    def guess_from(self, earlier: "LoadedModel", x: np.ndarray) -> Callable[[int], int]:
        """A commitment guess from ``x``, the schedule of an earlier window solved with
        ``earlier`` (this model or another of the same site): each on/off or driver column
        takes the earlier value of the same variable, i.e. the same hour of the earlier
        window (for weekly windows, the same hour of the week before); 0 where it has none."""
        if earlier is self:
            return lambda c: int(round(x[c]))
        theirs = earlier.int_names()
        mine = {c: n for n, c in self.int_names().items()}

        def guess(c: int) -> int:
            j = theirs.get(mine.get(c, ""))
            return int(round(x[j])) if j is not None else 0

        return guess

    def unit_int_cols(self) -> list[tuple[str, np.ndarray]]:
        """Integer columns of each committed unit (boilers, turbo-generators), by unit id."""
        out = []
        for blk in self.sm.model.component_data_objects(pyo.Block, descend_into=False):
            if getattr(blk, "commit_info", None) is None:
                continue
            cols = [self.col(v) for v in blk.component_data_objects(pyo.Var) if v.is_integer()]
            cols = [c for c in cols if c is not None]
            if cols:
                out.append((blk.unit.id, np.array(sorted(cols), dtype=np.int32)))
        return out

    def col_hours(self) -> np.ndarray:
        """Hour of each column (the last index of its variable), -1 for none."""
        if self._col_hours is None:
            hours = np.full(self.h.getNumCol(), -1, dtype=np.int64)
            for v, c in zip(self.vars, self.cols):
                i = v.index()
                t = i[-1] if isinstance(i, tuple) else i
                if isinstance(t, int):
                    hours[c] = t
            self._col_hours = hours
        return self._col_hours

    def improve_windows(self, x: np.ndarray, obj: float, time_limit: float, width: int = 24, step: int = 12,
                        first: int = 0, best: Incumbent | None = None, gap: float = 1e-5) -> tuple[np.ndarray, float]:
        """Fix-and-optimise over time: free every column of ``width`` hours, hold every
        other column (continuous ones too) at the incumbent, re-solve; keep improvements;
        windows advance by ``step`` hours from hour ``first`` (with one window before it
        when ``first`` > 0) to the end. Holding the rest whole leaves HiGHS's presolve a
        MILP of the window alone, so each step is quick, and it moves boilers,
        turbo-generators and drivers together, which the unit-by-unit search cannot.
        ``gap`` is each window's relative gap on the whole objective [-]; ``best`` as in
        :meth:`improve`.

        References
        ----------
        Helber, S. & Sahling, F., A fix-and-optimize approach for the multi-level capacitated
        lot sizing problem, Int. J. Production Economics 123 (2010) 247-256 (fix-and-optimize
        over time windows; citation from memory).
        """
        t_end = time.perf_counter() + time_limit
        hours = self.col_hours()
        n = int(hours.max()) + 1
        starts, a = [], (first - step if first > 0 else 0)
        while True:
            starts.append(a)  # the lead window before ``first`` may start before hour 0
            if a + width >= n:
                break
            a += step
        for a in starts:
            left = t_end - time.perf_counter()
            if left < 0.3 or (best is not None and best.stop.is_set()):
                break
            x, obj = _newest(x, obj, best)
            hold = np.flatnonzero((hours >= 0) & ((hours < a) | (hours >= a + width))).astype(np.int32)
            vals = self._held_values(x, hold)
            x, obj = self._search_around(x, obj, hold, vals, min(left, 5.0), gap, best, "window by window")
        return x, obj

    def _held_values(self, x: np.ndarray, hold: np.ndarray) -> np.ndarray:
        """Values of the columns ``hold`` to hold them at ``x``: integers rounded, everything
        within its bounds (solver round-off may leave a value a hair outside)."""
        vals = x[hold].copy()
        ints = np.isin(hold, self.int_cols)
        vals[ints] = np.round(vals[ints])
        return np.clip(vals, self.col_lower[hold], self.col_upper[hold])

    def _search_around(self, x: np.ndarray, obj: float, hold: np.ndarray, vals: np.ndarray, time_limit: float,
                       gap: float, best: Incumbent | None, source: str) -> tuple[np.ndarray, float]:
        """Re-solve from the schedule ``x`` (objective ``obj``) with the columns ``hold`` held
        at ``vals``; return the better of the two schedules, offering an improvement to
        ``best`` as found by ``source``. The bounds are restored afterwards."""
        self.h.changeColsBounds(len(hold), hold, vals, vals)
        try:
            self._set_start(x)
            self._run(time_limit, gap=gap)
            info = self.h.getInfo()
            if info.primal_solution_status == 2 and info.objective_function_value < obj - 1e-6 * abs(obj):
                x, obj = self.solution(), float(info.objective_function_value)
                if best is not None:
                    best.offer(x, obj, source)
        finally:
            self.h.changeColsBounds(len(hold), hold, self.col_lower[hold], self.col_upper[hold])
        return x, obj

    def slack_cols(self, reserve: bool = True) -> np.ndarray:
        """Columns of every balance slack (shortfalls and surpluses), and of the reserve's
        shortfall unless ``reserve`` is False."""
        m = self.sm.model
        slacks = [m.steam_short, m.steam_surplus, m.power_short, m.power_surplus]
        if reserve:
            slacks.append(m.reserve_short)
        cols = [self.col(v) for s in slacks for v in s.values()]
        return np.array(sorted(c for c in cols if c is not None), dtype=np.int32)

    def settle_shortfalls(self, x: np.ndarray, obj: float, bound: float, gap: float,
                          time_limit: float) -> tuple[np.ndarray, float] | None:
        """A schedule of the same quality or better with fewer shortfalls (or a cheaper one), when the schedule
        ``x`` (objective ``obj``) leaves some slack in use; None when none is found.

        A search stopped at a gap can keep a shortfall that costs less than the gap (a
        few hundredths of a t/h of reserve at its price is a few hundred EUR; a week's
        0.5 % is about 10 000 EUR): the schedule is then within the tolerance, but
        reports the week short. Or, in a week that cannot hold its reserve, a short search
        can end with the electric bus short too. First, where the reserve is short,
        :meth:`cover_reserve` tries every boiler on around it (:data:`COVER_SHARE` of the
        time). Then the hours around the shortfalls are
        freed (everything else held at ``x``, as in :meth:`improve_windows`), every slack
        is held at zero there, and the schedule found is kept if it costs less than ``obj``
        or lies within ``gap`` [-] of the proven ``bound``. Failing that, the same with
        only the steam and power slacks held (the reserve may stay short), around the hours
        they are in use; failing that too (a week that cannot meet everything), the hours
        around the shortfalls are searched again with no slack held, from ``x``, and a
        cheaper schedule is kept. Window widths of :data:`SETTLE_PADS` hours either side are
        tried in turn; the whole takes at most ``time_limit`` [s].
        """
        t_end = time.perf_counter() + time_limit
        hours = self.col_hours()
        every = self.slack_cols()
        if not (x[every] > SLACK_TOL).any():
            return None
        settled: tuple[np.ndarray, float] | None = None
        empty = np.zeros(0, dtype=np.int32)
        no_reserve = self.slack_cols(reserve=False)
        # steps: COVER (every boiler on around a reserve shortfall, :meth:`cover_reserve`),
        # or (slacks held at zero near the shortfall, whether only a cheaper schedule will do)
        levels: list[tuple[np.ndarray, bool] | None] = [None, (every, False), (no_reserve, False), (empty, True)]
        if (x[no_reserve] > SLACK_TOL).any():
            # steam or power short (priced far above the reserve): meeting the load comes
            # first, and covering the reserve after it (a 20 s plan with a boiler out left
            # the bus short while this time went to the reserve)
            levels = [(no_reserve, False), None, (every, False), (empty, True)]
        searches = sum(lv is not None for lv in levels)
        level = -1  # searches so far
        for step in levels:
            if step is None:
                covered = self.cover_reserve(x, obj, COVER_SHARE * (t_end - time.perf_counter()))
                if covered is not None:
                    x, obj = settled = covered
                    if not (x[every] > SLACK_TOL).any():
                        return settled
                continue
            held_slacks, cheaper_only = step
            level += 1
            # the last level holds none: it searches around whatever is still in use
            watched = held_slacks if len(held_slacks) else every
            short = watched[x[watched] > SLACK_TOL]
            if len(short) == 0:
                continue
            short_hours = np.unique(hours[short])
            for pad in SETTLE_PADS:
                left = t_end - time.perf_counter()
                if left < 0.3:
                    return settled
                # a share of what is left, so that one level (an impossible first one, say)
                # cannot take the time of the levels after it; a level's wider window gets
                # what its narrower one left
                attempts_left = searches - level
                near = np.zeros(len(hours), dtype=bool)
                for t in short_hours:
                    near |= (hours >= t - pad) & (hours <= t + pad)
                hold = np.flatnonzero((hours >= 0) & ~near).astype(np.int32)
                vals = self._held_values(x, hold)
                zeroed = np.setdiff1d(held_slacks, hold).astype(np.int32)
                cols = np.concatenate([hold, zeroed])
                vals = np.concatenate([vals, np.zeros(len(zeroed))])
                self.h.changeColsBounds(len(cols), cols, vals, vals)
                try:
                    if cheaper_only:  # x itself is a schedule of this search: start from it
                        self._set_start(x)
                    self._run(max(0.3, left / attempts_left), gap=1e-4)
                    info = self.h.getInfo()
                    found = info.primal_solution_status == 2
                    new_x = self.solution() if found else None
                    new_obj = float(info.objective_function_value) if found else math.inf
                finally:
                    self.h.changeColsBounds(len(cols), cols, self.col_lower[cols], self.col_upper[cols])
                if new_x is None:
                    continue
                if cheaper_only:
                    ok = new_obj < obj - 1e-6 * abs(obj)
                else:
                    ok = new_obj <= obj or (math.isfinite(bound) and new_obj - bound <= gap * abs(new_obj))
                if ok:  # the next level starts from this schedule
                    x, obj = new_x, new_obj
                    settled = (x, obj)
                    break
            if settled is not None and held_slacks is every:
                return settled  # nothing left in use
        return settled

    def cover_reserve(self, x: np.ndarray, obj: float, time_limit: float,
                      pad: int = COVER_PAD) -> tuple[np.ndarray, float] | None:
        """A cheaper schedule than ``x`` (objective ``obj``) with every boiler that may run
        on in the hours where ``x`` leaves the steam reserve short, ``pad`` hours either
        side (the commitment repaired for minimum up/down times and outages, the drivers
        re-chosen as a MILP, :meth:`commitment_start`); None when there is no reserve
        shortfall or nothing cheaper is found within ``time_limit`` [s].

        Running more boilers is what holds the reserve (each adds its spare rating), but a
        search that ended short rarely finds it: a boiler start pays off only with the
        penalty it saves, across its minimum up time, and the drivers must follow.
        Measured on a study's first window with TG2 out (the demo site, 20 s): 0.90 M EUR
        of reserve penalty, 0.29 M after 4 s of this.
        """
        m = self.sm.model
        if time_limit < 0.5 or m.component("reserve_short") is None:
            return None
        short = [t for t in m.T if (c := self.col(m.reserve_short[t])) is not None and x[c] > SLACK_TOL]
        if not short:
            return None
        hours = self.col_hours()
        near = np.zeros(int(hours.max()) + 1, dtype=bool)
        for t in short:
            near[max(0, t - pad):t + pad + 1] = True
        boilers = {self.col(b.on[t]) for b in self.sm.ctx.boilers for t in m.T} - {None}
        # boilers off near the shortfall that may run there (not held off by an outage);
        # none: every boiler that can is on already, and the search would only re-choose
        # the drivers with the commitment as it is
        added = [c for c in boilers if near[hours[c]] and x[c] < 0.5 and self.col_upper[c] > 0.5]
        if not added:
            return None

        def guess(c: int) -> int:
            return 1 if c in boilers and near[hours[c]] else int(round(x[c]))

        # the drivers as in x first (an LP: quick), which seeds the MILP over them
        new_x = self.commitment_start(guess, time_limit, gap=1e-3, drivers=True)
        new_obj = self.start_objective
        if new_x is None or new_obj is None or new_obj >= obj - 1e-6 * abs(obj):
            return None
        return new_x, new_obj

    def improve(self, x: np.ndarray, obj: float, time_limit: float,
                best: Incumbent | None = None) -> tuple[np.ndarray, float]:
        """Fix-and-optimise: free one committed unit's (then each pair's) on/off decisions,
        hold every other integer decision at the incumbent, re-solve; keep improvements.
        With ``best`` (shared with a search beside it) each step starts from the newest
        incumbent, improvements are offered to it, and its stop event ends the search.

        A local search around the incumbent that the MILP's own heuristics do not reach
        quickly on reserve-constrained sites.
        """
        t_end = time.perf_counter() + time_limit
        units = self.unit_int_cols()
        groups = [[u] for u in range(len(units))]
        groups += [[a, b] for a in range(len(units)) for b in range(a + 1, len(units))]
        for g in groups:
            left = t_end - time.perf_counter()
            if left < 0.5 or (best is not None and best.stop.is_set()):
                break
            x, obj = _newest(x, obj, best)
            free = np.concatenate([units[i][1] for i in g])
            hold = np.setdiff1d(self.int_cols, free).astype(np.int32)
            x, obj = self._search_around(x, obj, hold, np.round(x[hold]), min(left, 10.0), 1e-4, best,
                                         "unit by unit")
        return x, obj

    def solve_mip(self, options: SolveOptions, progress: Progress | None = None,
                  hint: Callable[[int], int] | None = None) -> SolveReport:
        """Solve the MILP and load the schedule into the model.

        The start comes from ``hint`` (a commitment guess, e.g. :meth:`guess_from` the
        previous window of a study) when given and feasible, else from the rounding start.
        With two threads or more and no hint, the rounding start and its improvement run
        in a thread beside HiGHS instead of before it (:mod:`cogendispatch.beside`).
        """
        secs: dict[str, float] = {"build": self.sm.build_seconds, "load": self.load_seconds}
        t0 = time.perf_counter()
        self.lp_bound = None  # a re-used model may hold another window's data
        start_obj = None
        start = None
        # the reserve rows serve the search's bound; a window started from a guess with only
        # a few seconds has next to no search for them to serve
        quick = hint is not None and options.time_limit < QUICK_LIMIT
        if options.strengthen and len(self.int_cols) > 0 and not quick and self.sm.model.component("reserve") is not None:
            if progress:
                progress("bounding each hour's boiler steam; adding reserve rows")
            add_reserve_rows(self, min(options.time_limit / 4, 30.0))
        secs["strengthen"] = time.perf_counter() - t0
        best = Incumbent()
        helper: threading.Thread | None = None
        if options.beside and hint is None and len(self.int_cols) > 0:
            spare = self.spare()
            spare.stop = best.stop
            helper = threading.Thread(target=helper_search, name="cogen-helper", daemon=True,
                                      args=(spare, best, t0 + options.time_limit,
                                            options.time_limit < QUICK_SWEEP_LIMIT))
            if progress:
                progress("HiGHS searching; beside it, a rounded start improved window by window and unit by unit")
            helper.start()
        elif options.warm_start and len(self.int_cols) > 0:
            start, start_obj = self._start_before(options, t0, hint, progress)
        secs["start"] = time.perf_counter() - t0 - secs["strengthen"]
        t1 = time.perf_counter()
        if start is not None:
            self._set_start(start)
            best.offer(start, start_obj, "start")
        kept = self._set_options(BESIDE_HIGHS_OPTIONS if helper is not None else MIP_OPTIONS)
        try:  # whatever happens here, the helper is stopped and joined before returning
            self._callbacks(best, progress, helper=helper is not None)
            # with a start in hand the search may get as little as is left; without one, 1 s
            remaining = max(0.1 if start is not None else 1.0, options.time_limit - (time.perf_counter() - t0))
            with self._quiet_notes(progress):
                self._run(remaining, gap=options.gap)
            if helper is not None and best.get()[0] is None and self.h.getInfo().primal_solution_status != 2:
                # a short limit ran out before any schedule: let the helper finish its start,
                # as the one-thread path would (its LP may take the whole limit)
                best.started.wait(max(options.time_limit, START_LP_MIN))
        finally:
            best.stop.set()
            interrupted = False
            while helper is not None and helper.is_alive():
                try:
                    helper.join(0.5)
                except KeyboardInterrupt:  # the helper stops at its next callback: wait for it
                    if interrupted:  # a second Ctrl-C: at once, as during HiGHS's own run
                        _exit_at_once()
                    interrupted = True
            self._stop_callbacks()
            self._set_options(kept)
        if interrupted:  # Ctrl-C while waiting for the helper still stops the plan
            raise KeyboardInterrupt
        notes = []
        if best.error:
            notes.append(f"the helper search stopped early ({best.error}); HiGHS went on alone, without "
                         "its own heuristics, so the schedule may be poorer than usual")
        if self.callback_error:
            notes.append(f"the search's progress callback failed ({self.callback_error}); the search went on "
                         "without it")
            self.callback_error = None
        secs["solve"] = time.perf_counter() - t1
        status = _STATUS.get(self.h.getModelStatus(), str(self.h.getModelStatus()).split(".")[-1])
        info = self.h.getInfo()
        has = info.primal_solution_status == 2
        obj = float(info.objective_function_value) if has else float("nan")
        x = self.solution() if has else None
        if len(self.int_cols):
            bound = float(info.mip_dual_bound)
            gap = float(info.mip_gap) if has else float("inf")
            if self.lp_bound is None and best.lp_bound is not None:
                self.lp_bound = best.lp_bound  # the helper's start (two threads) solved the same LP
            if self.lp_bound is not None and not bound >= self.lp_bound:
                # HiGHS stopped before its root LP (a start that took most of the time): the
                # start's LP relaxation of the same rows bounds the schedule as well
                bound = self.lp_bound
                gap = _rel_gap(obj, bound)
                if gap <= options.gap:
                    status = "optimal"
        else:
            bound, gap = obj, 0.0
        bx, bobj, _ = best.get()
        if bx is not None and (not has or bobj < obj - 1e-9 * abs(obj)):
            # a schedule HiGHS did not take up: a short time limit stopped it before the
            # start, or the helper found it after HiGHS's last look
            has, obj, x = True, bobj, bx
            gap = _rel_gap(obj, bound)
            if gap <= options.gap:
                status = "optimal"
        found_by = best.source if has and bx is not None and bobj <= obj + 1e-9 * abs(obj) else "HiGHS"
        settle_change = None
        if has and len(self.int_cols) and options.settle:
            if progress and (x[self.slack_cols()] > SLACK_TOL).any():
                progress("the schedule leaves demand or the reserve short: searching the hours around it again")
            with self._quiet_notes(progress):
                settled = self.settle_shortfalls(x, obj, bound, max(options.gap, gap), settle_limit(options.time_limit))
            if settled is not None:
                settle_change = settled[1] - obj
                x, obj = settled
                found_by = "shortfall settled"
                gap = _rel_gap(obj, bound)
                status = "optimal" if gap <= options.gap else status
            secs["solve"] = time.perf_counter() - t1
        if helper is not None:
            start_obj = best.first_start
        self.schedule = x
        if has:
            for v, c in zip(self.vars, self.cols):
                v.set_value(x[c], skip_validation=True)
        secs["total"] = sum(secs[k] for k in ("build", "load", "strengthen", "start", "solve"))
        return SolveReport(status=status, objective=obj, bound=bound, gap=gap, seconds=secs,
                           start_objective=start_obj, found_by=found_by if has else "",
                           settle_change=settle_change, notes=notes)

    def _start_before(self, options: SolveOptions, t0: float, hint: Callable[[int], int] | None,
                      progress: Progress | None) -> tuple[np.ndarray | None, float | None]:
        """The start built before HiGHS runs (one thread): from ``hint`` or the rounding
        start, improved unit by unit with what the time split leaves (module docstring)."""
        if progress:
            progress("finding a starting schedule (LP relaxation, rounded)")
        gap = max(options.gap, 1e-4)
        start = None
        if hint is not None:
            start = self.commitment_start(hint, min(options.time_limit / 2, 30.0), gap, drivers=True,
                                          free_until=HINT_FREE_HOURS)
        if start is None:
            # the LP may use the whole limit: a search without a start is far worse
            left = options.time_limit - (time.perf_counter() - t0)
            start = self.rounding_start(min(options.time_limit / 2, 60.0), gap=gap,
                                        lp_time_limit=max(options.time_limit, START_LP_MIN),
                                        short_time_limit=min(SHORT_START_SHARE * left, SHORT_START_MAX))
        if start is None:
            return None, None
        start_obj = self.start_objective
        budget = min(options.time_limit / 3, 30.0)
        if hint is None and options.search_share > 0:
            # keep time for HiGHS: its root LP and first cut rounds are what prove a
            # bound, and they take a few times the LP relaxation's time
            left = options.time_limit - (time.perf_counter() - t0)
            keep = max(options.search_share * options.time_limit, SEARCH_LP_TIMES * (self.lp_seconds or 0.0))
            budget = min(budget, left - min(keep, SEARCH_SHARE_MAX))
        if budget >= 1.0:
            if progress:
                progress(f"improving the start ({start_obj:,.0f}) unit by unit")
            start, start_obj = self.improve(start, start_obj, budget)
        return start, start_obj

    @contextlib.contextmanager
    def _quiet_notes(self, progress: Progress | None) -> Iterator[None]:
        """While the block runs, a line through ``progress`` each time HiGHS has been silent
        for :data:`QUIET_NOTE` s, so a long sub-search does not look like a hang."""
        if progress is None:
            yield
            return
        done = threading.Event()
        self.last_callback = time.perf_counter()

        def watch() -> None:
            said = 0.0
            while not done.wait(1.0):
                now = time.perf_counter()
                quiet = now - self.last_callback
                if quiet >= QUIET_NOTE and now - said >= QUIET_NOTE:
                    said = now
                    progress(f"still solving: no word from HiGHS for {quiet:.0f} s (it reports between its "
                             "steps, not within one of its sub-searches or an LP; Ctrl-C takes effect when "
                             "the step ends, a second Ctrl-C at once, writing nothing)")

        watcher = threading.Thread(target=watch, name="cogen-quiet-notes", daemon=True)
        watcher.start()
        try:
            yield
        finally:
            done.set()
            watcher.join()

    def _callbacks(self, best: Incumbent, progress: Progress | None, helper: bool = False) -> None:
        """HiGHS's MIP callbacks for one run: progress every 2 s; with a ``helper`` beside
        it, the helper's schedules handed in and HiGHS's own handed out through ``best``.
        :meth:`_stop_callbacks` ends them."""
        kinds = _MIP_CALLBACKS
        # the interrupt callback is always on (it also stops the run on Ctrl-C); the
        # schedules go in and out only with a helper beside HiGHS
        wanted = list(kinds[1:]) if helper else []
        last = [0.0]
        sent = [best.get()[2]]  # newest version HiGHS has; a start, if any, is already set

        def _cb(callback_type, message, data_out, data_in, user_data) -> None:  # noqa: ANN001
            if callback_type == kinds[1]:
                x, _, version = best.get()
                if version > sent[0] and x is not None:
                    sent[0] = version
                    data_in.setSolution(x)
            elif callback_type == kinds[2]:
                # only HiGHS's own schedule is known to HiGHS: a newer one of the helper's
                # still has to be handed in
                mine = best.offer(np.array(data_out.mip_solution), data_out.objective_function_value, "HiGHS")
                if mine and mine == best.get()[2]:
                    sent[0] = max(sent[0], mine)
            else:
                now = time.perf_counter()
                if progress is not None and now - last[0] >= 2.0:
                    last[0] = now
                    p, d = min(data_out.objective_function_value, best.get()[1]), data_out.mip_dual_bound
                    bound = f"bound {d:,.0f}" if math.isfinite(d) else "no bound yet (root LP)"
                    if math.isfinite(p) and p != 0 and math.isfinite(d):
                        progress(f"solving: best {p:,.0f}, {bound}, gap {100 * (p - d) / abs(p):.2f} %")
                    else:
                        progress(f"solving: {f'best {p:,.0f}' if math.isfinite(p) else 'no schedule yet'}, {bound}")

        self._mip_cb = _cb
        for k in wanted:
            self.h.startCallback(k)

    def option_value(self, name: str) -> float | bool | int | str:
        """The value of one HiGHS option of this instance."""
        got = self.h.getOptionValue(name)  # (status, value) in highspy 1.16, the value alone in some others
        return got[1] if isinstance(got, tuple) else got

    def _set_options(self, options: dict[str, float | bool]) -> dict[str, float | bool]:
        """Set HiGHS options; return their earlier values, to set them back."""
        kept = {k: self.option_value(k) for k in options}
        for k, v in options.items():
            self.h.setOptionValue(k, v)
        return kept

    def _stop_callbacks(self) -> None:
        for k in _MIP_CALLBACKS[1:]:
            self.h.stopCallback(k)
        self._mip_cb = None


def solve(sm: SiteModel, options: SolveOptions = SolveOptions(), progress: Progress | None = None) -> SolveReport:
    """Load ``sm`` into HiGHS and solve it; the schedule is loaded back into the Pyomo model.

    Raises
    ------
    SolveError when the solver stops with no schedule at all.
    """
    return solve_loaded(sm, options, progress)[1]


def solve_loaded(sm: SiteModel, options: SolveOptions = SolveOptions(),
                 progress: Progress | None = None) -> tuple[LoadedModel, SolveReport]:
    """:func:`solve`, also returning the loaded model (its ``schedule`` holds the column
    values) for work on the same instance afterwards, such as the marginal prices."""
    lm = LoadedModel(sm, threads=options.highs_threads)
    rep = lm.solve_mip(options, progress)
    if not rep.has_solution:
        if rep.status == "time limit":  # the slacks make every week feasible: time is what ran out
            raise SolveError(f"the {options.time_limit:g} s time limit ran out before any schedule was found "
                             f"(the LP relaxation of this site and series alone can take several seconds); "
                             "give a longer --time-limit")
        raise SolveError(f"HiGHS stopped ({rep.status}) without any schedule; "
                         "try a longer --time-limit or check the site for contradictory limits")
    return lm, rep
