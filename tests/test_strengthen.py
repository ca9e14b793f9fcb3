"""The reserve rows of `strengthen` cut off no schedule: same optimum with and without them.

Their validity rests on each hour's minimum boiler steam L_t being a true lower bound of
every schedule, and on the capacity of each running boiler set; both are checked here by
hand-worked cases.
"""

from __future__ import annotations

from typing import Callable

import pytest
from pyomo.core.expr.visitor import identify_variables

from cogendispatch import reserve
from cogendispatch.reserve import set_capacity
from cogendispatch.site import build_site_model
from cogendispatch.solve import LoadedModel, SolveOptions, solve
from cogendispatch.strengthen import add_reserve_rows, linking_rows, minimum_steam
from tiny import series, site


def _boilers() -> list[dict]:
    def b(i: str, size: int, eta: float, on: bool) -> dict:
        return {"id": i, "header": "HP", "fuels": ["NG"], "max_steam": f"{size} t/h", "min_steam": f"{size // 3} t/h",
                "efficiency_curve": {"load": [0.3, 1.0], "efficiency": [eta - 0.05, eta]}, "initial_on": on,
                "startup_cost": 500, "min_up": "3 h", "min_down": "2 h"}
    return [b("B1", 60, 0.88, True), b("B2", 60, 0.86, True), b("B3", 90, 0.84, False), b("B4", 30, 0.80, True)]


def test_set_capacity_by_hand() -> None:
    R = [120.0, 120.0, 160.0, 60.0]
    # cover 1: the set's rating less its largest member's (hand arithmetic)
    assert set_capacity(R, (0, 1, 2), 1.0) == pytest.approx(240.0)
    assert set_capacity(R, (0, 1, 3), 1.0) == pytest.approx(180.0)
    assert set_capacity(R, (0, 1, 2, 3), 1.0) == pytest.approx(300.0)
    assert set_capacity(R, (2,), 1.0) == 0.0  # a lone boiler cannot cover its own loss
    assert set_capacity(R, (), 1.0) == 0.0
    # cover 0.5, boilers of 120 and 160 t/h: both reserve rows bind,
    # s1 + 0.5 s3 = 120 and 0.5 s1 + s3 = 160 -> s1 = 160/3, s3 = 400/3, S = 560/3
    assert set_capacity(R, (0, 2), 0.5) == pytest.approx(560.0 / 3.0)
    # cover 0: no reserve, the full rating
    assert set_capacity(R, (0, 2), 0.0) == pytest.approx(280.0)


def _twins() -> list[dict]:
    return [{**b, "id": i, "max_steam": "100 t/h", "min_steam": "30 t/h"}
            for b, i in zip(_boilers()[:2], ("T1", "T2"))]


@pytest.mark.parametrize(("boilers", "demand"), [
    (_boilers, [40, 60, 90, 110, 100, 70, 50, 40]),
    (_boilers, [150, 200, 225, 230, 215, 160, 120, 100]),  # reserve short in the peak
    # two 100 t/h boilers: with cover c < 1 a set carries 2 x 100 / (1 + c) with its
    # reserve, and each t/h of reserve shortfall lets 2 / (1 + c) t/h more run (both
    # reserve rows bind): a set row counting the shortfall at par with steam, as for
    # c = 1, cut off the optimum here (hand arithmetic, c = 0.6: 125 t/h, 1.25 per t/h)
    (_twins, [110, 135, 150, 160, 150, 120, 100, 90]),
], ids=["reserve-kept", "reserve-short", "twins-reserve-short"])
@pytest.mark.parametrize("rows", ["sets", "covers"])
@pytest.mark.parametrize("cover", [1.0, 0.6])
def test_rows_keep_the_optimum(cover: float, rows: str, boilers: Callable[[], list[dict]], demand: list[float],
                               monkeypatch: pytest.MonkeyPatch) -> None:
    if rows == "covers":  # a site with more boilers than the set weights allow
        monkeypatch.setattr(reserve, "MAX_SET_BOILERS", 1)
    cfg = site(boiler=boilers(), reserve={"enabled": True, "cover": cover},
               letdown=[{"id": "LD", "from": "HP", "to": "LP", "max_flow": "300 t/h"}])
    ser = series(cfg, 8, demand_LP=demand)
    objs = []
    for strengthen in (False, True):
        sm = build_site_model(cfg, ser)
        assert (sm.model.component("boiler_set") is not None) == (rows == "sets")
        lm = LoadedModel(sm)
        if strengthen:
            assert add_reserve_rows(lm) > 0
        rep = lm.solve_mip(SolveOptions(gap=1e-9, time_limit=60, strengthen=False))
        assert rep.status == "optimal"
        objs.append(rep.objective)
    assert objs[1] == pytest.approx(objs[0], rel=1e-7)


def test_minimum_steam_is_a_lower_bound_of_the_schedule() -> None:
    cfg = site(boiler=_boilers(), reserve={"enabled": True},
               letdown=[{"id": "LD", "from": "HP", "to": "LP", "max_flow": "300 t/h"}])
    ser = series(cfg, 8, demand_LP=[40, 60, 90, 110, 100, 70, 50, 40])
    sm = build_site_model(cfg, ser)
    lm = LoadedModel(sm)
    L = minimum_steam(lm, 30)
    assert L is not None and (L > 0).all()
    assert add_reserve_rows(lm) > 0
    # the optimal schedule's boiler steam in every hour is at least the bound
    sm2 = build_site_model(cfg, ser)
    rep = solve(sm2, SolveOptions(gap=1e-9, strengthen=False))
    assert rep.status == "optimal"
    steam = [sum(b.steam[t].value for b in sm2.ctx.boilers) for t in sm2.model.T]
    assert all(s >= lt - 1e-6 for s, lt in zip(steam, L))


def test_minimum_steam_counts_the_import_limit() -> None:
    """A pump that cannot run wholly on its motor (the import limit leaves too little power)
    must run partly on its steam turbine; the minimum boiler steam includes that steam."""
    drive = {"id": "P", "duty": "3 MW", "normal": "motor", "motor": {"efficiency": 0.95},
             "steam_turbine": {"inlet": "HP", "exhaust": "LP", "steam_rate": "10 kg/kWh"}}
    cfg = site(grid={"max_import": "6 MW"}, drive=[drive])
    ser = series(cfg, 4, demand_LP=5.0, load=4.0)
    lm = LoadedModel(build_site_model(cfg, ser))
    L = minimum_steam(lm, 30)
    # hand calculation: the motor would draw 3 / 0.95 = 3.158 MW, of which only 6 - 4 = 2 MW
    # can be imported; the relaxation runs the share f = 1.158 / 3.158 on steam at
    # 10 kg/kWh x 3 MW = 30 t/h, i.e. 11.0 t/h, more than the 5 t/h of process demand
    f = (4.0 + 3.0 / 0.95 - 6.0) / (3.0 / 0.95)
    assert L is not None and (L >= 30.0 * f - 1e-6).all()
    # the integer schedule runs the pump on steam: 30 t/h, above the bound
    sm = build_site_model(cfg, ser)
    rep = solve(sm, SolveOptions(gap=1e-9, strengthen=False))
    assert rep.status == "optimal"
    assert all(sum(b.steam[t].value for b in sm.ctx.boilers) >= lt - 1e-6 for t, lt in zip(sm.model.T, L))
    # without the power shortfall in the bound the motor looks free and L drops to the demand
    low = minimum_steam(lm, 30, k_power=1e-3)
    assert low is not None and low.max() < 30.0 * f - 3.0


def test_linking_rows_are_the_rows_spanning_hours() -> None:
    """The decoupled LP drops exactly the rows whose variables belong to two hours or more,
    found here independently from the Pyomo expressions; those include every unit's
    transition, minimum-time, ramp and switching rows."""
    boilers = [dict(b, ramp_up="40 t/h", ramp_down="40 t/h") for b in _boilers()]
    tg = {"id": "TG", "inlet": "HP", "max_throttle": "60 t/h", "min_throttle": "10 t/h", "generator_rating": "8 MW",
          "no_load_loss": "0.2 MW", "min_up": "3 h", "min_down": "2 h", "initial_on": True,
          "section": [{"to": "LP", "efficiency": 0.75}]}
    drive = {"id": "P", "duty": "1 MW", "count": 2, "normal": "motor", "motor": {"efficiency": 0.95},
             "steam_turbine": {"inlet": "HP", "exhaust": "LP", "efficiency": 0.5}, "min_hours_between_switches": "3 h"}
    cfg = site(boiler=boilers, turbogenerator=[tg], drive=[drive], reserve={"enabled": True})
    sm = build_site_model(cfg, series(cfg, 8, demand_LP=[40, 60, 90, 110, 100, 70, 50, 40]))
    lm = LoadedModel(sm)
    by_row = {r: c for c, r in lm.opt._pyomo_con_to_solver_con_map.items()}
    spanning = set()
    for r, con in by_row.items():
        hours = {v.index()[-1] if isinstance(v.index(), tuple) else v.index()
                 for v in identify_variables(con.body, include_fixed=False)}
        if len(hours) > 1:
            spanning.add(r)
    found = set(linking_rows(lm).tolist())
    assert found == spanning
    kinds = {by_row[r].parent_component().local_name for r in found}
    assert {"transition", "min_up", "min_down", "ramp_up", "ramp_down", "switch_change",
            "switch_stay_steam", "switch_stay_motor"} <= kinds
    assert not kinds & {"header_balance", "power_balance", "reserve", "boiler_set_status"}
