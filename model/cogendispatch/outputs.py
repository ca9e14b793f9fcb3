"""Write result files whole or not at all: into a fresh folder beside the target, then swap."""

from __future__ import annotations

import json
import math
import os
import shutil
import tempfile
from pathlib import Path
from typing import Callable

import pandas as pd

from .errors import InputError

MARKER = "summary.json"  # a folder holding this was written by cogendispatch
# the names a run wrote at the top of its folder; a later run of the same kind replaces the
# folder only if it holds nothing else (a user's notes beside a plan would go with it)
MANIFEST = ".cogendispatch-files"


def output_kind(d: Path) -> str | None:
    """What a cogendispatch output folder holds ("plan", "study", "advice"), from its
    marker; None when it has no readable marker."""
    try:
        summary = json.loads((d / MARKER).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if not isinstance(summary, dict):
        return None
    if "kind" in summary:
        return str(summary["kind"])
    # a plan's summary names no kind: it is ours by the list of files the run wrote or by
    # the advice-only note every plan carries; anyone's summary.json is not a plan
    ours = (d / MANIFEST).is_file() or str(summary.get("note", "")).startswith("Advice only: cogendispatch")
    return "plan" if ours else None


# what each kind of output folder holds, in the messages about it
_KIND_WORDS = {"plan": "a plan", "study": "a study", "advice": "advice", "coefficients": "inspect tables"}


def check_out_dir(out: Path, kind: str = "plan", option: str = "--out") -> None:
    """Refuse, before any work, a folder that is not an earlier cogendispatch output of the
    same ``kind`` (a plan is never replaced by one hour's advice) or that cannot be written:
    the results go into a temporary folder beside it, so one is made and removed again in
    the nearest folder that exists. Messages name the folder as the ``option`` that gave it."""
    if out.exists() and not out.is_dir():
        raise InputError(out, option, "exists and is not a folder")
    if out.is_dir() and any(out.iterdir()):
        held = output_kind(out)
        if held is None:
            names = sorted(p.name + ("/" if p.is_dir() else "") for p in out.iterdir())  # the top only: it may be large
            shown = ", ".join(names[:5]) + (f" and {len(names) - 5} more" if len(names) > 5 else "")
            raise InputError(out, option, "is a non-empty folder that does not hold cogendispatch results "
                             f"({shown}); choose a new or empty folder (nothing was written)")
        if held != kind:
            raise InputError(out, option, f"holds {_KIND_WORDS.get(held, held)} from cogendispatch, which "
                             f"{_KIND_WORDS.get(kind, kind)} would replace; choose another folder (nothing was written)")
        foreign = _not_written_by_us(out)
        if foreign:
            shown = ", ".join(foreign[:5]) + (f" and {len(foreign) - 5} more" if len(foreign) > 5 else "")
            raise InputError(out, option, f"holds {_KIND_WORDS.get(held, held)} from cogendispatch and also "
                             f"{shown}, which cogendispatch did not write and replacing the folder would "
                             "delete; move them or choose another folder (nothing was written)")
    base = out.parent
    while not base.exists() and base != base.parent:
        base = base.parent
    if not base.is_dir():
        raise InputError(out, option, f"cannot be made: '{base}' is not a folder (nothing was written)")
    try:
        os.rmdir(tempfile.mkdtemp(prefix=f".{out.name}.probe-", dir=base))
    except OSError as exc:
        raise InputError(out, option, f"cannot be written in '{base}': {exc.strerror or exc} "
                         "(nothing was written)") from None


def _ignorable(name: str) -> bool:
    """Names nobody keeps on purpose: a file browser's folder settings ('.DS_Store',
    Windows' 'Thumbs.db' and 'desktop.ini'), office programs' lock files ('~$...',
    '.~lock.<name>#'), the
    folder's own list of names. Other hidden files (notes kept as '.notes.md', say) count
    as the user's."""
    return (name.startswith("~$") or (name.startswith(".~lock.") and name.endswith("#"))
            or name in (".DS_Store", "Thumbs.db", "desktop.ini", MANIFEST))


def _files(root: Path) -> list[str]:
    """Every file under ``root``, sub-folders included, as relative paths with '/'."""
    return sorted(p.relative_to(root).as_posix() for p in root.rglob("*") if not p.is_dir())


def _manifest(out: Path) -> tuple[set[str], bool] | None:
    """What the run that wrote ``out`` put there, and whether the list names only the top
    level (folders written before sub-folders' files were listed: each top-level name then
    covers everything under it); None for a folder without a list."""
    try:
        names = json.loads((out / MANIFEST).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if isinstance(names, dict) and isinstance(names.get("files"), list):
        return {str(n) for n in names["files"]}, False
    return ({str(n) for n in names}, True) if isinstance(names, list) else None


def _not_written_by_us(out: Path) -> list[str]:
    """Files anywhere in the output folder ``out`` (its sub-folders too) that its run did
    not write, from its list of names; none known for a folder written before the list
    was kept (those are carried into the new folder instead, :func:`atomic_dir`)."""
    listed = _manifest(out)
    if listed is None:
        return []
    ours, top_only = listed
    return [rel for rel in _files(out)
            if not _ignorable(rel.rsplit("/", 1)[-1]) and (rel.split("/")[0] if top_only else rel) not in ours]


def atomic_dir(out: str | Path, write: Callable[[Path], None], kind: str = "plan",
               option: str = "--out") -> Path:
    """Call ``write(tmp)`` to fill a temporary folder, then put it in place of ``out`` (an
    earlier output of the same ``kind``, see :func:`check_out_dir`).

    An interruption before the swap leaves ``out`` exactly as it was; the swap itself is two
    renames on the same file system.
    """
    out = Path(out).resolve()
    check_out_dir(out, kind, option)
    try:
        out.parent.mkdir(parents=True, exist_ok=True)
        tmp = Path(tempfile.mkdtemp(prefix=f".{out.name}.new-", dir=out.parent))
    except OSError as exc:
        raise InputError(out, option, f"cannot be written: {exc.strerror or exc} (nothing was written)") from None
    # mkdtemp makes the folder private (0700); results are for the whole team, so it gets
    # the mode any new folder would get under the user's umask
    mask = os.umask(0)
    os.umask(mask)
    tmp.chmod(0o777 & ~mask)
    old: Path | None = None
    try:
        write(tmp)
        (tmp / MANIFEST).write_text(json.dumps({"files": _files(tmp)}), encoding="utf-8")
        if out.exists():
            old = Path(tempfile.mkdtemp(prefix=f".{out.name}.old-", dir=out.parent))
            os.rmdir(old)
            os.replace(out, old)
        os.replace(tmp, out)
    except BaseException:
        if old is not None and old.exists() and not out.exists():  # stopped between the renames
            os.replace(old, out)
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    if old is not None and _carry_over(old, out):
        shutil.rmtree(old, ignore_errors=True)
    return out


def _carry_over(old: Path, new: Path) -> bool:
    """Move into ``new`` what the replaced folder ``old`` held that its run did not write
    (a folder without a manifest cannot be checked before the run) and the new run did not
    write either; True when ``old`` may then be deleted. Anything that cannot be moved
    keeps ``old`` on disk, beside the new folder, rather than be lost."""
    listed = _manifest(old)
    # top-level names: a file under a listed sub-folder is the run's too
    ours = {rel.split("/")[0] for rel in listed[0]} if listed is not None else set()
    ok = True
    for p in old.iterdir():
        if p.name in ours or _ignorable(p.name) or (new / p.name).exists():
            continue
        try:
            os.replace(p, new / p.name)
        except OSError:
            ok = False
    return ok


def _safe_text(x: object) -> object:
    """Quote text a spreadsheet would read as a formula (starting with = + - @)."""
    if isinstance(x, str) and x[:1] in ("=", "+", "-", "@"):
        return "'" + x
    return x


def quote_formulas(df: pd.DataFrame) -> pd.DataFrame:
    """A copy of ``df`` with text cells that a spreadsheet would read as formulas quoted."""
    out = df.copy()
    for c in out.columns:
        if out[c].dtype == object or pd.api.types.is_string_dtype(out[c]):
            out[c] = out[c].map(_safe_text)
    return out


def with_money_units(df: pd.DataFrame, units: dict[str, str]) -> pd.DataFrame:
    """``df`` with each money column of ``units`` named ``<column>_<unit>`` (e.g.
    ``fuel_EUR``, ``flip_import_price_EUR_MWh``), as every other file column carries its
    unit of measure; the other columns as they are."""
    return df.rename(columns={c: f"{c}_{u.replace('/', '_')}" for c, u in units.items() if u and c in df.columns})


def without_money_unit(df: pd.DataFrame, currency: str) -> pd.DataFrame:
    """``df`` with the ``_<currency>`` ending taken off its column names (a file read back
    for a report; a folder written before the columns carried it reads as it is)."""
    end = f"_{currency}"
    return df.rename(columns={c: c[: -len(end)] for c in df.columns
                              if currency and isinstance(c, str) and c.endswith(end)})


FLOAT_FORMAT = "%.12g"  # the CSV files' numbers: 12 significant digits


def write_csv(df: pd.DataFrame, path: Path, index: bool = True) -> None:
    """CSV with text cells that could be read as formulas quoted, and no negative zeros (an
    outflow of nothing reads 0, not -0)."""
    out = quote_formulas(df)
    floats = [c for c in out.columns if pd.api.types.is_float_dtype(out[c])]
    if floats:
        out[floats] = out[floats] + 0.0  # -0.0 + 0.0 is 0.0 (out is already a copy)
    out.to_csv(path, index=index, float_format=FLOAT_FORMAT)


def as_written(df: pd.DataFrame) -> pd.DataFrame:
    """``df`` with its float columns as :func:`write_csv` writes them (12 significant
    digits), so that a check made now and a later check of the file read back agree to the
    last digit."""
    out = df.copy()
    for c in out.columns:
        if pd.api.types.is_float_dtype(out[c]):
            out[c] = [float(FLOAT_FORMAT % v) + 0.0 for v in out[c].to_numpy()]
    return out


def _strict(obj: object) -> object:
    """``obj`` with NaN and infinities as null: JSON has no such numbers, and strict parsers
    refuse the NaN that Python's json writes by default."""
    if isinstance(obj, float):
        return obj if math.isfinite(obj) else None
    if isinstance(obj, dict):
        return {k: _strict(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_strict(v) for v in obj]
    if hasattr(obj, "item") and not isinstance(obj, (str, bytes)):  # numpy scalars
        return _strict(obj.item())
    return obj


def json_text(obj: object) -> str:
    """Strict JSON (no NaN: missing numbers are null), indented: for files and for --json."""
    return json.dumps(_strict(obj), indent=2, default=str, allow_nan=False)


def write_json(obj: object, path: Path) -> None:
    """:func:`json_text` into ``path``."""
    path.write_text(json_text(obj) + "\n", encoding="utf-8")
