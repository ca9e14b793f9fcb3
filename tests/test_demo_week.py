"""The demo week end to end: files written, balances closed, limits and reserve respected."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from cogendispatch.cli import main
from cogendispatch.plant.load import load_site

ROOT = Path(__file__).resolve().parents[1]
SITE = ROOT / "plant_configs" / "saltmarsh_refinery.toml"
SERIES = ROOT / "plant_configs" / "saltmarsh_week.csv"


@pytest.fixture(scope="module")
def week(tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("demo") / "week"
    # a short time limit keeps the suite fast (two threads: HiGHS and the search beside it);
    # the benchmark runs to the gap
    rc = main(["plan", str(SITE), "--series", str(SERIES), "--out", str(out), "--time-limit", "25", "--threads", "2", "--quiet"])
    assert rc == 0
    return out


def test_outputs_written_with_the_documented_keys(week: Path) -> None:
    for f in ("schedule.csv", "balances.csv", "power.csv", "costs.csv", "summary.json"):
        assert (week / f).is_file()
    s = json.loads((week / "summary.json").read_text())
    for key in ("status", "objective", "bound", "gap", "cost", "fuel_GJ", "import_MWh", "export_MWh",
                "co2_t", "seconds", "hours", "site", "series"):
        assert key in s
    for key in ("build", "load", "solve", "total"):
        assert s["seconds"][key] >= 0
    assert s["hours"] == 168
    assert s["status"] in ("optimal", "time limit")
    assert s["bound"] <= s["objective"] * (1 + 1e-9)
    assert s["cost_total"] == pytest.approx(s["objective"], rel=1e-6)
    assert Path(s["site"]) == SITE and Path(s["series"]) == SERIES
    assert s["diagnosis"] == []
    # costs.csv: one column per category, named with the currency, summing to the objective
    cost = pd.read_csv(week / "costs.csv", index_col="time")
    assert sorted(cost.columns) == sorted(f"{k}_{s['currency']}" for k in s["cost"])
    assert float(cost.to_numpy().sum()) == pytest.approx(s["objective"], rel=1e-6)


def test_every_header_and_power_balance_closes(week: Path) -> None:
    bal = pd.read_csv(week / "balances.csv")
    sums = bal.groupby(["time", "header"]).flow_t_h.sum()
    assert len(sums) == 168 * 3
    assert np.abs(sums.to_numpy()).max() < 1e-6  # CSV keeps 12 significant digits
    pw = pd.read_csv(week / "power.csv")
    assert np.abs(pw.groupby("time").power_MW.sum().to_numpy()).max() < 1e-6
    assert (bal[bal.term.str.startswith("shortfall")].flow_t_h.abs() < 1e-6).all()


def test_units_within_limits_and_reserve_holds(week: Path) -> None:
    cfg = load_site(SITE)
    s = pd.read_csv(week / "schedule.csv", index_col="time")
    tol = 1e-4
    for b in cfg.boilers:
        on = s[f"{b.id}.on"]
        steam = s[f"{b.id}.steam_t_h"]
        assert (steam <= b.max_steam * on + tol).all()
        assert (steam >= b.min_steam * on - tol).all()
        if b.ramp_up:
            assert (steam.diff().dropna()[on.iloc[1:].to_numpy() * on.shift().iloc[1:].to_numpy() == 1]
                    <= b.ramp_up + tol).all()
    for t in cfg.turbogenerators:
        on = s[f"{t.id}.on"]
        assert (s[f"{t.id}.throttle_t_h"] <= t.max_throttle * on + tol).all()
        assert (s[f"{t.id}.throttle_t_h"] >= t.min_throttle * on - tol).all()
        assert (s[f"{t.id}.power_MW"] <= t.generator_rating * on + tol).all()
    # reserve: the others' spare covers the load of any one running boiler
    spare = sum(b.max_steam * s[f"{b.id}.on"] - s[f"{b.id}.steam_t_h"] for b in cfg.boilers)
    for b in cfg.boilers:
        own_spare = b.max_steam * s[f"{b.id}.on"] - s[f"{b.id}.steam_t_h"]
        assert (spare - own_spare >= s[f"{b.id}.steam_t_h"] - tol).all()
    for ld in cfg.letdowns:
        assert (s[f"{ld.id}.flow_t_h"] <= ld.max_flow + tol).all()
        assert (s[f"{ld.id}.flow_t_h"] >= ld.min_flow - tol).all()
    assert (s["grid.import_MW"] <= cfg.grid.max_import + tol).all()
    assert (s["grid.import_MW"] >= cfg.grid.min_import - tol).all()
    for d in cfg.drives:
        assert s[f"{d.id}.on_steam"].between(0, d.count).all()
        assert (s[f"{d.id}.on_steam"] + s[f"{d.id}.on_motor"] == d.count).all()


def test_verification_and_baseline_in_the_summary(week: Path) -> None:
    s = json.loads((week / "summary.json").read_text())
    v = s["verify"]
    # the target on the demo week: power and fuel within 1 % of IAPWS-IF97 every hour
    assert v["max_power_error_pct"] < 1.0 and v["max_fuel_error_pct"] < 1.0
    assert v["verdict"].startswith("linear model within 1 %")
    assert (week / "verify.csv").is_file()
    b = s["baseline"]
    assert b["diagnosis"] == []  # the practice schedule meets the demand too
    assert b["saving"]["total"]["saving"] > 0
    assert b["cost_total"] == pytest.approx(b["saving"]["total"]["baseline"])
