"""Shift advice on tiny sites: prices against a hand derivation and finite differences,
the break-even power price, trips with and without the reserve."""

from __future__ import annotations

import numpy as np
import pytest

from cogendispatch.cli import main
from cogendispatch.decisions import HourModel, WhatIf, advise, hour_index
from cogendispatch.equipment.common import SiteStates
from cogendispatch.errors import InputError
from cogendispatch.site import build_site_model
from cogendispatch.solve import SolveOptions, solve
from cogendispatch.steam import isentropic_drop, state_pT
from tiny import series, site

P_MW = 2.0  # pump shaft duty
ETA_T, ETA_M = 0.6, 0.95
FUEL = 10.0  # [per GJ]
ETA_B = 0.85
MAKEUP = 0.5  # [per t]
D_HP, D_LP = 10.0, 40.0


def _site(**kw):  # noqa: ANN003, ANN202
    drive = {"id": "P1", "duty": f"{P_MW} MW", "motor": {"efficiency": ETA_M},
             "steam_turbine": {"inlet": "HP", "exhaust": "LP", "efficiency": ETA_T}}
    return site(drive=[drive], **kw)


def _hand(cfg):  # noqa: ANN001, ANN202
    """Hand derivation of the tiny site's costs, independent of the optimisation model.

    Boiler steam B, letdown flow m, drive steam s, deaerator steam S, feedwater F:
      HP:  B = m + D_HP + s
      LP:  r m + r_d s = D_LP + S          (desuperheated arrivals, ratios r, r_d)
      FW:  F = B + (r - 1) m + (r_d - 1) s (boiler feedwater and spray water)
      DA:  S = f F, f = (h_fw - h_mu) / (h_LP - h_mu), make-up M = F - S
    Cost per hour = c B + w M + (import price) x (load + motor power), with
    c = fuel price x (h_HP - h_fw) / eta_B [per t] and w the make-up water price.
    """
    st = SiteStates.of(cfg)
    h_hp, h_lp, h_fw = st.headers["HP"].h, st.headers["LP"].h, st.h_feedwater
    h_mu = state_pT(2.0, 20.0).h
    f = (h_fw - h_mu) / (h_lp - h_mu)
    r = (h_hp - h_fw) / (h_lp - h_fw)
    sr = 3600.0 / (ETA_T * isentropic_drop(st.headers["HP"], 5.0))  # [t/MWh]
    r_d = (h_hp - 3600.0 / sr - h_fw) / (h_lp - h_fw)
    c = FUEL * (h_hp - h_fw) / 1000.0 / ETA_B

    def steam_cost(d_hp: float, d_lp: float, s: float, fw: float = 0.0) -> float:
        # unknowns B, m, S, F; fw: extra feedwater drawn [t/h]
        a = np.array([[1, -1, 0, 0], [0, r, -1, 0], [-1, -(r - 1), 0, 1], [0, 0, 1, -f]], dtype=float)
        rhs = np.array([d_hp + s, d_lp - r_d * s, (r_d - 1) * s + fw, 0.0])
        B, m, S, F = np.linalg.solve(a, rhs)
        assert m > 0  # the letdown is open in the regime derived here
        return c * B + MAKEUP * (F - S)

    lam_hp = steam_cost(D_HP + 1, D_LP, 0) - steam_cost(D_HP, D_LP, 0)  # linear: exact
    lam_lp = steam_cost(D_HP, D_LP + 1, 0) - steam_cost(D_HP, D_LP, 0)
    lam_fw = steam_cost(D_HP, D_LP, 0, 1.0) - steam_cost(D_HP, D_LP, 0)
    delta = steam_cost(D_HP, D_LP, sr * P_MW) - steam_cost(D_HP, D_LP, 0)  # extra steam cost on turbine
    flip = ETA_M * delta / P_MW  # where p * P / eta_m equals it
    return lam_hp, lam_lp, lam_fw, flip, sr, r_d


def _boiler():  # noqa: ANN202
    return [{"id": "B1", "header": "HP", "fuels": ["NG"], "max_steam": "150 t/h", "min_steam": "10 t/h",
             "efficiency_curve": {"load": [0.05, 1.0], "efficiency": [ETA_B, ETA_B]}}]


def test_prices_and_break_even_match_the_hand_derivation() -> None:
    cfg = _site(boiler=_boiler(), fuel=[{"id": "NG", "price": f"{FUEL} per GJ"}])
    ser = series(cfg, 1, demand_HP=D_HP, demand_LP=D_LP, price_import=100.0)
    lam_hp, lam_lp, lam_fw, flip, sr, r_d = _hand(cfg)
    a = advise(cfg, ser, str(ser.time[0]), "<tiny>")
    assert a.prices["HP"] == pytest.approx(lam_hp, rel=1e-6)
    assert a.prices["LP"] == pytest.approx(lam_lp, rel=1e-6)
    assert a.power_price == pytest.approx(100.0, rel=1e-9)  # import between its limits
    row = a.drivers.set_index("machine").loc["P1"]
    assert row.flip_import_price == pytest.approx(flip, abs=0.5)
    # the marginal estimate eta_m SR (lambda_HP - r_d lambda_LP + (r_d - 1) lambda_fw): in this
    # linear regime it is exact
    assert row.marginal_estimate == pytest.approx(ETA_M * sr * (lam_hp - r_d * lam_lp + (r_d - 1) * lam_fw), rel=1e-6)
    assert row.marginal_estimate == pytest.approx(flip, rel=1e-6)
    # the recommendation flips either side of the break-even price
    for factor, better in ((0.9, "motor"), (1.1, "steam")):
        s2 = series(cfg, 1, demand_HP=D_HP, demand_LP=D_LP, price_import=flip * factor)
        r2 = advise(cfg, s2, str(s2.time[0]), "<tiny>").drivers.set_index("machine").loc["P1"]
        assert r2.better == better


def test_a_marginal_estimate_from_penalty_prices_is_left_out_and_said_why() -> None:
    """Beyond the boiler's 150 t/h the LP header goes short: its price is then the
    shortfall penalty (project default, schema.Penalties), and an estimate of the driver's
    break-even import price from it would be no price of steam (it came out at tens of
    thousands per MWh). It is left out, and the note says which price a penalty sets; the
    row is still there, with both full re-solves."""
    cfg = _site(boiler=_boiler(), fuel=[{"id": "NG", "price": f"{FUEL} per GJ"}])
    ser = series(cfg, 1, demand_HP=D_HP, demand_LP=200.0, price_import=100.0)
    a = advise(cfg, ser, str(ser.time[0]), "<tiny>")
    assert a.set_by["LP"] == "shortfall penalty"
    row = a.drivers.set_index("machine").loc["P1"]
    assert row.marginal_estimate is None or row.marginal_estimate != row.marginal_estimate  # None / NaN
    assert "LP price set by the shortfall penalty" in row.note and "marginal estimate left out" in row.note
    # HP's price too: its feedwater wants deaerator steam from the short LP header
    assert a.set_by["HP"] == "penalty elsewhere" and "HP price set by a penalty of another header or hour" in row.note
    assert "the price carries the penalty of a shortfall or surplus elsewhere" in a.reasons["HP"]
    assert np.isfinite(row.cost_on_steam) and np.isfinite(row.cost_on_motor)
    # the same hour within the boiler's rating keeps its estimate and has no note
    ok = advise(cfg, series(cfg, 1, demand_HP=D_HP, demand_LP=D_LP, price_import=100.0), str(ser.time[0]), "<tiny>")
    row = ok.drivers.set_index("machine").loc["P1"]
    assert row.marginal_estimate > 0 and row.note == ""


def _tg_site():  # noqa: ANN202
    # a curved efficiency (operating between its load points) and a back-pressure set HP -> LP
    boilers = [{"id": "B1", "header": "HP", "fuels": ["NG"], "max_steam": "160 t/h", "min_steam": "16 t/h",
                "efficiency_curve": {"load": [0.1, 0.4, 1.0], "efficiency": [0.80, 0.86, 0.84]}}]
    tg = {"id": "TG", "inlet": "HP", "max_throttle": "60 t/h", "generator_rating": "8 MW",
          "section": [{"to": "LP", "efficiency": 0.75}]}
    return _site(boiler=boilers, turbogenerator=[tg])


def test_marginal_prices_equal_finite_differences() -> None:
    # a curved efficiency (operating between its load points) and a turbo-generator, so the
    # prices are not simply fuel per tonne
    cfg = _tg_site()
    ser = series(cfg, 1, demand_HP=17.3, demand_LP=61.7, load=9.0, price_import=90.0)
    a = advise(cfg, ser, str(ser.time[0]), "<tiny>")
    hm = HourModel(cfg, ser, 0, a.held)
    for h in ("HP", "LP"):
        up = hm.cost(WhatIf(demand={h: 1.0})) - a.cost
        down = a.cost - hm.cost(WhatIf(demand={h: -1.0}))
        assert 0.5 * (up + down) == pytest.approx(a.prices[h], rel=1e-2)
    r = hm.power_row

    def with_load(d: float) -> float:
        hm._reset()
        hm.h.changeRowBounds(r, hm.rlo0[r] + d, hm.rup0[r] + d)
        hm.h.run()
        return hm.h.getInfo().objective_function_value

    assert 0.5 * (with_load(1.0) - with_load(-1.0)) == pytest.approx(a.power_price, rel=1e-2)


def test_driver_costs_equal_single_driver_sites() -> None:
    # the forced re-solves must cost what the same hour costs on a site where the machine
    # only has that driver (an independent build of the model)
    cfg = _site(boiler=_boiler(), fuel=[{"id": "NG", "price": f"{FUEL} per GJ"}])
    ser = series(cfg, 1, demand_HP=D_HP, demand_LP=D_LP, price_import=120.0)
    row = advise(cfg, ser, str(ser.time[0]), "<tiny>").drivers.set_index("machine").loc["P1"]
    for key, drop in (("cost_on_steam", "motor"), ("cost_on_motor", "steam_turbine")):
        d = cfg.drives[0].model_copy(update={drop: None})
        one = cfg.model_copy(update={"drives": [d]})
        sm = build_site_model(one, ser)
        rep = solve(sm, SolveOptions(gap=1e-9))
        assert rep.objective == pytest.approx(row[key], rel=1e-9)


def _three_boilers() -> list[dict]:
    # poorer at low load, so running fewer boilers harder is cheaper when the reserve allows
    return [{"id": f"B{i}", "header": "HP", "fuels": ["NG"], "max_steam": "60 t/h", "min_steam": "15 t/h",
             "efficiency_curve": {"load": [0.25, 1.0], "efficiency": [0.75, 0.85]}} for i in (1, 2, 3)]


@pytest.mark.parametrize("reserve", [True, False])
def test_boiler_trip_with_and_without_reserve(reserve: bool) -> None:
    cfg = site(boiler=_three_boilers(), reserve={"enabled": reserve})
    ser = series(cfg, 1, demand_LP=75.0)
    at = str(ser.time[0])
    base = advise(cfg, ser, at, "<tiny>")
    running = [b for b, on in base.held.items() if on and b.startswith("B")]
    a = advise(cfg, ser, at, "<tiny>", what_if=WhatIf(trip=[running[0]]))
    if reserve:
        # the reserve kept enough boilers running: losing one leaves every header supplied
        assert len(running) == 3
        assert a.what_if["short"] is False
    else:
        # without it two boilers carry the load, and losing one leaves a header short
        assert len(running) == 2
        assert a.what_if["short"] is True
        assert any("header SHORT" in c for c in a.what_if["changes"])


def test_what_if_keeps_the_commitment_unless_starts_are_allowed() -> None:
    """Without the reserve, 40 t/h of LP runs on one of three 60 t/h boilers. 40 t/h more
    is beyond one boiler's rating: held, the header is short by what the one cannot give;
    with starts allowed, a second boiler starts, its start-up cost charged to the hour."""
    boilers = [dict(b, startup_cost=2000) for b in _three_boilers()]
    cfg = site(boiler=boilers, reserve={"enabled": False})
    ser = series(cfg, 1, demand_LP=40.0)
    at = str(ser.time[0])
    base = advise(cfg, ser, at, "<tiny>")
    assert sum(on for b, on in base.held.items() if b.startswith("B")) == 1
    held = advise(cfg, ser, at, "<tiny>", what_if=WhatIf(demand={"LP": 40.0}))
    assert held.what_if["short"] is True and not any("started" in c for c in held.what_if["changes"])
    free = advise(cfg, ser, at, "<tiny>", what_if=WhatIf(demand={"LP": 40.0}), allow_starts=True)
    assert free.what_if["short"] is False and any("started" in c for c in free.what_if["changes"])
    assert free.what_if["asked"]["demand"] == {"LP": 40.0} and free.what_if["asked"]["allow_starts"] is True


def test_what_if_may_stop_a_running_unit_when_stops_are_allowed() -> None:
    """Two of three boilers run for 75 t/h of LP without the reserve; 40 t/h less demand is
    one boiler's work. Held, both stay on; with stops allowed the poorer one stops, and the
    hour is cheaper by at least its no-load fuel (both boilers' curves lose efficiency at
    low load, so one boiler at 35 t/h beats two at their minimum 15 t/h each)."""
    cfg = site(boiler=_three_boilers(), reserve={"enabled": False})
    ser = series(cfg, 1, demand_LP=75.0)
    at = str(ser.time[0])
    held = advise(cfg, ser, at, "<tiny>", what_if=WhatIf(demand={"LP": -40.0}))
    free = advise(cfg, ser, at, "<tiny>", what_if=WhatIf(demand={"LP": -40.0}), allow_stops=True)
    assert not any("stopped" in c for c in held.what_if["changes"])
    assert any("stopped" in c for c in free.what_if["changes"])
    assert free.what_if["cost"] < held.what_if["cost"] - 1.0
    assert free.what_if["asked"]["allow_stops"] is True


def test_trip_says_the_reserve_is_dropped_and_names_a_unit_already_off() -> None:
    cfg = site(boiler=_three_boilers(), reserve={"enabled": False})
    ser = series(cfg, 1, demand_LP=75.0)
    at = str(ser.time[0])
    off = [b for b, on in advise(cfg, ser, at, "<tiny>").held.items() if b.startswith("B") and not on]
    a = advise(cfg, ser, at, "<tiny>", what_if=WhatIf(trip=off))
    assert a.what_if["changes"][0] == f"{off[0]} was already off" and a.what_if["change"] == pytest.approx(0.0, abs=1e-6)
    cfg = site(boiler=_three_boilers(), reserve={"enabled": True})
    a = advise(cfg, ser, at, "<tiny>", what_if=WhatIf(trip=["B1"]))
    assert any(c.startswith("steam reserve no longer kept") for c in a.what_if["changes"])


def test_cli_advise_prints_tables_and_writes_files(tmp_path, capsys) -> None:  # noqa: ANN001
    from pathlib import Path
    root = Path(__file__).resolve().parents[1] / "plant_configs"
    out = tmp_path / "adv"
    rc = main(["advise", str(root / "saltmarsh_refinery.toml"), "--series", str(root / "saltmarsh_week.csv"),
               "--at", "2027-01-05T10:00", "--force", "CWP=steam", "--out", str(out)])
    text = capsys.readouterr().out
    assert rc == 0
    assert "Marginal prices" in text and "Turbine or motor" in text and "what-if" in text
    for f in ("advice.json", "prices.csv", "drivers.csv"):
        assert (out / f).is_file()
    import json

    import pandas as pd
    pr = pd.read_csv(out / "prices.csv").set_index("balance")
    adv = json.loads((out / "advice.json").read_text())
    assert set(pr.index) == {"HP", "MP", "LP", "power"} and pr.loc["power", "unit"] == "EUR/MWh"
    # the plan's columns (time, set_by "cost" or a penalty), the reason in words beside them
    assert list(pr.columns) == ["time", "price", "unit", "reserve_part", "set_by", "reason"]
    assert adv["reserve_part"]["power_per_MWh"] == pr.loc["power", "reserve_part"]
    assert set(pr.set_by) <= {"cost", "reserve limit", "shortfall penalty", "surplus penalty", "reserve penalty"}
    assert pr.loc["power", "reason"].startswith("grid import")
    drv = pd.read_csv(out / "drivers.csv")  # money columns name the currency, as the prices' unit column does
    assert {"cost_on_steam_EUR", "saving_EUR", "flip_import_price_EUR_MWh", "marginal_estimate_EUR_MWh"} <= set(drv.columns)
    assert (drv.saving_EUR >= 0).all()
    capsys.readouterr()
    assert main(["verify", str(out)]) == 2  # an advice folder is not a plan
    assert "holds advice results; verify re-checks a plan folder's schedule" in capsys.readouterr().err
    assert pr.loc["power", "price"] == pytest.approx(adv["marginal_price"]["power_per_MWh"])

    # --json is strict JSON, as the file is (no NaN: a price that never flips is null)
    def no_nan(name: str) -> None:
        raise AssertionError(f"{name} in --json output")

    rc = main(["advise", str(root / "saltmarsh_refinery.toml"), "--series", str(root / "saltmarsh_week.csv"),
               "--at", "2027-01-05T10:00", "--json"])
    printed = json.loads(capsys.readouterr().out, parse_constant=no_nan)
    mp = adv["marginal_price"]
    assert rc == 0 and printed["marginal_price"]["steam_per_t"] == pytest.approx(mp["steam_per_t"])
    assert printed["marginal_price"]["power_per_MWh"] == pytest.approx(mp["power_per_MWh"])


def test_advice_never_replaces_a_plan_folder(tmp_path, capsys) -> None:  # noqa: ANN001
    from test_robustness import _digest, _files

    site, ser = _files(tmp_path)
    plan = tmp_path / "plan"
    assert main(["plan", str(site), "--series", str(ser), "--out", str(plan), "--quiet"]) == 0
    before = _digest(plan)
    rc = main(["advise", str(site), "--series", str(ser), "--at", "2027-03-01T05:00", "--out", str(plan)])
    err = capsys.readouterr().err
    assert rc == 2 and "holds a plan from cogendispatch, which advice would replace" in err
    assert _digest(plan) == before


def test_advice_on_a_plan_made_from_another_series_says_so(tmp_path, capsys) -> None:  # noqa: ANN001
    import shutil

    from test_robustness import _files

    site, ser = _files(tmp_path)
    plan = tmp_path / "plan"
    assert main(["plan", str(site), "--series", str(ser), "--out", str(plan), "--quiet"]) == 0
    args = ["--at", "2027-03-01T05:00", "--plan", str(plan)]
    assert main(["advise", str(site), "--series", str(ser), *args]) == 0
    assert "note: the plan" not in capsys.readouterr().err  # the same files: nothing to say
    newer = tmp_path / "forecast.csv"
    shutil.copy(ser, newer)
    assert main(["advise", str(site), "--series", str(newer), *args]) == 0
    err = capsys.readouterr().err
    assert f"was made from the series file {ser.resolve()}, not {newer}" in err
    # the same file edited since the plan (a new forecast written over it) is named too
    ser.write_text(ser.read_text().replace(",5,", ",6,", 1))
    assert main(["advise", str(site), "--series", str(ser), *args]) == 0
    assert f"the series file {ser} has changed since the plan in {plan} was made from it" in capsys.readouterr().err
    # an hour the plan does not hold is an error alone, without a note that its states are held
    short = tmp_path / "six.csv"
    short.write_text("".join(newer.read_text().splitlines(keepends=True)[:7]))
    assert main(["plan", str(site), "--series", str(short), "--out", str(tmp_path / "p6"), "--quiet"]) == 0
    capsys.readouterr()
    assert main(["advise", str(site), "--series", str(newer), "--at", "2027-03-01T10:00", "--plan",
                 str(tmp_path / "p6")]) == 2
    err = capsys.readouterr().err
    assert "note:" not in err and "2027-03-01" in err


@pytest.mark.parametrize("args, where", [
    (["--at", "2030-01-01T00:00"], "--at"),
    (["--at", "2027-01-05"], "gives no hour"),
    (["--at", "10:00"], "'10:00' gives no date; write the date and the hour, e.g. '2027-01-04T10:00'"),
    (["--at", "2027-01-05T10:00", "--trip", "B1", "--allow-starts"], "does not go with --trip"),
    (["--at", "2027-01-05T10:00", "--force", "WGC=steam"], "--force"),
    (["--at", "2027-01-05T10:00", "--trip", "NOPE"], "--trip"),
    (["--at", "2027-01-05T10:00", "--price", "gas=3"], "--price"),
    (["--at", "2027-01-05T10:00", "--demand", "XX=+3"], "--demand"),
    (["--at", "2027-01-05T10:00", "--demand", "LP=lots"], "--demand"),
    (["--at", "2027-01-05T10:00", "--demand", "LP=+5 MW"], "--demand"),  # a unit of the wrong kind
    (["--at", "2027-01-05T10:00", "--price", "import=90 per t"], "--price"),
    (["--at", "2027-01-05T10:00", "--demand", "LP=+20", "--demand", "LP=+5"], "given twice"),
    (["--at", "2027-01-05T10:00", "--force", "CWP=steam", "--force", "CWP=motor"], "given twice"),
    (["--at", "2027-01-05T10:00", "--trip", "TG1", "--trip", "TG1"], "--trip: 'TG1' is given twice"),
    (["--at", "5/1/2027 10:00"], "year-month-day"),  # 1 May or 5 January, by country
    (["--at", "2027-01-05T10:00", "--keep-drivers"], "needs --plan"),
    (["--at", "2027-01-05T10:00", "--price", "import=90 USD/MWh"], "not the site's currency"),
])
def test_cli_advise_bad_options_exit_2(args: list[str], where: str, capsys) -> None:  # noqa: ANN001
    from pathlib import Path
    root = Path(__file__).resolve().parents[1] / "plant_configs"
    rc = main(["advise", str(root / "saltmarsh_refinery.toml"), "--series", str(root / "saltmarsh_week.csv"), *args])
    err = capsys.readouterr().err
    assert rc == 2 and where in err and "Traceback" not in err
    # with --json the failure is an object on standard output too
    import json
    assert main(["advise", str(root / "saltmarsh_refinery.toml"), "--series", str(root / "saltmarsh_week.csv"),
                 *args, "--json"]) == 2
    printed = json.loads(capsys.readouterr().out)
    assert printed["error"] == "input" and printed["exit_code"] == 2 and where in printed["message"]


def test_a_bad_command_line_with_json_prints_an_object(capsys) -> None:  # noqa: ANN001
    import json
    with pytest.raises(SystemExit) as exc:
        main(["plan", "site.toml", "--series", "s.csv", "--out", "o", "--json", "--bogus"])
    assert exc.value.code == 2
    cap = capsys.readouterr()
    assert json.loads(cap.out)["exit_code"] == 2 and "--bogus" in cap.err


def test_what_if_values_may_carry_units() -> None:
    import argparse

    from cogendispatch.cli import what_if_from_args
    args = argparse.Namespace(force=[], trip=[], price=["fuel:NG=4 per MMBtu", "import=0.09 per kWh", "export=40"],
                              demand=["LP=+20 klb/h", "MP=-3"])
    w = what_if_from_args(args)
    assert w.fuel_price["NG"] == pytest.approx(4 / (2.326 * 0.45359237), rel=1e-12)  # 1 MMBtu = 1.05505585 GJ (IT Btu, NIST SP 811)
    assert w.price_import == pytest.approx(90.0) and w.price_export == pytest.approx(40.0)
    assert w.demand["LP"] == pytest.approx(20 * 0.45359237, rel=1e-9)  # 1 lb = 0.45359237 kg (NIST SP 811)
    assert w.demand["MP"] == pytest.approx(-3.0)


def test_hour_index_names_a_missing_hour() -> None:
    cfg = site()
    ser = series(cfg, 3, demand_LP=10.0)
    assert hour_index(ser, str(ser.time[2]), "<s>") == 2
    assert hour_index(ser, "2027-03-01T02", "<s>") == 2  # an hour without minutes is an hour
    from cogendispatch.errors import InputError
    with pytest.raises(InputError, match="not an hour"):
        hour_index(ser, "2030-01-01 00:00", "<s>")


def test_at_with_slashes_reads_as_the_series_does() -> None:
    """A series written 3/1/2027 (month first) or 01/03/2027 (day first) is read the one way
    that makes its rows hourly; --at written with '/' is read the same way round (from the
    mill trial: it was refused outright). A series written year-month-day gives no hint,
    so '/' there is still refused."""
    import pandas as pd

    from cogendispatch.errors import InputError
    from cogendispatch.plant.series import parse_series

    cfg = site()

    def written(fmt: str):  # noqa: ANN202
        times = [t.strftime(fmt) for t in pd.date_range("2027-03-01", periods=48, freq="h")]
        return parse_series(pd.DataFrame({"time": times, "demand:HP [t/h]": ["0"] * 48, "demand:LP [t/h]": ["10"] * 48,
                                          "load [MW]": ["5"] * 48, "price:import [per MWh]": ["100"] * 48}),
                            cfg, "<s>")

    us, eu, iso = written("%m/%d/%Y %H:%M"), written("%d/%m/%Y %H:%M"), written("%Y-%m-%d %H:%M")
    assert (us.date_order, eu.date_order, iso.date_order) == ("month first", "day first", "")
    assert hour_index(us, "3/1/2027 12:00", "<s>") == 12 and hour_index(us, "3/2/2027 1:00", "<s>") == 25
    assert hour_index(eu, "01/03/2027 12:00", "<s>") == 12
    with pytest.raises(InputError, match="not an hour of the series"):  # 3 January, read as the series
        hour_index(us, "1/3/2027 12:00", "<s>")
    with pytest.raises(InputError, match="write the date as year-month-day, as the series does"):
        hour_index(iso, "3/1/2027 12:00", "<s>")

def test_advice_holds_the_plans_states(tmp_path) -> None:  # noqa: ANN001
    import pandas as pd

    from cogendispatch.outputs import write_csv
    from cogendispatch.results import plan_results
    cfg = site(boiler=_three_boilers(), reserve={"enabled": True},
               drive=[{"id": "P1", "duty": "2 MW", "motor": {"efficiency": 0.95},
                       "steam_turbine": {"inlet": "HP", "exhaust": "LP", "efficiency": 0.6}}])
    ser = series(cfg, 4, demand_LP=[30, 75, 75, 30], price_import=[40, 300, 300, 40])
    # plan the four hours, write the plan folder, then advise hour 2 from it
    sm = build_site_model(cfg, ser)
    solve(sm, SolveOptions(gap=1e-9))
    res = plan_results(sm)

    (tmp_path / "plan").mkdir()
    write_csv(res.schedule, tmp_path / "plan" / "schedule.csv")  # what advise reads of a plan
    sched = pd.read_csv(tmp_path / "plan" / "schedule.csv", index_col="time")
    a = advise(cfg, ser, str(ser.time[2]), "<tiny>", plan_dir=str(tmp_path / "plan"))
    row = sched.iloc[2]
    assert a.held == {u: int(row[f"{u}.on"]) for u in ("B1", "B2", "B3")}
    assert a.drivers.set_index("machine").loc["P1"].now_on_steam == int(row["P1.on_steam"])


def test_a_reserve_penalty_is_named_not_passed_off_as_cost() -> None:
    # Three 60 t/h boilers keep a one-boiler-trip reserve for 75 t/h of LP (deaerator
    # steam on top). 60 t/h more demand (half of it back as condensate, less deaerator
    # steam) is beyond what two can carry: with every boiler already running, the reserve
    # goes short and the hour's cost jumps by its penalty (10^4 per t of reserve by
    # default), which the advice must call a penalty.
    cfg = site(boiler=_three_boilers(), reserve={"enabled": True},
               letdown=[{"id": "LD", "from": "HP", "to": "LP", "max_flow": "200 t/h"}])
    ser = series(cfg, 1, demand_LP=75.0)
    at = str(ser.time[0])
    a = advise(cfg, ser, at, "<tiny>", what_if=WhatIf(demand={"LP": 60.0}))
    wi = a.what_if
    assert wi["short"] is False and wi["reserve_short_t_h"] > 1.0
    assert wi["penalty_change"] == pytest.approx(1e4 * wi["reserve_short_t_h"], rel=1e-9)
    note = next(c for c in wi["changes"] if c.startswith("steam reserve"))
    assert "penalty, not money spent" in note and "allow-starts" not in note  # no boiler left to start
    # far beyond what the boilers carry, the LP header goes short: that penalty is named too
    # (10^6 per t at the lowest header by default) and counted in the penalty change
    a = advise(cfg, series(cfg, 1, demand_LP=75.0), at, "<tiny>", what_if=WhatIf(demand={"LP": 500.0}))
    wi = a.what_if
    assert wi["short"] is True
    shortfall = next(c for c in wi["changes"] if "cannot supply or take" in c)
    lp_short = wi["penalty_change"] - 1e4 * wi["reserve_short_t_h"]
    named = float(shortfall.split(" of the change is the penalty")[0].replace(",", ""))
    assert lp_short > 1e8 and named == pytest.approx(lp_short, abs=1.0)
    assert wi["change"] > wi["penalty_change"] > 0.99 * wi["change"]  # nearly all of it is penalty
    # and a process exporting more LP steam than the vent and the deaerator can take: surplus
    a = advise(cfg, series(cfg, 1, demand_LP=75.0), at, "<tiny>", what_if=WhatIf(demand={"LP": -400.0}))
    wi = a.what_if
    assert any("cannot supply or take" in c for c in wi["changes"])
    assert wi["penalty_change"] > 1e8 and wi["change"] > 0.99 * wi["penalty_change"]
    # the same demand as the hour itself: the marginal prices say what sets them
    ser = series(cfg, 1, demand_LP=125.0)
    a = advise(cfg, ser, at, "<tiny>")
    assert "penalty" in a.reasons["LP"] and "reserve" in a.reasons["LP"]
    assert a.prices["LP"] > 1000.0  # of the penalty's order, far above any fuel cost


def test_a_what_if_price_never_imports_and_exports_at_once() -> None:
    # Power from the turbo-generator is cheap; an import price of 0 below the export price
    # of 60 would pay the site to import at its limit and sell the excess back, which one
    # metered connection cannot do.
    tg = {"id": "TG", "inlet": "HP", "max_throttle": "80 t/h", "min_throttle": "5 t/h",
          "generator_rating": "10 MW", "no_load_loss": "0.2 MW", "section": [{"to": "LP", "efficiency": 0.75}]}
    cfg = site(turbogenerator=[tg], grid={"max_import": "50 MW", "max_export": "20 MW"})
    ser = series(cfg, 1, demand_LP=60.0, load=4.0, price_import=100.0, price_export=60.0)
    at = str(ser.time[0])
    hm = HourModel(cfg, ser, 0, {"B1": 1, "TG": 1})
    st = hm.solve(WhatIf(price_import=0.0))
    x = hm.lm.solution()
    imp, exp = x[hm.imp_col], x[hm.exp_col]
    assert min(imp, exp) < 1e-6, (imp, exp)
    a = advise(cfg, ser, at, "<tiny>", what_if=WhatIf(price_import=0.0))
    assert a.what_if["cost"] == pytest.approx(st.cost, rel=1e-9)


def test_driver_history_counts_hours_since_the_last_change() -> None:
    """Hours each machine position has kept its driver before the hour, from the plan's rows
    (joined to the site file's state before the horizon when it never changed), and the hours
    the minimum time between changes still holds a change (HCFP 8 h, AIRB 24 h, BFWP two
    machines, 4 h, in the demo), as drive.py's per-position rows hold them."""
    import pandas as pd

    from cogendispatch.cli import _driver_change
    from cogendispatch.decisions import driver_history
    from cogendispatch.plant.load import load_site
    from conftest import DEMO_DIR

    cfg = load_site(DEMO_DIR / "saltmarsh_refinery.toml")
    given = {"AIRB": 0, "BFWP": 2}  # drivers before the horizon, 3 h since the last change
    cfg = cfg.model_copy(update={"drives": [d.model_copy(update={"initial_on_steam": given[d.id],
                                                                 "initial_hours_since_switch": 3.0})
                                            if d.id in given else d for d in cfg.drives]})
    bfwp_L = next(d for d in cfg.drives if d.id == "BFWP").min_hours_between_switches
    assert bfwp_L == 4.0
    sched = pd.DataFrame({"HCFP.on_steam": [0] * 5 + [1] * 20,  # to steam at hour 5
                          "AIRB.on_steam": [0] * 25,
                          "BFWP.on_steam": [2] * 7 + [1] * 18})  # one of two to motor at hour 7
    h = driver_history(cfg, 9, sched)
    assert (h["HCFP"].before, h["HCFP"].positions) == (1, ((1, 4.0),))  # hours 5 to 8
    assert (h["HCFP"].held_for(False), h["HCFP"].held_for(True)) == (4, 0)
    assert driver_history(cfg, 13, sched)["HCFP"].held_for(False) == 0  # 8 h served
    # AIRB on motor since the plan began, 3 h before it (site file): 12 h of its 24
    assert (h["AIRB"].positions, h["AIRB"].held_for(True)) == (((0, 12.0),), 12)
    # BFWP: the first machine on steam since before the plan (9 + 3 h), the second on motor
    # for 2 h. All on motor: only the first must change, and it may; all on steam: the
    # second must change, held 2 h more
    assert h["BFWP"].positions == ((1, 12.0), (0, 2.0))
    assert (h["BFWP"].held_for(False), h["BFWP"].held_for(True)) == (0, 2)
    # HCFP has no driver before the plan: kept since the plan began, it is free to change,
    # as the plan's rows take it
    assert driver_history(cfg, 3, sched)["HCFP"].held_for(True) == 0
    # the first hour: the site file alone; without a plan a later hour is unknown
    assert driver_history(cfg, 0, None)["AIRB"].held_for(True) == 21 and "HCFP" not in driver_history(cfg, 0, None)
    assert driver_history(cfg, 9, None) == {}
    row = {"better": "motor", "count": 1, "best_on_steam": 0, "on_steam_hour_before": 1, "motor_blocked_h": 4.0,
           "steam_blocked_h": 0.0}
    assert _driver_change(pd.Series(row), "?") == "not allowed for 4 h"
    assert _driver_change(pd.Series({**row, "better": "steam", "best_on_steam": 1}), "?") == "none needed"
    assert _driver_change(pd.Series({**row, "motor_blocked_h": 0.0}), "?") == "allowed"
    assert _driver_change(pd.Series({**row, "on_steam_hour_before": float("nan")}), "?") == "?"


def test_what_if_names_a_surplus_nothing_can_take(tmp_path, capsys) -> None:  # noqa: ANN001
    """500 t/h pushed into the LP header (a negative demand) is more than the vent and
    every user can take: the what-if names the surplus, not only the penalty it costs."""
    import json
    from pathlib import Path

    root = Path(__file__).resolve().parents[1] / "plant_configs"
    rc = main(["advise", str(root / "saltmarsh_refinery.toml"), "--series", str(root / "saltmarsh_week.csv"),
               "--at", "2027-01-05T10:00", "--demand", "LP=-500", "--json"])
    assert rc == 0  # a question, not the plant's state (README)
    wi = json.loads(capsys.readouterr().out)["what_if"]
    assert wi["surplus"] is True
    line = next(c for c in wi["changes"] if "LP header SURPLUS" in c)
    assert float(line.split("SURPLUS ")[1].split(" ")[0]) > 100.0


def test_cli_advise_exits_3_when_the_bus_is_short(tmp_path, capsys) -> None:  # noqa: ANN001
    """A load above the import limit and every generator: the hour as given leaves the bus
    short, which is 'demand not met' (exit 3) as a header short is."""
    from test_plan_small import TINY_TOML

    (tmp_path / "site.toml").write_text(TINY_TOML)
    (tmp_path / "s.csv").write_text("time,demand:HP [t/h],demand:LP [t/h],load [MW],price:import [per MWh]\n"
                                    "2027-03-01T00:00,0,20,80,50\n")
    rc = main(["advise", str(tmp_path / "site.toml"), "--series", str(tmp_path / "s.csv"), "--at", "2027-03-01T00:00"])
    err = capsys.readouterr().err
    assert rc == 3 and "not met:" in err and "power: short" in err and " MW, priced" in err


def test_a_turbo_generator_trip_keeps_the_steam_reserve() -> None:
    """The reserve covers losing a running boiler: tripping a turbo-generator (or a unit
    already off) leaves it in force, where it once was dropped and the hour looked cheaper."""
    from cogendispatch.plant.load import load_site
    from cogendispatch.plant.series import load_series
    from conftest import DEMO_DIR

    cfg = load_site(DEMO_DIR / "saltmarsh_refinery.toml")
    ser = load_series(DEMO_DIR / "saltmarsh_week.csv", cfg)
    a = advise(cfg, ser, "2027-01-05T10:00", "<demo>", what_if=WhatIf(trip=["TG1"]))
    text = " ".join(a.what_if["changes"])
    assert "reserve no longer kept" not in text
    b = advise(cfg, ser, "2027-01-05T10:00", "<demo>", what_if=WhatIf(trip=["B1"]))
    assert a.held["B1"] == 1 and "reserve no longer kept" in " ".join(b.what_if["changes"])


def test_a_flip_at_a_zero_import_price_is_zero() -> None:
    """Steam that costs nothing (its exhaust would be vented anyway) is better at any import
    price above zero: the flip is 0, not the bisection's round-off (it read 5.7e-11)."""
    from cogendispatch.decisions import _flip_prices

    class FreeSteam:  # the hour's cost on steam 0 (and an LP's round-off), on motor price x 2 MWh
        def cost(self, w: WhatIf) -> float:
            return 1e-9 if w.force["P1"] == "steam" else 2.0 * w.price_import

    assert _flip_prices(FreeSteam(), "P1", 100.0, -200.0, None, 0.5) == (0.0, None)


def test_a_trip_that_frees_a_reserve_penalty_says_why_the_hour_is_cheaper() -> None:
    """B1 (150 t/h) and B2, B3 (60 t/h each) run; the hour needs more steam than B2 and B3
    can make together, so losing B1 could not be covered: the reserve is short before any
    trip, and its penalty is in the hour's cost. Tripping B3 leaves B1 and B2 able to carry
    the hour, and the reserve is dropped with the trip: the hour costs less by about that
    penalty. The what-if must say so, not pass it off as a saving."""
    boilers = [{"id": b, "header": "HP", "fuels": ["NG"], "max_steam": f"{mx} t/h", "min_steam": "10 t/h",
                "efficiency_curve": {"load": [0.05, 1.0], "efficiency": [0.85, 0.85]}, "initial_on": True}
               for b, mx in (("B1", 150), ("B2", 60), ("B3", 60))]
    cfg = site(boiler=boilers, reserve={"enabled": True, "cover": 1.0},
               letdown=[{"id": "LD", "from": "HP", "to": "LP", "max_flow": "300 t/h"}])
    ser = series(cfg, 1, demand_LP=130.0)
    a = advise(cfg, ser, str(ser.time[0]), "<tiny>", what_if=WhatIf(trip=["B3"]))
    assert len(a.not_met) == 1 and a.not_met[0].startswith("steam reserve")  # the hour as given
    wi = a.what_if
    assert not wi["short"] and wi["reserve_short_t_h"] == 0.0
    note = next(c for c in wi["changes"] if c.startswith("steam reserve no longer kept"))
    assert wi["change"] < -1e4  # cheaper by about the penalty (10^4 per t/h, schema.Penalties)
    less = float(note.split("costs ")[1].split(" less")[0].replace(",", ""))
    freed = float(note.split("(")[1].split(" of it")[0].replace(",", ""))
    assert less == pytest.approx(-wi["change"], abs=1.0)
    assert freed == pytest.approx(-wi["penalty_change"], abs=1.0) and freed > 1e4
    # and who picks up the tripped boiler's steam is named
    assert any(c.startswith("boiler B3 ") and c.endswith("-> 0.0 t/h") for c in wi["changes"])
    assert any(c.startswith(("boiler B1 ", "boiler B2 ")) for c in wi["changes"])


def test_a_difference_that_is_not_monotone_in_the_import_price_is_searched_both_ways() -> None:
    """With the rest of the hour re-solved at each price, steam-minus-motor cost need not
    fall as the import price rises (a turbo-generator's load moves with it). Here, made up:
    the motor is better at the hour's 170 /MWh and from 120 to 680; steam is better below
    120 and above 680. The nearest flip is 120 (below the hour's price); a search upwards
    only, as this once was, found 680 alone."""  # noqa: D205
    from cogendispatch.decisions import _flip_prices

    class Hump:
        def cost(self, w: WhatIf) -> float:
            p = w.price_import
            diff = (p - 120.0) if p < 300.0 else (500.0 - p) * 0.5 + 90.0  # 0 at 120 and at 680
            return diff if w.force["P1"] == "steam" else 0.0

    near, other = _flip_prices(Hump(), "P1", 170.0, 50.0, None, 0.5)
    assert near == pytest.approx(120.0, abs=0.5)
    assert other is None  # the far side is searched only as far as the flip in hand
    # with an estimate above the hour's price that side is searched first, and the nearer
    # flip below is still found; both are then known
    near, other = _flip_prices(Hump(), "P1", 170.0, 50.0, 600.0, 0.5)
    assert near == pytest.approx(120.0, abs=0.5) and other == pytest.approx(680.0, abs=0.5)


def test_a_what_if_names_a_driver_change_the_minimum_time_does_not_allow() -> None:
    """The hour's re-solve does not hold the minimum time between driver changes (that is
    the plan's, across hours): a what-if that moves a machine's driver says when the change
    is not yet allowed, from the drivers of the hour before."""
    from types import SimpleNamespace

    from cogendispatch.decisions import DriverHistory, _blocked_changes

    history = {"AIRB": DriverHistory(((0, 12.0),), 24),  # on motor for 12 h of its 24
               "HCFP": DriverHistory(((1, 9.0),), 8)}  # on steam for 9 h of its 8: free
    base = SimpleNamespace(on_steam={"AIRB": 0, "HCFP": 1, "CWP": 0})
    new = SimpleNamespace(on_steam={"AIRB": 1, "HCFP": 0, "CWP": 1})  # CWP: no history, not judged
    lines = _blocked_changes(base, new, history)
    assert lines == ["AIRB: 0 -> 1 machine(s) on steam against the hour before is not allowed for 12 h "
                     "by the minimum time between driver changes (24 h)"]


def test_a_flip_below_a_negative_import_price_is_found() -> None:
    """An hour paid to take power (import at -20 /MWh) whose answer flips at -50: the search
    goes below a negative price, and a negative flip is not read as zero."""
    from cogendispatch.decisions import _flip_prices

    class Linear:  # steam minus motor = price + 50: motor better above -50
        def cost(self, w: WhatIf) -> float:
            return w.price_import + 50.0 if w.force["P1"] == "steam" else 0.0

    near, other = _flip_prices(Linear(), "P1", -20.0, 30.0, None, 0.5)
    assert near == pytest.approx(-50.0, abs=0.5) and other is None


def test_a_trip_note_names_the_penalty_as_part_of_a_dispatch_change() -> None:
    """Tripping a poor boiler held at its minimum load saves its fuel as well as the reserve
    penalty; the note then says how much was penalty and does not claim it all was."""
    boilers = [{"id": b, "header": "HP", "fuels": ["NG"], "max_steam": f"{mx} t/h", "min_steam": f"{mn} t/h",
                "efficiency_curve": {"load": [0.05, 1.0], "efficiency": [eta, eta]}, "initial_on": True}
               for b, mx, mn, eta in (("B1", 150, 10, 0.9), ("B2", 60, 10, 0.9), ("B3", 60, 30, 0.6))]
    cfg = site(boiler=boilers, reserve={"enabled": True, "cover": 1.0},
               letdown=[{"id": "LD", "from": "HP", "to": "LP", "max_flow": "300 t/h"}])
    ser = series(cfg, 1, demand_LP=130.0)
    wi = advise(cfg, ser, str(ser.time[0]), "<tiny>", what_if=WhatIf(trip=["B3"])).what_if
    note = next(c for c in wi["changes"] if c.startswith("steam reserve no longer kept"))
    assert "only because" not in note and "of which" in note and "the rest the dispatch" in note
    freed = float(note.split("of which ")[1].split(" was")[0].replace(",", ""))
    assert freed == pytest.approx(-wi["penalty_change"], abs=1.0) and -wi["change"] > freed + 10.0


def _pair_site():  # noqa: ANN202
    drive = {"id": "P1", "duty": f"{P_MW} MW", "count": 2, "motor": {"efficiency": ETA_M},
             "steam_turbine": {"inlet": "HP", "exhaust": "LP", "efficiency": ETA_T}}
    return site(drive=[drive], boiler=_boiler(), fuel=[{"id": "NG", "price": f"{FUEL} per GJ"}])


def test_a_spared_pair_may_be_best_split_between_its_drivers() -> None:
    """Two identical pumps, power dear (200 /MWh): one pump's exhaust (about 25 t/h) covers
    a small LP demand, the second's would have to be vented, so one on steam and one on
    motor beats both all-on-steam and all-on-motor (by reasoning; the costs are the
    model's). With a large LP demand both exhausts are used: both on steam."""
    cfg = _pair_site()
    ser = series(cfg, 1, demand_HP=D_HP, demand_LP=20.0, price_import=200.0)
    row = advise(cfg, ser, str(ser.time[0]), "<tiny>").drivers.set_index("machine").loc["P1"]
    assert row.better == "1 of 2 on steam" and row.best_on_steam == 1
    assert row.cost_best < min(row.cost_on_steam, row.cost_on_motor) - 50.0
    assert row.saving == pytest.approx(max(row.cost_on_steam, row.cost_on_motor) - row.cost_best)
    # the flip is where the best number on steam changes (not where all on steam and all
    # on motor cost the same): just on the hour's side of it 1 of 2 is still the cheapest,
    # just beyond it another number is
    assert "where 1 of 2 on steam stops being the cheapest" in row.note
    flip = row.flip_import_price
    hm = HourModel(cfg, ser, 0, {"B1": 1})

    def best_at(price: float) -> int:
        costs = [hm.cost(WhatIf(force={"P1": n}, price_import=price)) for n in range(3)]
        return min(range(3), key=lambda n: (costs[n], -n))

    inward = 1.0 if flip < 200.0 else -1.0
    assert best_at(flip + 2.0 * inward) == 1 and best_at(flip - 2.0 * inward) != 1
    # against the machines on steam now: none (a plan's state, say), both, or the best split
    from cogendispatch.decisions import driver_table
    prices, _, _ = hm.marginal_prices()
    for now, cost_now in ((0, row.cost_on_motor), (2, row.cost_on_steam), (1, row.cost_best)):
        r = driver_table(hm, {"P1": now}, prices).iloc[0]
        assert r.saving_vs_now == pytest.approx(cost_now - row.cost_best, abs=0.01)
    ser = series(cfg, 1, demand_HP=D_HP, demand_LP=60.0, price_import=200.0)
    row = advise(cfg, ser, str(ser.time[0]), "<tiny>").drivers.set_index("machine").loc["P1"]
    assert row.better == "steam" and row.best_on_steam == 2


def test_the_hour_holds_drivers_the_minimum_time_does_not_let_change() -> None:
    """Driver positions that changed less than the minimum time ago keep their driver in
    every re-solve of the hour except for the machine a what-if forces: with power cheap
    both pumps would go to motor, but the first changed to steam 2 h ago (4 h minimum)."""
    from cogendispatch.decisions import DriverHistory

    h = DriverHistory(((1, 2.0), (0, 9.0)), 4)  # first on steam for 2 h, second on motor for 9
    assert h.allowed() == (1, 2)
    assert DriverHistory(((1, 9.0), (0, 1.0)), 4).allowed() == (0, 1)  # the second held on motor
    assert DriverHistory(((1, 1.0), (0, 1.0)), 1).allowed() == (0, 2)  # 1 h: every hour free
    cfg = _pair_site()
    ser = series(cfg, 1, demand_HP=D_HP, demand_LP=40.0, price_import=5.0)
    hm = HourModel(cfg, ser, 0, {"B1": 1})
    assert hm.solve().on_steam["P1"] == 0  # free: both on motor
    hm.driver_limits = {"P1": h.allowed()}
    assert hm.solve().on_steam["P1"] == 1
    assert hm.solve(WhatIf(force={"P1": "motor"})).on_steam["P1"] == 0  # forced: the what-if's own


def test_an_estimate_that_disagrees_with_the_re_solves_is_said_so() -> None:
    """With 2 t/h of LP demand, the pump turbine's 25 t/h or so of exhaust would mostly be
    vented: at the hour's marginal prices (LP priced by the letdown) the estimate says
    steam pays above about 40 /MWh, while the full re-solves, which vent the exhaust, say
    motor at 100 (they flip near 340). The note says the two disagree and why."""
    cfg = _site(boiler=_boiler(), fuel=[{"id": "NG", "price": f"{FUEL} per GJ"}])
    ser = series(cfg, 1, demand_HP=D_HP, demand_LP=2.0, price_import=100.0)
    row = advise(cfg, ser, str(ser.time[0]), "<tiny>").drivers.iloc[0]
    assert row.better == "motor" and row.marginal_estimate < 100.0 < row.flip_import_price
    assert "the marginal estimate" in row.note and "points to steam" in row.note and "say motor" in row.note


def test_a_tie_over_a_range_of_prices_flips_at_its_edge_in_few_re_solves() -> None:
    """Below 47 /MWh steam and motor cost the same to a fraction of a cent (a made-up
    difference of -0.004 per hour), above it the motor is better: the flip is the edge of
    that tie, 47, found in a few steps (the search once crawled through the flat part for
    30 steps)."""
    from cogendispatch.decisions import _flip_prices

    calls = []

    class FlatThenRise:
        def cost(self, w: WhatIf) -> float:
            calls.append(1)
            p = w.price_import
            diff = -0.004 if p < 47.0 else 2.0 * (p - 47.0) - 0.004
            return diff if w.force["P1"] == "steam" else 0.0

    near, other = _flip_prices(FlatThenRise(), "P1", 100.0, 106.0, None, 0.5)
    assert near == pytest.approx(47.0, abs=0.5) and other is None
    # two re-solves a step: 5 to bracket it, about 10 to narrow 25 /MWh to 0.5 (halving
    # every other step), 2 on the far side; crawling along the flat part took 30 steps
    assert len(calls) <= 2 * 18


def test_an_estimate_from_steam_prices_a_turbo_generator_sets_is_said_to_move_with_power() -> None:
    """With the LP price set by a back-pressure set's exhaust, lambda_HP - lambda_LP is that
    set's power per tonne at the power price, so the marginal estimate moves with the import
    price and says little about the flip: here it reads about 96 /MWh while the re-solves
    flip near 60 (and again near 400). The note says which header a turbo-generator prices."""
    cfg = _tg_site()
    ser = series(cfg, 1, demand_HP=17.3, demand_LP=40.0, load=9.0, price_import=90.0)
    a = advise(cfg, ser, str(ser.time[0]), "<tiny>")
    assert a.reasons["LP"].startswith("LP: exhaust of TG")  # the scenario as meant
    row = a.drivers.iloc[0]
    assert abs(row.flip_import_price - row.marginal_estimate) > 20.0
    assert "set by a turbo-generator (LP by TG)" in row.note and "move with the power price" in row.note


def test_an_extraction_sets_the_price_of_its_header() -> None:
    """An extraction-back-pressure set HP -> MP -> LP, running, is the only way into MP:
    the MP price is its extraction's (the inlet price less the power the tonne would have
    made through the second section), and the line says so. (This once failed with an
    AttributeError for any running set with an extraction.)"""
    headers = [{"id": "HP", "pressure": "40 bar(a)", "temperature": "400 degC"},
               {"id": "MP", "pressure": "12 bar(a)", "temperature": "260 degC"},
               {"id": "LP", "pressure": "5 bar(a)", "temperature": "180 degC"}]
    tg = {"id": "TG", "inlet": "HP", "max_throttle": "80 t/h", "generator_rating": "20 MW", "initial_on": True,
          "section": [{"to": "MP", "efficiency": 0.75, "max_extraction": "50 t/h"}, {"to": "LP", "efficiency": 0.75}]}
    cfg = site(header=headers, turbogenerator=[tg])
    a = advise(cfg, series(cfg, 1, demand_MP=20.0, demand_LP=30.0, price_import=100.0, load=10.0),
               "2027-03-01T00:00", "<tiny>")
    assert not a.not_met
    assert a.reasons["MP"] == "MP: extraction from TG (the inlet price less the power it makes)"
    assert a.prices["LP"] < a.prices["MP"] < a.prices["HP"]

def test_a_binding_reserve_is_named_in_the_steam_price_with_its_share() -> None:
    """Two 60 t/h boilers with a full reserve may make 60 t/h between them; at 400 /MWh of
    import the turbo-generator would pass more steam (to the vent), so the reserve row
    binds and the HP price is above the boiler's cost without any shortfall. The reason
    names the reserve and its share, which is the price with the reserve less the price
    of the same hour without it."""
    def boiler(b: str) -> dict:
        return {"id": b, "header": "HP", "fuels": ["NG"], "max_steam": "60 t/h", "min_steam": "10 t/h",
                "efficiency_curve": {"load": [0.1, 1.0], "efficiency": [0.85, 0.85]}, "initial_on": True}

    tg = {"id": "TG", "inlet": "HP", "max_throttle": "80 t/h", "generator_rating": "20 MW", "initial_on": True,
          "section": [{"to": "LP", "efficiency": 0.75}]}
    prices = {}
    for on in (True, False):
        cfg = site(boiler=[boiler("B1"), boiler("B2")], turbogenerator=[tg], reserve={"enabled": on, "cover": 1.0})
        ser = series(cfg, 1, demand_HP=10.0, demand_LP=30.0, price_import=400.0, load=20.0)
        a = advise(cfg, ser, str(ser.time[0]), "<tiny>")
        assert not a.not_met
        prices[on] = (a.prices["HP"], a.reasons["HP"])
        assert a.set_by["HP"] == ("reserve limit" if on else "cost")  # a cost either way, no penalty
    assert prices[True][0] > prices[False][0] + 1.0  # the scenario as meant
    assert "reserve" not in prices[False][1]
    share = float(prices[True][1].split("adds ")[1].split(" EUR/t")[0])
    assert "the steam reserve binds" in prices[True][1]
    assert share == pytest.approx(prices[True][0] - prices[False][0], abs=0.01)


def test_a_power_price_the_reserve_raises_says_by_how_much() -> None:
    """With the import at its 5 MW limit, the back-pressure set makes the last MW and its
    HP steam comes from the costly B2 under a half cover (cover 0.5: B2 must carry twice
    what B1 adds above 100 t/h in all, as in test_prices). So the power price carries the
    reserve's part of the steam price; the line gives it, and it is the power price less
    that of the same hour without the reserve."""
    deaerator = {"pressure": "2 bar(a)", "heating_steam": "LP", "makeup_temperature": "20 degC",
                 "makeup_cost": "0.5 per t", "process_condensate_return": 0.0, "condensate_temperature": "80 degC"}
    boilers = [{"id": f"B{i}", "header": "HP", "fuels": ["NG"], "max_steam": "100 t/h", "min_steam": "10 t/h",
                "efficiency_curve": {"load": [0.1, 1.0], "efficiency": [eff, eff]}, "initial_on": True}
               for i, eff in ((1, 0.90), (2, 0.80))]
    tg = {"id": "TG", "inlet": "HP", "max_throttle": "80 t/h", "generator_rating": "20 MW", "initial_on": True,
          "section": [{"to": "LP", "efficiency": 0.75}]}
    out = {}
    for on in (True, False):
        cfg = site(boiler=boilers, turbogenerator=[tg], deaerator=deaerator, reserve={"enabled": on, "cover": 0.5},
                   grid={"max_import": "5 MW", "max_export": "0 MW"})
        a = advise(cfg, series(cfg, 1, demand_HP=60.0, demand_LP=20.0, price_import=100.0, load=12.0),
                   "2027-03-01T00:00", "<tiny>")
        assert not a.not_met and a.power_reason.startswith("power: turbo-generator TG")  # the scenario as meant
        out[on] = a
    assert out[True].set_by["power"] == "reserve limit" and out[False].set_by["power"] == "cost"
    assert out[True].power_price > out[False].power_price + 10.0
    part = float(out[True].power_reason.split("adds ")[1].split(" EUR/MWh")[0])
    assert part == pytest.approx(out[True].power_price - out[False].power_price, abs=0.01)
    assert "reserve" not in out[False].power_reason

def test_a_what_if_line_names_the_grid_when_import_moves() -> None:
    """A trip or a forced driver often moves the import first: the line says so."""
    from cogendispatch.decisions import HourState, what_if_changes

    def state(imp: float) -> HourState:
        return HourState(cost=0.0, on={}, on_steam={}, letdown={}, vent={}, short={}, power_short=0.0,
                         grid={"import": imp, "export": 0.0})

    assert what_if_changes(state(44.01), state(44.61)) == ["grid import 44.01 -> 44.61 MW"]
    assert what_if_changes(state(44.01), state(44.012)) == []  # below the digits shown


def test_keep_drivers_holds_the_plans_drivers_in_the_hour(tmp_path) -> None:  # noqa: ANN001
    """A plan made at dear power runs both pumps on steam; asked at cheap power, the hour
    alone would put both on motor. With keep_drivers the hour as given keeps the plan's two
    on steam (its dispatch says so), while the driver table's row still prices the change;
    without a plan, keep_drivers is refused."""
    from cogendispatch.outputs import write_csv
    from cogendispatch.results import plan_results
    cfg = _pair_site()
    dear = series(cfg, 2, demand_HP=D_HP, demand_LP=60.0, price_import=200.0)
    sm = build_site_model(cfg, dear)
    solve(sm, SolveOptions(gap=1e-9))
    (tmp_path / "plan").mkdir()
    write_csv(plan_results(sm).schedule, tmp_path / "plan" / "schedule.csv")
    cheap = series(cfg, 2, demand_HP=D_HP, demand_LP=60.0, price_import=5.0)
    at, plan = str(cheap.time[1]), str(tmp_path / "plan")
    free = advise(cfg, cheap, at, "<tiny>", plan_dir=plan)
    kept = advise(cfg, cheap, at, "<tiny>", plan_dir=plan, keep_drivers=True)
    assert free.drivers.iloc[0].now_on_steam == 2  # the plan's, as meant
    assert free.dispatch["machines_on_steam"]["P1"] == 0 and kept.dispatch["machines_on_steam"]["P1"] == 2
    assert kept.cost > free.cost + 1.0
    row = kept.drivers.iloc[0]
    assert row.better == "motor" and row.saving_vs_now == pytest.approx(row.cost_on_steam - row.cost_on_motor)
    with pytest.raises(InputError, match="--keep-drivers"):
        advise(cfg, cheap, at, "<tiny>", keep_drivers=True)


def test_the_flip_search_steps_along_each_solves_import() -> None:
    """Each re-solve's import [MW] is its cost's slope in the import price (an LP's
    optimum is linear in a cost coefficient while its schedule stays optimal). Made up:
    steam minus motor is 2 (p - 47) below 60 and 26 + 10 (p - 60) above it, motor better
    at the hour's 100. Bracketed between 100 and 40, a step along the slope from 40 (the end
    nearer zero) lands on 47 at once; false position and halving alone take several."""
    from cogendispatch.decisions import _bracket_and_bisect

    def kinked(p: float) -> tuple[float, float]:
        return (2.0 * (p - 47.0), 2.0) if p < 60.0 else (26.0 + 10.0 * (p - 60.0), 10.0)

    seen: list[float] = []

    def along(p: float) -> tuple[float, float]:
        seen.append(p)
        return kinked(p)

    assert _bracket_and_bisect(along, 100.0, 426.0, [40.0], 0.5) == pytest.approx(47.0, abs=0.05)
    assert len(seen) == 2  # the bracket's end, then the root
    blind: list[float] = []

    def unsaid(p: float) -> tuple[float, None]:
        blind.append(p)
        return kinked(p)[0], None

    assert _bracket_and_bisect(unsaid, 100.0, 426.0, [40.0], 0.5) == pytest.approx(47.0, abs=0.5)
    assert len(blind) > 3


def test_a_narrow_band_between_two_steps_is_found_along_the_slope() -> None:
    """Made up, after the demo's air blower at 10:00: the motor is better at the hour's 170
    and down to 80, steam between 78 and 80, the motor again below 78 (steam minus motor
    0.55 (p - 80) above 78 and -1.1 - 2.6 (p - 78) below it). The steps down land at 93.5 and
    51, both on the motor's side; the line through 93.5 with that solve's slope crosses zero
    at 80, which is looked at first, and the flip is found there."""
    from cogendispatch.decisions import _flip_prices

    class Band:
        last_import = 0.0

        def cost(self, w: WhatIf) -> float:
            p = w.price_import
            if w.force["P1"] == "motor":
                self.last_import = 0.0
                return 0.0
            if p >= 78.0:
                self.last_import = 0.55
                return 0.55 * (p - 80.0)
            self.last_import = -2.6
            return -1.1 - 2.6 * (p - 78.0)

    near, _ = _flip_prices(Band(), "P1", 170.0, 49.5, None, 0.5)
    assert near == pytest.approx(80.0, abs=0.5)


def test_a_venting_header_is_priced_by_its_vent_though_the_reserve_is_short() -> None:
    """Two 60 t/h boilers with a full reserve, the pump held on steam: 40 t/h of HP demand
    plus the turbine's steam leave the reserve short, and its exhaust is vented at LP (no
    LP demand). HP carries the reserve's penalty; LP's price is the vent's cost (-1 per t:
    one more t/h there vents one less), and its reason and category say the vent."""
    from cogendispatch.decisions import price_reasons, valuer
    from cogendispatch.prices import set_by

    def boiler(b: str) -> dict:
        return {"id": b, "header": "HP", "fuels": ["NG"], "max_steam": "60 t/h", "min_steam": "10 t/h",
                "efficiency_curve": {"load": [0.1, 1.0], "efficiency": [0.85, 0.85]}, "initial_on": True}

    cfg = _site(boiler=[boiler("B1"), boiler("B2")], reserve={"enabled": True, "cover": 1.0})
    hm = HourModel(cfg, series(cfg, 1, demand_HP=40.0, demand_LP=0.0), 0, {"B1": 1, "B2": 1})
    hm.driver_limits = {"P1": (1, 1)}  # on steam, as a minimum time between changes would hold it
    prices, _, x = hm.marginal_prices()
    reasons, _ = price_reasons(hm, x)
    m, val = hm.sm.model, valuer(hm.lm, x)
    assert prices["LP"] == pytest.approx(-1.0) and prices["HP"] > 1e4  # the scenario as meant
    assert reasons["LP"] == "LP: surplus, vented through V" and set_by(m, val, "LP", 0) == "cost"
    assert "reserve" in reasons["HP"] and set_by(m, val, "HP", 0) == "reserve penalty"



def test_a_unit_the_site_file_has_out_is_held_off_though_the_plan_runs_it(tmp_path) -> None:  # noqa: ANN001
    """A plan made while B3 ran, advised on a site file that has B3 unavailable since: the
    hour holds B3 off and says so (it once ran the out-of-service boiler at 96 t/h)."""
    from cogendispatch.outputs import write_csv
    from cogendispatch.results import plan_results
    cfg = site(boiler=_three_boilers(), reserve={"enabled": False})
    ser = series(cfg, 2, demand_LP=140.0)  # more than two boilers make: all three run
    sm = build_site_model(cfg, ser)
    solve(sm, SolveOptions(gap=1e-9))
    (tmp_path / "plan").mkdir()
    write_csv(plan_results(sm).schedule, tmp_path / "plan" / "schedule.csv")
    out = site(boiler=[{**b, "available": b["id"] != "B3"} for b in _three_boilers()], reserve={"enabled": False})
    a = advise(out, ser, str(ser.time[1]), "<tiny>", plan_dir=str(tmp_path / "plan"))
    assert a.held["B3"] == 0 and a.dispatch["boilers_t_h"]["B3"] == 0.0
    assert a.notes == ["B3 runs in the plan but is unavailable in the site file: held off"]
    assert a.not_met  # two boilers cannot make it: the hour says so


def test_a_boiler_at_its_fuels_supply_limit_is_not_named_as_marginal() -> None:
    """B1 burns a cheap fuel whose site-wide supply (60 GJ/h) runs out below the boiler's
    steam limits; the gas boiler B2 makes the rest. B2 sets the HP price, at its fuel cost
    per tonne (flat efficiency: price x heat per tonne / efficiency, by hand), and B1 must
    not be named for it."""
    from cogendispatch.equipment import boiler as boiler_mod

    boilers = [{"id": "B1", "header": "HP", "fuels": ["BARK"], "max_steam": "150 t/h", "min_steam": "10 t/h",
                "efficiency_curve": {"load": [0.05, 1.0], "efficiency": [0.80, 0.80]}},
               {**_boiler()[0], "id": "B2"}]
    cfg = _site(boiler=boilers, fuel=[{"id": "NG", "price": f"{FUEL} per GJ"},
                                      {"id": "BARK", "price": "2 per GJ", "max_supply": "60 GJ/h"}],
                reserve={"enabled": False})
    ser = series(cfg, 1, demand_HP=D_HP, demand_LP=D_LP, price_import=100.0)
    a = advise(cfg, ser, str(ser.time[0]), "<tiny>")
    assert a.reasons["HP"] == "HP: boiler B2 on its efficiency curve"
    q = boiler_mod.coefficients(cfg.boilers[1], SiteStates.of(cfg)).heat_per_t  # [GJ/t]
    # the HP price is B2's fuel per tonne plus the feedwater it draws (make-up and deaerator
    # steam), so at least the fuel part
    assert a.prices["HP"] > FUEL * q / ETA_B


def test_a_demand_what_if_returns_its_share_of_condensate() -> None:
    """Half of the process steam comes back as condensate (the tiny site's deaerator): a
    what-if of 10 t/h more LP demand costs what the hour costs with the series itself
    raised by 10 t/h, the extra return included (it once moved the header row alone)."""
    cfg = _site(boiler=_boiler(), fuel=[{"id": "NG", "price": f"{FUEL} per GJ"}])
    ser = series(cfg, 1, demand_HP=D_HP, demand_LP=D_LP, price_import=100.0)
    more = series(cfg, 1, demand_HP=D_HP, demand_LP=D_LP + 10.0, price_import=100.0)
    at = str(ser.time[0])
    a = advise(cfg, ser, at, "<tiny>", what_if=WhatIf(demand={"LP": 10.0}))
    assert a.what_if["cost"] == pytest.approx(advise(cfg, more, at, "<tiny>").cost, rel=1e-9)
    assert a.what_if["changes"][0] == f"LP demand {D_LP:.1f} -> {D_LP + 10:.1f} t/h"
    p = advise(cfg, ser, at, "<tiny>", what_if=WhatIf(price_import=250.0)).what_if["changes"]
    assert p[0] == "import price 100.00 -> 250.00 EUR/MWh"  # the price change is named first
    # the header row alone would have bought the deaerator steam for 5 t/h of make-up too
    hm = HourModel(cfg, ser, 0, a.held)
    assert hm.cost(WhatIf(demand={"LP": 10.0})) > a.what_if["cost"] + 1.0


def test_a_demand_change_needs_its_sign(capsys) -> None:  # noqa: ANN001
    from pathlib import Path

    from cogendispatch.cli import main
    site_path = Path(__file__).resolve().parents[1] / "plant_configs" / "saltmarsh_refinery.toml"
    series_path = site_path.with_name("saltmarsh_week.csv")
    rc = main(["advise", str(site_path), "--series", str(series_path), "--at", "2027-01-04T03:00", "--demand", "LP=5"])
    assert rc == 2 and "give the change with its sign, e.g. 'LP=+5'" in capsys.readouterr().err


def _ramp_site() -> str:
    """The CLI tests' tiny site (test_plan_small.TINY_TOML) with two must-run boilers: B1
    slow to ramp down, B2 slow to ramp up."""
    from test_plan_small import TINY_TOML

    head, rest = TINY_TOML.split("[[boiler]]", 1)
    letdown = "[[letdown]]" + rest.split("[[letdown]]", 1)[1]
    boilers = "".join(
        f'[[boiler]]\nid = "{b}"\nheader = "HP"\nfuels = ["NG"]\nmax_steam = "100 t/h"\nmin_steam = "10 t/h"\n'
        f'must_run = true\n{ramp}\nefficiency_curve = {{ load = [0.1, 1.0], efficiency = [{eta}, {eta}] }}\n'
        for b, ramp, eta in (("B1", 'ramp_down = "5 t/h"', 0.9), ("B2", 'ramp_up = "10 t/h"', 0.8)))
    return head + boilers + letdown


def test_a_trip_is_covered_only_as_fast_as_the_others_ramp(tmp_path) -> None:  # noqa: ANN001
    """With a plan, the hour before is known: B2 (ramp up 10 t/h an hour) cannot take B1's
    load within the hour B1 trips, so the LP header is short by what B2 cannot pick up;
    the tripped B1 stops from its load, whatever its own ramp down. Without a plan, the
    hour has no ramp history and B2 takes it all (the README says so)."""
    import pandas as pd

    from cogendispatch.plan import run_plan
    from cogendispatch.plant.load import load_site
    from cogendispatch.plant.series import load_series
    from cogendispatch.solve import SolveOptions

    site_file, ser_file = tmp_path / "site.toml", tmp_path / "s.csv"
    site_file.write_text(_ramp_site())
    ser_file.write_text("time,demand:HP [t/h],demand:LP [t/h],load [MW],price:import [per MWh]\n" + "".join(
        f"2027-03-01T0{h}:00,0,50,5,100\n" for h in range(4)))
    cfg = load_site(site_file)
    ser = load_series(ser_file, cfg)
    run_plan(site_file, ser_file, tmp_path / "plan", SolveOptions(time_limit=20, gap=1e-6))
    planned = pd.read_csv(tmp_path / "plan" / "schedule.csv")
    b2_before = float(planned["B2.steam_t_h"].iloc[1])
    at = str(ser.time[2])
    a = advise(cfg, ser, at, str(ser_file), str(tmp_path / "plan"), what_if=WhatIf(trip=["B1"]))
    assert a.what_if["short"] is True
    b2 = next(c for c in a.what_if["changes"] if c.startswith("boiler B2"))
    assert float(b2.split("-> ")[1].split()[0]) == pytest.approx(b2_before + 10.0, abs=0.11)
    free = advise(cfg, ser, at, str(ser_file), what_if=WhatIf(trip=["B1"]))
    assert free.what_if["short"] is False


def test_a_header_fed_only_at_its_limits_is_priced_through_the_letdown_below_it() -> None:
    """MP gets a steam-only compressor's exhaust and HP-MP letdown held at its 2 t/h
    minimum; what MP does not use goes on down the MP-LP letdown, and LP is set by the
    back-pressure set's exhaust. MP's price is LP's carried back through the MP-LP
    letdown (it read 'no single unit is marginal'), and LP names the set, not the letdown."""
    from test_plan_small import THREE_HEADERS

    tg = {"id": "TG", "inlet": "HP", "max_throttle": "80 t/h", "min_throttle": "5 t/h", "generator_rating": "20 MW",
          "section": [{"to": "LP", "efficiency": 0.7}]}
    drive = {"id": "C", "duty": "2 MW", "steam_turbine": {"inlet": "HP", "exhaust": "MP", "efficiency": 0.6}}
    cfg = site(header=THREE_HEADERS, boiler=_boiler(), fuel=[{"id": "NG", "price": f"{FUEL} per GJ"}],
               turbogenerator=[tg], drive=[drive],
               letdown=[{"id": "LD-HM", "from": "HP", "to": "MP", "max_flow": "50 t/h", "min_flow": "2 t/h"},
                        {"id": "LD-ML", "from": "MP", "to": "LP", "max_flow": "80 t/h"}])
    ser = series(cfg, 1, demand_MP=5.0, demand_LP=80.0, price_import=100.0)
    a = advise(cfg, ser, str(ser.time[0]), "<tiny>")
    assert a.reasons["LP"].startswith("LP: exhaust of TG")
    assert a.reasons["MP"] == "MP: letdown LD-ML to LP (the LP price carried back through it)"
    # carried back: one t/h more at MP is one less t/h let down, r t/h less at LP (less the
    # r - 1 t/h of spray water it no longer takes): between the LP price and r times it
    st = SiteStates.of(cfg)
    r = (st.headers["MP"].h - st.h_feedwater) / (st.headers["LP"].h - st.h_feedwater)
    assert a.prices["LP"] < a.prices["MP"] < r * a.prices["LP"]


def test_driver_table_side_by_side_is_the_same_table() -> None:
    """The driver table's machines searched in two threads (each on its own copy of the
    loaded hour) give the table one thread gives, row for row."""
    from pathlib import Path

    from cogendispatch.plant.load import load_site
    from cogendispatch.plant.series import load_series
    root = Path(__file__).resolve().parents[1] / "plant_configs"
    cfg = load_site(root / "saltmarsh_refinery.toml")
    ser = load_series(root / "saltmarsh_week.csv", cfg)
    one = advise(cfg, ser, "2027-01-05T10:00", "<demo>", threads=1).drivers
    two = advise(cfg, ser, "2027-01-05T10:00", "<demo>", threads=2).drivers
    assert len(one) == 6
    import pandas as pd
    pd.testing.assert_frame_equal(one, two)


def test_ctrl_c_while_the_table_waits_for_its_other_thread_stops_it() -> None:
    """Ctrl-C that comes while this thread waits for the other's last machine (outside any
    HiGHS run here) stops the other's solves and is raised once it has ended: no search is
    left running behind the interrupted command (at its exit it would abort the process)."""
    import os
    import signal
    import threading
    import time
    from types import SimpleNamespace

    from cogendispatch.decisions import _shared_out

    class Hour:  # what _shared_out uses of an HourModel
        def __init__(self) -> None:
            self.lm = SimpleNamespace(stop=None)

        def twin(self) -> "Hour":
            other = Hour()
            other.lm.stop = threading.Event()
            return other

    hm = Hour()

    def row(model: Hour, d: object) -> dict:
        while model is not hm and not model.lm.stop.is_set():  # a long search, until stopped
            time.sleep(0.02)
        if model is not hm:
            raise RuntimeError("stopped")
        return {}

    before = signal.signal(signal.SIGINT, signal.default_int_handler)
    timer = threading.Timer(0.5, lambda: os.kill(os.getpid(), signal.SIGINT))
    try:
        timer.start()
        with pytest.raises(KeyboardInterrupt):
            _shared_out(hm, [SimpleNamespace(count=1), SimpleNamespace(count=1)], 2, row)
    finally:
        timer.cancel()
        signal.signal(signal.SIGINT, before)
    assert not [t for t in threading.enumerate() if t.name == "cogen-advice"]
    assert hm.lm.stop is None  # the caller's stop as it was


def test_a_driver_choice_priced_by_a_penalty_is_marked_under_the_table(tmp_path, capsys) -> None:  # noqa: ANN001
    """A 3 MW machine whose turbine (HP -> LP, about 54 t/h at 3 MW) would pass more steam
    to LP than the 30 t/h of LP demand and the deaerator take, with no vent: on steam the
    LP header has steam nothing can take, and the saving of the motor is mostly penalty.
    The table marks its choice with '*' and a line under it says why (in the column it
    made the table some 250 characters wide: from the mill trial)."""
    from test_plan_small import TINY_TOML

    site_toml = TINY_TOML + ('[[drive]]\nid = "P1"\nduty = "3 MW"\nmotor = { efficiency = 0.95 }\n'
                             'steam_turbine = { inlet = "HP", exhaust = "LP", efficiency = 0.5 }\n')
    (tmp_path / "site.toml").write_text(site_toml)
    (tmp_path / "s.csv").write_text("time,demand:HP [t/h],demand:LP [t/h],load [MW],price:import [per MWh]\n"
                                    "2027-03-01T00:00,0,30,5,50\n")
    rc = main(["advise", str(tmp_path / "site.toml"), "--series", str(tmp_path / "s.csv"), "--at", "2027-03-01T00:00"])
    text = capsys.readouterr().out
    assert rc == 0
    assert "motor *" in text and "* P1: on steam, steam or power is left that nothing can take (the saving includes its penalty)" in text
