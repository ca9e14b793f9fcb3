"""Reports people read: a self-contained HTML page and an Excel workbook per output folder."""

from __future__ import annotations

from pathlib import Path

from ..outputs import output_kind
from .excel import write_plan_xlsx, write_study_xlsx
from .html import Units, plan_report, study_report


def write_reports(d: Path, units: str = "si") -> list[Path]:
    """Write report.html and plan.xlsx (or study.xlsx) into the output folder ``d``; the
    files written. ``units`` is for the page; the workbook keeps the folder's SI tables."""
    from ..errors import InputError

    kind = output_kind(d)
    if kind is None:
        what = "its summary.json is unreadable" if (d / "summary.json").exists() else "no summary.json"
        raise InputError(d, "", f"not a plan or study folder ({what})")
    if kind not in ("plan", "study"):
        raise InputError(d, "", f"holds {kind} results, which have no report; reports are for plan and study folders")
    u = Units(units)
    if kind == "study":
        build, xlsx, writer = study_report, d / "study.xlsx", write_study_xlsx
    else:
        build, xlsx, writer = plan_report, d / "plan.xlsx", write_plan_xlsx
    tmp, tmpx = d / ".report.html.tmp", d / ".workbook.xlsx.tmp"
    try:
        tmp.write_text(build(d, u), encoding="utf-8")
        writer(d, tmpx)
    except BaseException as exc:  # Ctrl-C too: no half-written file left to block a later run
        tmp.unlink(missing_ok=True)
        tmpx.unlink(missing_ok=True)
        if isinstance(exc, (OSError, ValueError, KeyError, TypeError)):
            # a file of the folder missing, or edited out of shape: nothing is replaced
            raise InputError(d, "", f"cannot build the report from this {kind} folder ({type(exc).__name__}: "
                             f"{exc}); its files are incomplete or were edited: run {kind} again") from None
        raise
    tmp.replace(d / "report.html")
    tmpx.replace(xlsx)
    return [d / "report.html", xlsx]


__all__ = ["write_reports", "Units"]
