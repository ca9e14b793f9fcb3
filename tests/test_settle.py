"""Settling shortfalls that a search stopped at its gap kept (solve.LoadedModel.settle_shortfalls).

The sites are tiny and their optimum follows by reasoning; the prices are the project's
default slack prices (schema.Penalties), not published values.
"""

from __future__ import annotations

import time

import numpy as np
import pytest

from cogendispatch.results import diagnose
from cogendispatch.site import build_site_model
from cogendispatch.solve import LoadedModel, SolveOptions
from tiny import series, site

EXACT = SolveOptions(gap=1e-6, time_limit=30, settle=False)


def _boiler(bid: str, on: bool, start: float = 0.0) -> dict:
    return {"id": bid, "header": "HP", "fuels": ["NG"], "max_steam": "60 t/h", "min_steam": "10 t/h",
            "efficiency_curve": {"load": [0.1, 1.0], "efficiency": [0.85, 0.85]}, "initial_on": on,
            "startup_cost": start}


def _bounds_restored(lm: LoadedModel) -> bool:
    lp = lm.h.getLp()
    return bool(np.array_equal(lp.col_lower_, lm.col_lower) and np.array_equal(lp.col_upper_, lm.col_upper))


def test_a_reserve_shortfall_cheaper_than_a_start_is_settled_only_within_the_gap() -> None:
    """B1 and B2 (60 t/h each) run; B3 is cold and costs 20 000 to start. With a full
    reserve (cover 1) the two running boilers may make 60 t/h between them (the one left
    must cover the other's steam); in hour 1 the site needs about 61.5 t/h. 1.5 t/h of
    reserve short for one hour at 10⁴ per t/h costs less than B3's start, so the exact
    optimum keeps the shortfall. A schedule that starts B3 instead is kept by the settling
    step only when it lies within the gap asked for."""
    cfg = site(boiler=[_boiler("B1", True), _boiler("B2", True), _boiler("B3", False, 20_000)],
               reserve={"enabled": True, "cover": 1.0})
    sm = build_site_model(cfg, series(cfg, 3, demand_LP=[30, 64, 30]))
    lm = LoadedModel(sm)
    rep = lm.solve_mip(EXACT)
    m = sm.model
    short = m.reserve_short[1].value
    assert 0.5 < short < 2.0  # the scenario as meant: a small reserve shortfall, B3 left cold
    assert max(b.on[1].value for b in sm.ctx.boilers if b.unit.id == "B3") < 0.5
    x = lm.schedule
    # at the exact optimum's gap, nothing within it meets the reserve: nothing is changed
    assert lm.settle_shortfalls(x, rep.objective, rep.bound, 1e-6, 10.0) is None
    assert _bounds_restored(lm)
    # the start is about a fifth of these three hours' cost: within a 50 % gap, the
    # schedule that starts B3 is taken
    settled = lm.settle_shortfalls(x, rep.objective, rep.bound, 0.5, 10.0)
    assert settled is not None
    new_x, new_obj = settled
    assert _bounds_restored(lm)
    slacks = lm.slack_cols()
    assert np.abs(new_x[slacks]).max() < 1e-6
    b3_on = lm.col(next(b for b in sm.ctx.boilers if b.unit.id == "B3").on[1])
    assert new_x[b3_on] == pytest.approx(1.0)
    # dearer than the optimum by the start less the penalty saved (and B3's fuel at its
    # minimum load rather than the others'; efficiencies are equal, so about nothing)
    assert new_obj - rep.objective == pytest.approx(20_000 - 1e4 * short, rel=0.02)
    assert new_obj - rep.bound <= 0.5 * abs(new_obj)


def test_a_plan_with_a_loose_gap_reports_the_week_met() -> None:
    """The same site through solve_mip with a 50 % gap: the schedule returned meets the
    reserve (the settling step finds it if the search stopped on the shortfall first)."""
    cfg = site(boiler=[_boiler("B1", True), _boiler("B2", True), _boiler("B3", False, 20_000)],
               reserve={"enabled": True, "cover": 1.0})
    ser = series(cfg, 3, demand_LP=[30, 64, 30])
    unsettled = build_site_model(cfg, ser)
    LoadedModel(unsettled).solve_mip(SolveOptions(gap=0.5, time_limit=30, settle=False))
    short = unsettled.model.reserve_short[1].value  # HiGHS stops on the shortfall at this gap
    sm = build_site_model(cfg, ser)
    rep = LoadedModel(sm).solve_mip(SolveOptions(gap=0.5, time_limit=30))
    assert diagnose(sm) == []
    assert rep.gap <= 0.5
    # the dearer schedule that starts B3 is reported as such: the start less the penalty
    # it saves (10^4 per t/h, schema.Penalties)
    assert rep.found_by == "shortfall settled" and rep.settle_change == pytest.approx(20_000 - 1e4 * short, rel=0.02)


def test_a_needless_bus_shortfall_is_settled_while_the_reserve_stays_short() -> None:
    """One boiler cannot hold any reserve (cover 1): every hour is reserve short, whatever
    the schedule. A schedule that also leaves the bus short (made here by hand from the
    optimum: 0.5 MW less import, bought as shortfall) is settled to one that meets the
    load; the reserve stays short, as it must."""
    cfg = site(boiler=[_boiler("B1", True)], reserve={"enabled": True, "cover": 1.0})
    sm = build_site_model(cfg, series(cfg, 3, demand_LP=30.0, load=5.0))
    lm = LoadedModel(sm)
    rep = lm.solve_mip(EXACT)
    m = sm.model
    x = lm.schedule.copy()
    assert x[lm.col(m.reserve_short[1])] > 10.0  # the reserve cannot be held
    short, imp = lm.col(m.power_short[1]), lm.col(m.grid.imp[1])
    x[short] += 0.5
    x[imp] -= 0.5
    worse = rep.objective + 0.5 * cfg.penalties.power_shortfall - 0.5 * 100.0
    settled = lm.settle_shortfalls(x, worse, rep.bound, 1e-6, 10.0)
    assert settled is not None
    new_x, new_obj = settled
    assert new_x[short] < 1e-6
    assert new_x[lm.col(m.reserve_short[1])] > 10.0
    assert new_obj == pytest.approx(rep.objective, rel=1e-6)
    assert _bounds_restored(lm)


def test_a_week_that_cannot_hold_its_reserve_gets_a_cheaper_schedule_around_it() -> None:
    """One boiler can hold no reserve (cover 1): every hour is short of it whatever the
    schedule, and neither settling level can zero it. A schedule that also vents 10 t/h in
    hour 1 (made by holding the vent open, a worse but consistent schedule) is searched
    again around the shortfall from itself, and the cheaper schedule, venting nothing, is
    kept."""
    cfg = site(boiler=[_boiler("B1", True)], reserve={"enabled": True, "cover": 1.0})
    sm = build_site_model(cfg, series(cfg, 3, demand_LP=30.0, load=5.0))
    best = LoadedModel(sm).solve_mip(EXACT)
    lm = LoadedModel(sm)
    vent = next(c for v, c in zip(lm.vars, lm.cols) if v.name == "vent_V.flow[1]")
    lm.h.changeColsBounds(1, np.array([vent], dtype=np.int32), np.array([10.0]), np.array([100.0]))
    # no reserve rows: they would be derived with the vent held open, and stay behind it
    worse = lm.solve_mip(SolveOptions(gap=1e-6, time_limit=30, settle=False, strengthen=False))
    lm.h.changeColsBounds(1, np.array([vent], dtype=np.int32), lm.col_lower[[vent]], lm.col_upper[[vent]])
    x = lm.schedule.copy()
    assert x[vent] == pytest.approx(10.0) and worse.objective > best.objective + 1.0
    settled = lm.settle_shortfalls(x, worse.objective, worse.bound, 1e-6, 10.0)
    assert settled is not None
    new_x, new_obj = settled
    assert new_x[vent] < 1e-6 and new_obj == pytest.approx(best.objective, rel=1e-6)
    assert new_x[lm.col(sm.model.reserve_short[1])] > 10.0  # still short: it cannot be held
    assert _bounds_restored(lm)


@pytest.mark.parametrize("peak, extended", [(200.0, True), (30.0, False)])
def test_the_start_gets_longer_when_the_lp_relaxation_is_short(monkeypatch: pytest.MonkeyPatch,
                                                               peak: float, extended: bool) -> None:
    """Three 60 t/h boilers cannot carry 200 t/h of LP steam: the LP relaxation itself is
    short, so the MILP after its rounding may use the longer ``short_time_limit``; a week
    the relaxation meets keeps the ordinary limit (beside.SHORT_START_SHARE)."""
    cfg = site(boiler=[_boiler("B1", True), _boiler("B2", True), _boiler("B3", False, 20_000)],
               reserve={"enabled": True, "cover": 1.0})
    lm = LoadedModel(build_site_model(cfg, series(cfg, 3, demand_LP=[30, peak, 30])))
    given: list[float] = []
    real = LoadedModel.commitment_start

    def recording(self: LoadedModel, guess, time_limit: float, *args, **kwargs):  # noqa: ANN001
        given.append(time_limit)
        return real(self, guess, time_limit, *args, **kwargs)

    monkeypatch.setattr(LoadedModel, "commitment_start", recording)
    x = lm.rounding_start(1.0, short_time_limit=40.0)
    assert x is not None
    assert (given[0] > 30.0) is extended
    assert bool((x[lm.slack_cols()] > 1e-6).any()) is extended


def test_a_search_stopped_before_its_root_lp_reports_the_start_lp_as_bound(monkeypatch: pytest.MonkeyPatch) -> None:
    """When HiGHS stops before its root LP (here: no node allowed), the report's bound is
    the start's LP relaxation of the same model, a valid bound, and not minus infinity."""
    cfg = site(boiler=[_boiler("B1", True), _boiler("B2", True), _boiler("B3", False, 20_000)],
               reserve={"enabled": True, "cover": 1.0})
    lm = LoadedModel(build_site_model(cfg, series(cfg, 3, demand_LP=[30, 200, 30])))
    real = LoadedModel._set_options

    def no_nodes(self: LoadedModel, options: dict) -> dict:  # noqa: ANN001
        kept = real(self, options)
        self.h.setOptionValue("mip_max_nodes", 0)
        return kept

    monkeypatch.setattr(LoadedModel, "_set_options", no_nodes)
    rep = lm.solve_mip(SolveOptions(gap=1e-6, time_limit=30, settle=False))
    assert lm.h.getInfo().mip_dual_bound == -np.inf  # the scenario as meant
    assert lm.lp_bound is not None
    assert rep.bound == pytest.approx(lm.lp_bound)
    assert rep.bound <= rep.objective + 1e-6 * abs(rep.objective)
    assert 0.0 <= rep.gap < 1.0


def test_every_boiler_on_around_a_reserve_shortfall_is_tried() -> None:
    """B1 and B2 run; B3 is cold and costs 1 000 to start. A schedule with B3 held off
    leaves 1.5 t/h of reserve short in hour 1 (10⁴ per t/h, schema.Penalties): far dearer
    than the start. cover_reserve turns every boiler on around the shortfall and returns the
    cheaper schedule that holds the reserve. With B3 unavailable there is no boiler to add,
    and it returns at once; given the optimum, nothing is short and it returns too."""
    cfg = site(boiler=[_boiler("B1", True), _boiler("B2", True), _boiler("B3", False, 1_000)],
               reserve={"enabled": True, "cover": 1.0})
    sm = build_site_model(cfg, series(cfg, 5, demand_LP=[30, 30, 64, 30, 30]))
    lm = LoadedModel(sm)
    b3 = next(b for b in sm.ctx.boilers if b.unit.id == "B3")
    off = np.array([lm.col(b3.on[t]) for t in sm.model.T], dtype=np.int32)
    upper = lm.col_upper[off].copy()
    lm.col_upper[off] = 0.0  # the model's own bounds, which its searches restore
    lm.h.changeColsBounds(len(off), off, lm.col_lower[off], lm.col_upper[off])
    held_off = lm.solve_mip(EXACT)
    lm.col_upper[off] = upper
    lm.h.changeColsBounds(len(off), off, lm.col_lower[off], lm.col_upper[off])
    x = lm.schedule
    assert x[lm.col(sm.model.reserve_short[2])] > 0.5  # the scenario as meant
    covered = lm.cover_reserve(x, held_off.objective, 10.0)
    assert covered is not None
    new_x, new_obj = covered
    assert np.abs(new_x[lm.slack_cols()]).max() < 1e-6 and new_x[off[2]] == pytest.approx(1.0)
    assert new_obj < held_off.objective - 10_000  # the penalty less the start and B3's fuel
    assert _bounds_restored(lm)
    lm.col_upper[off] = 0.0  # B3 out (an outage holds it so): the same shortfall, no boiler to add
    t0 = time.perf_counter()
    assert lm.cover_reserve(x, held_off.objective, 10.0) is None and time.perf_counter() - t0 < 1.0
    lm.col_upper[off] = upper
    best = lm.solve_mip(EXACT)
    assert lm.cover_reserve(lm.schedule, best.objective, 10.0) is None  # nothing short: nothing to try
