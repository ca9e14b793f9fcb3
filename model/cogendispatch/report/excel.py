"""Excel workbooks of a plan or study: one sheet per table, units in the header row,
frozen panes and number formats. Text that a spreadsheet would read as a formula is quoted."""

from __future__ import annotations

import json
import re
from datetime import datetime
from pathlib import Path

import pandas as pd
from openpyxl.utils import get_column_letter

from ..clock import offset_text, read_clock
from ..outputs import quote_formulas


def _sheet(writer: pd.ExcelWriter, name: str, df: pd.DataFrame, index: bool, keys: int = 1) -> None:
    """One sheet; the first ``keys`` columns (and the header row) stay in view."""
    out = quote_formulas(df)
    out.to_excel(writer, sheet_name=name, index=index)
    ws = writer.sheets[name]
    ws.freeze_panes = f"{get_column_letter(keys + 1)}2"
    width = out.shape[1] + (1 if index else 0)
    for j in range(1, width + 1):
        ws.column_dimensions[get_column_letter(j)].width = 16 if j > 1 else 20
        head = ws.cell(row=1, column=j).value
        # money (a column named with its currency, "cost_fuel_EUR") in whole units, as on
        # the terminal; other numbers to three decimals; counts as they are
        money = isinstance(head, str) and re.search(r"_[A-Z]{3}$", head) is not None
        for row in ws.iter_rows(min_row=2, min_col=j, max_col=j):
            for cell in row:
                if isinstance(cell.value, float):
                    cell.number_format = "#,##0" if money else "#,##0.000"
                elif isinstance(cell.value, int) and not isinstance(cell.value, bool):
                    cell.number_format = "#,##0"
                elif isinstance(cell.value, datetime):
                    cell.number_format = "yyyy-mm-dd hh:mm"


def _read(path: Path, index: str | None = None) -> pd.DataFrame:
    """A plan table with its ``time`` column as date-times Excel can sort and filter: the
    site's wall-clock time, as the series wrote it. A workbook cell holds no UTC offset, so
    times written with one keep it in a ``utc_offset`` column beside (the two 02:00 hours of
    an autumn clock change differ there)."""
    df = pd.read_csv(path)
    if "time" in df:
        stamps = read_clock(df["time"])
        df["time"] = [t.tz_localize(None) for t in stamps]
        if len(stamps) and stamps[0].tzinfo is not None:
            # "UTC+02:00": a cell starting with '+' would read as a formula
            df.insert(1, "utc_offset", ["UTC" + offset_text(t) for t in stamps])
    return df.set_index(index) if index else df


def write_plan_xlsx(d: Path, path: Path) -> None:
    """plan.xlsx from a plan folder's files."""
    s = json.loads((d / "summary.json").read_text(encoding="utf-8"))
    cur = s.get("currency", "")
    money = f"_{cur}" if cur else ""  # money named with its currency, as in the CSV files
    base = s.get("baseline", {})
    summary = pd.DataFrame(
        [("status", s["status"]), (f"objective{money}", s["objective"]), (f"bound{money}", s["bound"]),
         ("gap", s["gap"]), ("currency", cur), ("hours", s["hours"]), ("fuel_total_GJ", s["fuel_total_GJ"]),
         ("import_MWh", s["import_MWh"]), ("export_MWh", s["export_MWh"]), ("co2_t", s["co2_t"])]
        + [(f"cost_{k}{money}", v) for k, v in s["cost"].items()]
        + [(f"cost_total{money}", s.get("cost_total", sum(s["cost"].values())))]
        + ([(f"baseline_cost_total{money}", base["cost_total"]),
            (f"saving_total{money}", base["saving"]["total"]["saving"])] if "saving" in base else [])
        + ([("verification", s["verify"]["verdict"])] if "verify" in s else []),
        columns=["quantity", "value"])
    drivers = pd.DataFrame([{"machine": k, "machine_hours_on_steam_h": v["steam"], "machine_hours_on_motor_h": v["motor"]}
                            for k, v in s.get("drive_hours", {}).items()])
    with pd.ExcelWriter(path, engine="openpyxl") as w:
        _sheet(w, "summary", summary, index=False)
        _sheet(w, "schedule", _read(d / "schedule.csv", "time"), index=True)
        _sheet(w, "header balances", _read(d / "balances.csv"), index=False)
        _sheet(w, "electric balance", _read(d / "power.csv"), index=False)
        _sheet(w, "drivers", drivers, index=False)
        # the other tables of the folder, where the run wrote them
        for name, file, index in (("costs", "costs.csv", "time"), ("prices", "prices.csv", None),
                                  ("verification", "verify.csv", "time")):
            if (d / file).is_file():
                _sheet(w, name, _read(d / file, index), index=index is not None)


def write_study_xlsx(d: Path, path: Path) -> None:
    """study.xlsx from a study folder's files."""
    with pd.ExcelWriter(path, engine="openpyxl") as w:
        _sheet(w, "scenarios", pd.read_csv(d / "scenarios.csv"), index=False)
        _sheet(w, "monthly", pd.read_csv(d / "monthly.csv"), index=False, keys=2)  # month and scenario
