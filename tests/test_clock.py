"""The site's clock: a series written with UTC offsets gets every output hour back as it
wrote it, with its own offset, across the autumn clock change (two hours read 02:00)."""

from __future__ import annotations

import json
from pathlib import Path

import pandas as pd
import pytest

from cogendispatch.cli import main
from cogendispatch.clock import as_utc, hour_label, read_clock, site_clock
from test_plan_small import TINY_TOML

# 31 October 2027, 00:00 to 05:00 in central Europe: summer time (+02:00) ends at 03:00,
# when the clocks go back to 02:00 (+01:00), so 02:00 comes twice (EU Directive 2000/84/EC:
# summer time ends at 01:00 UTC on the last Sunday of October)
STAMPS = ["2027-10-31T00:00+02:00", "2027-10-31T01:00+02:00", "2027-10-31T02:00+02:00",
          "2027-10-31T02:00+01:00", "2027-10-31T03:00+01:00", "2027-10-31T04:00+01:00"]
SERIES = ("time,demand:HP [t/h],demand:LP [t/h],load [MW],price:import [per MWh]\n"
          + "".join(f"{t},0,{20 + h},5,{50 + 5 * h}\n" for h, t in enumerate(STAMPS)))


@pytest.fixture(scope="module")
def plan_dir(tmp_path_factory: pytest.TempPathFactory) -> Path:
    d = tmp_path_factory.mktemp("clock")
    (d / "site.toml").write_text(TINY_TOML)
    (d / "s.csv").write_text(SERIES)
    assert main(["plan", str(d / "site.toml"), "--series", str(d / "s.csv"), "--out", str(d / "out"), "--quiet"]) == 0
    return d / "out"


def test_site_clock_keeps_each_hours_offset() -> None:
    utc = pd.date_range("2027-10-30 22:00", periods=6, freq="h", tz="UTC")
    wall = pd.DatetimeIndex(["2027-10-31 00:00", "2027-10-31 01:00", "2027-10-31 02:00", "2027-10-31 02:00",
                             "2027-10-31 03:00", "2027-10-31 04:00"])
    got = site_clock(utc, wall)
    assert [t.isoformat() for t in got] == [pd.Timestamp(s).isoformat() for s in STAMPS]
    assert (as_utc(read_clock([str(t) for t in got])) == utc).all()
    # one offset all through: a plain DatetimeIndex in that zone
    one = site_clock(utc[:2], wall[:2])
    assert isinstance(one, pd.DatetimeIndex) and str(one[0]) == "2027-10-31 00:00:00+02:00"
    assert site_clock(utc, None) is utc
    # in messages the repeated hour is told apart by its offset
    assert [hour_label(got[i]) for i in (2, 3)] == ["2027-10-31 02:00+02:00", "2027-10-31 02:00+01:00"]
    assert hour_label(pd.Timestamp("2027-10-31 02:00")) == "2027-10-31 02:00"


def test_plan_files_give_the_hours_as_the_series_wrote_them(plan_dir: Path, capsys: pytest.CaptureFixture[str]) -> None:
    want = [str(pd.Timestamp(s)) for s in STAMPS]
    for name in ("schedule.csv", "costs.csv", "verify.csv"):
        assert pd.read_csv(plan_dir / name)["time"].tolist() == want, name
    for name in ("balances.csv", "power.csv", "prices.csv"):
        assert pd.read_csv(plan_dir / name)["time"].drop_duplicates().tolist() == want, name
    s = json.loads((plan_dir / "summary.json").read_text())
    assert s["first_hour"] == "2027-10-31 00:00:00+02:00"  # not 2027-10-30 22:00 UTC, the day before
    # the re-check reads the folder back and keeps the clock
    assert main(["verify", str(plan_dir)]) == 0
    assert pd.read_csv(plan_dir / "verify.csv")["time"].tolist() == want


def test_workbook_and_page_show_the_wall_clock(plan_dir: Path) -> None:
    sched = pd.read_excel(plan_dir / "plan.xlsx", sheet_name="schedule")
    assert [f"{t:%H:%M}" for t in sched["time"]] == ["00:00", "01:00", "02:00", "02:00", "03:00", "04:00"]
    assert sched["utc_offset"].tolist() == ["UTC+02:00"] * 3 + ["UTC+01:00"] * 3
    html = (plan_dir / "report.html").read_text()
    assert "from 2027-10-31 00:00:00+02:00" in html


def test_advice_takes_the_wall_clock_and_asks_which_repeated_hour(plan_dir: Path,
                                                                 capsys: pytest.CaptureFixture[str]) -> None:
    d = plan_dir.parent
    args = ["advise", str(d / "site.toml"), "--series", str(d / "s.csv"), "--plan", str(plan_dir), "--json"]
    assert main([*args, "--at", "2027-10-31T04:00"]) == 0
    assert json.loads(capsys.readouterr().out)["time"] == "2027-10-31 04:00:00+01:00"
    assert main([*args, "--at", "2027-10-31T02:00"]) == 2
    err = capsys.readouterr().err
    assert "comes twice" in err and "2027-10-31T02:00:00+02:00" in err and "2027-10-31T02:00:00+01:00" in err
    # an hour without a date: the example and the span are the site's (00:00+02:00 is
    # 22:00 UTC the day before)
    assert main([*args, "--at", "10:00"]) == 2
    err = capsys.readouterr().err
    assert "'2027-10-31T10:00'" in err and "runs 2027-10-31 00:00+02:00 to 2027-10-31 04:00+01:00" in err, err
    # the same instant written in the other offset is the same hour
    assert main([*args, "--at", "2027-10-31T03:00+02:00"]) == 0
    assert json.loads(capsys.readouterr().out)["time"] == "2027-10-31 02:00:00+01:00"


def test_clock_change_mistakes_are_named() -> None:
    """A series exported without offsets repeats 02:00 on the autumn night: refused with a
    hint at the clock change. With offsets, --at at an hour the spring clocks skip says so,
    and --at with the other season's offset is read as the same instant, with a note."""
    from cogendispatch.decisions import hour_index
    from cogendispatch.errors import InputError
    from cogendispatch.plant.series import parse_series
    from tiny import site

    cfg = site()

    def frame(times: list[str]) -> pd.DataFrame:
        return pd.DataFrame({"time": times, "demand:HP [t/h]": "0", "demand:LP [t/h]": "20", "load [MW]": "5",
                             "price:import [per MWh]": "100"})

    naive = [s[:16] for s in STAMPS]  # local time, offsets dropped: 02:00 twice
    with pytest.raises(InputError, match="duplicated hour 2027-10-31T02:00; the clocks going back"):
        parse_series(frame(naive), cfg, "<naive>")
    # spring, 28 March 2027: 01:00+01:00 is followed by 03:00+02:00
    spring = parse_series(frame(["2027-03-28T00:00+01:00", "2027-03-28T01:00+01:00", "2027-03-28T03:00+02:00",
                                 "2027-03-28T04:00+02:00"]), cfg, "<spring>")
    with pytest.raises(InputError, match="the clocks skip it"):
        hour_index(spring, "2027-03-28T02:00", "<spring>")
    assert hour_index(spring, "2027-03-28T04:00", "<spring>") == 3


def test_advice_at_with_the_other_seasons_offset_says_which_hour(plan_dir: Path,
                                                                  capsys: pytest.CaptureFixture[str]) -> None:
    d = plan_dir.parent
    assert main(["advise", str(d / "site.toml"), "--series", str(d / "s.csv"), "--plan", str(plan_dir), "--json",
                 "--at", "2027-10-31T05:00+02:00"]) == 0
    got = json.loads(capsys.readouterr().out)
    assert got["time"] == "2027-10-31 04:00:00+01:00"
    assert any("is 2027-10-31 04:00+01:00 as the series writes it" in n for n in got["notes"]), got["notes"]


def test_report_time_axis_marks_the_sites_midnights_across_the_clock_change() -> None:
    from cogendispatch.report.plots import time_ticks

    utc = pd.date_range("2027-10-29 22:00", periods=72, freq="h", tz="UTC")  # 30 Oct 00:00+02:00 on
    wall = pd.DatetimeIndex([t.tz_convert("Europe/Berlin").tz_localize(None) for t in utc])
    ticks, labels = time_ticks(site_clock(utc, wall))
    # 31 October has 25 hours: its midnight is row 24, 1 November's row 49
    assert ticks == [0, 24, 49] and labels == ["Sat 30 Oct", "Sun 31 Oct", "Mon 01 Nov"]
    # a day of the demo kind, no offsets: every three hours from midnight
    ticks, labels = time_ticks(pd.date_range("2027-01-04", periods=24, freq="h"))
    assert ticks == list(range(0, 24, 3)) and labels[1] == "04 Jan 03:00"
