"""The weekly plan: load the site and series, build, solve, collect and write the outputs."""

from __future__ import annotations

import time
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

from .outputs import atomic_dir, check_out_dir, write_csv, write_json
from .plant.load import load_site
from .plant.schema import SiteConfig
from .plant.series import Series, load_series
from .results import PlanResults, plan_results
from .site import BuildOptions, SiteModel, build_site_model
from .solve import SolveOptions, SolveReport, solve

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


def summary_dict(run_report: SolveReport, res: PlanResults, cfg: SiteConfig, series: Series,
                 site_path: str, series_path: str) -> dict[str, object]:
    """The ``summary.json`` content."""
    t = res.totals
    return {
        "status": run_report.status,
        "feasible": res.feasible,
        "objective": run_report.objective,
        "bound": run_report.bound,
        "gap": run_report.gap,
        "start_objective": run_report.start_objective,
        "currency": cfg.site.currency,
        "cost": t["cost"],
        "cost_total": float(sum(t["cost"].values())),
        "fuel_GJ": t["fuel_GJ"],
        "fuel_total_GJ": t["fuel_total_GJ"],
        "import_MWh": t["import_MWh"],
        "export_MWh": t["export_MWh"],
        "co2_t": t["co2_t"],
        "boiler_starts": t["boiler_starts"],
        "running_hours": t["running_hours"],
        "drive_hours": t["drive_hours"],
        "diagnosis": res.diagnosis,
        "seconds": run_report.seconds,
        "hours": series.hours,
        "first_hour": str(series.time[0]),
        "site": str(Path(site_path).resolve()),
        "series": str(Path(series_path).resolve()),
        "site_name": cfg.site.name,
        "note": SAFETY_NOTE,
    }


def run_plan(site_path: str | Path, series_path: str | Path, out: str | Path | None = None,
             solve_options: SolveOptions = SolveOptions(), build_options: BuildOptions = BuildOptions(),
             progress: Callable[[str], None] | None = None) -> PlanRun:
    """Plan the hours of ``series_path`` for the site ``site_path`` and write ``out``.

    Raises InputError for bad input (before anything is written) and SolveError when the
    solver finds no schedule at all.
    """
    say = progress or (lambda msg: None)
    if out is not None:
        check_out_dir(Path(out).resolve())
    t0 = time.perf_counter()
    cfg = load_site(site_path)
    series = load_series(series_path, cfg)
    read_s = time.perf_counter() - t0
    say(f"read the site and {series.hours} hours of series in {read_s:.2f} s; building the model")
    sm = build_site_model(cfg, series, build_options)
    say(f"model built in {sm.build_seconds:.2f} s")
    rep = solve(sm, solve_options, progress=say)
    rep.seconds["read"] = read_s
    say(f"{rep.status}: cost {rep.objective:,.0f}, gap {100 * rep.gap:.3f} %")
    res = plan_results(sm)
    summary = summary_dict(rep, res, cfg, series, str(site_path), str(series_path))
    run = PlanRun(cfg, series, sm, rep, res, summary)
    if out is not None:
        atomic_dir(out, lambda d: write_plan_files(run, d))
        say(f"wrote {Path(out)}")
    return run


def write_plan_files(run: PlanRun, d: Path) -> None:
    """Write every plan output into folder ``d``."""
    res = run.results
    write_csv(res.schedule, d / "schedule.csv")
    write_csv(res.balances, d / "balances.csv", index=False)
    write_csv(res.power, d / "power.csv", index=False)
    write_csv(res.hourly_cost, d / "costs.csv")
    write_json(run.summary, d / "summary.json")
