"""Command line: ``cogen inspect``, ``cogen plan`` and ``cogen advise``.

Exit codes: 0 done; 2 bad input (file, field or row named); 3 a schedule was written but
some demand could not be met (the diagnosis says where and when); 4 the solver found no
schedule; 130 interrupted.
"""

from __future__ import annotations

import argparse
import json
import os
import sys
import textwrap
import time
from pathlib import Path
from typing import TYPE_CHECKING, Callable

import numpy as np
import pandas as pd
from rich.console import Console
from rich.markup import escape
from rich.text import Text
from rich.table import Table

from .clock import as_utc
from .errors import InputError, SolveError
from .outputs import atomic_dir, json_text, with_money_units, write_csv, write_json
from .plan import SAFETY_NOTE, run_plan
from .site import BuildOptions
from .solve import SolveOptions
from .steam import SteamPropertyError
from .studies import COLD_MIN, NEW_MODEL_MIN
from .verify import MOISTURE_LIMIT

if TYPE_CHECKING:
    from .decisions import Advice, WhatIf

EXIT_OK, EXIT_INPUT, EXIT_SHORT, EXIT_SOLVER, EXIT_INTERRUPT = 0, 2, 3, 4, 130


class _Parser(argparse.ArgumentParser):
    def error(self, message: str) -> None:  # usage errors are bad input too: exit 2
        self.print_usage(sys.stderr)
        self.exit(EXIT_INPUT, f"{self.prog}: error: {message}\n")


def _positive(text: str) -> float:
    try:
        v = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"'{text}' is not a number") from None
    if not v > 0:
        raise argparse.ArgumentTypeError(f"'{text}' must be positive")
    return v


def _fraction(what: str, one_allowed: bool, hint: str) -> Callable[[str], float]:
    """An option type for a fraction above 0 and below 1 (or at most 1)."""

    def parse(text: str) -> float:
        v = _positive(text)
        if v > 1 or (v == 1 and not one_allowed):
            raise argparse.ArgumentTypeError(f"'{text}' is not {what}: give a fraction {hint}")
        return v

    return parse


_gap = _fraction("a relative gap", False, "below 1 (0.001 is 0.1 %)")
_quality = _fraction("a steam quality", True, "of at most 1")  # dryness fraction


def _count(text: str) -> int:
    """A whole number of at least 1 (threads, workers)."""
    try:
        v = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"'{text}' is not a whole number") from None
    if v < 1:
        raise argparse.ArgumentTypeError(f"'{text}' must be 1 or more")
    return v


def _units_option(p: argparse.ArgumentParser, prints_fuel: bool = True, remembered: bool = False) -> None:
    what = "report.html and of the fuel total printed here" if prints_fuel else "report.html"
    p.add_argument("--units", choices=["si", "us"], default=None if remembered else "si",
                   help=f"units of {what}: t/h and GJ, or klb/h and MMBtu (the CSV, JSON and workbook files "
                        "and the messages stay in t/h and GJ)"
                        + ("; default: the units the plan or study was run with" if remembered else ""))


def _site_and_series(p: argparse.ArgumentParser, series_help: str) -> None:
    p.add_argument("site", help="site file (TOML)")
    p.add_argument("--series", required=True, help=series_help)


def _version() -> str:
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version("cogendispatch")
    except PackageNotFoundError:  # run from the source tree without installing
        return "(not installed)"


def build_parser() -> argparse.ArgumentParser:
    """The ``cogen`` argument parser with its six commands; usage errors exit with code 2."""
    p = _Parser(prog="cogen", description="Cogeneration dispatch optimiser for industrial steam and power "
                "plants. " + SAFETY_NOTE)
    p.add_argument("--version", action="version", version=f"cogen {_version()}")
    sub = p.add_subparsers(dest="command", required=True, parser_class=_Parser)

    ins = sub.add_parser("inspect", help="validate a site file and print the linear coefficients it yields",
                         description="Validate a site file and print header states and each unit's linear "
                         "coefficients (fuel per tonne, turbine kW per t/h and steam rates, drive steam "
                         "rates, letdown water ratios, deaerator steam ratio, condenser heat per t/h of exhaust) and the fuels and grid limits as read.")
    ins.add_argument("site", help="site file (TOML)")
    ins.add_argument("--csv", metavar="DIR", help="also write each table as CSV into the folder DIR (created, or replaced if an earlier inspect wrote it)")
    ins.add_argument("--units", choices=["si", "us"], default="si",
                     help="units of the tables printed: SI (t/h, bar(a), degC, kJ/kg, GJ) or US customary "
                          "(klb/h, psia, degF, Btu/lb, MMBtu, lb/kWh); the CSV files stay SI")

    pl = sub.add_parser("plan", help="lowest-cost hourly schedule for the hours of a series",
                        description="Plan every unit hour by hour for the hours in --series and write "
                        "schedule.csv, balances.csv, power.csv, costs.csv, prices.csv, verify.csv, verify_sections.csv, "
                        "summary.json, report.html and plan.xlsx into --out (whole or not at all).")
    _site_and_series(pl, "hourly demands and prices (CSV or Excel)")
    pl.add_argument("--out", required=True, help="output folder (created, or replaced if it holds an earlier plan "
                                                 "and nothing else)")
    pl.add_argument("--gap", type=_gap, default=1e-3, help="relative MIP gap to stop at (default %(default)g)")
    pl.add_argument("--time-limit", type=_positive, default=120.0,
                    help="time for the search [s] (default %(default)g); reading, building, the re-check, the "
                         "baseline and the report come on top, and up to a quarter more (2 to 10 s) when the "
                         "schedule leaves demand or the reserve short; a limit too short for any schedule "
                         "(the LP relaxation alone takes seconds on a large site) is stretched until there "
                         "is one: the start's LP relaxation gets at least 60 s")
    pl.add_argument("--threads", type=_count, default=1,
                    help="threads for the solve (default 1); with 2 or more, one builds and improves "
                         "schedules beside HiGHS, which gets the rest: better results in the same time")
    pl.add_argument("--no-reserve", action="store_true", help="drop the one-boiler-trip steam reserve")
    pl.add_argument("--moisture-limit", type=_quality, default=MOISTURE_LIMIT,
                    help="lowest turbine exhaust quality accepted by the re-check (default %(default)g, common practice)")
    _units_option(pl)
    pl.add_argument("--quiet", action="store_true", help="no progress messages")
    pl.add_argument("--json", action="store_true", help="print summary.json to standard output")
    sd = sub.add_parser("study", help="a long horizon under price scenarios, rolling weekly windows",
                        description="Plan a long series (a year, or any length) under each scenario of a scenario "
                        "file, in weekly windows with a look-ahead, scenarios in parallel; write scenarios.csv, "
                        "monthly.csv, each scenario's hourly schedule as Parquet, report.html and study.xlsx "
                        "(whole or not at all). Example scenarios: plant_configs/saltmarsh_scenarios.toml.")
    _site_and_series(sd, "base hourly demands and prices (CSV or Excel)")
    sd.add_argument("--scenarios", required=True, help="scenario file (TOML)")
    sd.add_argument("--out", required=True, help="output folder")
    sd.add_argument("--window", type=int, default=168, help="hours kept per window (default %(default)d)")
    sd.add_argument("--lookahead", type=int, default=24, help="hours solved past each window and discarded (default %(default)d)")
    sd.add_argument("--gap", type=_gap, default=5e-3, help="relative MIP gap per window (default %(default)g)")
    sd.add_argument("--time-limit", type=_positive, default=1.5,
                    help="solver time per window [s] (default %(default)g); a window starts from the week before and "
                         "more time lets it improve further; a window with nothing to start from gets at "
                         f"least {COLD_MIN:g} s, one needing a newly built model at least {NEW_MODEL_MIN:g} s")
    sd.add_argument("--workers", type=_count, default=None, help="local worker processes (default: one per core)")
    sd.add_argument("--cluster", metavar="ADDRESS", help="send the scenarios to this Dask scheduler instead")
    sd.add_argument("--no-reserve", action="store_true", help="drop the one-boiler-trip steam reserve")
    _units_option(sd, prints_fuel=False)
    sd.add_argument("--quiet", action="store_true", help="no progress bars")
    sd.add_argument("--json", action="store_true", help="print the scenario table as JSON to standard output")
    rp = sub.add_parser("report", help="rebuild report.html and the Excel workbook of a plan or study folder",
                        description="Rebuild report.html and plan.xlsx or study.xlsx from the files of a plan or "
                        "study folder.")
    rp.add_argument("dir", help="a folder written by cogen plan or cogen study")
    _units_option(rp, prints_fuel=False, remembered=True)
    ve = sub.add_parser("verify", help="re-check a plan's schedule with full IAPWS-IF97 physics",
                        description="Re-evaluate every hour of a plan folder's schedule with IAPWS-IF97: turbine "
                        "sections along the actual expansion line, desuperheater and deaerator water from energy "
                        "balances, boiler fuel from the efficiency curve. Writes verify.csv and "
                        "verify_sections.csv and updates summary.json (plan runs this itself).")
    ve.add_argument("dir", help="a folder written by cogen plan")
    ve.add_argument("--moisture-limit", type=_quality, default=MOISTURE_LIMIT,
                    help="lowest exhaust quality accepted (default %(default)g, common practice)")
    ad = sub.add_parser("advise", help="one hour: marginal steam prices, turbine-versus-motor table, what-if",
                        description="Advice for one hour: the marginal cost of steam in each header and of power, "
                        "and for every machine with both drivers the cost of the hour on steam and on motor, the "
                        "saving and the import price at which the answer flips. What-if options re-solve the hour "
                        "with the change and say what moved.")
    _site_and_series(ad, "hourly demands and prices (CSV or Excel)")
    ad.add_argument("--at", required=True, help="the hour, as written in the series' time column (with UTC offsets there, the wall-clock time alone will do but for the hour that comes twice when the clocks go back)")
    ad.add_argument("--plan", metavar="DIR", help="hold the on/off states of this plan's schedule.csv")
    ad.add_argument("--force", action="append", default=[], metavar="MACHINE=steam|motor",
                    help="what if this machine ran on its steam turbine or on its motor (repeatable)")
    ad.add_argument("--trip", action="append", default=[], metavar="UNIT",
                    help="a boiler or turbo-generator out (repeatable)")
    ad.add_argument("--price", action="append", default=[], metavar="WHAT=VALUE",
                    help="import=, export= [per MWh] or fuel:ID= [per GJ]; or with a unit, e.g. 'fuel:NG=4 per MMBtu' "
                         "(repeatable, once per price)")
    ad.add_argument("--demand", action="append", default=[], metavar="HEADER=+-T_H",
                    help="change a header's process demand [t/h], or with a unit, e.g. 'LP=+20 klb/h' "
                         "(repeatable, once per header)")
    ad.add_argument("--allow-starts", action="store_true",
                    help="let a what-if start a stopped boiler or turbo-generator, its whole start-up cost "
                         "charged to the hour (by default every unit keeps its on/off state)")
    ad.add_argument("--allow-stops", action="store_true",
                    help="let a what-if stop a running boiler or turbo-generator for the hour (its minimum up "
                         "time and what the stop means for the hours after are not weighed)")
    ad.add_argument("--keep-drivers", action="store_true",
                    help="with --plan: hold every machine's driver as the plan has it in the hour (by default the "
                         "hour re-chooses the drivers the minimum time between changes allows); a row of the "
                         "driver table or a --force frees its own machine")
    ad.add_argument("--no-reserve", action="store_true", help="drop the one-boiler-trip steam reserve")
    ad.add_argument("--threads", type=_count, default=min(2, os.cpu_count() or 1),
                    help="machines of the driver table searched side by side, each re-solve on one thread "
                         "(default 2, or 1 on a one-core machine)")
    ad.add_argument("--out", help="also write advice.json, prices.csv, drivers.csv and summary.json here")
    ad.add_argument("--json", action="store_true", help="print advice.json to standard output")
    return p


def _pairs(items: list[str], flag: str) -> list[tuple[str, str]]:
    """KEY=VALUE options; a key given twice is refused rather than one value silently kept."""
    out: list[tuple[str, str]] = []
    for it in items:
        k, sep, v = it.partition("=")
        if not sep or not k or not v:
            raise InputError(None, flag, f"'{it}' is not KEY=VALUE")
        if any(k.strip() == seen for seen, _ in out):
            raise InputError(None, flag, f"'{k.strip()}' is given twice; give each once")
        out.append((k.strip(), v.strip()))
    return out


def _number(v: str, flag: str) -> float:
    try:
        x = float(v)
    except ValueError:
        raise InputError(None, flag, f"'{v}' is not a number") from None
    if x != x or x in (float("inf"), float("-inf")):
        raise InputError(None, flag, f"'{v}' is not a finite number")
    return x


def _amount(v: str, flag: str, kind: str, currency: str = "") -> float:
    """A plain number in the internal unit of ``kind``, or a number with its own unit
    ('4 per MMBtu', '+20 klb/h', '180 EUR/MWh' in the site's ``currency``), converted."""
    from .units import UnitError, in_site_currency, parse_quantity

    try:
        return _number(v, flag)
    except InputError:
        if not any(c.isalpha() for c in v):
            raise
    try:
        if currency:
            v = in_site_currency(v, currency)
        return parse_quantity(v, kind)
    except UnitError as e:
        raise InputError(None, flag, str(e)) from None


def what_if_from_args(args: argparse.Namespace, currency: str = "") -> "WhatIf":
    """The what-if of ``cogen advise`` from its ``--force``/``--trip``/price/demand options."""
    from .decisions import WhatIf

    twice = sorted({u for u in args.trip if args.trip.count(u) > 1})
    if twice:
        raise InputError(None, "--trip", f"'{twice[0]}' is given twice; give each once")
    w = WhatIf(force=dict(_pairs(args.force, "--force")), trip=list(args.trip))
    for k, v in _pairs(args.price, "--price"):
        if k == "import":
            w.price_import = _amount(v, "--price", "price_power", currency)
        elif k == "export":
            w.price_export = _amount(v, "--price", "price_power", currency)
        elif k.startswith("fuel:"):
            w.fuel_price[k[5:]] = _amount(v, "--price", "price_energy", currency)
        else:
            raise InputError(None, "--price", f"'{k}' is not import, export or fuel:<id>")
    for k, v in _pairs(args.demand, "--demand"):
        if not v.strip().startswith(("+", "-")):  # 'LP=5' reads as 'set LP to 5' as easily
            raise InputError(None, "--demand", f"'{k}={v}': give the change with its sign, e.g. '{k}=+{v.strip()}' "
                             f"or '{k}=-{v.strip()}'")
        w.demand[k] = _amount(v, "--demand", "mass_flow")
    return w


def dispatch_line(d: dict[str, dict[str, float]]) -> str:
    """The hour's dispatch in one line: boilers, turbo-generators, grid, machines on steam."""
    parts = [", ".join(f"{k} {v:.1f} t/h" for k, v in d["boilers_t_h"].items() if v > 0.05) or "no boiler",
             ", ".join(f"{k} {v:.2f} MW" for k, v in d["turbogenerators_MW"].items() if v > 0.005) or "no generation",
             f"import {d['grid_MW']['import']:.2f} MW" + (f", export {d['grid_MW']['export']:.2f} MW"
                                                          if d["grid_MW"]["export"] > 0.005 else ""),
             "on steam: " + (", ".join(f"{k} {v:g}" for k, v in d["machines_on_steam"].items() if v) or "none")]
    return "; ".join(parts)


def penalty_gap_line(s: dict, cur: str) -> str | None:
    """A line for a plan whose cost carries penalties: HiGHS's gap is of the whole
    objective, penalties and all, so against the money alone the same distance to the bound
    weighs more. None without penalties or gap."""
    pen = float(s["cost"].get("penalty", 0.0))
    money = s["objective"] - pen
    if pen <= 0.5 or s["gap"] <= 1e-9 or money <= 0:
        return None
    left = s["objective"] - s["bound"]
    return (f"the gap is of the cost with its penalties ({pen:,.0f} {cur} of them); against the money alone, "
            f"{money:,.0f} {cur}, the bound leaves up to {left:,.0f} {cur} ({100 * left / money:.1f} %)")


def advice_dict(a: "Advice", currency: str) -> dict[str, object]:
    """One hour's advice as the JSON object written to ``advice.json``."""
    return {
        "time": a.time, "currency": currency, "held_on": a.held, "cost": a.cost,
        "marginal_price": {"steam_per_t": a.prices, "power_per_MWh": a.power_price},
        # the part of each price the steam reserve makes (0 where the reserve does not bind)
        "reserve_part": {"steam_per_t": {h: a.reserve_part.get(h, 0.0) for h in a.prices},
                         "power_per_MWh": a.reserve_part.get("power", 0.0)},
        "reason": {**a.reasons, "power": a.power_reason},
        "dispatch": a.dispatch, "notes": a.notes,
        "drivers": a.drivers.to_dict(orient="records"), "what_if": a.what_if, "seconds": a.seconds,
        "note": SAFETY_NOTE,
    }


def _other_inputs(plan: Path, site: Path, series: Path) -> list[str]:
    """Notes when a plan folder was made from another site or series file than the advice
    is asked on, or from the same file since changed: its commitment may not fit the hour
    (a new forecast may be meant)."""
    from .plan import file_digest

    try:
        s = json.loads((plan / "summary.json").read_text())
    except (OSError, ValueError):
        return []  # advise reads the plan's schedule itself and says what is wrong with it
    if not isinstance(s, dict):
        return []
    out = []
    for key, given in (("site", site), ("series", series)):
        made = s.get(key)
        if made and Path(made).resolve() != given.resolve():
            out.append(f"the plan in {plan} was made from the {key} file {made}, not {given}; "
                       "its units' on/off states are held as planned")
        elif made and s.get(f"{key}_sha256") not in (None, file_digest(given)):
            out.append(f"the {key} file {given} has changed since the plan in {plan} was made from it; "
                       "the plan's on/off states are held as planned")
    return out


def cmd_advise(args: argparse.Namespace, out: Console, err: Console) -> int:
    """``cogen advise``: one hour held as running, re-optimised; returns the exit code."""
    from .decisions import advise
    from .outputs import check_out_dir
    from .plant.load import load_site
    from .plant.series import load_series

    if args.out:
        check_out_dir(Path(args.out).resolve(), "advice")
    cfg = load_site(args.site)
    series = load_series(args.series, cfg)
    for note in series.notes():
        err.print(Text(f"note: {note}"))
    w = what_if_from_args(args, cfg.site.currency)
    a = advise(cfg, series, args.at, args.series, args.plan, w,
               BuildOptions(reserve=False if args.no_reserve else None), allow_starts=args.allow_starts,
               keep_drivers=args.keep_drivers, allow_stops=args.allow_stops, threads=args.threads)
    # said once the hour is known to be in the plan, not before an error that it is not
    notes = _other_inputs(Path(args.plan), Path(args.site), Path(args.series)) if args.plan else []
    for note in notes + a.notes:
        err.print(Text(f"note: {note}"))
    d = advice_dict(a, cfg.site.currency)
    cur = cfg.site.currency
    if args.json:
        print(json_text(d))
    else:
        pr = pd.DataFrame([{"balance": h, "marginal price": v, "unit": f"{cur}/t",
                            "set by": a.reasons[h].split(": ", 1)[1]} for h, v in a.prices.items()]
                          + [{"balance": "power", "marginal price": a.power_price, "unit": f"{cur}/MWh",
                              "set by": a.power_reason.split(": ", 1)[1]}])
        # the prices and the driver table are the hour as given; the what-if is its own line
        given = " as given, before the what-if below" if a.what_if else ""
        _table(out, f"Marginal prices at {a.time} (hour cost {a.cost:,.0f} {cur}{given})", pr)
        out.print(Text("hour" + (" as given" if a.what_if else "") + ": " + dispatch_line(a.dispatch)))
        if not a.drivers.empty:
            # why a machine's drivers before the hour may be unknown
            unknown = ("unknown (give --plan)" if args.plan is None and a.time != str(series.stamps[0])
                       else "unknown (no driver before the first hour in the site file)")
            dt = a.drivers[["machine", "now_on_steam", "cost_on_steam", "cost_on_motor", "saving", "saving_vs_now",
                            "better", "flip_import_price", "marginal_estimate"]].copy()
            # a choice that leaves demand or the reserve short is priced by a penalty: marked
            # in the table, said in full under it (in the column it made the table too wide)
            penalised: list[str] = []
            for i, r in a.drivers.iterrows():
                marks = [f"on {drv}, {what}" for drv in ("steam", "motor")
                         for what, hit in (("demand goes short", r[f"{drv}_leaves_short"]),
                                           ("steam or power is left that nothing can take", r[f"{drv}_leaves_surplus"]),
                                           (f"the reserve is {r[f'{drv}_reserve_short_t_h']:.1f} t/h short",
                                            r[f"{drv}_reserve_short_t_h"] > 1e-4)) if hit]
                if marks:
                    dt.loc[i, "better"] = f"{r['better']} *"
                    penalised.append(f"* {r['machine']}: {'; '.join(marks)} (the saving includes its penalty)")
                dt.loc[i, "change"] = _driver_change(r, unknown)
            # money per hour to a tenth, prices to a tenth: one precision a column
            for c in ("saving", "saving_vs_now", "flip_import_price", "marginal_estimate"):
                dt[c] = dt[c].astype(float).round(1)
            for c in ("cost_on_steam", "cost_on_motor"):
                dt[c] = dt[c].astype(float).round()
            dt.columns = ["machine", "machines on steam now", f"hour on steam [{cur}]", f"hour on motor [{cur}]",
                          f"saving [{cur}/h]", f"saving against now [{cur}/h]", "better",
                          f"flips at import [{cur}/MWh]", f"marginal estimate [{cur}/MWh]",
                          "driver change (minimum time between changes)"]
            dt = dt.astype(object)
            dt[f"flips at import [{cur}/MWh]"] = dt[f"flips at import [{cur}/MWh]"].where(
                dt[f"flips at import [{cur}/MWh]"].notna(), "none in range")
            dt[f"marginal estimate [{cur}/MWh]"] = dt[f"marginal estimate [{cur}/MWh]"].where(
                dt[f"marginal estimate [{cur}/MWh]"].notna(), "left out (a penalty sets a price)")
            _table(out, "Turbine or motor" + (" (hour as given)" if a.what_if else ""), dt)
            for line in penalised:
                out.print(Text(line))
            for note, machines in a.drivers.groupby("note", sort=False)["machine"]:
                if note:  # machines with the same note on one line
                    out.print(f"{', '.join(machines)}: {note}", highlight=False)
        if a.what_if:
            wi = a.what_if
            change = round(wi["change"]) + 0.0  # + 0.0: no "-0"
            out.print(Text(f"what-if: hour cost {wi['cost']:,.0f} {cur} ({change:+,.0f} against "
                           f"{wi['base_cost']:,.0f}); " + ("; ".join(wi["changes"]) or "nothing else changed")))
        out.print(f"advice in {a.seconds:.2f} s")
        out.print(f"[italic]{SAFETY_NOTE}[/italic]")
    if args.out:
        def write(dd: Path) -> None:
            write_json(d, dd / "advice.json")
            # the same long form as a plan's prices.csv (steam per header [per t], power [per
            # MWh], the reserve's part, set_by "cost" or the penalty), with the reason in words
            rows = [(h, v, f"{cur}/t", a.reasons[h]) for h, v in a.prices.items()]
            rows.append(("power", a.power_price, f"{cur}/MWh", a.power_reason))
            write_csv(pd.DataFrame([{"time": a.time, "balance": b, "price": v, "unit": u,
                                     "reserve_part": a.reserve_part.get(b, 0.0),
                                     "set_by": a.set_by[b], "reason": why.split(": ", 1)[-1]}
                                    for b, v, u, why in rows]), dd / "prices.csv", index=False)
            write_csv(with_money_units(a.drivers, {"cost_on_steam": cur, "cost_on_motor": cur, "saving": cur,
                                                   "cost_best": cur, "saving_vs_now": cur,
                                                   "flip_import_price": f"{cur}/MWh",
                                                   "marginal_estimate": f"{cur}/MWh"}),
                      dd / "drivers.csv", index=False)
            # marker so a later run may replace this folder
            write_json({"kind": "advice", "time": a.time}, dd / "summary.json")
        atomic_dir(args.out, write, "advice")
    if a.not_met:  # the hour as given: a header, the bus or the steam reserve short
        for r in a.not_met:
            err.print(f"[bold red]not met:[/bold red] {escape(r)}", highlight=False)
        return EXIT_SHORT
    return EXIT_OK


def _driver_change(r: pd.Series, unknown: str) -> str:
    """Whether the site's minimum time between driver changes allows the best number of
    machines on steam this hour, from the driver table's row ``r``; ``unknown`` when the
    drivers before the hour are not known."""
    before = r["on_steam_hour_before"]
    if before is None or before != before:  # NaN: no history before the hour
        return unknown
    target = before if r["better"] == "either" else r["best_on_steam"]
    if target == before or target == r.get("now_on_steam"):  # runs so already (the plan's hour)
        return "none needed"
    if r.get("best_allowed_now", None) is True:
        return "allowed"
    held = r["steam_blocked_h"] if target > before else r["motor_blocked_h"]
    return "allowed" if held <= 0 else f"not allowed for {held:.0f} h"


def cmd_study(args: argparse.Namespace, out: Console, err: Console) -> int:
    """``cogen study``: a long horizon under price scenarios, window by window; returns the exit code."""
    import re

    from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn, TimeRemainingColumn

    from .outputs import check_out_dir
    from .plan import file_digest
    from .plant.load import load_site
    from .plant.series import load_series
    from .results import end_stops
    from .studies import COLD_MIN, load_scenarios, run_study, summarise, window_gap_words

    if args.window < 1 or args.lookahead < 0:
        raise InputError(None, "--window", "the window must be at least 1 h and the look-ahead not negative")
    check_out_dir(Path(args.out).resolve(), "study")
    cfg = load_site(args.site)
    base = load_series(args.series, cfg)
    for note in base.notes():
        err.print(Text(f"note: {note}"))
    scen = load_scenarios(args.scenarios, cfg, base)
    for ps in scen:
        for note in ps.notes:
            err.print(Text(f"note: {note}"))
    build = BuildOptions(reserve=False if args.no_reserve else None)
    opts = SolveOptions(gap=args.gap, time_limit=args.time_limit)
    t0 = time.perf_counter()
    with Progress(TextColumn("{task.description}"), BarColumn(), TextColumn("{task.completed}/{task.total} windows"),
                  TimeElapsedColumn(), TimeRemainingColumn(), console=err, disable=args.quiet) as bar:
        n_win = -(-base.hours // args.window)
        tasks = {ps.name: bar.add_task(ps.name, total=n_win) for ps in scen}
        results = run_study(cfg, scen, opts, args.window, args.lookahead, build, args.workers, args.cluster,
                            lambda name, i, n: bar.update(tasks[name], completed=i * n_win // n))
    secs = time.perf_counter() - t0
    table = pd.concat([summarise(cfg, r) for r in results], ignore_index=True)
    monthly = pd.concat([summarise(cfg, r, by_month=True) for r in results], ignore_index=True)

    def slug(k: int, name: str) -> str:
        return f"{k + 1:02d}_" + (re.sub(r"[^A-Za-z0-9_.-]+", "_", name).strip("_.")[:40] or "scenario")

    cur = cfg.site.currency
    # the files name the currency in every money column, as in a plan's costs.csv
    money = {c: cur for c in table.columns if c.startswith("cost_")}
    table_out, monthly_out = with_money_units(table, money), with_money_units(monthly, money)

    def write(d: Path) -> None:
        write_csv(table_out, d / "scenarios.csv", index=False)
        write_csv(monthly_out, d / "monthly.csv", index=False)
        (d / "schedules").mkdir()
        for k, r in enumerate(results):
            sched = r.schedule
            if sched.index.dtype == object:  # offsets change in the year: Parquet holds one zone a column
                sched = sched.set_axis(as_utc(sched.index).rename("time"))
            sched.to_parquet(d / "schedules" / f"{slug(k, r.name)}.parquet")
        write_json({"kind": "study", "currency": cfg.site.currency, "site_name": cfg.site.name,
                    "first_hour": str(base.stamps[0]), "last_hour": str(base.stamps[-1]),
                    "site": str(Path(args.site).resolve()), "series": str(Path(args.series).resolve()),
                    "scenarios": str(Path(args.scenarios).resolve()), "seconds": secs, "units": args.units,
                    # what the figures were made from: a budget is traced to its files
                    "site_sha256": file_digest(args.site), "series_sha256": file_digest(args.series),
                    "scenarios_sha256": file_digest(args.scenarios),
                    "price_files": {ps.name: {"path": ps.price_file, "sha256": file_digest(ps.price_file)}
                                    for ps in scen if ps.price_file is not None},
                    "options": {"window_h": args.window, "lookahead_h": args.lookahead, "gap": args.gap,
                                "time_limit_s": args.time_limit, "first_window_min_s": COLD_MIN,
                                "reserve": "off (--no-reserve)" if args.no_reserve else "as the site file says"},
                    "windows": {r.name: [w.__dict__ for w in r.windows] for r in results},
                    # what was short, where and when, per scenario (as printed)
                    "diagnosis": {r.name: r.diagnosis for r in results},
                    "scenario_notes": {ps.name: list(ps.notes) for ps in scen if ps.notes},
                    "note": SAFETY_NOTE}, d / "summary.json")
        from .report import write_reports

        write_reports(d, args.units)

    atomic_dir(args.out, write, "study")
    if args.json:
        print(json_text({"currency": cur, "scenarios": table_out.to_dict(orient="records"),
                         "diagnosis": {r.name: r.diagnosis for r in results}}))
        return EXIT_SHORT if any(r.shortfall_hours for r in results) else EXIT_OK
    cols = [c for c in table.columns if c.startswith("cost_")] + ["fuel_GJ", "import_MWh", "export_MWh", "co2_t",
                                                                  "boiler_starts", "shortfall_hours"]
    comp = table.set_index("scenario")[cols].T
    first = comp.columns[0]
    for c in comp.columns[1:]:
        comp[f"{c} - {first}"] = comp[c] - comp[first]
    money_rows = [q for q in comp.index if q.startswith("cost_")]
    # money in whole currency units, as in the plan's table (+ 0.0: no "-0")
    comp.loc[money_rows] = comp.loc[money_rows].astype(float).round() + 0.0
    comp.insert(0, "quantity", [q.replace("cost_", f"cost [{cur}] ") for q in comp.index])
    _table(out, f"Scenarios over {base.hours} h ({secs:.0f} s)", comp.reset_index(drop=True).astype(object))
    gaps = ", ".join(f"{r.scenario} {window_gap_words(r)}" for _, r in table.iterrows())
    out.print(Text(f"largest gap of a window's search: {gaps}; cost differences smaller than "
                   "these are within the search's tolerance (give --time-limit more to narrow them)"))
    if args.time_limit < COLD_MIN:
        out.print(Text(f"each scenario's first window was given at least {COLD_MIN:g} s, not --time-limit "
                       f"{args.time_limit:g} s: with no week before it, it starts from its LP relaxation"))
    for r in results:
        for note in end_stops(cfg, r.schedule):
            out.print(Text(f"end of horizon, {r.name}: {note}"))
    out.print(f"outputs in {Path(args.out).resolve()}")
    out.print(f"[italic]{SAFETY_NOTE}[/italic]")
    short = [r.name for r in results if r.shortfall_hours]
    if short:
        for r in results:
            if r.shortfall_hours:
                err.print(Text(f"not met: scenario '{r.name}' has {r.shortfall_hours} hour(s) with a shortfall"))
                for line in r.diagnosis:
                    err.print(Text(f"  {r.name}: {line}"))
                open_ = [w for w in r.windows if w.status != "optimal"]
                if open_:  # as for a plan: a search stopped early may have left the shortfall
                    worst = max((w.gap for w in open_ if w.gap is not None), default=None)
                    err.print(Text(f"  {r.name}: {len(open_)} of {len(r.windows)} window(s) stopped before proving "
                                   "their schedule" + (f" (largest gap {100 * worst:.1f} %)" if worst is not None else "")
                                   + "; some of the shortfall may be the search's rather than the site's: "
                                   "try a longer --time-limit"))
        return EXIT_SHORT
    return EXIT_OK


def _fmt(x: object) -> str:
    if isinstance(x, float):
        if x != x:
            return ""
        x = x + 0.0  # no '-0'
        return f"{x:,.4g}" if abs(x) < 1000 else f"{x:,.0f}"
    return "" if x is None else str(x)


def _is_number(x: object) -> bool:
    return isinstance(x, (int, float, np.integer, np.floating)) and not isinstance(x, bool)


HEADING_LINES = 3  # most lines a table's column heading is broken into


def _table(console: Console, title: str, df: pd.DataFrame) -> None:
    """A table on the terminal, no cell ever cut or wrapped (a cut number reads as another
    number): when the columns do not fit the width they go into several tables, each
    repeating the first column. Before that, a table too wide for the terminal breaks its
    long headings (a scenario's name, say) over up to :data:`HEADING_LINES` lines, between
    words."""
    cells = [[_fmt(v) for v in df[c].tolist()] for c in df.columns]
    heads = [str(c) for c in df.columns]
    widths = [max(len(v) for v in [h, *col]) for h, col in zip(heads, cells)]
    if sum(w + 3 for w in widths) + 1 > console.width:  # too wide: headings on several lines first
        widths = [max([len(w) for w in h.split()] + [len(v) for v in col] + [-(-len(h) // HEADING_LINES)])
                  for h, col in zip(heads, cells)]
        for j, h in enumerate(heads):  # narrowest width that keeps the heading to its lines
            while len(textwrap.wrap(h, widths[j], break_long_words=False)) > HEADING_LINES:
                widths[j] += 1
        heads = ["\n".join(textwrap.wrap(h, w, break_long_words=False)) or h for h, w in zip(heads, widths)]
        widths = [max([w] + [len(line) for line in h.split("\n")]) for h, w in zip(heads, widths)]
    numeric = [pd.api.types.is_numeric_dtype(df[c]) or all(_is_number(v) or v is None for v in df[c].tolist())
               for c in df.columns]
    groups: list[list[int]] = [[]]
    used = widths[0] + 4 if widths else 0  # borders and padding: 3 a column, 1 at the end
    for j in range(1, len(widths)):
        if groups[-1] and used + widths[j] + 3 > console.width:
            groups.append([])
            used = widths[0] + 4
        groups[-1].append(j)
        used += widths[j] + 3
    for k, group in enumerate(groups):
        cols = [0, *group] if widths else []
        name = title if k == 0 else f"{title} (continued)"
        t = Table(title=Text(name), title_justify="left")
        for j in cols:
            t.add_column(Text(heads[j]), justify="right" if numeric[j] else "left", no_wrap=True,
                         min_width=widths[j])
        for i in range(len(df)):
            t.add_row(*[Text(cells[j][i]) for j in cols])
        console.print(t)


# the quantities of `cogen inspect` whose names do not say it all
_INSPECT_TERMS = {
    "header_t_per_t": "t/h that reach the header per t/h of exhaust: above 1, desuperheater water added to "
                      "bring a hotter exhaust to header temperature; below 1, a colder or wetter exhaust gives up "
                      "drain (README, 'Header balances')",
    "outlet_t_per_t": "t/h that leave the desuperheater per t/h through the valve (valve flow plus water)",
}


def cmd_inspect(args: argparse.Namespace, out: Console) -> int:
    """``cogen inspect``: validate a site and print its linear coefficients; returns the exit code."""
    from .coefficients import coefficient_tables
    from .plant.load import load_site
    from .us_columns import in_us_units

    cfg = load_site(args.site)
    tables = coefficient_tables(cfg)
    def n(count: int, noun: str) -> str:
        return f"{count} {noun}{'' if count == 1 else 's'}"

    out.print(f"[bold]{escape(cfg.site.name)}[/bold]: valid ({n(len(cfg.headers), 'header')}, "
              f"{n(len(cfg.boilers), 'boiler')}, {n(len(cfg.turbogenerators), 'turbo-generator')}, "
              f"{n(sum(d.count for d in cfg.drives), 'driven machine')})")
    explained: set[str] = set()
    for name, df in tables.items():
        if df.empty:
            continue
        if args.units == "us":
            df = in_us_units(df)
        if name in ("boilers",):
            _table(out, name, df)
        else:  # one column per unit, one row per quantity: fits a terminal
            key = df.columns[0]
            label = df[key].astype(str)
            if "turbine" in df and key != "turbine":  # a condenser's row per turbine exhausting into it
                label = label + df["turbine"].map(lambda v: f" {v}" if isinstance(v, str) else "")
            if "section" in df:
                label = label + df["section"].map(lambda v: f"/{int(v)}" if v == v and v is not None else "")
            wide = df.drop(columns=[key]).T
            wide.columns = label.tolist()
            wide.insert(0, "quantity", wide.index)
            _table(out, name, wide.reset_index(drop=True).astype(object))
        for col, meaning in _INSPECT_TERMS.items():
            if col in df and col not in explained:  # once, under the first table that has it
                explained.add(col)
                out.print(Text(f"  {col}: {meaning}"), style="dim")
    from .results import reserve_uncoverable
    if cfg.reserve.enabled and (never := reserve_uncoverable(cfg)):
        # said before any plan: every hour such a boiler runs that high shows the reserve short
        out.print(Text(f"note: with the steam reserve's cover of {cfg.reserve.cover:g}, the others can never cover "
                       + ", ".join(never) + "; plans show the reserve short whenever it runs higher (a lower "
                       "[reserve] cover, or --no-reserve, if the site accepts that risk)"))
    if args.csv:
        def write(tmp: Path) -> None:
            for name, df in tables.items():
                write_csv(df, tmp / f"{name}.csv", index=False)
            # the marker lets a later inspect replace this folder and nothing else
            write_json({"kind": "coefficients", "site": str(Path(args.site).resolve())}, tmp / "summary.json")

        atomic_dir(args.csv, write, kind="coefficients", option="--csv")
    return EXIT_OK


def cmd_plan(args: argparse.Namespace, out: Console, err: Console) -> int:
    """``cogen plan``: the weekly plan, written whole or not at all; returns the exit code (3: a header short)."""
    t0 = time.perf_counter()

    def progress(msg: str) -> None:
        if not args.quiet:
            err.print(f"[dim]{time.perf_counter() - t0:6.1f} s[/dim]  {escape(msg)}", highlight=False)

    cores = os.cpu_count() or 1
    if args.threads > cores:
        err.print(f"note: --threads {args.threads} is more than this machine's {cores} core(s); "
                  "the threads then share them")
    run = run_plan(args.site, args.series, args.out,
                   SolveOptions(gap=args.gap, time_limit=args.time_limit, threads=args.threads),
                   BuildOptions(reserve=False if args.no_reserve else None), progress, args.moisture_limit,
                   args.units, on_note=lambda note: err.print(Text(f"note: {note}")))
    s = run.summary
    if args.json:
        print(json_text(s))
    else:
        cur = s["currency"]
        # money in whole currency units: a vent's 0.04 beside 747,681 of fuel reads as noise
        cost = pd.DataFrame([{"category": k, f"cost [{cur}]": float(round(v))} for k, v in s["cost"].items()]
                            + [{"category": "total", f"cost [{cur}]": float(round(s["cost_total"]))}])
        _table(out, f"Cost over {s['hours']} h from {s['first_hour']}", cost)
        starts = s.get("starts", s["boiler_starts"])  # a summary written before turbo-generator starts were counted
        hrs = pd.DataFrame([{"unit": k, "running h": v, "starts": starts.get(k, "")}
                            for k, v in s["running_hours"].items()])
        _table(out, "Units", hrs)
        dh = pd.DataFrame([{"machine": k, "machine-h on steam": v["steam"], "machine-h on motor": v["motor"]}
                           for k, v in s["drive_hours"].items()])
        _table(out, "Drives", dh)
        sec = s["seconds"]
        from .report.html import Units
        u = Units(args.units)
        # HiGHS says "optimal" once within the gap asked; say which gap that was
        status = (f"optimal within the {100 * args.gap:g} % gap asked" if s["status"] == "optimal" and s["gap"] > 1e-9
                  else s["status"])
        out.print(f"status {status}, gap {100 * s['gap']:.3f} %, cost {s['objective']:,.0f} {cur}, "
                  f"bound {s['bound']:,.0f} {cur}; fuel {s['fuel_total_GJ'] * u.ke:,.0f} {u.energy}, "
                  f"import {s['import_MWh']:,.0f} MWh, export {s['export_MWh']:,.0f} MWh, CO2 {s['co2_t']:,.0f} t")
        if (line := penalty_gap_line(s, cur)) is not None:
            out.print(Text(line))
        out.print(f"time: build {sec['build']:.2f} s, load {sec['load']:.2f} s, start {sec['start']:.2f} s, "
                  f"solve {sec['solve']:.2f} s, total {sec['total']:.2f} s; schedule found by {s['found_by']}")
        if "baseline" in s:
            sv = s["baseline"]["saving"]
            bt = pd.DataFrame([{"category": k, f"practice [{cur}]": float(round(v["baseline"])),
                                f"optimised [{cur}]": float(round(v["optimised"])), f"saving [{cur}]": float(round(v["saving"])),
                                "saving [%]": "n/a" if v["saving_pct"] is None else round(v["saving_pct"], 1) + 0.0}
                               for k, v in sv.items()])
            _table(out, "Against the practice baseline", bt)
            if "total_without_penalty" in sv:
                out.print(Text("penalties price demand or reserve not met, not money: the money saved is "
                               f"total_without_penalty, {sv['total_without_penalty']['saving']:,.0f} {cur}"))
            if s["baseline"]["diagnosis"]:
                diag = s["baseline"]["diagnosis"]
                more = f"; and {len(diag) - 3} more in summary.json (baseline > diagnosis)" if len(diag) > 3 else ""
                out.print(Text("the practice baseline itself leaves demand unmet: " + "; ".join(diag[:3]) + more))
        elif "baseline_note" in s:
            out.print(Text(s["baseline_note"]))
        if s.get("settle_change") is not None:
            ch = s["settle_change"]
            out.print(Text(f"shortfall settled: the search's schedule left some demand or the reserve short; the "
                           f"hours around it were searched again and the objective changed by {ch:+,.0f} {cur}"
                           + (" (a dearer schedule within the gap asked, taken because it meets what the first "
                              "left short)" if ch > 0 else "")))
        for note in s.get("start_stops", []):
            out.print(Text(f"start of horizon: {note}"))
        for note in s.get("end_stops", []):
            out.print(Text(f"end of horizon: {note}"))
        if "verify" in s:
            out.print(Text(f"verification: {s['verify']['verdict']}"))
        out.print(f"outputs in {Path(args.out).resolve()}")
        out.print(f"[italic]{SAFETY_NOTE}[/italic]")
    if run.results.diagnosis:
        for line in run.results.diagnosis:
            err.print(f"[bold red]not met:[/bold red] {escape(line)}", highlight=False)
        if run.report.status != "optimal":
            # the search may have stopped before it found a schedule without shortfall
            err.print(Text(f"the search stopped ({run.report.status}) before proving this schedule; the shortfall "
                           "may be the search's rather than the site's: try a longer --time-limit"))
        return EXIT_SHORT
    return EXIT_OK


def main(argv: list[str] | None = None) -> int:
    """Entry point of the ``cogen`` console script; returns the exit code (2: bad input)."""
    out = Console(soft_wrap=True)  # messages whole, one a line; tables fit the width themselves
    if not out.is_terminal:
        # piped or redirected: a file has no width to fit, and cut numbers mislead
        out = Console(width=max(out.width, 240), soft_wrap=True)
    err = Console(stderr=True, soft_wrap=True)  # one message a line, whole, for logs and grep
    args: argparse.Namespace | None = None
    words = sys.argv[1:] if argv is None else argv

    def json_error(kind: str, message: str, code: int) -> None:
        # --json promises an object on standard output: a failed run gives one too (the
        # command line as given, when argparse refused it before there were args)
        if getattr(args, "json", False) if args is not None else "--json" in words:
            print(json_text({"error": kind, "message": message, "exit_code": code}))

    try:
        try:
            args = build_parser().parse_args(argv)
        except SystemExit as exc:  # argparse has printed its message
            if exc.code == EXIT_INPUT:
                json_error("input", "bad command line (see standard error)", EXIT_INPUT)
            raise
        if args.command == "inspect":
            return cmd_inspect(args, out)
        if args.command == "advise":
            return cmd_advise(args, out, err)
        if args.command == "report":
            from .report import write_reports

            d = Path(args.dir)
            if not (d / "summary.json").is_file():
                raise InputError(d, "", "not a plan or study folder (no summary.json)")
            units = args.units
            if units is None:  # as the plan or study was run (older folders: SI)
                try:
                    units = json.loads((d / "summary.json").read_text(encoding="utf-8")).get("units", "si")
                except (OSError, ValueError, AttributeError):
                    units = "si"
                units = units if units in ("si", "us") else "si"
            for f in write_reports(d, units):
                out.print(f"wrote {f}")
            return EXIT_OK
        if args.command == "study":
            return cmd_study(args, out, err)
        if args.command == "verify":
            from .plan import verify_plan_dir

            ver = verify_plan_dir(args.dir, args.moisture_limit)
            out.print(Text(f"verification: {ver.verdict}"))
            for w in ver.worst:
                out.print(Text(f"  worst: {w}"))
            for f in ver.flags[:20]:
                out.print(Text(f"  flag: {f}"))
            return EXIT_OK
        return cmd_plan(args, out, err)
    except InputError as exc:
        for line in str(exc).splitlines():
            err.print(f"[bold red]input error:[/bold red] {escape(line)}", highlight=False)
        json_error("input", str(exc), EXIT_INPUT)
        return EXIT_INPUT
    except SteamPropertyError as exc:
        err.print(f"[bold red]input error:[/bold red] {escape(str(exc))}", highlight=False)
        json_error("input", str(exc), EXIT_INPUT)
        return EXIT_INPUT
    except SolveError as exc:
        err.print(f"[bold red]solver:[/bold red] {escape(str(exc))}", highlight=False)
        json_error("solver", str(exc), EXIT_SOLVER)
        return EXIT_SOLVER
    except KeyboardInterrupt:
        err.print("interrupted; earlier results were left as they were")
        return EXIT_INTERRUPT


if __name__ == "__main__":
    sys.exit(main())
