"""Hourly marginal prices of a plan (duals of the LP around the schedule) against finite
differences of the whole plan: one more t/h of demand, or MW of load, in one hour."""

from __future__ import annotations

import pytest

from cogendispatch.prices import hourly_prices
from cogendispatch.site import build_site_model
from cogendispatch.solve import SolveOptions, solve, solve_loaded
from tiny import series, site

LP_DEMAND = [30.0, 45.0, 38.0]
# no condensate comes back from the process, so one more t/h demanded changes the header
# balance alone, as the dual prices it (a return would also credit the deaerator)
DEAERATOR = {"pressure": "2 bar(a)", "heating_steam": "LP", "makeup_temperature": "20 degC",
             "makeup_cost": "0.5 per t", "process_condensate_return": 0.0, "condensate_temperature": "80 degC"}


def _cfg():  # noqa: ANN202
    # a boiler on a curved efficiency (working between its points) and a back-pressure set,
    # so neither price is simply fuel per tonne
    boilers = [{"id": "B1", "header": "HP", "fuels": ["NG"], "max_steam": "160 t/h", "min_steam": "16 t/h",
                "efficiency_curve": {"load": [0.1, 0.4, 1.0], "efficiency": [0.80, 0.86, 0.84]}, "initial_on": True}]
    tg = {"id": "TG", "inlet": "HP", "max_throttle": "30 t/h", "generator_rating": "8 MW", "initial_on": True,
          "section": [{"to": "LP", "efficiency": 0.75}]}
    return site(boiler=boilers, turbogenerator=[tg], deaerator=DEAERATOR)


def _cost(cfg, demand_lp: list[float], load: list[float]) -> float:  # noqa: ANN001
    sm = build_site_model(cfg, series(cfg, 3, demand_LP=demand_lp, load=load, price_import=90.0))
    return solve(sm, SolveOptions(gap=1e-9, time_limit=60)).objective


def test_prices_equal_finite_differences() -> None:
    cfg = _cfg()
    load = [9.0, 9.0, 9.0]
    sm = build_site_model(cfg, series(cfg, 3, demand_LP=LP_DEMAND, load=load, price_import=90.0))
    lm, rep = solve_loaded(sm, SolveOptions(gap=1e-9, time_limit=60))
    pr = hourly_prices(lm, lm.schedule)
    assert pr is not None
    assert list(pr.columns) == ["time", "balance", "price", "unit", "reserve_part", "set_by"]
    assert set(pr.set_by) == {"cost"}  # nothing short: every price is a cost
    assert len(pr) == 3 * (len(cfg.headers) + 1)
    assert set(pr.unit) == {"EUR/t", "EUR/MWh"}
    base = rep.objective
    step = 0.2
    for hour in (0, 1):
        p = pr.set_index(["time", "balance"]).price
        t = pr.time.unique()[hour]
        more = list(LP_DEMAND)
        more[hour] += step
        assert p[(t, "LP")] == pytest.approx((_cost(cfg, more, load) - base) / step, rel=2e-3)
        heavier = list(load)
        heavier[hour] += step
        assert p[(t, "power")] == pytest.approx((_cost(cfg, LP_DEMAND, heavier) - base) / step, rel=2e-3)
    # the loaded model is left as it was: the MIP solves again to the same optimum
    assert lm.solve_mip(SolveOptions(gap=1e-9, time_limit=60)).objective == pytest.approx(base, rel=1e-9)


def test_a_price_set_by_the_reserve_penalty_says_so() -> None:
    # one 60 t/h boiler with the reserve on has no cover at all: the reserve is short in
    # every hour, and a tonne more steam makes it shorter, so its penalty sets the prices
    boilers = [{"id": "B1", "header": "HP", "fuels": ["NG"], "max_steam": "60 t/h", "min_steam": "10 t/h",
                "efficiency_curve": {"load": [0.1, 1.0], "efficiency": [0.85, 0.85]}, "initial_on": True}]
    cfg = site(boiler=boilers, reserve={"enabled": True})
    sm = build_site_model(cfg, series(cfg, 2, demand_LP=20.0))
    lm, _ = solve_loaded(sm, SolveOptions(gap=1e-9, time_limit=60))
    pr = hourly_prices(lm, lm.schedule)
    lp = pr[pr.balance == "LP"]
    assert (lp.set_by == "reserve penalty").all() and (lp.price > 5000).all()


def test_a_price_a_shortfall_sets_through_a_letdown_says_so() -> None:
    """The 100 t/h boiler cannot carry 90 t/h of HP and 30 of LP: LP goes short (where a
    missing tonne is priced least, site.shortfall_prices), and one more t/h at HP takes
    steam from the letdown to LP, so HP's price is the shortfall penalty's too, though HP
    has no slack of its own: named "penalty elsewhere", never "cost"."""
    cfg = site()
    sm = build_site_model(cfg, series(cfg, 1, demand_HP=90.0, demand_LP=30.0))
    lm, _ = solve_loaded(sm, SolveOptions(gap=1e-9, time_limit=60))
    pr = hourly_prices(lm, lm.schedule).set_index("balance")
    assert pr.loc["LP", "set_by"] == "shortfall penalty"
    assert abs(pr.loc["HP", "price"]) > 0.5e6 and pr.loc["HP", "set_by"] == "penalty elsewhere"


def test_a_price_the_reserve_raises_is_a_cost_named_reserve_limit() -> None:
    """Two 100 t/h boilers, the efficient B1 and the costly B2, with half of a lost boiler's
    steam to be covered (cover 0.5): each must carry at least 2 (D - 100) t/h of a total D
    (its row: 100 - s_other >= 0.5 s_own). Above 100 t/h in all, one more t/h makes B2 take
    2 t/h more and B1 one less: a real cost, above the fuel of either, that the reserve
    makes. The price reads "reserve limit", with the reserve's part beside it, and equals
    the finite difference of the whole plan."""
    boilers = [{"id": f"B{i}", "header": "HP", "fuels": ["NG"], "max_steam": "100 t/h", "min_steam": "10 t/h",
                "efficiency_curve": {"load": [0.1, 1.0], "efficiency": [eff, eff]}, "initial_on": True}
               for i, eff in ((1, 0.90), (2, 0.80))]
    cfg = site(boiler=boilers, deaerator=DEAERATOR, reserve={"enabled": True, "cover": 0.5})

    def plan(demand: float):  # noqa: ANN202
        sm = build_site_model(cfg, series(cfg, 1, demand_HP=demand))
        return solve_loaded(sm, SolveOptions(gap=1e-9, time_limit=60))

    lm, rep = plan(110.0)
    pr = hourly_prices(lm, lm.schedule).set_index("balance")
    assert rep.objective < 1e5  # no reserve shortfall: its penalty would be 10^6 per t
    hp = pr.loc["HP"]
    assert hp.set_by == "reserve limit" and 0.0 < hp.reserve_part < hp.price
    step = 0.2
    assert hp.price == pytest.approx((plan(110.0 + step)[1].objective - rep.objective) / step, rel=2e-3)
    # with room to spare (60 t/h in all) the reserve makes no part of the price
    lm, _ = plan(40.0)
    pr = hourly_prices(lm, lm.schedule).set_index("balance")
    assert pr.loc["HP", "set_by"] == "cost" and pr.loc["HP", "reserve_part"] == 0.0
