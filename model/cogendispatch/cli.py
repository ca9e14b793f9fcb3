"""Command line: ``cogen inspect`` and ``cogen plan``.

Exit codes: 0 done; 2 bad input (file, field or row named); 3 a schedule was written but
some demand could not be met (the diagnosis says where and when); 4 the solver found no
schedule; 130 interrupted.
"""

from __future__ import annotations

import argparse
import json
import sys
import time
from pathlib import Path

import pandas as pd
from rich.console import Console
from rich.markup import escape
from rich.text import Text
from rich.table import Table

from .errors import InputError, SolveError
from .plan import SAFETY_NOTE, run_plan
from .site import BuildOptions
from .solve import SolveOptions
from .steam import SteamPropertyError

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


def build_parser() -> argparse.ArgumentParser:
    p = _Parser(prog="cogen", description="Cogeneration dispatch optimiser for industrial steam and power "
                "plants. " + SAFETY_NOTE)
    sub = p.add_subparsers(dest="command", required=True, parser_class=_Parser)

    ins = sub.add_parser("inspect", help="validate a site file and print the linear coefficients it yields",
                         description="Validate a site file and print header states and each unit's linear "
                         "coefficients (fuel per tonne, turbine kW per t/h and steam rates, drive steam "
                         "rates, letdown water ratios, deaerator steam ratio).")
    ins.add_argument("site", help="site file (TOML)")
    ins.add_argument("--csv", metavar="DIR", help="also write each table as CSV into DIR")

    pl = sub.add_parser("plan", help="lowest-cost hourly schedule for the hours of a series",
                        description="Plan every unit hour by hour for the hours in --series and write "
                        "schedule.csv, balances.csv, power.csv, costs.csv and summary.json into --out "
                        "(whole or not at all).")
    pl.add_argument("site", help="site file (TOML)")
    pl.add_argument("--series", required=True, help="hourly demands and prices (CSV or Excel)")
    pl.add_argument("--out", required=True, help="output folder (created, or replaced if it holds earlier results)")
    pl.add_argument("--gap", type=_positive, default=1e-3, help="relative MIP gap to stop at (default 0.001 = 0.1 %%)")
    pl.add_argument("--time-limit", type=_positive, default=120.0, help="solver time limit [s] (default 120)")
    pl.add_argument("--threads", type=int, default=1, help="HiGHS threads (default 1)")
    pl.add_argument("--no-reserve", action="store_true", help="drop the one-boiler-trip steam reserve")
    pl.add_argument("--quiet", action="store_true", help="no progress messages")
    pl.add_argument("--json", action="store_true", help="print summary.json to standard output")
    return p


def _fmt(x: object) -> str:
    if isinstance(x, float):
        if x != x:
            return ""
        return f"{x:,.4g}" if abs(x) < 1000 else f"{x:,.0f}"
    return "" if x is None else str(x)


def _table(console: Console, title: str, df: pd.DataFrame) -> None:
    t = Table(title=Text(title), title_justify="left")
    for c in df.columns:
        first = c == df.columns[0]
        t.add_column(Text(str(c)), justify="right" if pd.api.types.is_numeric_dtype(df[c]) else "left",
                     no_wrap=first, min_width=max(len(str(v)) for v in [c, *df[c].tolist()]) if first else None)
    for _, row in df.iterrows():
        t.add_row(*[Text(_fmt(v)) for v in row.tolist()])
    console.print(t)


def cmd_inspect(args: argparse.Namespace, out: Console) -> int:
    from .coefficients import coefficient_tables
    from .plant.load import load_site

    cfg = load_site(args.site)
    tables = coefficient_tables(cfg)
    out.print(f"[bold]{escape(cfg.site.name)}[/bold]: valid ({len(cfg.headers)} headers, {len(cfg.boilers)} boilers, "
              f"{len(cfg.turbogenerators)} turbo-generators, {sum(d.count for d in cfg.drives)} driven machines)")
    for name, df in tables.items():
        if df.empty:
            continue
        if name in ("boilers",):
            _table(out, name, df)
        else:  # one column per unit, one row per quantity: fits a terminal
            key = df.columns[0]
            label = df[key].astype(str) + (("/" + df["section"].astype(str)) if "section" in df else "")
            wide = df.drop(columns=[key]).T
            wide.columns = label.tolist() if name != "deaerator" else ["deaerator"]
            wide.insert(0, "quantity", wide.index)
            _table(out, name, wide.reset_index(drop=True).astype(object))
    if args.csv:
        d = Path(args.csv)
        d.mkdir(parents=True, exist_ok=True)
        for name, df in tables.items():
            df.to_csv(d / f"{name}.csv", index=False)
    return EXIT_OK


def cmd_plan(args: argparse.Namespace, out: Console, err: Console) -> int:
    t0 = time.perf_counter()

    def progress(msg: str) -> None:
        if not args.quiet:
            err.print(f"[dim]{time.perf_counter() - t0:6.1f} s[/dim]  {escape(msg)}", highlight=False)

    run = run_plan(args.site, args.series, args.out,
                   SolveOptions(gap=args.gap, time_limit=args.time_limit, threads=args.threads),
                   BuildOptions(reserve=False if args.no_reserve else None), progress)
    s = run.summary
    if args.json:
        print(json.dumps(s, indent=2, default=str))
    else:
        cur = s["currency"]
        cost = pd.DataFrame([{"category": k, f"cost [{cur}]": v} for k, v in s["cost"].items()]
                            + [{"category": "total", f"cost [{cur}]": s["cost_total"]}])
        _table(out, f"Cost over {s['hours']} h from {s['first_hour']}", cost)
        hrs = pd.DataFrame([{"unit": k, "running h": v, "starts": s["boiler_starts"].get(k, "")}
                            for k, v in s["running_hours"].items()])
        _table(out, "Units", hrs)
        dh = pd.DataFrame([{"machine": k, "machine-h on steam": v["steam"], "machine-h on motor": v["motor"]}
                           for k, v in s["drive_hours"].items()])
        _table(out, "Drives", dh)
        sec = s["seconds"]
        out.print(f"status {s['status']}, gap {100 * s['gap']:.3f} %, cost {s['objective']:,.0f} {cur}, "
                  f"bound {s['bound']:,.0f}; fuel {s['fuel_total_GJ']:,.0f} GJ, import {s['import_MWh']:,.0f} MWh, "
                  f"export {s['export_MWh']:,.0f} MWh, CO2 {s['co2_t']:,.0f} t")
        out.print(f"time: build {sec['build']:.2f} s, load {sec['load']:.2f} s, start {sec['start']:.2f} s, "
                  f"solve {sec['solve']:.2f} s, total {sec['total']:.2f} s")
        out.print(f"outputs in {Path(args.out).resolve()}")
        out.print(f"[italic]{SAFETY_NOTE}[/italic]")
    if run.results.diagnosis:
        for line in run.results.diagnosis:
            err.print(f"[bold red]not met:[/bold red] {escape(line)}", highlight=False)
        return EXIT_SHORT
    return EXIT_OK


def main(argv: list[str] | None = None) -> int:
    out = Console()
    err = Console(stderr=True)
    try:
        args = build_parser().parse_args(argv)
        if args.command == "inspect":
            return cmd_inspect(args, out)
        return cmd_plan(args, out, err)
    except InputError as exc:
        for line in str(exc).splitlines():
            err.print(f"[bold red]input error:[/bold red] {escape(line)}", highlight=False)
        return EXIT_INPUT
    except SteamPropertyError as exc:
        err.print(f"[bold red]input error:[/bold red] {escape(str(exc))}", highlight=False)
        return EXIT_INPUT
    except SolveError as exc:
        err.print(f"[bold red]solver:[/bold red] {escape(str(exc))}", highlight=False)
        return EXIT_SOLVER
    except KeyboardInterrupt:
        err.print("interrupted; earlier results were left as they were")
        return EXIT_INTERRUPT


if __name__ == "__main__":
    sys.exit(main())
