"""One self-contained HTML page per plan or study: inline SVG charts, no scripts, no fetches."""

from __future__ import annotations

import json
from html import escape
from pathlib import Path

import pandas as pd

from . import plots
from ..clock import read_clock
from ..outputs import without_money_unit
from ..studies import window_gap_words
from ..units import convert

T_H_TO_KLB_H = 1.0 / convert(1.0, "klb/h", "mass_flow")  # [klb/h per t/h]
GJ_TO_MMBTU = 1.0 / convert(1.0, "MMBtu", "energy")  # [MMBtu per GJ], International Table Btu

CSS = """
body{font-family:system-ui,-apple-system,'Segoe UI',sans-serif;margin:24px auto;max-width:1180px;color:#1d2730}
h1{font-size:22px;margin-bottom:2px}h2{font-size:17px;border-bottom:2px solid #1f6f78;padding-bottom:3px;margin-top:28px}
.meta{color:#5b6770;font-size:13px}.note{background:#fbf6ea;border-left:4px solid #d19a2e;padding:8px 12px;font-size:13px}
table{border-collapse:collapse;font-size:12px;margin:8px 0}td,th{border-bottom:1px solid #dfe3e8;padding:3px 9px;text-align:right}
th{background:#eef3f4}td:first-child,th:first-child{text-align:left}.chart svg{max-width:100%;height:auto}
.bad{color:#b5523b;font-weight:600}.good{color:#1f6f78;font-weight:600}
"""


class Units:
    """Display units: SI (t/h, GJ) or US customary (klb/h, MMBtu)."""

    def __init__(self, system: str = "si") -> None:
        self.us = system == "us"
        self.flow = "klb/h" if self.us else "t/h"
        self.energy = "MMBtu" if self.us else "GJ"
        self.kf = T_H_TO_KLB_H if self.us else 1.0
        self.ke = GJ_TO_MMBTU if self.us else 1.0


def _table(df: pd.DataFrame) -> str:
    head = "".join(f"<th>{escape(str(c))}</th>" for c in df.columns)
    rows = []
    for _, r in df.iterrows():
        cells = []
        for v in r.tolist():
            if isinstance(v, float):
                v = f"{v:,.2f}" if abs(v) < 1000 else f"{v:,.0f}"
            cells.append(f"<td>{escape(str(v))}</td>")
        rows.append("<tr>" + "".join(cells) + "</tr>")
    return f"<table><thead><tr>{head}</tr></thead><tbody>{''.join(rows)}</tbody></table>"


def _page(title: str, meta: str, body: list[str], note: str) -> str:
    return ("<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'>"
            "<meta http-equiv='Content-Security-Policy' content=\"default-src 'none'; style-src 'unsafe-inline'; img-src data:\">"
            f"<title>{escape(title)}</title><style>{CSS}</style></head><body>"
            f"<h1>{escape(title)}</h1><p class='meta'>{meta}</p><p class='note'>{escape(note)}</p>"
            + "".join(body) + "</body></html>")


def _chart(svg: str) -> str:
    return f"<div class='chart'>{svg}</div>"


def _num(x: object) -> float:
    """A number from summary.json, where a missing one (no bound, an infinite gap) is null."""
    return float("nan") if x is None else float(x)  # type: ignore[arg-type]


def _read_timed(path: Path, index: bool = False) -> pd.DataFrame:
    """A plan table with its ``time`` column on the site's clock, each hour with the UTC
    offset it was written with (:func:`cogendispatch.clock.read_clock`), as the index or
    as a column."""
    df = pd.read_csv(path)
    times = read_clock(df.pop("time"))
    if index:
        df.index = times
    else:
        df.insert(0, "time", times)
    return df


def plan_report(d: Path, units: Units = Units()) -> str:
    """The plan page, built from the files of a plan folder."""
    s = json.loads((d / "summary.json").read_text(encoding="utf-8"))
    sched = _read_timed(d / "schedule.csv", index=True)
    bal = _read_timed(d / "balances.csv")
    pw = _read_timed(d / "power.csv")
    cost = without_money_unit(_read_timed(d / "costs.csv", index=True), str(s.get("currency", "")))
    cur = escape(str(s.get("currency", "")))
    sec = s.get("seconds", {})
    meta = (f"{escape(s.get('site_name', ''))} &middot; {s['hours']} h from {escape(str(s.get('first_hour')))} &middot; "
            f"status <b>{escape(str(s['status']))}</b>, gap {100 * _num(s['gap']):.2f} %, cost "
            f"{_num(s['objective']):,.0f} {cur}, bound {_num(s['bound']):,.0f} &middot; build {sec.get('build', 0):.1f} s, "
            f"load {sec.get('load', 0):.1f} s, solve {sec.get('solve', 0):.1f} s, total {sec.get('total', 0):.1f} s")
    body: list[str] = []
    if s.get("diagnosis"):
        body.append("<h2>Demand not met</h2><ul>" + "".join(f"<li class='bad'>{escape(x)}</li>" for x in s["diagnosis"]) + "</ul>")
    # summary tables
    money = f"cost [{s.get('currency', '')}]"
    cost_tab = pd.DataFrame([{"category": k, money: v} for k, v in s["cost"].items()]
                            + [{"category": "total", money: s.get("cost_total", sum(s["cost"].values()))}])
    body.append("<h2>Cost</h2>" + _table(cost_tab))
    notes = [f"start of horizon: {x}" for x in s.get("start_stops", [])] + \
        [f"end of horizon: {x}" for x in s.get("end_stops", [])]
    if notes:
        body.append("<ul>" + "".join(f"<li>{escape(x)}</li>" for x in notes) + "</ul>")
    if "baseline" in s:
        sv = s["baseline"]["saving"]
        body.append("<h2>Against the practice baseline</h2>" + _table(pd.DataFrame(
            [{"category": k, f"practice [{s.get('currency', '')}]": v["baseline"],
              f"optimised [{s.get('currency', '')}]": v["optimised"], f"saving [{s.get('currency', '')}]": v["saving"],
              "saving [%]": "n/a" if v["saving_pct"] is None else v["saving_pct"]} for k, v in sv.items()])))
        if s["baseline"].get("diagnosis"):
            body.append("<p class='bad'>The practice baseline itself leaves demand or the steam reserve unmet, "
                        "and its cost carries the penalties for that, so the saving above is not all money: "
                        + "; ".join(escape(x) for x in s["baseline"]["diagnosis"]) + ".</p>")
    elif "baseline_note" in s:
        body.append(f"<h2>Against the practice baseline</h2><p>{escape(s['baseline_note'])}</p>")
    if "verify" in s:
        v = s["verify"]
        ok = v["verdict"].startswith("linear model within")
        body.append(f"<h2>IAPWS-IF97 re-check</h2><p class='{'good' if ok else 'bad'}'>{escape(v['verdict'])}</p>"
                    + "<ul>" + "".join(f"<li>{escape(w)}</li>" for w in v.get("worst_hours", [])) + "</ul>")
    # header balances
    body.append(f"<h2>Header balances [{units.flow}]</h2>")
    for h, g in bal.groupby("header", sort=False):
        piv = g.pivot_table(index="time", columns="term", values="flow_t_h", aggfunc="sum", sort=False) * units.kf
        demand = -piv.pop("process demand") if "process demand" in piv else None
        if demand is not None and (demand < 0).any():
            # a process that exports steam into the header is a source, stacked with the rest
            piv["process export"] = (-demand).clip(lower=0.0)
            demand = demand.clip(lower=0.0)
        body.append(_chart(plots.stacked_balance(piv, demand, f"{h} header: sources (+) and uses (-)",
                                                 f"steam flow [{units.flow}]")))
    piv = pw.pivot_table(index="time", columns="term", values="power_MW", aggfunc="sum", sort=False)
    load = -piv.pop("site load") if "site load" in piv else None
    body.append("<h2>Electric balance [MW]</h2>" + _chart(plots.stacked_balance(
        piv, load, "Generation and import (+), motors and export (-)", "power [MW]", line_label="site load")))
    boil = sched[[c for c in sched.columns if c.endswith(".steam_t_h") and c.split(".")[0] in s.get("running_hours", {})
                  and f"{c.split('.')[0]}.fuel_GJ_h" in sched.columns]] * units.kf
    boil.columns = [c.split(".")[0] for c in boil.columns]
    body.append("<h2>Boilers</h2>" + _chart(plots.lines(boil, "Boiler steam (0 when off)", f"steam [{units.flow}]",
                                                        step=True)))
    dh = s.get("drive_hours", {})
    if dh:
        frame = pd.DataFrame({"on steam": {k: v["steam"] for k, v in dh.items()},
                              "on motor": {k: v["motor"] for k, v in dh.items()}})
        body.append("<h2>Drivers</h2>" + _chart(plots.stacked_bars(frame, "Machine-hours on steam and on motor",
                                                                    "machine-hours [h]", horizontal=True)))
    daily = cost.groupby([t.date() for t in cost.index]).sum()  # the site's days (cogendispatch.clock)
    # penalties for unmet demand are of another order (10^6 per t): charted, they flatten
    # every real cost, so they are named in words instead
    short = cost["penalty"] > 1e-6 if "penalty" in cost else pd.Series(False, index=cost.index)
    daily = daily.drop(columns="penalty", errors="ignore")
    body.append(f"<h2>Cost by day [{cur}]</h2>" + _chart(plots.stacked_bars(daily, "Cost by category per day",
                                                                           f"cost [{s.get('currency', '')}/day]")))
    if short.any():
        body.append(f"<p class='bad'>Penalties for unmet demand or reserve, {float(cost['penalty'].sum()):,.0f} "
                    f"{cur} in {int(short.sum())} h, are left out of this chart and of the prices below; "
                    "see the diagnosis.</p>")
    if (d / "prices.csv").is_file():
        pr = _read_timed(d / "prices.csv")
        wide = pr.pivot(index="time", columns="balance", values="price")
        wide.loc[short.reindex(wide.index, fill_value=False).to_numpy(), :] = float("nan")  # priced by a penalty
        steam = wide.drop(columns="power", errors="ignore") / units.kf  # per t -> per klb in US units
        mass = "klb" if units.us else "t"
        body.append("<h2>Marginal prices</h2><p>What one more unit of steam in a header, or of site "
                    "load, would have cost in each hour with every unit's on/off and driver held "
                    "(<code>prices.csv</code>); near zero where a header vents or lets down surplus.</p>")
        body.append(_chart(plots.lines(steam, "Marginal steam price by header", f"[{cur}/{mass}]", step=True)))
        if "power" in wide:
            body.append(_chart(plots.lines(wide[["power"]], "Marginal power price", f"[{cur}/MWh]", step=True)))
    fuel = sum(sched[c] for c in sched.columns if c.endswith(".fuel_GJ_h")) * units.ke
    body.append(f"<p class='meta'>fuel {float(fuel.sum()):,.0f} {units.energy}, import {s['import_MWh']:,.0f} MWh, "
                f"export {s['export_MWh']:,.0f} MWh, CO2 {s['co2_t']:,.0f} t</p>")
    hours = int(s.get("hours", 168))
    return _page("Weekly plan" if hours == 168 else f"Plan over {hours} h", meta, body, s.get("note", ""))


def study_report(d: Path, units: Units = Units()) -> str:
    """The study page, built from the files of a study folder."""
    s = json.loads((d / "summary.json").read_text(encoding="utf-8"))
    table = without_money_unit(pd.read_csv(d / "scenarios.csv"), str(s.get("currency", "")))
    monthly = without_money_unit(pd.read_csv(d / "monthly.csv"), str(s.get("currency", "")))
    # the categories only: the totals are their sums, stacked they would count twice
    costs = table.set_index("scenario")[[c for c in table.columns if c.startswith("cost_")
                                         and c not in ("cost_total", "cost_total_without_penalty")]]
    costs.columns = [c[5:] for c in costs.columns]
    cur = escape(str(s.get("currency", "currency")))
    body = ["<h2>Scenarios</h2>" + _chart(plots.stacked_bars(costs, "Cost by category per scenario", f"cost [{cur}]",
                                                             horizontal=True))]
    penalty = table["cost_penalty"] if "cost_penalty" in table else pd.Series(0.0, index=table.index)
    if (penalty > 0).any():
        body.append("<p class='bad'>The penalty bars price demand or reserve not met (see Shortfalls below); "
                    "they are no money spent, and a scenario short of reserve saves what holding it would "
                    "cost: its cost without penalty is no like-for-like comparison.</p>")
    money = "cost_total_without_penalty" if "cost_total_without_penalty" in monthly else "cost_total"
    piv = monthly.pivot_table(index="month", columns="scenario", values=money, sort=False)
    title = "Cost per month and scenario" + (", penalties left out" if money != "cost_total" else "")
    body.append("<h2>Monthly cost</h2>" + _chart(plots.grouped_bars(piv, title, f"cost [{cur}/month]")))
    drv = table.set_index("scenario")[[c for c in table.columns if c.endswith(".machine_hours_on_steam_h")]]
    drv.columns = [c.removesuffix(".machine_hours_on_steam_h") for c in drv.columns]
    if not drv.empty:
        body.append("<h2>Drivers</h2>" + _chart(plots.grouped_bars(drv.T, "Machine-hours on steam, by scenario",
                                                                    "machine-hours [h]", horizontal=True)))
    cols = ["scenario", "cost_total", "cost_penalty", "cost_total_without_penalty", "fuel_GJ", "import_MWh",
            "export_MWh", "co2_t", "boiler_starts", "shortfall_hours", "largest_window_gap"]
    tab = table[[c for c in cols if c in table]].copy()
    if "fuel_GJ" in tab:
        tab["fuel_GJ"] = tab["fuel_GJ"] * units.ke
    if "largest_window_gap" in tab:
        # a per cent where every window proved one, words where some did not (not "nan")
        tab["largest_window_gap"] = [window_gap_words(r) for _, r in table.iterrows()]
    # one style of heading, with the unit in brackets, as the page's other tables
    tab = tab.rename(columns={"cost_total": f"cost [{cur}]", "cost_penalty": f"of it penalty [{cur}]",
                              "cost_total_without_penalty": f"cost without penalty [{cur}]",
                              "fuel_GJ": f"fuel [{units.energy}]",
                              "import_MWh": "import [MWh]", "export_MWh": "export [MWh]", "co2_t": "CO2 [t]",
                              "boiler_starts": "boiler starts", "shortfall_hours": "hours short",
                              "largest_window_gap": "largest window gap"})
    body.append("<h2>Totals</h2>" + _table(tab)
                + "<p class='meta'>Largest window gap: how far the weakest window's search stayed from its "
                  "proven bound; cost differences smaller than it are within the search's tolerance "
                  "(none proven: a window ended with no bound, which a window started from the week "
                  "before often does within a short limit).</p>")
    short = {k: v for k, v in (s.get("diagnosis") or {}).items() if v}
    if short:
        items = "".join(f"<li><b>{escape(k)}</b><ul>" + "".join(f"<li>{escape(x)}</li>" for x in v) + "</ul></li>"
                        for k, v in short.items())
        open_ = [k for k in short if any(w.get("status") != "optimal" for w in (s.get("windows") or {}).get(k, []))]
        caveat = ("<p class='meta'>Windows of " + ", ".join(escape(k) for k in open_) + " stopped before proving "
                  "their schedule: some of the shortfall may be the search's rather than the site's (a longer "
                  "--time-limit tells).</p>") if open_ else ""
        body.append(f"<h2>Shortfalls</h2><ul>{items}</ul>{caveat}")
    notes = s.get("scenario_notes") or {}
    if notes:
        body.append("<h2>Notes</h2><ul>" + "".join(f"<li>{escape(x)}</li>" for v in notes.values() for x in v)
                    + "</ul>")
    period = f" &middot; {escape(str(s['first_hour']))} to {escape(str(s['last_hour']))}" if "first_hour" in s else ""
    meta = (f"{escape(str(s.get('site_name', '')))}{period} &middot; {len(table)} scenario(s), "
            f"{float(s.get('seconds', 0)):.0f} s")
    return _page("Budget study", meta, body, s.get("note", ""))
