"""The search beside HiGHS: the shared incumbent, fix-and-optimise over time windows, and a
two-thread solve that agrees with the one-thread solve and stops when HiGHS is done.

The site is small enough that HiGHS proves its optimum in well under a second, so every
search here is checked against that proven optimum rather than against a stored number.
"""

from __future__ import annotations

import time

import numpy as np
import pytest

from cogendispatch.beside import Incumbent, helper_search
from cogendispatch.site import build_site_model
from cogendispatch.solve import BESIDE_HIGHS_OPTIONS, MIP_OPTIONS, LoadedModel, SolveOptions, solve
from test_reuse import _lp_arrays
from test_studies import _site
from tiny import series

HOURS = 24
# a day with a morning and an evening peak, and a dear import tariff in the day
DEMAND = [40, 38, 36, 35, 38, 50, 75, 95, 100, 98, 90, 85, 80, 82, 88, 95, 105, 110, 100, 85, 70, 60, 50, 45]
PRICE = [60] * 7 + [140] * 14 + [60] * 3
EXACT = SolveOptions(gap=1e-9, time_limit=60, warm_start=False)


@pytest.fixture(scope="module")
def case():  # noqa: ANN201
    cfg = _site()
    return cfg, series(cfg, HOURS, demand_LP=DEMAND, price_import=PRICE)


@pytest.fixture(scope="module")
def optimum(case) -> float:  # noqa: ANN001
    rep = solve(build_site_model(*case), EXACT)
    assert rep.status == "optimal"
    return rep.objective


def _loaded(case) -> LoadedModel:  # noqa: ANN001
    return LoadedModel(build_site_model(*case))


def _all_on(lm: LoadedModel) -> tuple[np.ndarray, float]:
    """A poor feasible schedule: every unit committed all day, drivers left to a MILP."""
    x = lm.commitment_start(lambda c: 1, 30.0)
    assert x is not None and lm.start_objective is not None
    return x, lm.start_objective


def _assert_feasible(lm: LoadedModel, x: np.ndarray, tol: float = 1e-6) -> None:
    a = _lp_arrays(lm)
    act = a["matrix"] @ x
    assert np.all(act >= a["row_lo"] - tol) and np.all(act <= a["row_up"] + tol)
    assert np.all(x >= a["col_lo"] - tol) and np.all(x <= a["col_up"] + tol)
    ints = x[lm.int_cols]
    assert np.allclose(ints, np.round(ints), atol=1e-6)


def test_incumbent_keeps_only_better_schedules() -> None:
    best = Incumbent()
    assert best.offer(np.array([1.0]), 100.0, "start")
    assert not best.offer(np.array([2.0]), 100.0 + 1e-9, "HiGHS")  # round-off is not better
    assert not best.offer(np.array([3.0]), 120.0, "HiGHS")
    assert best.offer(np.array([4.0]), 90.0, "window by window")
    x, obj, version = best.get()
    assert (x[0], obj, version, best.source) == (4.0, 90.0, 2, "window by window")


def test_every_hourly_column_knows_its_hour(case) -> None:  # noqa: ANN001
    lm = _loaded(case)
    hours = lm.col_hours()
    m = lm.sm.model
    for t in m.T:
        assert hours[lm.col(m.boiler_B1.on[t])] == t
        assert hours[lm.col(m.drive_P1.on_steam[0, t])] == t
        assert hours[lm.col(m.steam_short["LP", t])] == t
    assert hours.min() >= 0  # on this site every column belongs to an hour


def test_one_window_over_the_whole_day_is_the_milp_itself(case, optimum) -> None:  # noqa: ANN001
    lm = _loaded(case)
    x0, obj0 = _all_on(lm)
    assert obj0 > optimum * (1 + 1e-3)  # the start is worth improving
    x, obj = lm.improve_windows(x0, obj0, 60.0, width=HOURS, step=HOURS, gap=1e-9)
    assert obj == pytest.approx(optimum, rel=1e-7)
    _assert_feasible(lm, x)


def test_short_windows_improve_and_keep_the_schedule_feasible(case, optimum) -> None:  # noqa: ANN001
    lm = _loaded(case)
    x0, obj0 = _all_on(lm)
    x, obj = lm.improve_windows(x0, obj0, 60.0, width=8, step=4)
    assert optimum * (1 - 1e-9) <= obj < obj0
    _assert_feasible(lm, x)
    # the objective reported is the schedule's own cost
    assert float(np.array(lm.h.getLp().col_cost_) @ x + lm.h.getLp().offset_) == pytest.approx(obj, rel=1e-9)
    # the bounds held for each window are all released again
    a = _lp_arrays(lm)
    assert np.array_equal(a["col_lo"], lm.col_lower) and np.array_equal(a["col_up"], lm.col_upper)


def test_the_helper_alone_builds_and_improves_a_schedule(case, optimum) -> None:  # noqa: ANN001
    lm = _loaded(case)
    spare = lm.spare()
    best = Incumbent()
    helper_search(spare, best, time.perf_counter() + 5.0)
    x, obj, _ = best.get()
    assert best.error is None
    assert x is not None and best.first_start is not None
    assert optimum * (1 - 1e-9) <= obj <= best.first_start
    _assert_feasible(lm, x)
    assert lm.h.getNumCol() == spare.h.getNumCol()  # the copy never touched the original


@pytest.mark.parametrize("quick, first", [(True, (12, 6, 0)), (False, (24, 12, 0))])
def test_a_short_time_limit_sweeps_12_h_windows_first(case, monkeypatch, quick, first) -> None:  # noqa: ANN001
    widths: list[tuple[int, int, int]] = []
    sweep = LoadedModel.improve_windows

    def recording(self, x, obj, time_limit, width=24, step=12, first=0, **kwargs):  # noqa: ANN001, ANN202
        widths.append((width, step, first))
        return sweep(self, x, obj, time_limit, width, step, first, **kwargs)

    monkeypatch.setattr(LoadedModel, "improve_windows", recording)
    spare = _loaded(case).spare()
    best = Incumbent()
    helper_search(spare, best, time.perf_counter() + 4.0, quick_sweep=quick)
    assert best.error is None and widths and widths[0] == first
    assert (12, 6, 0) not in widths[1:]  # made once, never in the cycled passes
    # which sweep a solve asks for follows its time limit
    asked: list[bool] = []
    monkeypatch.setattr("cogendispatch.solve.helper_search", lambda h, b, d, q: (asked.append(q), b.started.set()))
    LoadedModel(build_site_model(*case)).solve_mip(SolveOptions(gap=1e-9, time_limit=15.0 if quick else 120.0, threads=2))
    assert asked == [quick]


def test_two_threads_reach_the_one_thread_optimum_and_stop_with_highs(case, optimum) -> None:  # noqa: ANN001
    t0 = time.perf_counter()
    rep = solve(build_site_model(*case), SolveOptions(gap=1e-9, time_limit=60, threads=2))
    elapsed = time.perf_counter() - t0
    assert rep.status == "optimal"
    assert rep.objective == pytest.approx(optimum, rel=1e-7)
    assert rep.found_by in ("HiGHS", "start", "window by window", "unit by unit")
    # HiGHS proves this optimum within a second or two; the helper must stop with it
    # rather than search on to the 60 s limit
    assert elapsed < 20.0


def test_a_failing_helper_leaves_highs_to_finish_alone(case, optimum, monkeypatch) -> None:  # noqa: ANN001
    def broken(self, *args, **kwargs):  # noqa: ANN001, ANN202
        raise RuntimeError("no start today")

    monkeypatch.setattr(LoadedModel, "rounding_start", broken)
    lm = LoadedModel(build_site_model(*case))
    rep = lm.solve_mip(SolveOptions(gap=1e-9, time_limit=60, threads=2))  # no progress: --quiet
    assert rep.status == "optimal" and rep.found_by == "HiGHS"
    assert rep.objective == pytest.approx(optimum, rel=1e-7)
    # said in the report (summary.json's solver_notes, standard error) with or without progress
    assert any("helper search stopped early (RuntimeError: no start today)" in s for s in rep.notes)


def test_a_progress_callback_that_raises_does_not_end_the_search(case, optimum) -> None:
    """A progress line that cannot be written (stderr piped into a closed `head`) raised
    inside HiGHS's callback, which ended the run as an error and lost the schedule."""
    def broken(msg: str) -> None:
        if msg.startswith("solving:"):
            raise BrokenPipeError("stderr closed")

    lm = LoadedModel(build_site_model(*case))
    rep = lm.solve_mip(SolveOptions(gap=1e-9, time_limit=60, threads=1, warm_start=False), progress=broken)
    assert rep.has_solution and rep.objective == pytest.approx(optimum, rel=1e-7)
    assert any("progress callback failed (BrokenPipeError: stderr closed)" in n for n in rep.notes)


@pytest.mark.parametrize("threads", [1, 2])
def test_highs_options_for_its_search_are_set_and_set_back(case, optimum, monkeypatch, threads) -> None:  # noqa: ANN001
    lm = LoadedModel(build_site_model(*case))
    during: list[dict[str, object]] = []
    run = LoadedModel._run

    def recording(self, *args, **kwargs):  # noqa: ANN001, ANN202
        if self is lm:  # the main instance's runs, not the helper's copy
            during.append({k: lm.option_value(k) for k in BESIDE_HIGHS_OPTIONS})
        return run(self, *args, **kwargs)

    monkeypatch.setattr(LoadedModel, "_run", recording)
    before = {k: lm.option_value(k) for k in BESIDE_HIGHS_OPTIONS}
    rep = lm.solve_mip(SolveOptions(gap=1e-9, time_limit=60, threads=threads))
    assert rep.status == "optimal" and rep.objective == pytest.approx(optimum, rel=1e-7)
    # the branch and bound is the last run: no restart; with the helper, no heuristics of its own
    wanted = BESIDE_HIGHS_OPTIONS if threads == 2 else {**before, **MIP_OPTIONS}
    assert during[-1] == wanted and during[-1] != before
    assert threads == 1 or len(during) == 1  # with the helper, the start is built on its copy
    # a later solve of the same loaded model (a study's next window) gets HiGHS's own again
    assert {k: lm.option_value(k) for k in BESIDE_HIGHS_OPTIONS} == before


def test_solves_with_different_thread_counts_follow_each_other(case, optimum) -> None:  # noqa: ANN001
    # HiGHS sizes its task scheduler by the first run in an OS thread and refuses a later
    # run asking for another size; a plan on 3 threads is followed by its 1-thread baseline
    for threads in (3, 1, 2):
        rep = solve(build_site_model(*case), SolveOptions(gap=1e-9, time_limit=60, threads=threads))
        assert rep.status == "optimal"
        assert rep.objective == pytest.approx(optimum, rel=1e-7)
