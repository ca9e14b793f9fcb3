"""Linear coefficients of the equipment modules against worked examples and hand calculations."""

from __future__ import annotations

import pytest

from cogendispatch.coefficients import coefficient_tables
from cogendispatch.equipment import boiler as boiler_mod
from cogendispatch.equipment import drive as drive_mod
from cogendispatch.equipment import turbine as turbine_mod
from cogendispatch.equipment.common import SiteStates
from cogendispatch.equipment.deaerator import heating_steam_ratio
from cogendispatch.equipment.letdown import outlet_ratio
from cogendispatch.plant.load import load_site
from cogendispatch.steam import state_pT, state_px
from cogendispatch.units import parse_quantity
from conftest import DEMO_DIR
from tiny import site

BTU_PER_LB = 2.326  # [kJ/kg] per Btu/lb (NIST SP 811, International Table Btu)


def _example_10_8_site():  # noqa: ANN202
    """Cengel & Boles Example 10-8 as a site: 7 MPa/500 degC boiler, 500 kPa extraction,
    5 kPa condenser, isentropic turbine (section efficiencies 1)."""
    return site(
        header=[{"id": "HP", "pressure": "70 bar(a)", "temperature": "500 degC"},
                {"id": "LP", "pressure": "5 bar(a)"}],  # saturated process header
        deaerator={"pressure": "1.5 bar(a)", "heating_steam": "LP"},
        condenser=[{"id": "C", "pressure": "0.05 bar(a)", "cooling_capacity": "100 MW"}],
        turbogenerator=[{"id": "T", "inlet": "HP", "max_throttle": "100 t/h", "generator_rating": "30 MW",
                         "generator_efficiency": 1.0,
                         "section": [{"to": "LP", "efficiency": 1.0, "max_extraction": "100 t/h"},
                                     {"to": "C", "efficiency": 1.0}]}],
    )


def test_turbine_sections_reproduce_cengel_example_10_8():
    cfg = _example_10_8_site()
    co = turbine_mod.coefficients(cfg.turbogenerators[0], SiteStates.of(cfg))
    s1, s2 = co.sections
    assert co.kind == "extraction-condensing"
    # Cengel & Boles, Example 10-8: h1 3411.4, h5 2739.3, h6 2073.0 kJ/kg (0.5 %)
    assert s1.inlet.h == pytest.approx(3411.4, rel=5e-3)
    assert s1.outlet.h == pytest.approx(2739.3, rel=5e-3)
    assert s2.outlet.h == pytest.approx(2073.0, rel=5e-3)
    m = 15.0 * 3.6  # 15 kg/s in t/h
    # (b) no process heat, all 15 kg/s to the condenser: turbine work
    # 15 * (3411.4 - 2073.0) = 20 076 kW (Example 10-8 (b), net 20.0 MW after ~0.1 MW pumps)
    p_b = m * (s1.mw_per_tph + s2.mw_per_tph)
    assert p_b == pytest.approx(20.076, rel=5e-3)
    # (c) 13.5 kg/s through the first section, 10.5 kg/s extracted, 3 kg/s to the condenser:
    # turbine work 13.5 * (3411.4 - 2739.3) + 3 * (2739.3 - 2073.0) = 11.07 MW
    # (Example 10-8 (c), net 11.0 MW after the pumps' 0.1 MW)
    p_c = 13.5 * 3.6 * s1.mw_per_tph + 3.0 * 3.6 * s2.mw_per_tph
    assert p_c == pytest.approx(11.07, rel=5e-3)
    # the 500 kPa header is saturated: the isentropic extraction (x ~ 0.99) arrives wet and
    # gives up a drain to keep the header at saturated vapour (ratio just below 1)
    r = SiteStates.of(cfg).arrival_ratio(s1.outlet.h, "LP")
    assert 0.95 < r < 1.0


def test_condenser_table_gives_the_heat_of_each_exhaust_by_cengel_example_10_8():
    """Heat a condensing exhaust brings to the condenser per t/h: (h6 - h_f) / 3600 [MW per
    t/h]. Cengel & Boles Example 10-8: h6 2073.0 kJ/kg (published); h_f at 5 kPa 137.75 kJ/kg
    (Cengel & Boles Table A-5, from memory). Part (c) sends 3 kg/s to the condenser:
    3 * (2073.0 - 137.75) = 5806 kW rejected (0.5 %, as the example's other states)."""
    cfg = _example_10_8_site()
    cond = coefficient_tables(cfg)["condensers"].set_index("condenser").loc["C"]
    assert cond["turbine"] == "T" and cond["section"] == 2
    assert cond["hotwell_h_kJ_kg"] == pytest.approx(137.75, rel=5e-3)
    assert cond["saturation_T_C"] == pytest.approx(32.87, abs=0.05)  # Table A-5, 5 kPa (from memory)
    assert 3.0 * 3.6 * cond["heat_MW_per_t_h"] == pytest.approx(5.806, rel=5e-3)
    # the exhaust flow at which the 100 MW cooling capacity is reached, from the same states
    assert cond["exhaust_t_h_at_capacity"] == pytest.approx(100.0 * 3600.0 / (2073.0 - 137.75), rel=5e-3)


def test_inspect_tables_show_fuels_and_grid_as_read():
    cfg = load_site(DEMO_DIR / "saltmarsh_refinery.toml")
    tabs = coefficient_tables(cfg)
    fuels = tabs["fuels"].set_index("fuel")
    for f in cfg.fuels:
        assert fuels.loc[f.id, "price_EUR_GJ"] == f.price and fuels.loc[f.id, "co2_t_GJ"] == f.co2_factor
    assert fuels.loc["RFG", "burned_by"] == " ".join(b.id for b in cfg.boilers if "RFG" in b.fuels)
    # what a planner checks a coefficient against: the headers a drive turbine works between,
    # a set's throttle range and rating, a letdown's range
    drv = tabs["drives"].set_index("drive")
    airb = next(d for d in cfg.drives if d.id == "AIRB")
    assert (drv.loc["AIRB", "inlet"], drv.loc["AIRB", "exhaust"]) == (airb.steam_turbine.inlet, airb.steam_turbine.exhaust)
    tg2 = next(t for t in cfg.turbogenerators if t.id == "TG2")
    first = tabs["turbines"].set_index(["turbine", "section"]).loc[("TG2", 1)]
    assert (first.max_throttle_t_h, first.generator_rating_MW) == (tg2.max_throttle, tg2.generator_rating)
    # and a condensing set's section limits: the extraction at the end of its first section,
    # the condenser flow through its last (the minimum condenser flow)
    tg1 = next(t for t in cfg.turbogenerators if t.id == "TG1")
    secs = tabs["turbines"].set_index(["turbine", "section"])
    s1, s2 = secs.loc[("TG1", 1)], secs.loc[("TG1", 2)]
    assert (s1.min_extraction_t_h, s1.max_extraction_t_h) == (tg1.sections[0].min_extraction, tg1.sections[0].max_extraction)
    assert (s2.min_flow_t_h, s2.max_flow_t_h) == (tg1.sections[1].min_flow, tg1.sections[1].max_flow)
    assert s2.min_flow_t_h > 0 and s2.max_extraction_t_h != s2.max_extraction_t_h  # none after the last section
    assert tabs["letdowns"].max_flow_t_h.tolist() == [ld.max_flow for ld in cfg.letdowns]
    g = tabs["grid"].iloc[0]
    assert (g.max_import_MW, g.max_export_MW, g.min_import_MW) == (cfg.grid.max_import, cfg.grid.max_export,
                                                                   cfg.grid.min_import)


def test_turbine_section_power_formula_by_hand():
    # 42 bar(a)/400 degC to 12 bar(a) at 78 %: P = m dh_s eta / 3600 (hand calculation)
    cfg = site(header=[{"id": "HP", "pressure": "42 bar(a)", "temperature": "400 degC"},
                       {"id": "LP", "pressure": "12 bar(a)", "temperature": "250 degC"}],
               deaerator={"pressure": "2 bar(a)", "heating_steam": "LP"},
               turbogenerator=[{"id": "T", "inlet": "HP", "max_throttle": "100 t/h", "generator_rating": "30 MW",
                                "section": [{"to": "LP", "efficiency": 0.78}]}])
    co = turbine_mod.coefficients(cfg.turbogenerators[0], SiteStates.of(cfg))
    h_in = state_pT(42, 400).h
    from cogendispatch.steam import state_ps
    h_s = state_ps(12, state_pT(42, 400).s).h
    assert co.sections[0].mw_per_tph == pytest.approx((h_in - h_s) * 0.78 / 3600, rel=1e-12)
    assert co.sections[0].outlet.h == pytest.approx(h_in - 0.78 * (h_in - h_s), rel=1e-9)


def test_boiler_fuel_cost_matches_doe_steam_tip_15():
    # US DOE Steam Tip Sheet #15: 150 psig saturated steam from 150 degF feedwater needs about
    # 1073-1078 Btu/lb; at 8.00 $/MMBtu and 81 % efficiency, about 10.60 $ per 1000 lb.
    p = parse_quantity("150 psig", "pressure")
    h_fw = state_pT(p, parse_quantity("150 degF", "temperature")).h
    q = boiler_mod.heat_to_steam(state_px(p, 1.0).h, h_fw, 0.0, state_px(p, 0.0).h)  # [kJ/kg]
    assert q / BTU_PER_LB == pytest.approx(1078, abs=2)  # Tip Sheet #15, Table 1
    cost_per_klb = 8.00 * (q / BTU_PER_LB) * 1000 / 1e6 / 0.81
    assert cost_per_klb == pytest.approx(10.60, rel=1e-2)  # the sheet rounds 1073-1078 Btu/lb


def test_boiler_fuel_points_and_blowdown_by_hand():
    cfg = site()
    b = cfg.boilers[0]
    st = SiteStates.of(cfg)
    co = boiler_mod.coefficients(b, st)
    q = (st.headers["HP"].h - st.h_feedwater) / 1000  # [GJ/t], no blowdown in the tiny site
    assert co.heat_per_t == pytest.approx(q, rel=1e-12)
    assert co.fuel[-1] == pytest.approx(100 * q / 0.85, rel=1e-12)
    # blowdown of 5 % of feedwater leaves as saturated liquid at drum pressure
    h_bd = state_px(40, 0.0).h
    q_bd = boiler_mod.heat_to_steam(st.headers["HP"].h, st.h_feedwater, 0.05, h_bd)
    assert q_bd == pytest.approx(st.headers["HP"].h - st.h_feedwater + 0.05 / 0.95 * (h_bd - st.h_feedwater))


def test_nonconvex_curve_is_detected():
    # efficiency flat then rising steeply: the middle segment's incremental heat input is clearly
    # below the first's (invented curve)
    cfg = site(boiler=[{"id": "B", "header": "HP", "fuels": ["NG"], "max_steam": "100 t/h", "min_steam": "20 t/h",
                        "efficiency_curve": {"load": [0.2, 0.5, 0.8, 1.0], "efficiency": [0.80, 0.80, 0.86, 0.845]}}])
    co = boiler_mod.coefficients(cfg.boilers[0], SiteStates.of(cfg))
    sl = co.slopes
    assert not co.convex and sl[1] < sl[0] and len(co.steam) == 4


def test_nearly_convex_curve_is_replaced_by_its_hull():
    # slopes 1.1415, 1.1410, 1.2115 GJ/t: non-convex by a hair; the hull through the 20 %,
    # 80 % and 100 % points is at most HULL_TOLERANCE below the 50 % point
    cfg = site(boiler=[{"id": "B", "header": "HP", "fuels": ["NG"], "max_steam": "100 t/h", "min_steam": "20 t/h",
                        "efficiency_curve": {"load": [0.2, 0.5, 0.8, 1.0], "efficiency": [0.78, 0.835, 0.85, 0.845]}}])
    co = boiler_mod.coefficients(cfg.boilers[0], SiteStates.of(cfg))
    assert co.convex and co.steam == (20.0, 80.0, 100.0)
    f50 = 50.0 * co.heat_per_t / 0.835  # the given point, by hand
    hull50 = co.fuel[0] + (co.fuel[1] - co.fuel[0]) * 30.0 / 60.0
    assert boiler_mod.fuel_at(co, 50.0) == pytest.approx(hull50, rel=1e-12)
    assert co.hull_shortfall == pytest.approx((f50 - hull50) / f50, rel=1e-9)
    assert 0 < co.hull_shortfall <= boiler_mod.HULL_TOLERANCE
    sl = co.slopes
    assert sl[1] >= sl[0]


def test_lower_hull_drops_points_above_the_chord():
    assert boiler_mod.lower_hull((0.0, 1.0, 2.0, 3.0), (0.0, 2.0, 2.0, 6.0)) == [0, 2, 3]
    assert boiler_mod.lower_hull((0.0, 1.0, 2.0), (0.0, 1.0, 3.0)) == [0, 1, 2]


def test_drive_steam_rate_and_exhaust_by_hand():
    # MIL-HDBK-1003/7 Table 8 form: steam rate = 3600 / (eta * dh_s) [kg/kWh]
    cfg = site(drive=[{"id": "P", "duty": "1 MW", "steam_turbine": {"inlet": "HP", "exhaust": "LP", "efficiency": 0.5}},
                      {"id": "Q", "duty": "1 MW", "steam_turbine": {"inlet": "HP", "exhaust": "LP", "steam_rate": "20 kg/kWh"}}])
    st = SiteStates.of(cfg)
    from cogendispatch.steam import isentropic_drop
    drop = isentropic_drop(st.headers["HP"], 5.0)
    p = drive_mod.coefficients(cfg.drives[0], st)
    assert p.steam_rate == pytest.approx(3600 / (0.5 * drop))
    assert p.exhaust_h == pytest.approx(st.headers["HP"].h - 0.5 * drop)
    q = drive_mod.coefficients(cfg.drives[1], st)
    assert q.exhaust_h == pytest.approx(st.headers["HP"].h - 3600 / 20)
    assert q.efficiency == pytest.approx(3600 / (20 * drop))


def test_letdown_water_ratio_matches_energy_balance():
    # tests/references.md sec. 6 [calc]: 42 bar(a)/400 degC let down to 11 bar(a), sprayed to 200 degC
    # with 105 degC water needs about 0.163 kg water per kg of steam (1 %)
    cfg = site(header=[{"id": "HP", "pressure": "42 bar(a)", "temperature": "400 degC"},
                       {"id": "LP", "pressure": "11 bar(a)", "temperature": "200 degC"}],
               deaerator={"pressure": "1.2 bar(a)", "heating_steam": "LP"})
    st = SiteStates.of(cfg)
    # the model sprays deaerator water (saturated at 1.2 bar(a), 104.8 degC): same check
    assert outlet_ratio(cfg.letdowns[0], st) - 1.0 == pytest.approx(0.163, rel=1e-2)


def test_deaerator_steam_ratio_by_hand():
    # S/F = (h_fw - h_w)/(h_s - h_w): 2 bar(a) deaerator, water in at 50 degC, 5 bar(a) 180 degC steam
    h_fw = state_px(2.0, 0.0).h
    h_w = state_pT(2.0, 50.0).h
    h_s = state_pT(5.0, 180.0).h
    r = heating_steam_ratio(h_fw, h_w, h_s)
    assert r * h_s + (1 - r) * h_w == pytest.approx(h_fw, rel=1e-12)  # energy balance closes
    assert 0.1 < r < 0.15


def test_cengel_example_10_8_c_process_heat_and_utilisation_factor():
    # Cengel & Boles, Example 10-8 (c): 1.5 kg/s throttled to 500 kPa, 10.5 kg/s extracted at
    # 500 kPa, 3 kg/s to the 5 kPa condenser; process heater leaves saturated liquid.
    # Published: process heat 26.2 MW, net power 11.0 MW, utilisation factor 86.5 % (0.5 %).
    from cogendispatch.steam import state_ps, throttled_state

    cfg = _example_10_8_site()
    st = SiteStates.of(cfg)
    s1, s2 = turbine_mod.coefficients(cfg.turbogenerators[0], st).sections
    h1 = s1.inlet.h
    h7 = state_px(5.0, 0.0).h  # saturated liquid at 500 kPa
    h_thr = throttled_state(s1.inlet, 5.0).h  # the letdown valve is isenthalpic
    q_process = (1.5 * (h_thr - h7) + 10.5 * (s1.outlet.h - h7)) / 1000  # [MW]
    assert q_process == pytest.approx(26.2, rel=5e-3)
    w_turbine = 13.5 * 3.6 * s1.mw_per_tph + 3.0 * 3.6 * s2.mw_per_tph  # [MW]
    # pumps, isentropic: condensate from 5 kPa and process return from 500 kPa to 7 MPa
    f3, f7 = state_px(0.05, 0.0), state_px(5.0, 0.0)
    h_p1, h_p2 = state_ps(70.0, f3.s).h, state_ps(70.0, f7.s).h
    w_pumps = (3.0 * (h_p1 - f3.h) + 12.0 * (h_p2 - f7.h)) / 1000
    h4 = (3.0 * h_p1 + 12.0 * h_p2) / 15.0
    q_in = 15.0 * (h1 - h4) / 1000
    assert w_turbine - w_pumps == pytest.approx(11.0, rel=5e-3)
    assert (w_turbine - w_pumps + q_process) / q_in == pytest.approx(0.865, rel=5e-3)


@pytest.mark.parametrize("width", [80, 120])
def test_inspect_fits_the_terminal_without_cutting_a_number(width: int, monkeypatch: pytest.MonkeyPatch,
                                                            capsys: pytest.CaptureFixture[str]) -> None:
    # a number cut to '3,5…' reads as another number: wide tables are split instead
    from pathlib import Path

    from rich.console import Console

    from cogendispatch import cli

    class Terminal(Console):
        def __init__(self, *args: object, **kwargs: object) -> None:
            super().__init__(*args, **{**kwargs, "width": width, "force_terminal": True, "color_system": None})

    monkeypatch.setattr(cli, "Console", Terminal)
    site_file = Path(__file__).resolve().parents[1] / "plant_configs" / "saltmarsh_refinery.toml"
    assert cli.main(["inspect", str(site_file)]) == 0
    text = capsys.readouterr().out
    assert "…" not in text
    # table lines fit; a message line is left whole for the terminal to wrap
    assert max(len(line) for line in text.splitlines() if line[:1] in "┏┃┡│└") <= width
    # the wet gas compressor's and the air blower's duty [kW], and B4's curve note, whole
    assert "3,500" in text and "5,000" in text and "convex hull, up to 0.002 % below the curve" in text
    assert "vents" in text and "V-LP" in text  # every unit read is shown, vents too
    # the ratios whose names do not say it all are explained, once each
    assert text.count("header_t_per_t: t/h that reach the header") == 1 and text.count("outlet_t_per_t: ") == 1
    assert "condensers" in text and "COND TG1/2" in text and "fuels" in text and "max_import_MW" in text


def test_deaerator_table_gives_the_steam_each_water_stream_needs():
    # 1 t of water at h_w plus S t of steam at h_s leave as (1 + S) t of saturated feedwater:
    # h_w + S h_s = (1 + S) h_fw (mass and energy balance of a direct-contact heater, as
    # deaerator.add_deaerator writes it); one row per stream the model feeds in.
    cfg = load_site(DEMO_DIR / "saltmarsh_refinery.toml")
    dea = coefficient_tables(cfg)["deaerator"].set_index("stream")
    assert list(dea.index) == ["make-up", "process condensate", "COND hotwell condensate"]
    da = cfg.deaerator
    h_fw = state_px(da.pressure, 0.0).h
    h_s = SiteStates.of(cfg).headers[da.heating_steam].h
    for stream, T in (("make-up", da.makeup_temperature), ("process condensate", da.condensate_temperature)):
        h_w = state_pT(da.pressure, T).h
        s = dea.loc[stream, "steam_t_per_t_water"]
        assert h_w + s * h_s == pytest.approx((1 + s) * h_fw, rel=1e-12)
    h_hw = state_px(cfg.condensers[0].pressure, 0.0).h  # saturated liquid in the condenser
    s = dea.loc["COND hotwell condensate", "steam_t_per_t_water"]
    assert h_hw + s * h_s == pytest.approx((1 + s) * h_fw, rel=1e-12)
    assert "55%" in dea.loc["process condensate", "flow"]


def test_a_table_too_wide_breaks_its_headings_before_splitting(capsys: pytest.CaptureFixture[str]) -> None:
    """Scenario names as column headings made a study's table many times the terminal's
    width; a table that does not fit breaks its headings between words (up to three
    lines), and one that fits keeps them whole."""
    import pandas as pd
    from rich.console import Console

    from cogendispatch.cli import _table

    df = pd.DataFrame({"quantity": ["cost"], "import -20 % in January, carbon +20": [1914154.0],
                       "LP demand +10 %, B3 overhaul": [3220659.0]})
    _table(Console(width=60, force_terminal=True, color_system=None), "t", df)
    text = capsys.readouterr().out
    assert max(len(line) for line in text.splitlines()) <= 60 and "(continued)" not in text
    assert "import -20 % in January, carbon +20" not in text and "import -20 %" in text  # broken, not cut
    assert "1,914,154" in text and "3,220,659" in text
    _table(Console(width=200, force_terminal=True, color_system=None), "t", df)
    assert "import -20 % in January, carbon +20" in capsys.readouterr().out  # fits: whole
    # at most three lines a heading, however narrow its numbers
    heads = pd.DataFrame({"machine": ["CCP"], "driver change (minimum time between changes)": ["allowed"],
                          "saving against now [EUR/h]": [5.0], "x" * 70: [1.0]})
    _table(Console(width=60, force_terminal=True, color_system=None), "t", heads)
    head_lines = [ln for ln in capsys.readouterr().out.splitlines() if ln.startswith("┃")]
    assert 0 < len(head_lines) <= 2 * 3  # two tables at most (the long one split off), three lines each
