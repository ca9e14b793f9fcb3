"""Reports people read: a self-contained HTML page and an Excel workbook per output folder."""

from __future__ import annotations

from pathlib import Path

from ..outputs import output_kind
from .excel import write_plan_xlsx, write_study_xlsx
from .html import Units, plan_report, study_report


def write_reports(d: Path, units: str = "si") -> list[Path]:
    """Write report.html and plan.xlsx (or study.xlsx) into the output folder ``d``; the
    files written. ``units`` is for the page; the workbook keeps the folder's SI tables."""
    kind = output_kind(d)
    if kind not in ("plan", "study"):
        from ..errors import InputError

        raise InputError(d, "", f"holds {kind} results, which have no report; reports are for plan and study folders")
    u = Units(units)
    if kind == "study":
        html, xlsx, writer = study_report(d, u), d / "study.xlsx", write_study_xlsx
    else:
        html, xlsx, writer = plan_report(d, u), d / "plan.xlsx", write_plan_xlsx
    tmp = d / ".report.html.tmp"
    tmp.write_text(html, encoding="utf-8")
    tmp.replace(d / "report.html")
    tmpx = d / ".workbook.xlsx.tmp"
    writer(d, tmpx)
    tmpx.replace(xlsx)
    return [d / "report.html", xlsx]


__all__ = ["write_reports", "Units"]
