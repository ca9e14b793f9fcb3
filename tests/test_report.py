"""Reports: the HTML page in headless Chromium, the Excel workbook read back, escaping, units."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pandas as pd
import pytest
from openpyxl import load_workbook

from cogendispatch.cli import main
from test_plan_small import TINY_TOML

SERIES = ("time,demand:HP [t/h],demand:LP [t/h],load [MW],price:import [per MWh]\n"
          + "".join(f"2027-03-01T{h:02d}:00,0,{20 + h},5,{50 + 5 * h}\n" for h in range(6)))


@pytest.fixture(scope="module")
def plan_dir(tmp_path_factory: pytest.TempPathFactory) -> Path:
    d = tmp_path_factory.mktemp("rep")
    # a free-text name that must never run as markup
    (d / "site.toml").write_text(TINY_TOML.replace('name = "tiny"', 'name = "<script>alert(1)</script> & =SUM(A1)"'))
    (d / "s.csv").write_text(SERIES)
    assert main(["plan", str(d / "site.toml"), "--series", str(d / "s.csv"), "--out", str(d / "out"), "--quiet"]) == 0
    return d / "out"


def test_report_and_workbook_are_written(plan_dir: Path) -> None:
    assert (plan_dir / "report.html").stat().st_size > 10_000
    assert (plan_dir / "plan.xlsx").is_file()
    # hourly marginal prices: every hour, each header and the electric bus
    pr = pd.read_csv(plan_dir / "prices.csv")
    assert len(pr) == 6 * 3 and set(pr.balance) == {"HP", "LP", "power"} and pr.price.notna().all()
    html = (plan_dir / "report.html").read_text()
    assert "Marginal steam price by header" in html
    assert "Plan over 6 h" in html and "Weekly plan" not in html  # six hours are not a week


def test_names_are_escaped(plan_dir: Path) -> None:
    html = (plan_dir / "report.html").read_text()
    assert "<script" not in html.lower()
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in html
    # nothing to fetch: no external sources, links or stylesheets (SVG namespaces are names, not fetches)
    import re
    assert not re.search(r"""(src|href)\s*=\s*["']?(https?:|//)|url\(\s*["']?https?:|@import""", html, re.I)


def test_workbook_reads_back_like_the_csv_files(plan_dir: Path) -> None:
    xl = pd.read_excel(plan_dir / "plan.xlsx", sheet_name=None)
    assert set(xl) == {"summary", "schedule", "header balances", "electric balance", "drivers", "costs", "prices",
                       "verification"}
    pd.testing.assert_frame_equal(xl["prices"], pd.read_csv(plan_dir / "prices.csv", parse_dates=["time"]),
                                  check_dtype=False)
    # times are date-time cells a spreadsheet can sort and filter, not text
    assert pd.api.types.is_datetime64_any_dtype(xl["schedule"]["time"])
    assert list(xl["schedule"]["time"]) == list(pd.date_range("2027-03-01", periods=6, freq="h"))
    sched = pd.read_csv(plan_dir / "schedule.csv")
    got = xl["schedule"]
    assert list(got.columns) == list(sched.columns)
    pd.testing.assert_frame_equal(got.drop(columns="time"), sched.drop(columns="time"), check_dtype=False, rtol=1e-9)
    pd.testing.assert_frame_equal(xl["header balances"].drop(columns="time"),
                                  pd.read_csv(plan_dir / "balances.csv").drop(columns="time"), check_dtype=False)
    pd.testing.assert_frame_equal(xl["electric balance"].drop(columns="time"),
                                  pd.read_csv(plan_dir / "power.csv").drop(columns="time"), check_dtype=False)
    s = json.loads((plan_dir / "summary.json").read_text())
    summ = xl["summary"].set_index("quantity")["value"]
    cur = s["currency"]
    assert float(summ[f"objective_{cur}"]) == pytest.approx(s["objective"])
    # every money row names the currency, and the categories add up to the total
    assert [q for q in summ.index if q.startswith("cost_") and not q.endswith(f"_{cur}")] == []
    parts = [float(summ[f"cost_{k}_{cur}"]) for k in s["cost"]]
    assert sum(parts) == pytest.approx(float(summ[f"cost_total_{cur}"]))
    wb = load_workbook(plan_dir / "plan.xlsx")
    assert wb["schedule"].freeze_panes == "B2"
    assert any(c.number_format == "#,##0.000" for row in wb["schedule"].iter_rows(min_row=2) for c in row)
    html = (plan_dir / "report.html").read_text()
    assert "<td>total</td>" in html  # the cost table ends with its total


def test_us_units_and_rebuild(plan_dir: Path, tmp_path: Path) -> None:
    d = tmp_path / "copy"
    shutil.copytree(plan_dir, d)
    assert main(["report", str(d), "--units", "us"]) == 0
    html = (d / "report.html").read_text()
    assert "klb/h" in html and "Header balances [klb/h]" in html
    assert main(["report", str(tmp_path)]) == 2  # not a plan or study folder
    # rebuilt from the same files, the page is the same file (no random ids in its charts)
    assert main(["report", str(d), "--units", "us"]) == 0
    assert (d / "report.html").read_text() == html
    # the factors the page scales by: 1 lb = 0.45359237 kg exactly, 1 Btu_IT/lb = 2.326
    # kJ/kg exactly (NIST SP 811, App. B)
    from cogendispatch.report import Units

    us = Units("us")
    assert us.kf == pytest.approx(1.0 / 0.45359237, rel=1e-12)  # klb/h per t/h
    assert us.ke == pytest.approx(1.0 / (2.326 * 0.45359237), rel=1e-12)  # MMBtu per GJ


def test_page_renders_in_headless_chromium(plan_dir: Path, tmp_path: Path) -> None:
    chromium = shutil.which("chromium") or shutil.which("chromium-browser")
    if chromium is None:
        pytest.skip("Debian's chromium is not installed (.ci/run installs it)")
    sync_api = pytest.importorskip("playwright.sync_api")
    errors, requests = [], []
    with sync_api.sync_playwright() as p:
        browser = p.chromium.launch(executable_path=chromium, args=[
            "--no-sandbox", "--disable-gpu", "--disable-background-networking", "--disable-component-update",
            "--disable-sync", "--no-first-run"])
        page = browser.new_page(viewport={"width": 1280, "height": 900})
        page.on("console", lambda m: errors.append(m.text) if m.type == "error" else None)
        page.on("pageerror", lambda e: errors.append(str(e)))
        page.on("request", lambda r: requests.append(r.url))
        page.goto((plan_dir / "report.html").as_uri())
        page.wait_for_load_state("load")
        n_svg = page.locator("svg").count()
        drawn = page.evaluate("Array.from(document.querySelectorAll('svg')).filter("
                              "s => s.querySelectorAll('path').length > 3 && s.getBoundingClientRect().width > 100).length")
        shot = tmp_path / "report.png"
        page.screenshot(path=str(shot), full_page=True)
        browser.close()
    assert errors == []
    assert [u for u in requests if not u.startswith("file://")] == []
    assert n_svg >= 5 and drawn == n_svg  # two headers, power, boilers, cost per day
    assert shot.stat().st_size > 20_000


def test_plan_prints_its_fuel_total_in_the_units_asked(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    (tmp_path / "site.toml").write_text(TINY_TOML)
    (tmp_path / "s.csv").write_text(SERIES)
    assert main(["plan", str(tmp_path / "site.toml"), "--series", str(tmp_path / "s.csv"), "--out",
                 str(tmp_path / "out"), "--quiet", "--units", "us"]) == 0
    out = capsys.readouterr().out
    gj = json.loads((tmp_path / "out" / "summary.json").read_text())["fuel_total_GJ"]
    # 1 MMBtu = 1.05505585 GJ (NIST SP 811, International Table Btu: 2.326 kJ/kg per Btu/lb)
    assert f"fuel {gj / (2.326 * 0.45359237):,.0f} MMBtu" in out
    # the folder remembers its units: a rebuild without --units keeps them, one with it changes them
    d = tmp_path / "out"
    assert json.loads((d / "summary.json").read_text())["units"] == "us"
    assert main(["report", str(d)]) == 0 and "klb/h" in (d / "report.html").read_text()
    assert main(["report", str(d), "--units", "si"]) == 0 and "klb/h" not in (d / "report.html").read_text()


def test_penalties_stay_out_of_the_cost_and_price_charts(tmp_path: Path) -> None:
    """An impossible hour costs 10^6 per t missing: the daily cost chart and the price
    charts leave it out (it would flatten every real figure), and the page says so."""
    (tmp_path / "site.toml").write_text(TINY_TOML)
    (tmp_path / "s.csv").write_text("time,demand:HP [t/h],demand:LP [t/h],load [MW],price:import [per MWh]\n"
                                    "2027-03-01T00:00,0,20,5,50\n2027-03-01T01:00,0,90,5,50\n"
                                    "2027-03-01T02:00,0,20,5,50\n")
    assert main(["plan", str(tmp_path / "site.toml"), "--series", str(tmp_path / "s.csv"), "--out",
                 str(tmp_path / "out"), "--quiet"]) == 3
    html = (tmp_path / "out" / "report.html").read_text()
    assert "are left out of this chart and of the prices below" in html and "in 1 h" in html


def test_report_on_a_broken_folder_is_refused_and_keeps_the_old_page(plan_dir: Path, tmp_path: Path,
                                                                     capsys: pytest.CaptureFixture[str]) -> None:
    d = tmp_path / "copy"
    shutil.copytree(plan_dir, d)
    page = (d / "report.html").read_bytes()
    (d / "balances.csv").unlink()
    assert main(["report", str(d)]) == 2
    err = capsys.readouterr().err
    assert "cannot build the report" in err and "Traceback" not in err
    assert (d / "report.html").read_bytes() == page and not list(d.glob(".*.tmp"))
    (d / "summary.json").write_text("{not json")
    assert main(["report", str(d)]) == 2
    assert "summary.json is unreadable" in capsys.readouterr().err


def test_a_short_baseline_is_named_beside_the_saving(plan_dir: Path, tmp_path: Path) -> None:
    d = tmp_path / "copy"
    shutil.copytree(plan_dir, d)
    s = json.loads((d / "summary.json").read_text())
    assert "baseline" in s and not s["baseline"]["diagnosis"]
    assert "practice baseline itself leaves" not in (d / "report.html").read_text()
    s["baseline"]["diagnosis"] = ["HP header short 13.17 t/h at most in hour 0 (2027-03-01 00:00)"]
    (d / "summary.json").write_text(json.dumps(s))
    assert main(["report", str(d)]) == 0
    html = (d / "report.html").read_text()
    assert "practice baseline itself leaves demand or the steam reserve unmet" in html
    assert "HP header short 13.17 t/h" in html
