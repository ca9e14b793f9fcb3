"""Tiny sites whose optimum is known by reasoning, solved through the whole model."""

from __future__ import annotations

import numpy as np
import pytest

from cogendispatch.equipment.common import SiteStates
from cogendispatch.results import plan_results
from cogendispatch.site import build_site_model
from cogendispatch.solve import SolveOptions, solve
from tiny import series, site

FAST = SolveOptions(gap=1e-6, time_limit=30)

DRIVE = {"id": "P1", "duty": "2 MW", "steam_turbine": {"inlet": "HP", "exhaust": "LP", "efficiency": 0.6},
         "motor": {"efficiency": 0.95}}
TG = {"id": "TG", "inlet": "HP", "max_throttle": "80 t/h", "min_throttle": "5 t/h",
      "generator_rating": "10 MW", "no_load_loss": "0.2 MW", "section": [{"to": "LP", "efficiency": 0.75}]}


def run(cfg, ser):  # noqa: ANN001, ANN201
    """Solve a tiny site; every such solve is also checked for energy conservation."""
    from test_crosschecks import audit_residual

    sm = build_site_model(cfg, ser)
    rep = solve(sm, FAST)
    res = plan_results(sm)
    assert np.abs(audit_residual(cfg, ser, sm, res)).max() < 1e-5
    return sm, rep, res


def test_cheap_power_runs_motors_and_letdown_carries_the_steam():
    # Power at 5 /MWh is far below the cost of making it from steam (about 10 /GJ fuel),
    # so the pump runs on its motor, the turbo-generator stays off and LP steam comes
    # through the letdown.
    cfg = site(drive=[DRIVE], turbogenerator=[dict(TG, initial_on=False)])
    ser = series(cfg, 3, demand_LP=40.0, price_import=5.0)
    sm, rep, res = run(cfg, ser)
    s = res.schedule
    assert rep.status == "optimal"
    assert (s["P1.on_steam"] == 0).all()
    assert (s["TG.on"] == 0).all()
    assert (s["LD.flow_t_h"] > 30).all()


def test_expensive_power_puts_the_drive_on_steam():
    # At 400 /MWh, expanding the LP steam the process needs anyway through the pump's turbine
    # (about 12 kg/kWh) is far cheaper than 2.1 MW of motor power; the extra fuel is only the
    # shaft work taken out of the steam.
    cfg = site(drive=[DRIVE])
    _, rep, res = run(cfg, series(cfg, 3, demand_LP=40.0, price_import=400.0))
    assert rep.status == "optimal"
    assert (res.schedule["P1.on_steam"] == 1).all()
    assert (res.schedule["LD.flow_t_h"] < 40).all()


def test_expensive_power_runs_the_turbo_generator_before_the_drive_turbine():
    # With a 75 % efficient generator set beside the 60 % efficient drive turbine, a tonne
    # expanded HP->LP makes more power in the set (0.75 * 0.97 of the isentropic drop) than
    # it saves on the motor (0.60 / 0.95): the set takes the steam, the pump stays on motor.
    cfg = site(drive=[DRIVE], turbogenerator=[dict(TG, initial_on=False)])
    _, rep, res = run(cfg, series(cfg, 3, demand_LP=40.0, price_import=400.0))
    s = res.schedule
    assert rep.status == "optimal"
    assert (s["TG.on"] == 1).all() and (s["TG.power_MW"] > 3).all()
    assert (s["P1.on_steam"] == 0).all()
    # the set was off before hour 0: one start, counted whatever it costs
    assert s["TG.start"].tolist() == [1, 0, 0]
    assert res.totals["starts"] == {"B1": 0, "TG": 1}


def _two_boilers(startup_cost: float) -> dict:
    return [
        {"id": "OLD", "header": "HP", "fuels": ["NG"], "max_steam": "100 t/h", "min_steam": "10 t/h",
         "efficiency_curve": {"load": [0.1, 1.0], "efficiency": [0.75, 0.75]}, "initial_on": True},
        {"id": "NEW", "header": "HP", "fuels": ["NG"], "max_steam": "100 t/h", "min_steam": "10 t/h",
         "efficiency_curve": {"load": [0.1, 1.0], "efficiency": [0.90, 0.90]}, "initial_on": False,
         "startup_cost": startup_cost},
    ]


def test_boiler_start_avoided_when_start_cost_exceeds_saving():
    # 3 h at 40 t/h: switching from 75 % to 90 % efficiency saves about
    # 40 t/h * 2.9 GJ/t * (1/0.75 - 1/0.90) * 10 /GJ * 3 h ~ 770 plus CO2 -- less than 50 000.
    cfg = site(boiler=_two_boilers(50_000))
    _, rep, res = run(cfg, series(cfg, 3, demand_LP=40.0))
    assert (res.schedule["NEW.on"] == 0).all()
    cfg = site(boiler=_two_boilers(10))  # and more than 10: start it
    _, rep, res = run(cfg, series(cfg, 3, demand_LP=40.0))
    assert res.schedule["NEW.on"].iloc[0] == 1


def _peak_site(min_up: str):  # noqa: ANN202
    """B1 (100 t/h, 85 %) running, B2 (60 t/h, 70 %) cold with minimum up time ``min_up``."""
    boilers = [
        {"id": "B1", "header": "HP", "fuels": ["NG"], "max_steam": "100 t/h", "min_steam": "10 t/h",
         "efficiency_curve": {"load": [0.1, 1.0], "efficiency": [0.85, 0.85]}},
        {"id": "B2", "header": "HP", "fuels": ["NG"], "max_steam": "60 t/h", "min_steam": "20 t/h",
         "efficiency_curve": {"load": [0.1, 1.0], "efficiency": [0.70, 0.70]}, "initial_on": False,
         "min_up": min_up},
    ]
    return site(boiler=boilers, letdown=[{"id": "LD", "from": "HP", "to": "LP", "max_flow": "200 t/h"}])


def test_min_up_time_keeps_a_boiler_on_after_a_short_peak():
    # B1 alone cannot carry hour 2 (130 t/h of demand); B2 must start, and with a 4 h
    # minimum up time it stays on for 4 h although B1 could carry the other hours alone.
    cfg = _peak_site("4 h")
    demand = [30, 30, 130, 30, 30, 30, 30, 30]
    _, rep, res = run(cfg, series(cfg, 8, demand_LP=demand))
    on = res.schedule["B2.on"].to_numpy().astype(int).tolist()
    # it runs exactly once, for exactly its minimum up time, covering hour 2 (starting in
    # hour 1 or 2 costs the same: both are optimal)
    assert on[2] == 1 and sum(on) == 4
    first = on.index(1)
    assert on[first:first + 4] == [1, 1, 1, 1] and first in (0, 1, 2)
    assert not res.diagnosis


def test_a_running_hour_is_not_a_start_and_a_stop_at_once():
    # With 1 h minimum times and no start-up cost, nothing in the objective stops the
    # solver from booking a start and a stop in the same running hour (the transition row
    # only sees their difference); the reported start count would then be wrong. The
    # point on = 1, start = stop = 1 must violate one of the boiler's own rows.
    import pyomo.environ as pyo

    cfg = site()
    sm = build_site_model(cfg, series(cfg, 3, demand_LP=30.0))
    blk = sm.model.boiler_B1
    for t in sm.model.T:
        blk.on[t].set_value(1)
        blk.start[t].set_value(1 if t == 0 else 0)
        blk.stop[t].set_value(1 if t == 0 else 0)
    violated = [c.name for c in blk.component_data_objects(pyo.Constraint, active=True)
                if c.name.split(".")[-1].startswith(("transition", "min_up", "min_down"))
                and ((c.upper is not None and pyo.value(c.body) > pyo.value(c.upper) + 1e-9)
                     or (c.lower is not None and pyo.value(c.body) < pyo.value(c.lower) - 1e-9))]
    assert violated
    # ... and the plan counts no start for a boiler that runs throughout
    _, _, res = run(cfg, series(cfg, 3, demand_LP=30.0))
    assert res.schedule["B1.on"].tolist() == [1, 1, 1]
    assert res.schedule["B1.start"].sum() == 0 and res.totals["boiler_starts"]["B1"] == 0


def test_minimum_import_holds_when_own_power_is_cheaper():
    # A turbo-generator makes power below the import price, so the site would import
    # nothing; a 1.5 MW minimum import (a reverse-power relay, say) keeps 1.5 MW flowing in
    # every hour and the set backs off by as much.
    cfg = site(turbogenerator=[TG], letdown=None)
    _, _, free_run = run(cfg, series(cfg, 3, demand_LP=60.0, load=4.0, price_import=500.0))
    assert (free_run.schedule["grid.import_MW"] < 1e-6).all()
    cfg = site(turbogenerator=[TG], letdown=None, grid={"max_import": "50 MW", "min_import": "1.5 MW"})
    _, _, held = run(cfg, series(cfg, 3, demand_LP=60.0, load=4.0, price_import=500.0))
    assert np.allclose(held.schedule["grid.import_MW"], 1.5, atol=1e-6)
    assert (held.schedule["grid.export_MW"] == 0).all()


def test_a_part_hour_minimum_up_time_is_rounded_up():
    # 2.5 h of minimum up time holds the peak boiler on for 3 hourly steps (Python's
    # round() would give 2: half to even)
    from cogendispatch.equipment.common import whole_hours

    assert [whole_hours(x) for x in (0.5, 1.0, 2.5, 6.0, 6.5)] == [1, 1, 3, 6, 7]
    cfg = _peak_site("2.5 h")
    _, _, res = run(cfg, series(cfg, 6, demand_LP=[30, 30, 130, 30, 30, 30]))
    assert res.schedule["B2.on"].sum() == 3


def test_colder_exhaust_cannot_superheat_itself():
    # LP held at 5 bar(a) and 300 degC: the turbo-generator's exhaust arrives near 190 degC
    # (the model books it with a negative "drain"). That is physical only where hotter
    # letdown steam takes less spray in the same hour, so with power dear the set runs
    # only as far as the letdown's spray can absorb its exhaust.
    hot_lp = [{"id": "HP", "pressure": "40 bar(a)", "temperature": "400 degC"},
              {"id": "LP", "pressure": "5 bar(a)", "temperature": "300 degC"}]
    cfg = site(header=hot_lp, turbogenerator=[TG])
    _, _, res = run(cfg, series(cfg, 2, demand_LP=60.0, price_import=400.0))
    bal = res.balances[res.balances.header == "LP"]
    water = bal[bal.term.str.endswith(("desuperheater water", "drain"))].groupby("time").flow_t_h.sum()
    assert (water >= -1e-6).all() and (water.abs() < 1e-6).all()  # bound: no spare spray
    drain = bal[bal.term == "TG exhaust to LP drain"].flow_t_h
    assert (drain < -0.5).all()  # the set runs, against the letdown's spray
    assert (res.schedule["LD.flow_t_h"] > 1.0).all()


def test_min_down_time_holds_a_stopped_boiler_off():
    # The boiler was stopped 1 h before the horizon with a 3 h minimum down time: it may
    # not run in hours 0-1 even though the demand there is short without it.
    boilers = [{"id": "B1", "header": "HP", "fuels": ["NG"], "max_steam": "100 t/h", "min_steam": "10 t/h",
                "efficiency_curve": {"load": [0.1, 1.0], "efficiency": [0.85, 0.85]}, "initial_on": False,
                "initial_hours": "1 h", "min_down": "3 h"}]
    cfg = site(boiler=boilers)
    _, rep, res = run(cfg, series(cfg, 4, demand_LP=30.0))
    assert res.schedule["B1.on"].tolist() == [0, 0, 1, 1]
    # ... and the diagnosis says which header is short (LP, where the demand is), when, and why
    assert len(res.diagnosis) == 1
    d = res.diagnosis[0]
    assert d.startswith("LP header short") and "hours 0-1" in d and "B1 held off (outage or minimum down time)" in d


def test_impossible_demand_is_diagnosed_by_header_and_hour():
    cfg = site()
    _, rep, res = run(cfg, series(cfg, 4, demand_LP=[50, 150, 160, 50]))
    assert rep.has_solution
    assert len(res.diagnosis) == 1
    d = res.diagnosis[0]
    assert d.startswith("LP header short") and "hours 1-2" in d
    # the boiler is at its 100 t/h limit in the short hours, and 10 t/h more demand in
    # hour 2 than in hour 1 is 10 t/h more shortfall
    bal = res.balances
    short = bal[(bal.term == "shortfall (unmet)") & (bal.header == "LP")].flow_t_h.to_numpy()
    assert short[0] == pytest.approx(0, abs=1e-6) and short[3] == pytest.approx(0, abs=1e-6)
    # (mass balance of LP: the deaerator's heating steam changes with the condensate returned)
    da = res.schedule["deaerator.steam_t_h"].to_numpy()
    assert short[2] - short[1] == pytest.approx(10.0 + da[2] - da[1], rel=1e-6)
    assert res.schedule["B1.steam_t_h"].iloc[1:3].tolist() == pytest.approx([100, 100])


def test_deaerator_is_no_steam_dump():
    # A process exports 150 t/h into LP, which has no vent and no user: nothing can take
    # it. The deaerator may not quench it in make-up water and pour it away (its overflow
    # drains only returned condensate, none here), so the hour is reported as LP surplus.
    cfg = site(vent=None)
    _, _, res = run(cfg, series(cfg, 2, demand_LP=[20, -150], demand_HP=[0, 30]))
    # the HP process's return (half its 30 t/h), heated to saturation with its steam
    st = SiteStates.of(cfg)
    from cogendispatch.steam import state_pT
    h_s, h_fw, h_ret = st.headers["LP"].h, st.h_feedwater, state_pT(2.0, 80.0).h
    assert res.schedule["deaerator.overflow_t_h"].iloc[1] <= 15.0 * (h_s - h_ret) / (h_s - h_fw) + 1e-6
    assert res.schedule["deaerator.makeup_t_h"].iloc[1] < 100
    assert any(d.startswith("LP header surplus") and "hour 1" in d for d in res.diagnosis)


def test_a_short_header_names_only_units_that_can_feed_it():
    # HP is short (the boiler at its rating); the HP->LP letdown at its capacity cannot
    # help HP and must not be named as binding
    cfg = site(letdown=[{"id": "LD", "from": "HP", "to": "LP", "max_flow": "5 t/h"}])
    _, _, res = run(cfg, series(cfg, 1, demand_HP=120.0, demand_LP=5.0))
    hp = [d for d in res.diagnosis if d.startswith("HP header short")]
    assert hp and "B1 at its 100 t/h rating" in hp[0] and "LD" not in hp[0]


def test_balances_close_and_limits_hold_on_a_tiny_site():
    cfg = site(drive=[DRIVE], turbogenerator=[TG])
    ser = series(cfg, 6, demand_LP=[20, 40, 60, 50, 30, 25], demand_HP=5.0,
                 price_import=[50, 80, 200, 200, 80, 50])
    sm, rep, res = run(cfg, ser)
    sums = res.balances.groupby(["time", "header"]).flow_t_h.sum()
    assert np.abs(sums.to_numpy()).max() < 1e-6
    psum = res.power.groupby("time").power_MW.sum()
    assert np.abs(psum.to_numpy()).max() < 1e-6
    s = res.schedule
    assert (s["B1.steam_t_h"] <= 100 + 1e-6).all()
    assert (s["TG.power_MW"] <= 10 + 1e-6).all()
    on = s["TG.on"] == 1
    assert (s.loc[on, "TG.throttle_t_h"] >= 5 - 1e-6).all()


def test_maker_envelope_replaces_the_section_physics():
    # A maker's envelope MW = -0.5*on + 0.08*throttle: at a fixed 40 t/h LP demand and dear
    # power the set runs; its power must equal the envelope at the throttle it was given.
    env_tg = {"id": "TG", "inlet": "HP", "max_throttle": "80 t/h", "min_throttle": "5 t/h",
              "generator_rating": "10 MW", "section": [{"to": "LP"}],
              "envelope": {"no_load": "0.5 MW", "throttle": "80 kWh/t"}}
    cfg = site(turbogenerator=[env_tg])
    _, rep, res = run(cfg, series(cfg, 3, demand_LP=40.0, price_import=300.0))
    s = res.schedule
    assert (s["TG.on"] == 1).all()
    assert s["TG.power_MW"].to_numpy() == pytest.approx(0.08 * s["TG.throttle_t_h"].to_numpy() - 0.5, abs=1e-6)
    # First law on the casing: the generator takes 0.08 MW per t/h at 0.97 efficiency, i.e.
    # 3600 x 0.08 / 0.97 = 296.9 kJ/kg out of the steam; the exhaust leaves at h_HP - 296.9,
    # above the LP header's enthalpy, and is desuperheated with feedwater:
    # water = throttle x (h_exh - h_LP) / (h_LP - h_fw).
    st = SiteStates.of(cfg)
    h_exh = st.headers["HP"].h - 3600 * 0.08 / 0.97
    water = s["TG.throttle_t_h"].to_numpy() * (h_exh - st.headers["LP"].h) / (st.headers["LP"].h - st.h_feedwater)
    bal = res.balances
    got = bal[(bal.header == "LP") & (bal.term == "TG exhaust desuperheater water")].flow_t_h.to_numpy()
    assert water.min() > 1.0 and got == pytest.approx(water, rel=1e-9)


THREE_HEADERS = [{"id": "HP", "pressure": "40 bar(a)", "temperature": "400 degC"},
                 {"id": "MP", "pressure": "15 bar(a)", "temperature": "300 degC"},
                 {"id": "LP", "pressure": "5 bar(a)", "temperature": "180 degC"}]


def test_envelope_sections_are_checked_one_by_one() -> None:
    """Steam extracted at MP does (120 - 118) x 3600 / 0.97 = 7.4 kJ/kg of work, so what
    passes on to LP must do 445.4 - 7.4 = 438 kJ/kg (437.9 unrounded) in the MP-LP section: more than an
    isentropic expansion from the state at MP allows (about 285 kJ/kg), though less than
    one from the inlet to LP (514 kJ/kg). The loader refuses it, naming the throttle slope."""
    from cogendispatch.errors import InputError
    env = {"no_load": "0.3 MW", "throttle": "120 kWh/t", "extraction": {"MP": "-118 kWh/t"}}
    tg = {"id": "T", "inlet": "HP", "max_throttle": "80 t/h", "generator_rating": "20 MW",
          "section": [{"to": "MP"}, {"to": "LP"}], "envelope": env}
    with pytest.raises(InputError, match=r"envelope > throttle.*would do 445.4 kJ/kg of work from 'HP'.*"
                       r"437.9 of it in this section.*isentropic expansion from the state at 'MP' \(.*\) to 'LP'"):
        site(header=THREE_HEADERS, turbogenerator=[tg])


def test_condensing_envelope_turbine_closes_its_energy() -> None:
    """A maker's envelope may exhaust to a condenser: the exhaust enthalpy, and so the
    cooling duty, follow from its work (first law), as for any envelope section."""
    from cogendispatch.equipment.turbine import coefficients
    env = {"no_load": "0.5 MW", "throttle": "200 kWh/t", "extraction": {"LP": "-120 kWh/t"}}
    tg = {"id": "T", "inlet": "HP", "max_throttle": "80 t/h", "generator_rating": "20 MW",
          "section": [{"to": "LP", "max_extraction": "60 t/h"}, {"to": "C"}], "envelope": env}
    cfg = site(condenser=[{"id": "C", "pressure": "0.1 bar(a)", "cooling_capacity": "100 MW"}], turbogenerator=[tg])
    co = coefficients(cfg.turbogenerators[0], SiteStates.of(cfg))
    h_in = SiteStates.of(cfg).headers["HP"].h
    assert co.sections[-1].outlet.h == pytest.approx(h_in - 3600 * 0.2 / 0.97, rel=1e-12)
    assert 0 < co.sections[1].efficiency < 1 and 0 < co.sections[0].efficiency < 1
    _, rep, res = run(cfg, series(cfg, 2, demand_LP=30.0, price_import=300.0))
    s = res.schedule
    # condenser duty = exhaust flow x (h_exhaust - h_condensate) / 3600
    flow = s["C.flow_t_h"].to_numpy()
    from cogendispatch.steam import state_px
    duty = flow * (co.sections[-1].outlet.h - state_px(0.1, 0.0).h) / 3600
    assert flow.max() > 1.0 and s["C.duty_MW"].to_numpy() == pytest.approx(duty, rel=1e-9)


def test_excel_series_is_read_like_csv(tmp_path):  # noqa: ANN001
    import pandas as pd

    from cogendispatch.plant.series import load_series
    cfg = site()
    df = pd.DataFrame({"time": [str(t) for t in pd.date_range("2027-03-01", periods=3, freq="h")],
                       "demand:HP [t/h]": [0, 0, 0], "demand:LP [t/h]": [10, 20, 30], "load [MW]": [5, 5, 5],
                       "price:import [per MWh]": [50, 60, 70]})
    df.to_excel(tmp_path / "s.xlsx", index=False)
    df.to_csv(tmp_path / "s.csv", index=False)
    a, b = load_series(tmp_path / "s.xlsx", cfg), load_series(tmp_path / "s.csv", cfg)
    assert a.demand.equals(b.demand) and a.price_import.equals(b.price_import)
    assert list(a.time) == list(b.time)


TINY_TOML = """
[site]
name = "tiny"
[deaerator]
pressure = "2 bar(a)"
heating_steam = "LP"
[grid]
max_import = "50 MW"
[reserve]
enabled = false
[[header]]
id = "HP"
pressure = "40 bar(a)"
temperature = "400 degC"
[[header]]
id = "LP"
pressure = "5 bar(a)"
[[fuel]]
id = "NG"
price = "10 per GJ"
[[boiler]]
id = "B1"
header = "HP"
fuels = ["NG"]
max_steam = "50 t/h"
min_steam = "5 t/h"
efficiency_curve = { load = [0.1, 1.0], efficiency = [0.85, 0.85] }
[[letdown]]
id = "LD"
from = "HP"
to = "LP"
max_flow = "100 t/h"
"""


def test_cli_plan_exits_3_with_a_diagnosis_and_still_writes_the_schedule(tmp_path, capsys):  # noqa: ANN001
    from cogendispatch.cli import main
    (tmp_path / "site.toml").write_text(TINY_TOML)
    (tmp_path / "s.csv").write_text("time,demand:HP [t/h],demand:LP [t/h],load [MW],price:import [per MWh]\n"
                                    "2027-03-01T00:00,0,20,5,50\n2027-03-01T01:00,0,90,5,50\n2027-03-01T02:00,0,20,5,50\n")
    out = tmp_path / "out"
    rc = main(["plan", str(tmp_path / "site.toml"), "--series", str(tmp_path / "s.csv"), "--out", str(out), "--quiet"])
    err = capsys.readouterr().err
    assert rc == 3
    # the boiler is the limit; the lack lands where the demand is, LP (a t/h missing from
    # HP is priced half as much again, site.shortfall_prices), naming the boiler
    assert "LP header short" in err and "hour 1" in err and "HP header short" not in err
    assert "B1 at its 50 t/h rating" in err
    assert (out / "schedule.csv").is_file() and (out / "summary.json").is_file()


def test_diagnosis_names_the_binding_limits():
    # 150 t/h of LP demand: the 100 t/h boiler is at its rating (the letdown, 200 t/h, is not)
    cfg = site(letdown=[{"id": "LD", "from": "HP", "to": "LP", "max_flow": "200 t/h"}])
    _, rep, res = run(cfg, series(cfg, 2, demand_LP=[50, 150]))
    assert len(res.diagnosis) == 1
    assert "binding in hour 1: B1 at its 100 t/h rating" in res.diagnosis[0]
    # and a power load above the import limit names the grid
    cfg = site(grid={"max_import": "3 MW"})
    _, rep, res = run(cfg, series(cfg, 1, demand_LP=20.0, load=5.0))
    assert any(d.startswith("electric bus short") and "grid import at its 3 MW limit" in d for d in res.diagnosis)
    # with a condensing set whose last section is full, the diagnosis names that section
    # too: more power would need more steam through it
    tg = {"id": "TGC", "inlet": "HP", "max_throttle": "80 t/h", "generator_rating": "30 MW",
          "no_load_loss": "0.2 MW", "section": [{"to": "C", "efficiency": 0.75, "max_flow": "20 t/h"}]}
    cond = {"id": "C", "pressure": "0.1 bar(a)", "cooling_capacity": "100 MW"}
    cfg = site(grid={"max_import": "1 MW"}, turbogenerator=[tg], condenser=[cond])
    _, rep, res = run(cfg, series(cfg, 1, demand_LP=20.0, load=15.0))
    short = [d for d in res.diagnosis if d.startswith("electric bus short")]
    assert len(short) == 1
    assert "TGC section to C at its 20 t/h limit" in short[0] and "grid import at its 1 MW limit" in short[0]
    # a back-pressure set with nowhere for its exhaust but the deaerator and a full vent
    cfg = site(grid={"max_import": "1 MW"}, turbogenerator=[TG],
               vent=[{"id": "V", "header": "LP", "max_flow": "15 t/h", "cost": "1 per t"}])
    _, rep, res = run(cfg, series(cfg, 1, demand_LP=0.0, load=8.0))
    short = [d for d in res.diagnosis if d.startswith("electric bus short")]
    assert len(short) == 1 and "V venting its 15 t/h maximum" in short[0], res.diagnosis


def test_demand_comes_before_the_reserve_in_an_impossible_hour() -> None:
    """Two running 60 t/h boilers hold a full reserve (cover 1) for 60 t/h only; 80 t/h of LP
    demand in hour 1 can be met by their ratings but not with the reserve held. The plan
    meets the demand and reports the reserve short, rather than splitting the lack between
    the two (by hand: every t/h of boiler steam above 60 t/h is a t/h of reserve missing)."""
    from cogendispatch.results import diagnose

    boilers = [{"id": b, "header": "HP", "fuels": ["NG"], "max_steam": "60 t/h", "min_steam": "10 t/h",
                "efficiency_curve": {"load": [0.1, 1.0], "efficiency": [0.85, 0.85]}, "initial_on": True}
               for b in ("B1", "B2")]
    cfg = site(boiler=boilers, reserve={"enabled": True, "cover": 1.0})
    sm = build_site_model(cfg, series(cfg, 3, demand_LP=[30, 80, 30]))
    rep = solve(sm, SolveOptions(gap=1e-6, time_limit=60))
    assert rep.objective > 1e5  # the reserve shortfall is priced in
    m = sm.model
    assert max(m.steam_short[h.id, t].value for h in cfg.headers for t in m.T) < 1e-6
    steam = sum(b.steam[1].value for b in sm.ctx.boilers)
    assert steam > 70.0  # well above the 60 t/h the reserve allows (desuperheating water makes up the rest)
    assert m.reserve_short[1].value == pytest.approx(steam - 60.0, abs=1e-4)
    msgs = diagnose(sm)
    assert len(msgs) == 1 and msgs[0].startswith("steam reserve short") and "hour 1" in msgs[0]


def test_shortfall_prices_rise_by_pressure_level() -> None:
    from cogendispatch.site import shortfall_prices
    cfg = site(header=[*THREE_HEADERS, {"id": "LP2", "pressure": "5 bar(a)"}])
    # the project's rule (site.shortfall_prices; no published source): half a step per
    # pressure level above the lowest; headers at one pressure share a price
    assert shortfall_prices(cfg) == {"HP": 2.0e6, "MP": 1.5e6, "LP": 1.0e6, "LP2": 1.0e6}


def test_load_comes_before_the_reserve() -> None:
    """The import is capped at 3 MW against a 10 MW load, so the back-pressure set must make
    about 7 MW: about 74 t/h through it (0.75 x 514 kJ/kg x 0.97 generator, less 0.2 MW no
    load: 0.1 MW per t/h), on top of what the LP header needs. Two running 60 t/h boilers
    with a full reserve (cover 1) may make 60 t/h only, so the reserve is short. The plan
    must meet the load and report the reserve short, not cut the load to keep reserve
    (each MW cut would spare about 10 t/h of reserve)."""
    from cogendispatch.results import diagnose

    boilers = [{"id": b, "header": "HP", "fuels": ["NG"], "max_steam": "60 t/h", "min_steam": "10 t/h",
                "efficiency_curve": {"load": [0.1, 1.0], "efficiency": [0.85, 0.85]}, "initial_on": True}
               for b in ("B1", "B2")]
    cfg = site(boiler=boilers, reserve={"enabled": True, "cover": 1.0}, grid={"max_import": "3 MW"},
               turbogenerator=[TG])
    sm = build_site_model(cfg, series(cfg, 2, demand_LP=20.0, load=10.0))
    solve(sm, SolveOptions(gap=1e-6, time_limit=60))
    m = sm.model
    assert max(m.power_short[t].value for t in m.T) < 1e-6
    assert min(m.reserve_short[t].value for t in m.T) > 1.0
    msgs = diagnose(sm)
    assert msgs and all(d.startswith("steam reserve short") for d in msgs)


def test_ejectors_run_only_while_a_turbine_exhausts_into_the_condenser():
    # Cheap power and a 40 t/h minimum throttle keep the condensing set off; LP steam is in
    # surplus in hour 0 (a waste-heat boiler exports into it). The ejectors' drains return
    # to the deaerator, where they would displace make-up water and the vented surplus:
    # without the tie to the set's status the ejectors would run on their own as a path
    # from LP steam to boiler feed.
    tg = {"id": "TGC", "inlet": "HP", "max_throttle": "80 t/h", "min_throttle": "40 t/h", "initial_on": False,
          "generator_rating": "10 MW", "no_load_loss": "0.2 MW", "section": [{"to": "C", "efficiency": 0.75}]}
    cond = {"id": "C", "pressure": "0.1 bar(a)", "cooling_capacity": "40 MW", "ejector_steam": "2 t/h",
            "ejector_header": "LP"}
    cfg = site(turbogenerator=[tg], condenser=[cond])
    _, rep, res = run(cfg, series(cfg, 3, demand_HP=20.0, demand_LP=[-8.0, 0.0, 2.0], price_import=5.0))
    s = res.schedule
    assert rep.status == "optimal"
    assert (s["TGC.on"] == 0).all()
    assert s["V.flow_t_h"].iloc[0] > 2.0  # the surplus the ejectors could have taken
    assert (s["C.in_service"] == 0).all() and (s["C.ejector_t_h"].abs() < 1e-9).all()


def test_a_stop_near_the_horizons_end_is_named_as_an_end_effect() -> None:
    """A unit that runs from the plan's start and stops for good in its last day is named
    (the plan sees no restart after its last hour); a stop earlier, a unit that runs to the
    end, or one off from the start is not. A day is common practice, no published value."""
    import pandas as pd

    from cogendispatch.results import end_stops

    cfg = site(turbogenerator=[TG])
    t = pd.date_range("2027-01-04", periods=48, freq="h")

    def sched(b1: list[int], tg: list[int]) -> pd.DataFrame:
        return pd.DataFrame({"B1.on": b1, "TG.on": tg}, index=pd.Index(t, name="time"))

    notes = end_stops(cfg, sched([1] * 48, [1] * 40 + [0] * 8))
    assert len(notes) == 1 and notes[0].startswith("TG stops at 2027-01-05 16:00") and "(8 h)" in notes[0]
    assert end_stops(cfg, sched([1] * 48, [1] * 20 + [0] * 28)) == []  # 28 h before the end: a real stop
    assert end_stops(cfg, sched([1] * 48, [0] * 40 + [1] * 8)) == []  # runs at the end
    assert end_stops(cfg, sched([1] * 48, [0] * 10 + [1] * 30 + [0] * 8)) == []  # off at the start
    # a plan of 8 h: only its last quarter counts as its end (a stop in hour 2 is a stop)
    short = sched([1] * 48, [1] * 48).iloc[:8].assign(**{"TG.on": [1, 1, 0, 0, 0, 0, 0, 0]})
    assert end_stops(cfg, short) == []
    assert len(end_stops(cfg, short.assign(**{"TG.on": [1] * 6 + [0] * 2}))) == 1
    # a machine that keeps a driver 24 h changing 5 h before the end: the plan saw 5 of them
    cfg = site(drive=[{**DRIVE, "min_hours_between_switches": "24 h"}])
    s = pd.DataFrame({"P1.on_steam": [0] * 43 + [1] * 5}, index=pd.Index(t, name="time"))
    notes = end_stops(cfg, s)
    assert len(notes) == 1 and notes[0].startswith("P1 changes from 0 to 1 machine(s) on steam at 2027-01-05 19:00")
    assert end_stops(cfg, s.assign(**{"P1.on_steam": [0] * 20 + [1] * 28})) == []  # 28 h before: seen whole


def test_a_unit_on_before_the_plan_and_stopped_at_its_first_hour_is_named() -> None:
    """A unit the site file has on before the first hour that the plan keeps off from the
    first hour stops at no cost of its own in the model: the plan names it (a trial found
    the demo's TG1 so, with nothing said)."""
    import pandas as pd

    from cogendispatch.results import start_stops

    t = pd.date_range("2027-01-04", periods=6, freq="h")
    s = pd.DataFrame({"B1.on": [1] * 6, "TG.on": [0, 0, 1, 1, 1, 1]}, index=pd.Index(t, name="time"))
    notes = start_stops(site(turbogenerator=[{**TG, "initial_on": True}]), s)
    assert notes == ["TG was on before the first hour (initial_on in the site file) and is stopped at "
                     "2027-01-04 00:00; off 2 of 6 h"]
    assert start_stops(site(turbogenerator=[{**TG, "initial_on": False}]), s) == []  # off before: no stop
    assert start_stops(site(turbogenerator=[{**TG, "initial_on": True}]), s.assign(**{"TG.on": 1})) == []


def test_diagnosis_names_a_fuel_supply_limit():
    """A boiler far below its rating but out of fuel (a site-wide max_supply of 100 GJ/h
    gives about 100 x 0.85 / 2.9 = 29 t/h) is the limit a shortfall names."""
    cfg = site(fuel=[{"id": "NG", "price": "10 per GJ", "max_supply": "100 GJ/h"}],
               letdown=[{"id": "LD", "from": "HP", "to": "LP", "max_flow": "200 t/h"}])
    _, rep, res = run(cfg, series(cfg, 2, demand_LP=[20, 60]))
    assert len(res.diagnosis) == 1 and "LP header short" in res.diagnosis[0]
    assert "binding in hour 1: B1 at its fuel's supply limit (NG 100 GJ/h)" in res.diagnosis[0]


def test_a_turbo_generator_may_be_must_run():
    """must_run holds a turbo-generator on, as it does a boiler: with power at 1 per MWh
    the set would otherwise stay off (its no-load loss costs more than it makes)."""
    tg = {"id": "TG", "inlet": "HP", "max_throttle": "60 t/h", "min_throttle": "10 t/h", "generator_rating": "10 MW",
          "no_load_loss": "0.5 MW", "initial_on": False, "section": [{"to": "LP", "efficiency": 0.7}]}
    free = site(turbogenerator=[tg])
    _, _, res = run(free, series(free, 3, demand_LP=30.0, price_import=1.0))
    assert (res.schedule["TG.on"] == 0).all()
    held = site(turbogenerator=[{**tg, "must_run": True}])
    _, _, res = run(held, series(held, 3, demand_LP=30.0, price_import=1.0))
    assert (res.schedule["TG.on"] == 1).all()


def test_a_diagnosis_gives_the_sites_clock():
    """A series written with its UTC offset is held in UTC; the diagnosis names the hour as
    the file wrote it (05:00 at +01:00, with its offset), not as UTC (04:00)."""
    import pandas as pd

    from cogendispatch.plant.series import parse_series
    cfg = site()
    raw = pd.DataFrame({"time": [f"2027-03-01T0{h}:00+01:00" for h in range(6)], "demand:HP [t/h]": "0",
                        "demand:LP [t/h]": ["20", "20", "20", "20", "20", "150"], "load [MW]": "5",
                        "price:import [per MWh]": "100"})
    _, rep, res = run(cfg, parse_series(raw, cfg, "<offsets>"))
    assert any("hour 5 (2027-03-01 05:00+01:00)" in d for d in res.diagnosis), res.diagnosis


def test_a_reserve_no_schedule_can_hold_is_explained() -> None:
    """With cover 1, a 100 t/h boiler above 60 t/h cannot be covered by a 60 t/h one at any
    schedule (the reserve row: the others' spare rating >= cover x its steam). The diagnosis
    names it and says how to plan with less reserve; at cover 0.5 (50 t/h of 100) it can."""
    from cogendispatch.results import reserve_hint

    def boiler(bid: str, rating: str) -> dict:
        return {"id": bid, "header": "HP", "fuels": ["NG"], "max_steam": rating, "min_steam": "10 t/h",
                "efficiency_curve": {"load": [0.1, 1.0], "efficiency": [0.85, 0.85]}}

    two = [boiler("B1", "100 t/h"), boiler("B2", "60 t/h")]
    hint = reserve_hint(site(boiler=two, reserve={"enabled": True, "cover": 1.0}))
    assert "the others can never cover B1 above 60 t/h" in hint and "B2 above" not in hint
    assert "a lower [reserve] cover (now 1) or --no-reserve" in hint
    assert "never" not in reserve_hint(site(boiler=two, reserve={"enabled": True, "cover": 0.5}))


def test_inspect_says_when_a_boiler_can_never_be_covered(tmp_path, capsys) -> None:  # noqa: ANN001
    """The tiny site's one 50 t/h boiler can hold no reserve: inspect says so before any
    plan shows the reserve short (reserve_uncoverable); without the reserve, nothing."""
    from cogendispatch.cli import main

    (tmp_path / "on.toml").write_text(TINY_TOML.replace("[reserve]\nenabled = false", "[reserve]\nenabled = true"))
    (tmp_path / "off.toml").write_text(TINY_TOML)
    assert main(["inspect", str(tmp_path / "on.toml")]) == 0
    out = capsys.readouterr().out
    assert "with the steam reserve's cover of 1, the others can never cover B1 above 0 t/h" in " ".join(out.split())
    assert main(["inspect", str(tmp_path / "off.toml")]) == 0
    assert "never cover" not in capsys.readouterr().out
