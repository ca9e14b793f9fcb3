"""The weekly plan: load the site and series, build, solve, collect and write the outputs."""

from __future__ import annotations

import time
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

import pandas as pd

from .baseline import NoBaselineError, practice_baseline, savings
from .clock import read_clock
from .errors import SolveError
from .outputs import as_written, atomic_dir, check_out_dir, output_kind, with_money_units, write_csv, write_json
from .plant.load import load_site
from .plant.schema import SiteConfig
from .plant.series import Series, load_series
from .prices import hourly_prices
from .report import write_reports
from .results import PlanResults, end_stops, plan_results, start_stops
from .site import BuildOptions, SiteModel, build_site_model
from .solve import SolveOptions, SolveReport, solve_loaded
from .verify import MOISTURE_LIMIT, Verification, verify_schedule

SAFETY_NOTE = ("Advice only: cogendispatch does not operate the plant. Equipment limits, protection "
               "systems, local codes and licensed engineering judgment always prevail over this schedule.")


@dataclass
class PlanRun:
    cfg: SiteConfig
    series: Series
    model: SiteModel
    report: SolveReport
    results: PlanResults
    summary: dict[str, object]
    verification: Verification | None = None
    units: str = "si"  # report units: "si" or "us"
    prices: pd.DataFrame | None = None  # hourly marginal prices (prices.hourly_prices)


def summary_dict(run_report: SolveReport, res: PlanResults, cfg: SiteConfig, series: Series,
                 site_path: str, series_path: str, reserve: bool | None = None) -> dict[str, object]:
    """The ``summary.json`` content; ``reserve`` is the run's override of the site file's
    reserve setting (``BuildOptions.reserve``, False for --no-reserve)."""
    t = res.totals
    return {
        "status": run_report.status,
        "feasible": res.feasible,
        "objective": run_report.objective,
        "bound": run_report.bound,
        "gap": run_report.gap,
        "start_objective": run_report.start_objective,
        "found_by": run_report.found_by,
        "settle_change": run_report.settle_change,
        "solver_notes": run_report.notes,
        "currency": cfg.site.currency,
        "cost": t["cost"],
        "cost_total": float(sum(t["cost"].values())),
        "fuel_GJ": t["fuel_GJ"],
        "fuel_total_GJ": t["fuel_total_GJ"],
        "import_MWh": t["import_MWh"],
        "export_MWh": t["export_MWh"],
        "co2_t": t["co2_t"],
        "boiler_starts": t["boiler_starts"],
        "starts": t["starts"],
        "running_hours": t["running_hours"],
        "drive_hours": t["drive_hours"],
        "diagnosis": res.diagnosis,
        # the one-boiler-trip reserve the schedule keeps (site file's [reserve], unless the
        # run overrode it)
        "reserve": {"enabled": cfg.reserve.enabled if reserve is None else reserve, "cover": cfg.reserve.cover,
                    "set_by": "site file" if reserve is None else "command line"},
        "end_stops": end_stops(cfg, res.schedule),
        "start_stops": start_stops(cfg, res.schedule),
        "seconds": run_report.seconds,
        "hours": series.hours,
        "first_hour": str(series.stamps[0]),
        "site": str(Path(site_path).resolve()),
        "series": str(Path(series_path).resolve()),
        "site_name": cfg.site.name,
        "note": SAFETY_NOTE,
    }


def file_digest(path: str | Path) -> str | None:
    """SHA-256 of a file's bytes, hex (None when it cannot be read)."""
    import hashlib

    try:
        return hashlib.sha256(Path(path).read_bytes()).hexdigest()
    except OSError:
        return None


def run_plan(site_path: str | Path, series_path: str | Path, out: str | Path | None = None,
             solve_options: SolveOptions = SolveOptions(), build_options: BuildOptions = BuildOptions(),
             progress: Callable[[str], None] | None = None, moisture_limit: float = MOISTURE_LIMIT,
             units: str = "si", on_note: Callable[[str], None] | None = None) -> PlanRun:
    """Plan the hours of ``series_path`` for the site ``site_path`` and write ``out``.

    Raises InputError for bad input (before anything is written) and SolveError when the
    solver finds no schedule at all. ``on_note`` gets each note on the series' values
    (:meth:`Series.notes`) as soon as it is read.
    """
    say = progress or (lambda msg: None)
    if out is not None:
        check_out_dir(Path(out).resolve())
    t0 = time.perf_counter()
    cfg = load_site(site_path)
    series = load_series(series_path, cfg)
    for note in series.notes():  # said before the solve: a unit mistaken is worth a look first
        (on_note or say)(note)
    read_s = time.perf_counter() - t0
    say(f"read the site and {series.hours} hours of series in {read_s:.2f} s; building the model")
    sm = build_site_model(cfg, series, build_options)
    say(f"model built in {sm.build_seconds:.2f} s")
    lm, rep = solve_loaded(sm, solve_options, progress=say)
    rep.seconds["read"] = read_s
    say(f"{rep.status}: cost {rep.objective:,.0f}, gap {100 * rep.gap:.3f} %")
    for note in rep.notes:  # said even with --quiet: the run went otherwise than it should
        (on_note or say)(note)
    res = plan_results(sm)
    say("pricing steam and power hour by hour (the LP around the schedule)")
    t1 = time.perf_counter()
    prices = hourly_prices(lm, lm.schedule) if lm.schedule is not None else None
    rep.seconds["prices"] = time.perf_counter() - t1
    say("re-checking the schedule with IAPWS-IF97 physics")
    # the schedule as schedule.csv will hold it: `cogen verify` on the folder then finds
    # the same figures to the last digit instead of rewriting them with 1e-10 changes
    ver = verify_schedule(cfg, series, as_written(res.schedule), moisture_limit)
    summary = summary_dict(rep, res, cfg, series, str(site_path), str(series_path),
                           build_options.reserve if build_options is not None else None)
    summary["verify"] = ver.summary()
    summary["series_notes"] = series.notes()  # values most likely in a wrong unit (Series.notes)
    summary["units"] = units  # of report.html, kept for `cogen report` to rebuild it alike
    # what the files held when planned: advice on a file changed since says so
    summary["site_sha256"], summary["series_sha256"] = file_digest(site_path), file_digest(series_path)
    say(f"verification: {ver.verdict}")
    say("pricing the practice baseline (merit-order boilers, fixed turbine throttles, normal drivers)")
    try:
        base = practice_baseline(cfg, series, build_options, time_limit=solve_options.time_limit)
    except (NoBaselineError, SolveError) as e:  # the plan stands without its comparison
        summary["baseline_note"] = f"no practice baseline: {e}"
        say(summary["baseline_note"])
    else:
        summary["baseline"] = {"cost": base.cost, "cost_total": base.total, "diagnosis": base.results.diagnosis,
                               "saving": savings(res.totals["cost"], base.cost)}
    run = PlanRun(cfg, series, sm, rep, res, summary, ver, units, prices)
    if out is not None:
        atomic_dir(out, lambda d: write_plan_files(run, d))
        say(f"wrote {Path(out)}")
    return run


def verify_plan_dir(out: str | Path, moisture_limit: float = MOISTURE_LIMIT) -> Verification:
    """Re-run the IAPWS-IF97 check on a plan folder and update its verify files and summary."""
    import json

    import pandas as pd

    from .errors import InputError

    d = Path(out)
    if not d.is_dir():
        raise InputError(d, "", "folder not found" if not d.exists() else "is a file, not a plan folder")
    kind = output_kind(d)
    if kind is None:
        what = "unreadable" if (d / "summary.json").exists() else "not a plan folder (no summary.json)"
        raise InputError(d, "", what)
    if kind != "plan":
        raise InputError(d, "", f"holds {kind} results; verify re-checks a plan folder's schedule")
    summary = json.loads((d / "summary.json").read_text(encoding="utf-8"))
    try:
        site, series_path = summary["site"], summary["series"]
    except KeyError:
        raise InputError(d / "summary.json", "site/series", "without the site and series paths") from None
    cfg = load_site(site)
    series = load_series(series_path, cfg)
    try:
        # each number exactly as written, so the re-check meets the plan's own check of the
        # same digits (as_written); pandas 3 does so by default and deprecates the option
        exact = {"float_precision": "round_trip"} if int(pd.__version__.split(".")[0]) < 3 else {}
        sched = pd.read_csv(d / "schedule.csv", index_col="time", **exact)
        sched.index = read_clock(sched.index)
    except (FileNotFoundError, ValueError) as exc:
        raise InputError(d / "schedule.csv", "", f"cannot read the schedule ({exc})") from None
    if len(sched) != series.hours:
        raise InputError(d / "schedule.csv", "", f"{len(sched)} rows but the series has {series.hours} hours")
    try:
        ver = verify_schedule(cfg, series, sched, moisture_limit)
    except KeyError as exc:
        raise InputError(d / "schedule.csv", "", f"has no column {exc.args[0]!r}: the site file {site} no longer "
                         "matches this plan (a unit renamed or added since?); plan again") from None
    summary["verify"] = ver.summary()

    # all three written first, then swapped in: a failed write leaves the old set whole
    writes: dict[str, Callable[[Path], None]] = {
        "verify.csv": lambda p: write_csv(ver.hourly, p),
        "verify_sections.csv": lambda p: write_csv(ver.sections, p, index=False),
        "summary.json": lambda p: write_json(summary, p)}
    tmps = {name: d / f".{name}.tmp" for name in writes}
    try:
        for name, write in writes.items():
            write(tmps[name])
    except BaseException:
        for tmp in tmps.values():
            tmp.unlink(missing_ok=True)
        raise
    for name, tmp in tmps.items():
        tmp.replace(d / name)
    return ver


def write_plan_files(run: PlanRun, d: Path) -> None:
    """Write every plan output into folder ``d``."""
    res = run.results
    write_csv(res.schedule, d / "schedule.csv")
    write_csv(res.balances, d / "balances.csv", index=False)
    write_csv(res.power, d / "power.csv", index=False)
    cur = str(run.summary.get("currency", ""))
    write_csv(with_money_units(res.hourly_cost, {c: cur for c in res.hourly_cost.columns}), d / "costs.csv")
    if run.verification is not None:
        write_csv(run.verification.hourly, d / "verify.csv")
        write_csv(run.verification.sections, d / "verify_sections.csv", index=False)
    if run.prices is not None:
        write_csv(run.prices, d / "prices.csv", index=False)
    write_json(run.summary, d / "summary.json")
    write_reports(d, run.units)
