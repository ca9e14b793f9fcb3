"""Budget studies: scenarios applied and validated, rolling horizon against the monolithic
solve, states carried across windows, process pool and Dask results equal to serial."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from cogendispatch.cli import main
from cogendispatch.errors import InputError
from cogendispatch.site import build_site_model
from cogendispatch.solve import SolveOptions, solve
from cogendispatch.studies import (PreparedScenario, load_scenarios, rolling_horizon, run_study, short_hours,
                                   summarise)
from tiny import series, site

FAST = SolveOptions(gap=1e-4, time_limit=60, warm_start=False)


def _site():  # noqa: ANN202
    boilers = [{"id": "B1", "header": "HP", "fuels": ["NG"], "max_steam": "80 t/h", "min_steam": "20 t/h",
                "startup_cost": 800, "min_up": "6 h", "min_down": "4 h", "ramp_up": "30 t/h", "ramp_down": "30 t/h",
                "initial_steam": "40 t/h", "efficiency_curve": {"load": [0.25, 1.0], "efficiency": [0.78, 0.88]}},
               {"id": "B2", "header": "HP", "fuels": ["NG"], "max_steam": "60 t/h", "min_steam": "15 t/h",
                "startup_cost": 500, "min_up": "4 h", "min_down": "4 h", "initial_on": False,
                "efficiency_curve": {"load": [0.25, 1.0], "efficiency": [0.75, 0.84]}}]
    drive = {"id": "P1", "duty": "2 MW", "motor": {"efficiency": 0.95}, "min_hours_between_switches": "6 h",
             "steam_turbine": {"inlet": "HP", "exhaust": "LP", "efficiency": 0.6}}
    tg = {"id": "TG", "inlet": "HP", "max_throttle": "80 t/h", "min_throttle": "10 t/h", "generator_rating": "10 MW",
          "no_load_loss": "0.3 MW", "min_up": "8 h", "min_down": "6 h", "startup_cost": 1000,
          "section": [{"to": "LP", "efficiency": 0.75}]}
    return site(boiler=boilers, drive=[drive], turbogenerator=[tg])


def _two_weeks(cfg, seed: int = 1):  # noqa: ANN001, ANN202
    n = 336
    t = np.arange(n)
    day = np.sin(2 * np.pi * (t % 24 - 9) / 24)
    rng = np.random.default_rng(seed)
    return series(cfg, n, demand_LP=list(60 + 25 * day + rng.normal(0, 3, n)), load=6.0,
                  price_import=list(np.where((t % 24 >= 8) & (t % 24 < 20), 180, 50) + rng.normal(0, 5, n)))


def test_rolling_horizon_is_within_half_a_percent_of_the_monolithic_solve() -> None:
    cfg = _site()
    ser = _two_weeks(cfg)
    sm = build_site_model(cfg, ser)
    mono = solve(sm, FAST)
    assert mono.status == "optimal"
    r = rolling_horizon(cfg, PreparedScenario("base", ser, ()), FAST)
    assert len(r.windows) == 2 and len(r.schedule) == 336
    rolled = float(r.hourly_cost.to_numpy().sum())
    assert rolled == pytest.approx(mono.objective, rel=5e-3)
    assert rolled >= mono.objective * (1 - 2e-4)  # the monolithic optimum is a lower bound (within its gap)


def test_min_up_time_holds_across_a_window_edge() -> None:
    # B2 must start for the peak in hours 22-23, the last hours of the first 24 h window;
    # with a 4 h minimum up time it stays on in hours 24-25 of the next window
    cfg = site(boiler=[
        {"id": "B1", "header": "HP", "fuels": ["NG"], "max_steam": "100 t/h", "min_steam": "10 t/h",
         "efficiency_curve": {"load": [0.1, 1.0], "efficiency": [0.85, 0.85]}},
        {"id": "B2", "header": "HP", "fuels": ["NG"], "max_steam": "60 t/h", "min_steam": "20 t/h",
         "efficiency_curve": {"load": [0.1, 1.0], "efficiency": [0.70, 0.70]}, "initial_on": False, "min_up": "4 h"}],
        letdown=[{"id": "LD", "from": "HP", "to": "LP", "max_flow": "200 t/h"}])
    demand = [30.0] * 48
    demand[22] = demand[23] = 130.0
    ser = series(cfg, 48, demand_LP=demand)
    r = rolling_horizon(cfg, PreparedScenario("x", ser, ()), FAST, window=24, lookahead=0)
    on = r.schedule["B2.on"].to_numpy().astype(int)
    assert on[22] == on[23] == 1
    assert on[24] == on[25] == 1  # carried: it started at hour 22 (or 21)
    assert on[22:].sum() <= 4 + (1 - on[21])  # and not longer than it must


def _scenario_file(tmp_path, text: str):  # noqa: ANN001, ANN202
    p = tmp_path / "sc.toml"
    p.write_text(text)
    return p


def test_scenarios_change_prices_demand_and_take_units_out(tmp_path) -> None:  # noqa: ANN001
    cfg = _site()
    base = series(cfg, 24 * 40, demand_LP=50.0, price_import=100.0)  # March 1 to April 9
    p = _scenario_file(tmp_path, """
[[scenario]]
name = "base"
[[scenario]]
name = "dear"
fuel.NG = { multiply = 1.5, add = "1 per GJ" }
import = { add = "10 per MWh", months = [4] }
demand = { LP = 1.1 }
  [[scenario.outage]]
  unit = "B2"
  from = "2027-03-02T00:00"
  to = "2027-03-03T05:00"
""")
    b, d = load_scenarios(p, cfg, base)
    assert b.series.fuel_price["NG"].iloc[0] == pytest.approx(10.0)
    assert d.series.fuel_price["NG"].iloc[0] == pytest.approx(16.0)
    march = d.series.time.month == 3
    assert d.series.price_import[march].to_numpy() == pytest.approx(100.0)
    assert d.series.price_import[~march].to_numpy() == pytest.approx(110.0)
    assert d.series.demand["LP"].iloc[0] == pytest.approx(55.0)
    assert d.outages == (("B2", 24, 53),)



def test_a_scenario_sets_a_fixed_price_for_listed_months(tmp_path) -> None:  # noqa: ANN001
    """set = "40 per MWh" replaces the series' price in the months listed (a budget's flat
    price); a price per MMBtu is converted to the site's per GJ (1 MMBtu = 1.055056 GJ,
    ISO 31-4 / NIST SP 811 Btu_IT)."""
    cfg = _site()
    base = series(cfg, 24 * 40, demand_LP=50.0, price_import=100.0)  # March 1 to April 9
    p = _scenario_file(tmp_path, """
[[scenario]]
name = "flat"
import = { set = "40 per MWh", months = [4] }
fuel.NG = { set = "9 per MMBtu" }
""")
    (s,) = load_scenarios(p, cfg, base)
    april = s.series.time.month == 4
    assert s.series.price_import[april].to_numpy() == pytest.approx(40.0)
    assert s.series.price_import[~april].to_numpy() == pytest.approx(100.0)
    assert s.series.fuel_price["NG"].to_numpy() == pytest.approx(9.0 / 1.055056, rel=1e-6)

@pytest.mark.parametrize("text, where", [
    ('[[scenario]]\nname = "a"\nfuel.XX = { multiply = 2 }\n', "fuel > XX"),
    ('[[scenario]]\nname = "a"\n[[scenario.outage]]\nunit = "NOPE"\nfrom = "2027-03-01"\nto = "2027-03-02"\n', "unit"),
    ('[[scenario]]\nname = "a"\n[[scenario.outage]]\nunit = "B1"\nfrom = "2029-03-01"\nto = "2029-03-02"\n', "outside"),
    ('[[scenario]]\nname = "a"\nimport = { add = "10" }\n', "import > add"),
    ('[[scenario]]\nname = "a"\n[[scenario]]\nname = "a"\n', "duplicated scenario"),
    ('[[scenario]]\nname = "Gas"\n[[scenario]]\nname = "gas"\n', "duplicated scenario name(s), capitals aside"),
    ('[[scenario]]\nname = "gas "\n', "begins or ends with a space"),
    # a factor written as a per cent (130 for +30 %)
    ('[[scenario]]\nname = "a"\nfuel.NG = { multiply = 130 }\n', "fuel > NG > multiply: 130 is a factor"),
    ('[[scenario]]\nname = "a"\ndemand = { XX = 1.1 }\n', "demand > XX"),
    ('[[scenario]]\nname = "a"\nwind = 3\n', "unknown key"),
    ('[[scenario]\nname = "a"\n', "not valid TOML"),
    ('[[scenario]]\nname = "a"\nimport = { multiply = 1e400 }\n', "import > multiply"),
    ('[[scenario]]\nname = "a"\nco2 = { add = "20 USD/t" }\n', "co2 > add"),  # not the site's currency
    ('[[scenario]]\nname = "a"\n[[scenario.outage]]\nunit = "B1"\nfrom = "2027-03-01T00:00+01:00"\nto = "2027-03-01T05:00+01:00"\n',
     "has a UTC offset but the series' times have none"),
    ('[[scenario]]\nname = "a"\n[[scenario.outage]]\nunit = "B1"\nfrom = "tuesday"\nto = "2027-03-01"\n', "from"),
    # spellings pandas reads but not as a whole day: 2027-3-01 would end at 00:00, not 23:00
    ('[[scenario]]\nname = "a"\n[[scenario.outage]]\nunit = "B1"\nfrom = "2027-03-01"\nto = "2027-3-01"\n',
     "write a date as '2027-03-14' (the whole day)"),
    ('[[scenario]]\nname = "a"\n[[scenario.outage]]\nunit = "B1"\nfrom = "20270301"\nto = "2027-03-01"\n', "from"),
    ('[[scenario]]\nname = "a"\nprices = "nothere.csv"\n', "prices"),
    ('[[scenarios]]\nname = "a"\n', "scenarios"),  # the documented keys only, no synonyms
    ('[[scenario]]\nname = "a"\n[[scenario.outage]]\nunit = "B1"\nstart = "2027-03-01"\nto = "2027-03-01"\n', "start"),
    ('[[scenario]]\nname = "a"\nload = -1\n', "load"),
    # a fixed price goes alone: "set and multiply" has no one reading
    ('[[scenario]]\nname = "a"\nimport = { set = "40 per MWh", multiply = 1.1 }\n', "'set' fixes the price and goes alone"),
    ('[[scenario]]\nname = "a"\nimport = { set = "40 per MWh", add = "1 per MWh" }\n', "'set' fixes the price"),
    ('[[scenario]]\nname = "a"\nco2 = { set = "40" }\n', "co2 > set"),
])
def test_bad_scenarios_name_the_place(tmp_path, text: str, where: str) -> None:  # noqa: ANN001
    cfg = _site()
    with pytest.raises(InputError) as e:
        load_scenarios(_scenario_file(tmp_path, text), cfg, series(cfg, 24, demand_LP=50.0))
    assert where in str(e.value) and "sc.toml" in str(e.value)


def test_outage_keeps_the_unit_off() -> None:
    cfg = _site()
    ser = series(cfg, 48, demand_LP=60.0)
    r = rolling_horizon(cfg, PreparedScenario("o", ser, (("B1", 10, 30),)), FAST, window=24, lookahead=6)
    assert (r.schedule["B1.on"].iloc[10:31] == 0).all()


@pytest.mark.parametrize(("span", "lookahead"), [((0, 10), 6), ((24, 40), 0)])
def test_an_outage_at_a_windows_first_hour_stops_a_boiler_at_load(span: tuple[int, int], lookahead: int) -> None:
    """B1 runs at 40 t/h or more with a 30 t/h ramp down: an outage from the first hour of
    a window (of the series, or after a window that did not see it coming, look-ahead 0)
    stops it from that load, a trip rather than a planned ramp; the window used to be
    infeasible and the study to stop."""
    cfg = _site()
    ser = series(cfg, 48, demand_LP=90.0)
    r = rolling_horizon(cfg, PreparedScenario("o", ser, (("B1", *span),)), FAST, window=24, lookahead=lookahead)
    assert (r.schedule["B1.on"].iloc[span[0]:span[1] + 1] == 0).all()
    if span[0] > 0:  # it ran at load up to the outage
        assert r.schedule["B1.steam_t_h"].iloc[span[0] - 1] > 30.0


def test_a_unit_out_of_service_stops_from_its_initial_load() -> None:
    """A plan whose site file marks a running boiler out of service (initial_steam above
    what its ramp down allows in one hour) stops it in the first hour; it was infeasible."""
    from cogendispatch.site import build_site_model
    from cogendispatch.solve import solve

    raw = _site()
    b1 = next(b for b in raw.boilers if b.id == "B1")
    assert b1.initial_on and b1.initial_steam > max(b1.ramp_down, b1.min_steam)
    cfg = raw.model_copy(update={"boilers": [b.model_copy(update={"available": False}) if b.id == "B1" else b
                                             for b in raw.boilers]})
    sm = build_site_model(cfg, series(cfg, 6, demand_LP=40.0))
    rep = solve(sm, FAST)
    assert rep.has_solution and all(sm.blocks["B1"].on[t].value < 0.5 for t in range(6))


def _three(cfg):  # noqa: ANN001, ANN202
    ser = _two_weeks(cfg, seed=3)
    ser = ser.window(0, 72)
    return [PreparedScenario("a", ser, ()), PreparedScenario("b", ser, (("B2", 5, 20),)),
            PreparedScenario("c", ser, ())]


def test_process_pool_results_equal_serial() -> None:
    cfg = _site()
    sc = _three(cfg)
    serial = run_study(cfg, sc, FAST, window=24, lookahead=6, workers=1)
    pooled = run_study(cfg, sc, FAST, window=24, lookahead=6, workers=2)
    assert len(serial) == len(pooled) == len(sc) == 3
    for a, b in zip(serial, pooled):
        assert a.name == b.name
        pd.testing.assert_frame_equal(a.schedule, b.schedule)


def test_dask_local_cluster_results_equal_serial() -> None:
    distributed = pytest.importorskip("distributed")
    cfg = _site()
    sc = _three(cfg)[:2]
    serial = run_study(cfg, sc, FAST, window=24, lookahead=6, workers=1)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                                  dashboard_address=None) as cluster:
        remote = run_study(cfg, sc, FAST, window=24, lookahead=6, cluster=cluster.scheduler_address)
    assert len(serial) == len(remote) == len(sc) == 2
    for a, b in zip(serial, remote):
        pd.testing.assert_frame_equal(a.schedule, b.schedule)
        pd.testing.assert_frame_equal(summarise(cfg, a), summarise(cfg, b))


def test_demo_scenario_file_loads_and_changes_what_it_says() -> None:
    from pathlib import Path

    from cogendispatch.plant.load import load_site
    from cogendispatch.plant.series import load_series
    root = Path(__file__).resolve().parents[1] / "plant_configs"
    cfg = load_site(root / "saltmarsh_refinery.toml")
    base = load_series(root / "saltmarsh_week.csv", cfg)
    sc = {s.name: s for s in load_scenarios(root / "saltmarsh_scenarios.toml", cfg, base)}
    assert list(sc) == ["base", "gas +30 %", "import -20 % in January, carbon +20", "LP demand +10 %, B3 overhaul",
                        "import and export +50 %"]
    tight = sc["import and export +50 %"].series
    assert tight.price_import.to_numpy() == pytest.approx(1.5 * base.price_import.to_numpy())
    assert tight.price_export.to_numpy() == pytest.approx(1.5 * base.price_export.to_numpy())
    assert sc["gas +30 %"].series.fuel_price["NG"].to_numpy() == pytest.approx(1.3 * base.fuel_price["NG"].to_numpy())
    assert sc["import -20 % in January, carbon +20"].series.co2_price.to_numpy() == pytest.approx(
        base.co2_price.to_numpy() + 20.0)
    lp = sc["LP demand +10 %, B3 overhaul"]
    assert lp.series.demand["LP"].to_numpy() == pytest.approx(1.1 * base.demand["LP"].to_numpy())
    assert lp.outages == (("B3", 48, 119),)  # 6 to 8 January of a week from 4 January, inclusive


def test_cli_study_writes_the_outputs(tmp_path, capsys, monkeypatch) -> None:  # noqa: ANN001
    import json
    from pathlib import Path

    from cogendispatch.report import plots
    stacked = []
    real_stacked = plots.stacked_bars
    monkeypatch.setattr(plots, "stacked_bars", lambda frame, *a, **k: stacked.append(frame) or real_stacked(frame, *a, **k))
    root = Path(__file__).resolve().parents[1] / "plant_configs"
    # the price file repeats the day's export prices: it changes nothing but is traced
    sc = _scenario_file(tmp_path, '[[scenario]]\nname = "base"\n[[scenario]]\nname = "=cheap power"\n'
                                  'import = { multiply = 0.5 }\nprices = "export.csv"\n')
    ser = tmp_path / "day.csv"
    day = pd.read_csv(root / "saltmarsh_week.csv").iloc[:12]
    day.to_csv(ser, index=False)
    day[["time", *[c for c in day.columns if c.startswith("price:export")]]].to_csv(tmp_path / "export.csv", index=False)
    out = tmp_path / "study"
    rc = main(["study", str(root / "saltmarsh_refinery.toml"), "--series", str(ser), "--scenarios", str(sc),
               "--out", str(out), "--window", "6", "--lookahead", "2", "--time-limit", "10", "--gap", "0.01",
               "--workers", "1", "--quiet"])
    assert rc == 0
    table = pd.read_csv(out / "scenarios.csv")
    assert table.scenario.tolist() == ["base", "'=cheap power"]  # quoted: never a spreadsheet formula
    assert table.cost_import_EUR.iloc[1] < table.cost_import_EUR.iloc[0]  # money columns name the currency
    assert [c for c in table.columns if c.startswith("cost_") and not c.endswith("_EUR")] == []
    assert (table.largest_window_gap >= 0).all() and (table.largest_window_gap < 0.05).all()
    assert (table.windows_proven == table.windows).all()
    # every start is counted: cost_startup is boilers' and turbo-generators' start-up costs
    assert {"boiler_starts", "turbogenerator_starts"} <= set(table.columns)
    # driver hours only for machines with a choice (the demo's WGC is steam-only, FANS motor-only)
    on_steam = {c.removesuffix(".machine_hours_on_steam_h") for c in table.columns
                if c.endswith(".machine_hours_on_steam_h")}
    assert {"B1.hours_on_h", "TG2.hours_on_h"} <= set(table.columns)  # unit.quantity_unit, as the schedule
    assert on_steam == {"BFWP", "CWP", "CCP", "AIRB", "HCFP", "IAC"}
    monthly = pd.read_csv(out / "monthly.csv")
    assert set(monthly.month) == {"2027-01"}
    s = pd.read_parquet(out / "schedules" / "01_base.parquet")
    assert len(s) == 12
    html = (out / "report.html").read_text()
    assert "Budget study" in html and html.count("<svg") >= 2 and "cost [EUR/month]" in html
    # the cost bars stack the categories only (the totals stacked on them doubled each bar)
    bars = stacked[-1]
    assert not [c for c in bars.columns if c.startswith("total")]
    assert bars.sum(axis=1).to_numpy() == pytest.approx(table.cost_total_EUR.to_numpy())
    summary = json.loads((out / "summary.json").read_text())
    assert summary["options"]["time_limit_s"] == 10 and summary["options"]["window_h"] == 6
    assert summary["first_hour"].startswith("2027-01-04 00:00") and "Saltmarsh" in summary["site_name"]
    assert "Saltmarsh" in html and "2027-01-04 11:00" in html  # the page says which site and hours
    assert summary["diagnosis"] == {"base": [], "=cheap power": []}  # nothing short in either
    # what the figures were made from: each file with its SHA-256
    import hashlib
    digest = hashlib.sha256((tmp_path / "export.csv").read_bytes()).hexdigest()
    assert summary["price_files"] == {"=cheap power": {"path": str((tmp_path / "export.csv").resolve()),
                                                       "sha256": digest}}
    assert summary["scenarios_sha256"] == hashlib.sha256(sc.read_bytes()).hexdigest()
    assert summary["series_sha256"] == hashlib.sha256(ser.read_bytes()).hexdigest()
    xl = pd.read_excel(out / "study.xlsx", sheet_name=None)
    pd.testing.assert_frame_equal(xl["scenarios"], pd.read_csv(out / "scenarios.csv"), check_dtype=False)
    from openpyxl import load_workbook
    assert load_workbook(out / "study.xlsx")["scenarios"]["A3"].value == "'=cheap power"  # text, not a formula
    assert load_workbook(out / "study.xlsx")["monthly"].freeze_panes == "C2"  # month and scenario stay in view
    ws = load_workbook(out / "study.xlsx")["scenarios"]
    heads = {c.value: c.column for c in ws[1]}
    assert ws.cell(row=2, column=heads["cost_total_EUR"]).number_format == "#,##0"  # money in whole units
    assert ws.cell(row=2, column=heads["fuel_GJ"]).number_format == "#,##0.000"
    capsys.readouterr()
    assert main(["verify", str(out)]) == 2  # a study folder is not a plan
    assert "holds study results; verify re-checks a plan folder's schedule" in capsys.readouterr().err


def test_study_reports_shortfalls_like_a_plan(capsys) -> None:  # noqa: ANN001
    cfg = _site()
    ser = series(cfg, 30, demand_LP=[60.0] * 10 + [400.0] * 3 + [60.0] * 17)
    r = rolling_horizon(cfg, PreparedScenario("peak", ser, ()), FAST, window=12, lookahead=4)
    assert r.shortfall_hours == 3
    row = summarise(cfg, r).iloc[0]  # money apart from the penalties, which dwarf it here
    assert row.cost_total_without_penalty == pytest.approx(row.cost_total - row.cost_penalty)
    assert row.cost_penalty > 1e5
    # the peak straddles a window edge: each window names its short headers, with dates
    assert r.diagnosis and all("header short" in d and "2027-03-01 1" in d for d in r.diagnosis)
    assert any("binding in hour" in d and "at its" in d for d in r.diagnosis)
    # hours counted in the whole series (10 to 12), not from each window's start
    import re
    covered = set()
    for d in r.diagnosis:
        for a, b in re.findall(r"\bhours? (\d+)(?:-(\d+))? \(", d):
            covered |= set(range(int(a), int(b or a) + 1))
    assert covered == {10, 11, 12}


def test_round_off_is_no_shortfall_hour() -> None:
    """A slack of round-off size priced at a large penalty is not a shortfall hour; a real
    one is (zero tolerance 1e-5 t/h or MW at the cheapest slack price)."""
    cfg = site(penalties={"steam_shortfall": "1e6 per t", "steam_surplus": "1e6 per t",
                          "power_shortfall": "1e6 per MWh", "power_surplus": "1e6 per MWh"})
    hourly = pd.DataFrame({"fuel": [100.0, 100.0, 100.0], "penalty": [0.0, 1e-3, 5e4]})
    assert short_hours(cfg, hourly).tolist() == [False, False, True]
    # a reserve short by 5e-4 t/h (priced 1e4 per t: 5 per hour) is as real as the diagnosis says
    cfg = site(penalties={"reserve_shortfall": "1e4 per t"})
    hourly = pd.DataFrame({"fuel": [100.0, 100.0], "penalty": [1e-3, 5.0]})
    assert short_hours(cfg, hourly).tolist() == [False, True]


def test_a_window_without_a_bound_leaves_the_gap_unproven() -> None:
    from cogendispatch.studies import ScenarioResult, WindowReport
    cfg = _site()
    ser = series(cfg, 2, demand_LP=50.0)
    s = pd.DataFrame(0.0, index=ser.time, columns=[f"{b.id}.{q}" for b in cfg.boilers for q in ("on", "start")]
                     + [f"{b.id}.fuel_NG_GJ_h" for b in cfg.boilers] + ["grid.import_MW", "grid.export_MW"]
                     + [f"{t.id}.on" for t in cfg.turbogenerators] + ["P1.on_steam"])
    c = pd.DataFrame({"fuel": [1.0, 1.0]}, index=ser.time)
    win = [WindowReport("a", "b", 0.1, 1.0, "time limit", 0.004, 1), WindowReport("c", "d", 0.1, 1.0, "time limit", None, 1)]
    row = summarise(cfg, ScenarioResult("x", s, c, 0, win)).iloc[0]
    assert np.isnan(row.largest_window_gap)
    # what the proven windows proved is kept beside it
    assert (row.windows_proven, row.windows) == (1, 2) and row.largest_proven_window_gap == pytest.approx(0.004)
    win[1] = WindowReport("c", "d", 0.1, 1.0, "optimal", 0.001, 1)
    assert summarise(cfg, ScenarioResult("x", s, c, 0, win)).largest_window_gap.iloc[0] == pytest.approx(0.004)
    from cogendispatch.studies import proven_gap
    assert proven_gap(0.07) == 0.07 and proven_gap(float("inf")) is None
    assert proven_gap(1.03) is None  # a bound below zero (a 103 % gap was reported) proves nothing
    assert proven_gap(1.5, objective=-2.0e5) == 1.5  # an exporting site's negative cost: a real gap


def test_a_folder_given_as_scenario_file_is_refused(tmp_path) -> None:  # noqa: ANN001
    cfg = _site()
    with pytest.raises(InputError, match="cannot be read"):
        load_scenarios(tmp_path, cfg, series(cfg, 24, demand_LP=50.0))


def test_study_says_a_shortfall_may_be_the_searchs_when_a_window_stopped_early(tmp_path, capsys,
                                                                              monkeypatch) -> None:  # noqa: ANN001
    """As a plan does: when a window of a short scenario stopped before proving its
    schedule, the study says the shortfall may be the search's rather than the site's. The
    windows here are solved whole and then reported as stopped at the time limit."""
    from cogendispatch.solve import LoadedModel
    from test_plan_small import TINY_TOML

    solve_mip = LoadedModel.solve_mip

    def stopped(self, *a, **kw):  # noqa: ANN001, ANN002, ANN003, ANN202
        rep = solve_mip(self, *a, **kw)
        rep.status, rep.gap = "time limit", 0.183
        return rep

    (tmp_path / "site.toml").write_text(TINY_TOML)
    (tmp_path / "s.csv").write_text("time,demand:HP [t/h],demand:LP [t/h],load [MW],price:import [per MWh]\n"
                                    "2027-03-01T00:00,0,20,5,50\n2027-03-01T01:00,0,90,5,50\n2027-03-01T02:00,0,20,5,50\n")
    sc = _scenario_file(tmp_path, '[[scenario]]\nname = "base"\n')
    args = ["study", str(tmp_path / "site.toml"), "--series", str(tmp_path / "s.csv"), "--scenarios", str(sc),
            "--window", "3", "--lookahead", "0", "--workers", "1", "--quiet"]
    assert main([*args, "--out", str(tmp_path / "proven")]) == 3
    err = capsys.readouterr().err
    assert "LP header short" in err and "the search's rather than the site's" not in err
    monkeypatch.setattr(LoadedModel, "solve_mip", stopped)
    assert main([*args, "--out", str(tmp_path / "stopped")]) == 3
    err = capsys.readouterr().err
    assert "1 of 1 window(s) stopped before proving their schedule (largest gap 18.3 %)" in err
    assert "the search's rather than the site's" in err
    # and the page says it beside the shortfalls, as the terminal does
    assert "the search's rather than the site's" in (tmp_path / "stopped" / "report.html").read_text()
    assert "the search's rather than the site's" not in (tmp_path / "proven" / "report.html").read_text()


def test_scenario_inputs_as_an_engineer_writes_them(tmp_path) -> None:  # noqa: ANN001
    """Forms a budget engineer writes and the study once refused or misread: a price with
    the site's currency; an outage running past the series' end (the hours it covers
    count); a date alone as 'to' (the whole day, inclusive); dates without quotes (TOML's
    own date type); a price file with price columns only (the rest stays the base's); a
    month filter that misses the series (a note, not silence)."""
    cfg = _site()
    base = series(cfg, 72, demand_LP=50.0, price_import=100.0)  # 2027-03-01 to 03-03
    (tmp_path / "dear.csv").write_text("time,price:import [per MWh]\n" + "".join(
        f"{t},{150 + k}\n" for k, t in enumerate(pd.date_range("2027-03-01", periods=72, freq="h"))))
    p = _scenario_file(tmp_path, """
[[scenario]]
name = "carbon"
co2 = { add = "20 EUR/t" }
import = { multiply = 2, months = [6] }
  [[scenario.outage]]
  unit = "B2"
  from = 2027-03-02T12:00:00
  to = 2027-03-09
  [[scenario.outage]]
  unit = "TG"
  from = "2027-03-01"
  to = 2027-03-01
[[scenario]]
name = "price file"
prices = "dear.csv"
load = 1.1
""")
    c, f = load_scenarios(p, cfg, base)
    assert c.series.co2_price.to_numpy() == pytest.approx(20.0)
    assert c.outages == (("B2", 36, 71), ("TG", 0, 23))
    assert c.series.price_import.to_numpy() == pytest.approx(100.0)
    assert len(c.notes) == 1 and "months [6] has no hour in the series" in c.notes[0]
    assert f.series.price_import.iloc[5] == pytest.approx(155.0)
    assert f.series.fuel_price["NG"].to_numpy() == pytest.approx(base.fuel_price["NG"].to_numpy())
    assert f.series.co2_price.to_numpy() == pytest.approx(base.co2_price.to_numpy())
    assert f.series.load.to_numpy() == pytest.approx(1.1 * base.load.to_numpy())  # the site load scaled
    assert c.series.load.to_numpy() == pytest.approx(base.load.to_numpy())
    assert not f.notes


def test_outage_times_against_a_series_with_utc_offsets() -> None:
    """A series with UTC offsets (read as UTC) takes outage times with offsets, compared
    as instants, or without, as the site's wall clock: across the autumn clock change of
    31 October 2027 in central Europe (EU Directive 2000/84/EC: summer time ends at 01:00
    UTC on the last Sunday of October), 02:00 comes twice, so a 'from' at 02:00 is the first
    and a 'to' the second; a date alone is the site's day, 00:00 to 23:00 on its clock."""
    from pathlib import Path

    from cogendispatch.plant.series import parse_series
    from cogendispatch.studies import _outage_time
    from tiny import site

    utc = pd.date_range("2027-10-30 22:00", periods=48, freq="h", tz="UTC")
    stamps = [t.tz_convert("Europe/Berlin").isoformat() for t in utc]
    cfg = site()
    ser = parse_series(pd.DataFrame({"time": stamps, "demand:HP [t/h]": "0", "demand:LP [t/h]": "20",
                                     "load [MW]": "5", "price:import [per MWh]": "100"}), cfg, "<offsets>")
    f = Path("sc.toml")
    assert _outage_time(f, "x", "2027-10-31T06:00+01:00", ser, end=False) == utc[7]
    notes: list[str] = []
    assert _outage_time(f, "x", "2027-10-31T02:00", ser, end=False, notes=notes) == utc[2]  # 02:00+02:00
    assert _outage_time(f, "x", "2027-10-31T02:00", ser, end=True, notes=notes) == utc[3]  # 02:00+01:00
    assert "comes twice (the clocks go back): taken as 2027-10-31 02:00:00+02:00, the first" in notes[0]
    assert "taken as 2027-10-31 02:00:00+01:00, the second" in notes[1]
    assert _outage_time(f, "x", "2027-10-31", ser, end=False) == utc[0]  # 00:00+02:00
    assert _outage_time(f, "x", "2027-10-31", ser, end=True) == utc[24]  # 23:00+01:00, 25 h on
    # beyond the series' end, at the offset of its last hour
    assert _outage_time(f, "x", "2027-11-02T06:00", ser, end=True) == pd.Timestamp("2027-11-02T05:00", tz="UTC")
    # spring: on 28 March 2027 the clocks skip 02:00 (01:00+01:00 is followed by 03:00+02:00);
    # an outage from 02:00 begins at 03:00, one to 02:00 ends at 01:00
    utc = pd.date_range("2027-03-27 23:00", periods=6, freq="h", tz="UTC")
    ser = parse_series(pd.DataFrame({"time": [t.tz_convert("Europe/Berlin").isoformat() for t in utc],
                                     "demand:HP [t/h]": "0", "demand:LP [t/h]": "20", "load [MW]": "5",
                                     "price:import [per MWh]": "100"}), cfg, "<offsets>")
    assert _outage_time(f, "x", "2027-03-28T02:00", ser, end=False, notes=notes) == utc[2]  # 03:00+02:00
    assert "an hour the clocks skip: taken as 2027-03-28 03:00:00+02:00" in notes[-1]
    assert _outage_time(f, "x", "2027-03-28T02:00", ser, end=True) == utc[1]  # 01:00+01:00


def test_months_are_the_sites_when_the_series_has_utc_offsets(tmp_path) -> None:  # noqa: ANN001
    """A series written with its UTC offset (+02:00) is held in UTC, where April begins two
    hours late: a scenario's `months` and the monthly summary go by the site's clock."""
    from cogendispatch.plant.series import parse_series

    cfg = _site()
    base = series(cfg, 8, demand_LP=50.0, price_import=100.0)
    raw = pd.DataFrame({"time": [f"{t.isoformat()}+02:00" for t in pd.date_range("2027-03-31 20:00", periods=8, freq="h")],
                        "demand:HP [t/h]": "0", "demand:LP [t/h]": "50", "load [MW]": "5",
                        "price:import [per MWh]": "100"})
    ser = parse_series(raw, cfg, "<offsets>")
    assert ser.time[0] == pd.Timestamp("2027-03-31 18:00", tz="UTC") and ser.wall_time[4] == pd.Timestamp("2027-04-01")
    assert base.wall_time.equals(base.time)  # without offsets the wall clock is the time column
    sc = load_scenarios(_scenario_file(tmp_path, '[[scenario]]\nname = "april"\nimport = { add = "50 per MWh", months = [4] }\n'),
                        cfg, ser)[0]
    assert sc.series.price_import.tolist() == [100.0] * 4 + [150.0] * 4
    r = rolling_horizon(cfg, sc, FAST, window=8, lookahead=0)
    monthly = summarise(cfg, r, by_month=True)
    assert monthly["month"].tolist() == ["2027-03", "2027-04"]
    assert (monthly["cost_import"] > 0).all()


def test_scenario_mistakes_a_budget_engineer_makes(tmp_path) -> None:  # noqa: ANN001
    """Dates with '/' or '.' (day or month first by country) are refused; a factor of 105
    (meant as per cent) is refused; a price file's non-price columns are named in a note."""
    cfg = _site()
    base = series(cfg, 48, demand_LP=50.0)
    for text, where in (('from = "5/1/2027"\nto = "2027-03-02"', "year-month-day"),
                        ('from = "2027-03-01"\nto = "02.03.2027"', "year-month-day")):
        with pytest.raises(InputError, match=where):
            load_scenarios(_scenario_file(tmp_path, f'[[scenario]]\nname = "a"\n[[scenario.outage]]\nunit = "B1"\n{text}\n'),
                           cfg, base)
    with pytest.raises(InputError, match=r"\[\[scenario\]\] #1 \('a'\) > load"):  # named, as the others
        load_scenarios(_scenario_file(tmp_path, '[[scenario]]\nname = "a"\nload = 105\n'), cfg, base)
    (tmp_path / "p.csv").write_text("time,price:import [per MWh],demand:LP [t/h]\n" + "".join(
        f"{t},90,100\n" for t in pd.date_range("2027-03-01", periods=48, freq="h")))
    (ps,) = load_scenarios(_scenario_file(tmp_path, '[[scenario]]\nname = "a"\nprices = "p.csv"\n'), cfg, base)
    assert ps.series.demand["LP"].to_numpy() == pytest.approx(50.0)  # demand stays the base's
    assert len(ps.notes) == 1 and "demand:LP [t/h], left out" in ps.notes[0]


def test_each_machine_of_a_spared_pair_carries_its_own_time_since_a_change() -> None:
    """Two pumps on steam for 1000 h and more; the second goes to its motor 2 h before the
    window ends. The next window holds the second (2 of its 6 h served) for 4 h, but not the
    first, which has kept steam for 1022 h (it was held too, by the pair's one figure)."""
    from cogendispatch.equipment.drive import wanted_drivers
    from cogendispatch.studies import carry_states

    drive = {"id": "P", "duty": "500 kW", "count": 2, "normal": "steam", "motor": {"efficiency": 0.95},
             "steam_turbine": {"inlet": "HP", "exhaust": "LP", "efficiency": 0.5},
             "min_hours_between_switches": "6 h", "initial_on_steam": 2, "initial_hours_since_switch": "1000 h"}
    cfg = site(drive=[drive])
    sched = pd.DataFrame({"B1.on": [1] * 24, "B1.steam_t_h": [50.0] * 24, "P.on_steam": [2] * 22 + [1] * 2})
    d = carry_states(cfg, sched, cfg).drives[0]
    assert d.initial_on_steam == 1 and d.initial_hours_since_switch == [1024.0, 2.0]
    held = wanted_drivers(d, list(range(10)))
    assert held == {(1, t): 0 for t in range(4)}
    # a site file may give one figure per machine too; a wrong number of them is refused
    assert site(drive=[{**drive, "initial_hours_since_switch": ["30 h", "2 h"]}]).drives[0].hours_since_switch(1) == 2.0
    with pytest.raises(InputError, match="initial_hours_since_switch.*3 figures for 2 machine"):
        site(drive=[{**drive, "initial_hours_since_switch": ["30 h", "2 h", "1 h"]}])


def test_the_window_after_an_outage_is_not_a_copy_of_the_outage_week(monkeypatch: pytest.MonkeyPatch) -> None:
    """A window started from the week before solves again from its own LP relaxation when an
    outage sets the two apart (the outage week's dispatch, copied hour for hour into a
    normal week, cost a trial's study 2 % in a week with no outage)."""
    import cogendispatch.studies as st

    calls: list[bool] = []
    real = st._second_opinion

    def spy(lm, rep, options):  # noqa: ANN001, ANN202
        calls.append(True)
        return real(lm, rep, options)

    monkeypatch.setattr(st, "_second_opinion", spy)
    monkeypatch.setattr(st, "COLD_MIN", 2.0)
    cfg = _site()
    ser = series(cfg, 72, demand_LP=60.0)
    rolling_horizon(cfg, PreparedScenario("o", ser, (("B2", 5, 20),)), FAST, window=24, lookahead=6)
    # window 1 has the outage (no hint: cold); window 2 follows it; window 3 neither
    assert len(calls) == 1
    calls.clear()
    rolling_horizon(cfg, PreparedScenario("base", ser, ()), FAST, window=24, lookahead=6)
    assert not calls  # no outage, no shortfall: the week before is kept as the guess


def test_a_scenario_price_beyond_any_market_gets_the_series_note(tmp_path) -> None:  # noqa: ANN001
    """add = "1190 per GJ" (a price per MWh meant as per GJ, say) makes gas 1 200 per GJ: the
    note the base series would get above 500 per GJ (Series.notes, common practice) is given
    for the scenario and points at its multiply, add or set. (A multiplier of 120 is refused as a
    per cent.)"""
    cfg = _site()
    base = series(cfg, 24, demand_LP=50.0)
    ps = load_scenarios(_scenario_file(tmp_path, '[[scenario]]\nname = "gas"\nfuel.NG = { add = "1190 per GJ" }\n'),
                        cfg, base)[0]
    assert any("('gas')" in n and "the price of fuel NG reaches 1,200 per GJ" in n
               and "check the scenario's multiply, add or set" in n for n in ps.notes), ps.notes
    ok = load_scenarios(_scenario_file(tmp_path, '[[scenario]]\nname = "gas"\nfuel.NG = { multiply = 1.2 }\n'),
                        cfg, base)[0]
    assert not ok.notes


def test_a_price_file_with_utc_offsets_against_a_series_without_says_so(tmp_path) -> None:  # noqa: ANN001
    cfg = _site()
    base = series(cfg, 24, demand_LP=50.0)
    (tmp_path / "p.csv").write_text("time,price:import [per MWh]\n" + "".join(
        f"{t.isoformat()}+01:00,{100 + k}\n" for k, t in enumerate(pd.date_range("2027-03-01", periods=24, freq="h"))))
    with pytest.raises(InputError, match="the price file gives its times with UTC offsets and the series without"):
        load_scenarios(_scenario_file(tmp_path, '[[scenario]]\nname = "a"\nprices = "p.csv"\n'), cfg, base)


def test_a_short_price_file_says_which_hours_it_lacks(tmp_path) -> None:  # noqa: ANN001
    cfg = _site()
    base = series(cfg, 24, demand_LP=50.0)
    (tmp_path / "p.csv").write_text("time,price:import [per MWh]\n" + "".join(
        f"{t},{100 + k}\n" for k, t in enumerate(pd.date_range("2027-03-01", periods=20, freq="h"))))
    with pytest.raises(InputError, match=r"4 hour\(s\) of the series missing, the first 2027-03-01 20:00"):
        load_scenarios(_scenario_file(tmp_path, '[[scenario]]\nname = "a"\nprices = "p.csv"\n'), cfg, base)
