"""The reserve cover inequalities cut off no schedule: same optimum with and without them."""

from __future__ import annotations

import pytest

from cogendispatch.site import build_site_model
from cogendispatch.solve import LoadedModel, SolveOptions, solve
from cogendispatch.strengthen import add_reserve_covers, minimum_steam
from tiny import series, site


def _boilers() -> list[dict]:
    def b(i: str, size: int, eta: float, on: bool) -> dict:
        return {"id": i, "header": "HP", "fuels": ["NG"], "max_steam": f"{size} t/h", "min_steam": f"{size // 3} t/h",
                "efficiency_curve": {"load": [0.3, 1.0], "efficiency": [eta - 0.05, eta]}, "initial_on": on,
                "startup_cost": 500, "min_up": "3 h", "min_down": "2 h"}
    return [b("B1", 60, 0.88, True), b("B2", 60, 0.86, True), b("B3", 90, 0.84, False), b("B4", 30, 0.80, True)]


@pytest.mark.parametrize("cover", [1.0, 0.6])
def test_covers_keep_the_optimum(cover: float) -> None:
    cfg = site(boiler=_boilers(), reserve={"enabled": True, "cover": cover},
               letdown=[{"id": "LD", "from": "HP", "to": "LP", "max_flow": "300 t/h"}])
    ser = series(cfg, 8, demand_LP=[40, 60, 90, 110, 100, 70, 50, 40])
    objs = []
    for strengthen in (False, True):
        sm = build_site_model(cfg, ser)
        rep = solve(sm, SolveOptions(gap=1e-9, time_limit=60, strengthen=strengthen))
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
    assert add_reserve_covers(lm) > 0
    # the optimal schedule's boiler steam in every hour is at least the bound
    sm2 = build_site_model(cfg, ser)
    rep = solve(sm2, SolveOptions(gap=1e-9, strengthen=False))
    assert rep.status == "optimal"
    steam = [sum(b.steam[t].value for b in sm2.ctx.boilers) for t in sm2.model.T]
    assert all(s >= lt - 1e-6 for s, lt in zip(steam, L))
