"""The IAPWS-IF97 re-check of schedules, and the practice baseline."""

from __future__ import annotations

import json
import re

import numpy as np
import pytest

from cogendispatch.baseline import practice_baseline, savings
from cogendispatch.cli import main
from cogendispatch.equipment import boiler as boiler_mod
from cogendispatch.equipment.common import SiteStates
from cogendispatch.results import plan_results
from cogendispatch.site import build_site_model
from cogendispatch.solve import SolveOptions, solve
from cogendispatch.steam import state_ph, state_pT, state_ps
from cogendispatch.verify import boiler_fuel_physical, expand_sections, verify_schedule
from tiny import series, site
from test_plan_small import TINY_TOML


def _ext_cond(no_load: str, eff2: float = 0.74, inlet_T: str = "400 degC"):  # noqa: ANN202
    return site(
        header=[{"id": "HP", "pressure": "40 bar(a)", "temperature": inlet_T},
                {"id": "LP", "pressure": "5 bar(a)", "temperature": "180 degC"}],
        condenser=[{"id": "C", "pressure": "0.1 bar(a)", "cooling_capacity": "100 MW"}],
        turbogenerator=[{"id": "T", "inlet": "HP", "max_throttle": "100 t/h", "generator_rating": "30 MW",
                         "no_load_loss": no_load,
                         "section": [{"to": "LP", "efficiency": 0.8, "max_extraction": "100 t/h"},
                                     {"to": "C", "efficiency": eff2}]}])


def test_without_no_load_loss_the_expansion_is_the_design_line() -> None:
    cfg = _ext_cond("0 MW")
    st = SiteStates.of(cfg)
    line = expand_sections(cfg.turbogenerators[0], st, [80.0, 30.0])
    from cogendispatch.equipment.turbine import coefficients
    co = coefficients(cfg.turbogenerators[0], st)
    assert len(line) == len(co.sections) == 2
    for (_, outl, p), sec, f in zip(line, co.sections, [80.0, 30.0]):
        assert outl.h == pytest.approx(sec.outlet.h, rel=1e-9)
        assert p == pytest.approx(f * sec.mw_per_tph, rel=1e-9)


def test_no_load_loss_stays_in_the_steam() -> None:
    # with a Willans loss the lost work heats the exhaust: the first section's exhaust is
    # hotter than at design, and the second section, starting hotter, expands through a larger
    # isentropic drop (reheat) -- so the physics makes a little more power than the linear model
    cfg = _ext_cond("1.0 MW")
    st = SiteStates.of(cfg)
    from cogendispatch.equipment.turbine import coefficients
    tg = cfg.turbogenerators[0]
    co = coefficients(tg, st)
    flows = [60.0, 20.0]
    line = expand_sections(tg, st, flows)
    assert line[0][1].h > co.sections[0].outlet.h
    # the same expansion written out by hand with IAPWS-IF97 states: design drops at
    # isentropic efficiency, the internal loss 1.0 MW / eta_gen shared by design power
    h1 = state_pT(40.0, 400.0)
    dh1_design = 0.8 * (h1.h - state_ps(5.0, h1.s).h)
    h2_design = state_ph(5.0, h1.h - dh1_design)
    dh2_design = 0.74 * (h2_design.h - state_ps(0.1, h2_design.s).h)
    d1, d2 = 60.0 * dh1_design / 3600, 20.0 * dh2_design / 3600  # [MW] at the shaft
    loss = 1.0 / tg.generator_efficiency
    dh1 = dh1_design - loss * d1 / (d1 + d2) * 3600 / 60.0
    h2 = state_ph(5.0, h1.h - dh1)
    dh2 = 0.74 * (h2.h - state_ps(0.1, h2.s).h) - loss * d2 / (d1 + d2) * 3600 / 20.0
    assert line[0][1].h == pytest.approx(h1.h - dh1, rel=1e-9)
    assert line[1][1].h == pytest.approx(h2.h - dh2, rel=1e-9)
    assert [p for _, _, p in line] == pytest.approx([60.0 * dh1 / 3600, 20.0 * dh2 / 3600], rel=1e-9)
    p_model = tg.generator_efficiency * sum(f * s.mw_per_tph for f, s in zip(flows, co.sections)) - 1.0
    p_phys = tg.generator_efficiency * sum(p for _, _, p in line)
    assert p_phys > p_model
    assert p_phys - p_model < 0.05 * p_model


def test_boiler_fuel_between_curve_points_by_hand() -> None:
    cfg = site(boiler=[{"id": "B", "header": "HP", "fuels": ["NG"], "max_steam": "100 t/h", "min_steam": "20 t/h",
                        "efficiency_curve": {"load": [0.2, 1.0], "efficiency": [0.78, 0.88]}}])
    b = cfg.boilers[0]
    co = boiler_mod.coefficients(b, SiteStates.of(cfg))
    # at a curve point the two agree; at 60 t/h the efficiency is 0.83 by interpolation
    assert boiler_fuel_physical(co, [0.2, 1.0], [0.78, 0.88], 100, 100.0) == pytest.approx(co.fuel[-1])
    assert boiler_fuel_physical(co, [0.2, 1.0], [0.78, 0.88], 100, 60.0) == pytest.approx(60 * co.heat_per_t / 0.83)
    assert boiler_mod.fuel_at(co, 60.0) != pytest.approx(60 * co.heat_per_t / 0.83, rel=1e-4)


def test_wet_exhaust_is_flagged() -> None:
    # 40 bar(a) at 300 degC expanded at 90 % to 0.1 bar(a) ends near x = 0.80 (IAPWS-IF97)
    cfg = _ext_cond("0 MW", eff2=0.9, inlet_T="300 degC")
    ser = series(cfg, 2, demand_LP=20.0, price_import=400.0)
    sm = build_site_model(cfg, ser)
    solve(sm, SolveOptions(gap=1e-6))
    res = plan_results(sm)
    assert (res.schedule["T.exhaust_C_t_h"] > 0).all()
    x_design = state_ps(0.1, state_pT(40, 300).s)
    assert x_design.x < 0.88
    v = verify_schedule(cfg, ser, res.schedule)
    assert v.flags and "below 0.88" in v.flags[0]
    assert "wet-exhaust" in v.verdict


def test_wet_exhaust_of_a_makers_envelope_is_flagged() -> None:
    """A maker's envelope gives the power, but its exhaust is still steam: 200 kWh/t from
    40 bar(a), 300 degC (h = 2961 kJ/kg) takes 3600 x 0.2 / 0.97 = 742 kJ/kg out, leaving
    h = 2219 kJ/kg at 0.1 bar(a), x = (2219 - 191.8) / 2392.1 = 0.85 (IAPWS-IF97 saturation
    values at 0.1 bar(a); hand arithmetic): below 0.88, flagged as for section efficiencies,
    and its sections listed."""
    env = {"no_load": "0.3 MW", "throttle": "200 kWh/t", "extraction": {"LP": "-120 kWh/t"}}
    cfg = site(header=[{"id": "HP", "pressure": "40 bar(a)", "temperature": "300 degC"},
                       {"id": "LP", "pressure": "5 bar(a)", "temperature": "180 degC"}],
               condenser=[{"id": "C", "pressure": "0.1 bar(a)", "cooling_capacity": "100 MW"}],
               turbogenerator=[{"id": "T", "inlet": "HP", "max_throttle": "100 t/h", "generator_rating": "30 MW",
                                "section": [{"to": "LP", "max_extraction": "100 t/h"}, {"to": "C"}],
                                "envelope": env}])
    ser = series(cfg, 2, demand_LP=20.0, price_import=400.0)
    sm = build_site_model(cfg, ser)
    solve(sm, SolveOptions(gap=1e-6))
    res = plan_results(sm)
    assert (res.schedule["T.exhaust_C_t_h"] > 0).all()
    v = verify_schedule(cfg, ser, res.schedule)
    cond = v.sections[v.sections["to"] == "C"]
    assert len(cond) == 2 and cond["exhaust_quality"].to_numpy() == pytest.approx(0.847, abs=0.002)
    assert v.flags and "T section 2 exhaust quality 0.84" in v.flags[0] and "wet-exhaust" in v.verdict
    # the envelope's power is its own law: no power error is claimed for it
    assert v.hourly["power_error_MW"].abs().max() < 1e-9


def test_sections_file_is_headed_when_no_set_runs() -> None:
    cfg = _ext_cond("0 MW")
    ser = series(cfg, 2, demand_LP=20.0, price_import=1.0)
    sched = plan_results(_solved(cfg, ser)).schedule.copy()
    sched["T.on"] = 0.0
    v = verify_schedule(cfg, ser, sched)
    assert v.sections.empty and list(v.sections.columns)[:3] == ["time", "turbine", "section"]


def _solved(cfg, ser):  # noqa: ANN001, ANN202
    sm = build_site_model(cfg, ser)
    solve(sm, SolveOptions(gap=1e-6))
    return sm


def test_verify_reports_header_imbalance_and_deaerator_steam() -> None:
    cfg = _ext_cond("1.0 MW")
    ser = series(cfg, 3, demand_LP=[30, 50, 40], price_import=300.0)
    sm = build_site_model(cfg, ser)
    solve(sm, SolveOptions(gap=1e-6))
    res = plan_results(sm)
    v = verify_schedule(cfg, ser, res.schedule)
    h = v.hourly
    ext = res.schedule["T.extraction_LP_t_h"].to_numpy()
    # the hotter extraction needs more desuperheater water: LP gains steam where it flows
    assert ((h["LP_energy_imbalance_MW"].to_numpy() > 0) == (ext > 1e-6)).all()
    assert (h["deaerator_steam_physics_t_h"] >= h["deaerator_steam_model_t_h"] - 1e-9).all()


def test_deaerator_overflow_is_scheduled_and_rechecked() -> None:
    """A process that exports 40 t/h into HP leaves the boiler little to make, while the LP
    users return all of their 50 t/h as condensate: more hot water reaches the deaerator
    than the boiler draws, and the excess drains. The schedule shows it; the re-check of
    the deaerator's energy balance takes it as scheduled, so with no turbine (nothing the
    linear model simplifies) it agrees with the model to rounding."""
    cfg = site(deaerator={"pressure": "2 bar(a)", "heating_steam": "LP", "makeup_temperature": "20 degC",
                          "process_condensate_return": 1.0, "condensate_temperature": "95 degC"})
    ser = series(cfg, 2, demand_HP=-40.0, demand_LP=50.0)
    sm = build_site_model(cfg, ser)
    solve(sm, SolveOptions(gap=1e-6))
    res = plan_results(sm)
    s = res.schedule
    # mass: 50 t/h returned against a boiler feed of about 10 t/h (its steam and blowdown)
    assert (s["deaerator.overflow_t_h"] > 30.0).all()
    h = verify_schedule(cfg, ser, s).hourly
    assert h["deaerator_steam_physics_t_h"].to_numpy() == pytest.approx(h["deaerator_steam_model_t_h"].to_numpy(), abs=1e-6)
    assert np.abs(h["LP_mass_imbalance_t_h"].to_numpy()).max() < 1e-6


def test_baseline_keeps_a_boiler_on_while_its_ramp_brings_it_down() -> None:
    """The practice rule would stop the poorer boiler at once, but it starts at 60 t/h and
    may shed only 10 t/h an hour; it may trip from max(10, its 10 t/h minimum) = 10 t/h, so
    it runs ceil((60 - 10) / 10) = 5 hours before it stops (was: no baseline at all)."""
    boilers = [{"id": "GOOD", "header": "HP", "fuels": ["NG"], "max_steam": "100 t/h", "min_steam": "10 t/h",
                "efficiency_curve": {"load": [0.1, 1.0], "efficiency": [0.86, 0.9]}},
               {"id": "POOR", "header": "HP", "fuels": ["NG"], "max_steam": "100 t/h", "min_steam": "10 t/h",
                "efficiency_curve": {"load": [0.1, 1.0], "efficiency": [0.76, 0.8]}, "initial_on": True,
                "initial_steam": "60 t/h", "ramp_down": "10 t/h"}]
    cfg = site(boiler=boilers)
    base = practice_baseline(cfg, series(cfg, 8, demand_LP=30.0))
    assert base.results.schedule["POOR.on"].tolist() == [1, 1, 1, 1, 1, 0, 0, 0]


def test_baseline_keeps_the_statuses_the_model_holds_at_the_start() -> None:
    """A turbo-generator with a fixed throttle (the practice: run it) stopped 1 h before the
    horizon with a 6 h minimum down time, and a machine normally on steam switched to its
    motor 1 h before with 6 h between switches: the practice rule applies only once those
    times are served (5 h in), or the baseline prices a schedule the plant cannot run."""
    tg = {"id": "TG", "inlet": "HP", "max_throttle": "80 t/h", "min_throttle": "10 t/h", "generator_rating": "10 MW",
          "no_load_loss": "0.3 MW", "min_up": "8 h", "min_down": "6 h", "fixed_throttle": "40 t/h",
          "initial_on": False, "initial_hours": "1 h", "section": [{"to": "LP", "efficiency": 0.75}]}
    drive = {"id": "P", "duty": "500 kW", "normal": "steam", "motor": {"efficiency": 0.95},
             "steam_turbine": {"inlet": "HP", "exhaust": "LP", "efficiency": 0.5},
             "min_hours_between_switches": "6 h", "initial_on_steam": 0, "initial_hours_since_switch": "1 h"}
    cfg = site(turbogenerator=[tg], drive=[drive])
    s = practice_baseline(cfg, series(cfg, 10, demand_LP=50.0), time_limit=20).results.schedule
    assert s["TG.on"].tolist() == [0] * 5 + [1] * 5
    assert s["P.on_steam"].tolist() == [0] * 5 + [1] * 5


def test_baseline_ranks_boilers_by_steam_cost_not_efficiency() -> None:
    """A less efficient boiler on a fuel at a third of the price makes cheaper steam
    (4/0.75 = 5.3 against 12/0.9 = 13.3 per GJ of steam): the practice rule commits it
    first, and the better-but-dearer one only when it is needed."""
    fuels = [{"id": "NG", "price": "12 per GJ"}, {"id": "HOG", "price": "4 per GJ"}]
    boilers = [{"id": "GAS", "header": "HP", "fuels": ["NG"], "max_steam": "60 t/h", "min_steam": "12 t/h",
                "efficiency_curve": {"load": [0.2, 1.0], "efficiency": [0.86, 0.9]}, "initial_on": False},
               {"id": "BIO", "header": "HP", "fuels": ["HOG"], "max_steam": "60 t/h", "min_steam": "12 t/h",
                "efficiency_curve": {"load": [0.2, 1.0], "efficiency": [0.7, 0.75]}, "initial_on": False}]
    cfg = site(fuel=fuels, boiler=boilers)
    s = practice_baseline(cfg, series(cfg, 4, demand_LP=[20, 20, 20, 20])).results.schedule
    assert s["BIO.on"].tolist() == [1, 1, 1, 1] and s["GAS.on"].tolist() == [0, 0, 0, 0]


def test_baseline_follows_the_rules_and_never_beats_the_optimiser() -> None:
    boilers = [{"id": "GOOD", "header": "HP", "fuels": ["NG"], "max_steam": "60 t/h", "min_steam": "12 t/h",
                "efficiency_curve": {"load": [0.2, 1.0], "efficiency": [0.86, 0.9]}},
               {"id": "POOR", "header": "HP", "fuels": ["NG"], "max_steam": "60 t/h", "min_steam": "12 t/h",
                "efficiency_curve": {"load": [0.2, 1.0], "efficiency": [0.76, 0.8]}, "initial_on": False}]
    drive = {"id": "P", "duty": "1 MW", "normal": "steam", "motor": {"efficiency": 0.95},
             "steam_turbine": {"inlet": "HP", "exhaust": "LP", "efficiency": 0.5}}
    tg = {"id": "T", "inlet": "HP", "max_throttle": "50 t/h", "generator_rating": "8 MW", "fixed_throttle": "20 t/h",
          "section": [{"to": "LP", "efficiency": 0.75}]}
    cfg = site(boiler=boilers, drive=[drive], turbogenerator=[tg])
    ser = series(cfg, 4, demand_LP=[20, 40, 70, 30], price_import=[20, 60, 60, 20])
    base = practice_baseline(cfg, ser)
    s = base.results.schedule
    assert (s["P.on_steam"] == 1).all()  # its normal driver, cheap power or not
    assert s["T.throttle_t_h"].tolist() == pytest.approx([20.0] * 4)
    # merit order: the better boiler runs whenever the poorer one does
    assert (s["GOOD.on"] >= s["POOR.on"]).all()
    sm = build_site_model(cfg, ser)
    rep = solve(sm, SolveOptions(gap=1e-9))
    assert rep.objective <= base.total + 1e-6
    sv = savings(plan_results(sm).totals["cost"], base.cost)
    assert sv["total"]["saving"] == pytest.approx(base.total - rep.objective, rel=1e-9, abs=1e-6)
    # in the plan's own order, total last; no per cent of a category the baseline spends nothing on
    # (it was alphabetical: co2, export, fuel, ...; the cost table starts with fuel)
    assert list(savings({"fuel": 1.0, "import": 2.0, "co2": 3.0}, {"co2": 1.0, "vent": 1.0})) == \
        ["fuel", "import", "co2", "vent", "total"]
    assert savings({"fuel": 10.0, "export": 0.0}, {"fuel": 20.0, "export": 0.0})["export"]["saving_pct"] is None
    assert savings({"fuel": 10.0}, {"fuel": 20.0})["fuel"]["saving_pct"] == pytest.approx(50.0)
    # a penalty in either schedule (demand or reserve not met) is no money: the money saved
    # is given apart (a trial read a billion "saved" off a week the baseline left short)
    sv = savings({"fuel": 100.0, "penalty": 0.0}, {"fuel": 80.0, "penalty": 1e6})
    assert sv["total"]["saving"] == pytest.approx(1e6 - 20.0)
    assert sv["total_without_penalty"]["saving"] == pytest.approx(-20.0)
    assert "total_without_penalty" not in savings({"fuel": 1.0, "penalty": 0.0}, {"fuel": 2.0, "penalty": 0.0})


def test_cli_verify_updates_a_plan_folder(tmp_path, capsys) -> None:  # noqa: ANN001
    (tmp_path / "site.toml").write_text(TINY_TOML)
    (tmp_path / "s.csv").write_text("time,demand:HP [t/h],demand:LP [t/h],load [MW],price:import [per MWh]\n"
                                    "2027-03-01T00:00,0,20,5,50\n2027-03-01T01:00,0,30,5,50\n")
    out = tmp_path / "out"
    assert main(["plan", str(tmp_path / "site.toml"), "--series", str(tmp_path / "s.csv"), "--out", str(out), "--quiet"]) == 0
    s = json.loads((out / "summary.json").read_text())
    assert "within 1 %" in s["verify"]["verdict"] and "baseline" in s
    # re-checked from the files, the plan's own check comes out the same to the last digit
    first = {f: (out / f).read_bytes() for f in ("verify.csv", "verify_sections.csv")}
    assert main(["verify", str(out)]) == 0
    assert {f: (out / f).read_bytes() for f in first} == first
    assert json.loads((out / "summary.json").read_text())["verify"] == s["verify"]
    (out / "verify.csv").unlink()
    assert main(["verify", str(out)]) == 0
    assert (out / "verify.csv").is_file()
    assert main(["verify", str(tmp_path)]) == 2  # not a plan folder
    # the site renamed a boiler since: a clear refusal naming the column, nothing rewritten
    before = (out / "verify.csv").read_bytes()
    (tmp_path / "site.toml").write_text(TINY_TOML.replace('id = "B1"', 'id = "B9"').replace('"B1"', '"B9"'))
    capsys.readouterr()
    assert main(["verify", str(out)]) == 2
    assert "has no column 'B9." in capsys.readouterr().err
    assert (out / "verify.csv").read_bytes() == before
    assert not list(out.glob(".*.tmp"))


def test_willans_heat_in_a_back_pressure_exhaust_by_hand() -> None:
    """A back-pressure set's whole Willans loss W0 / eta_gen heats its exhaust; the header
    then makes W0 / eta_gen * 3600 / (h_LP - h_fw) t/h more steam by desuperheating
    (first law on the header, SiteStates.arrival_ratio), which the verdict names."""
    tg = {"id": "T", "inlet": "HP", "max_throttle": "60 t/h", "generator_rating": "8 MW", "no_load_loss": "0.3 MW",
          "generator_efficiency": 0.96, "section": [{"to": "LP", "efficiency": 0.75}], "initial_on": True}
    cfg = site(turbogenerator=[tg])
    ser = series(cfg, 2, demand_LP=[40, 50], price_import=300.0)
    sm = build_site_model(cfg, ser)
    solve(sm, SolveOptions(gap=1e-6))
    res = plan_results(sm)
    assert (res.schedule["T.on"] > 0.5).all()
    v = verify_schedule(cfg, ser, res.schedule)
    st = SiteStates.of(cfg)
    by_hand = 0.3 / 0.96 * 3600.0 / (st.headers["LP"].h - st.h_feedwater)
    assert v.hourly["LP_exhaust_water_t_h"].to_numpy() == pytest.approx([by_hand, by_hand], rel=1e-6)
    assert "Willans loss" in v.verdict and "LP" in v.verdict
    # the verdict's parts add up to the imbalance it names first
    imb, water, rest = (float(x) for x in re.findall(r"([+-]\d+\.\d+) t/h", v.verdict)[:3])
    assert imb == pytest.approx(water + rest, abs=0.011)
    assert water == pytest.approx(round(by_hand, 2), abs=0.011)


def test_the_verdict_names_the_first_of_equal_imbalances() -> None:
    """The same imbalance in many hours (to the 0.01 t/h printed) names the first of them
    and how many others are alike; it once named one hour or another by round-off."""
    import pandas as pd

    from cogendispatch.verify import _mass_note

    cfg = site()
    t = pd.date_range("2027-01-04", periods=4, freq="h")
    hourly = pd.DataFrame({"HP_mass_imbalance_t_h": [0.0] * 4,
                           "LP_mass_imbalance_t_h": [0.5457, 0.5458, 0.54571, 0.2],
                           "HP_exhaust_water_t_h": [0.0] * 4, "LP_exhaust_water_t_h": [0.0] * 4}, index=t)
    note = _mass_note(cfg, hourly)
    assert "+0.55 t/h (LP at 2027-01-04 00:00:00 and 2 other hour(s) alike" in note
