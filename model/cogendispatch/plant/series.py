"""Hourly time series: process steam demand, site electric load and prices.

File layout (CSV, or the first sheet of an Excel workbook), one row per hour::

    time,demand:HP [t/h],demand:LP [t/h],load [MW],price:import [per MWh],price:export [per MWh],price:fuel:NG [per GJ],price:co2 [per t],duty:P101 [kW]

Every column but ``time`` names its unit in brackets; values are converted to the internal
units on load. ``price:fuel:<id>``, ``price:co2``, ``price:export`` and ``duty:<drive>`` are
optional: a missing fuel price or drive duty falls back to the site file, a missing CO2 or
export price to zero. Every header needs a demand column (zeros where it has no process
demand). Demand may be negative (a process waste-heat boiler exporting steam).
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from functools import cached_property
from pathlib import Path

import numpy as np
import pandas as pd

from ..clock import site_clock
from ..errors import InputError
from ..units import UnitError, column_factor, in_site_currency
from .schema import SiteConfig

_COL_RE = re.compile(r"^\s*([A-Za-z][A-Za-z0-9_:\-]*)\s*\[\s*([^\]]+?)\s*\]\s*$")


POWER_PRICE_NOTE = 1.0e4  # [currency/MWh] see Series.notes
FUEL_PRICE_NOTE = 500.0  # [currency/GJ]
LOAD_NOTE = 0.1  # [MW]
LOAD_HIGH_NOTE = 2000.0  # [MW] above any industrial site's own load
POWER_PRICE_LOW_NOTE = 1.0  # [currency/MWh] a whole series below it: a price per kWh


@dataclass(frozen=True)
class Series:
    """Validated hourly inputs in internal units, all indexed by the same hourly ``time``."""

    time: pd.DatetimeIndex
    demand: pd.DataFrame  # [t/h] columns: header ids
    load: pd.Series  # [MW]
    price_import: pd.Series  # [currency/MWh]
    price_export: pd.Series  # [currency/MWh]
    fuel_price: pd.DataFrame  # [currency/GJ] columns: fuel ids
    co2_price: pd.Series  # [currency/t]
    duty: pd.DataFrame  # [MW] columns: drive ids (shaft power of one machine)
    source: str = ""
    time_note: str = ""  # how dates written with '/' were read, when day first
    # how the file wrote its dates: "month first" or "day first" with '/', "" year-month-day
    date_order: str = ""
    # the wall-clock times as written, when the file gave UTC offsets (``time`` is then
    # UTC): a month or a day is the site's, not Greenwich's
    wall: pd.DatetimeIndex | None = None

    @property
    def wall_time(self) -> pd.DatetimeIndex:
        """The site's wall-clock time of each hour (naive)."""
        return self.wall if self.wall is not None else self.time

    @cached_property
    def stamps(self) -> pd.Index:
        """Each hour as the file wrote it, with its UTC offset when it gave one: the times
        every output file and message shows (:mod:`cogendispatch.clock`); ``time`` is UTC
        then, for matching hours."""
        return site_clock(self.time, self.wall)

    @property
    def hours(self) -> int:
        """Number of hours in the series."""
        return len(self.time)

    def notes(self) -> list[str]:
        """Values beyond what any site or market has, most likely a column's unit mistaken
        (a price per kWh headed per MWh reads a thousand times too high): a note each, not
        an error, as a study may mean them. The limits are common practice, no published
        values: power prices beyond 10 000 per MWh (above the day-ahead and intraday price
        caps of the large European markets, from memory) or an import price below 1 per MWh
        all through, fuel beyond 500 per GJ, a load below 0.1 MW or above 2 000 MW."""
        out = [self.time_note] if self.time_note else []
        for what, col, limit in (("import", self.price_import, POWER_PRICE_NOTE),
                                 ("export", self.price_export, POWER_PRICE_NOTE)):
            if len(col) and col.abs().max() > limit:
                out.append(f"{self.source}: the {what} price reaches {col.abs().max():,.0f} per MWh; "
                           f"check the column's unit (per MWh, not per kWh)")
        for f in self.fuel_price:
            if self.fuel_price[f].abs().max() > FUEL_PRICE_NOTE:
                out.append(f"{self.source}: the price of fuel {f} reaches {self.fuel_price[f].abs().max():,.0f} "
                           "per GJ; check the column's unit")
        if len(self.load) and 0.0 < self.load.max() < LOAD_NOTE:  # 0: every load is a drive's motor
            out.append(f"{self.source}: the site electric load is at most {self.load.max():.3f} MW; check the "
                       "column's unit (MW, not kW)")
        if len(self.load) and self.load.max() > LOAD_HIGH_NOTE:
            out.append(f"{self.source}: the site electric load reaches {self.load.max():,.0f} MW; check the "
                       "column's unit (MW, not kW)")
        if len(self.price_import) and 0.0 < self.price_import.abs().max() < POWER_PRICE_LOW_NOTE:
            out.append(f"{self.source}: the import price is at most {self.price_import.abs().max():.3f} per MWh; "
                       "check the column's unit (per MWh, not per kWh)")
        return out


    def window(self, start: int, length: int) -> "Series":
        """Hours ``start`` .. ``start + length - 1`` as a new Series."""
        sl = slice(start, start + length)
        return Series(
            time=self.time[sl], demand=self.demand.iloc[sl], load=self.load.iloc[sl],
            price_import=self.price_import.iloc[sl], price_export=self.price_export.iloc[sl],
            fuel_price=self.fuel_price.iloc[sl], co2_price=self.co2_price.iloc[sl],
            duty=self.duty.iloc[sl], source=self.source, time_note=self.time_note, date_order=self.date_order,
            wall=self.wall[sl] if self.wall is not None else None,
        )


_KIND = {
    "demand": "mass_flow", "load": "power", "duty": "power",
    "price:import": "price_power", "price:export": "price_power",
    "price:fuel": "price_energy", "price:co2": "price_mass",
}


def read_table(path: Path) -> pd.DataFrame:
    """The table's cells as typed (strings); an Excel workbook's first sheet, whose name
    is kept in ``attrs["sheet"]``."""
    excel = path.suffix.lower() in (".xlsx", ".xlsm", ".xls")
    try:
        if excel:
            try:
                book = pd.ExcelFile(path)
            except OSError:  # not found, a folder, no permission: said below as for a CSV
                raise
            except Exception as exc:  # noqa: BLE001  the reader's own words would not help here
                raise InputError(path, "", f"cannot be read as an Excel workbook ({type(exc).__name__}); save it "
                                 "again from the spreadsheet as .xlsx, or as CSV") from None
            with book:
                sheet = str(book.sheet_names[0])
                # cells as typed: pandas would turn 'n/a', 'NA' and blanks alike into NaN
                raw = pd.read_excel(book, sheet_name=sheet, dtype=str, na_filter=False)
                first = pd.read_excel(book, sheet_name=sheet, header=None, nrows=1, dtype=str, na_filter=False)
            raw.attrs["sheet"] = sheet
        else:
            raw = pd.read_csv(path, dtype=str, keep_default_na=False, skipinitialspace=True)
            first = pd.read_csv(path, header=None, nrows=1, dtype=str, keep_default_na=False, skipinitialspace=True)
    except InputError:
        raise
    except FileNotFoundError:
        raise InputError(path, "", "file not found") from None
    except IsADirectoryError:
        raise InputError(path, "", "is a folder; give the series file (CSV or Excel)") from None
    except Exception as exc:  # parser errors from pandas/openpyxl come in many types
        why = " ".join(str(exc).split())  # parser messages carry line breaks
        raise InputError(path, "", f"cannot read the table ({type(exc).__name__}: {why})") from None
    # the reader renames a repeated heading ('load [MW].1'): name the heading as written
    names = [str(x).strip() for x in (first.iloc[0] if len(first) else [])]
    repeated = [n for i, n in enumerate(names) if n and n in names[:i]]
    if repeated:
        raise InputError(path, "header row", f"column '{repeated[0]}' appears twice")
    return raw


def load_series(path: str | Path, site: SiteConfig, prices_only: bool = False) -> Series:
    """Load and validate an hourly series for ``site``.

    Parameters
    ----------
    path : CSV or Excel file, one row per hour (see the module docstring)
    site : the validated site, used to check header, fuel and drive references
    prices_only : a file of replacement prices (a study scenario's): demand and load
        columns may be left out, and a price column left out reads NaN (keep the base's)

    Raises
    ------
    InputError naming the file and the column or row at fault.
    """
    path = Path(path)
    raw = read_table(path)
    return parse_series(raw, site, path, prices_only)


def parse_series(raw: pd.DataFrame, site: SiteConfig, path: str | Path = "<series>",
                 prices_only: bool = False) -> Series:
    """Validate a table of strings (as read from CSV/Excel) into a :class:`Series`
    (``prices_only``: see :func:`load_series`)."""
    path = Path(path)
    if raw.shape[0] == 0:
        raise InputError(path, "", "no rows")
    cols = [str(c) for c in raw.columns]
    if "time" not in cols:
        # a title or notes above the table: the headings are further down
        below = [i for i in range(min(len(raw), 20))
                 if any(str(v).strip().lower() == "time" for v in raw.iloc[i].to_numpy())]
        if below:
            raise InputError(path, "header row", f"missing column 'time', which appears in row {below[0] + 2}: "
                             "the headings must be the first row (a title above the table?)")
        sheet = raw.attrs.get("sheet")
        where = f" (read from the workbook's first sheet, '{sheet}': the series must be the first sheet)" if sheet else ""
        raise InputError(path, "header row", "missing column 'time'" + where)
    time, time_note, wall = _parse_time(raw["time"], path)
    # the time_note is given for a day-first reading only (_slashed_reading)
    date_order = ("day first" if time_note else "month first") if raw["time"].astype(str).str.contains("/").any() else ""

    headers = {h.id for h in site.headers}
    fuels = {f.id for f in site.fuels}
    drives = {d.id for d in site.drives}
    values: dict[tuple[str, str], pd.Series] = {}
    written: dict[tuple[str, str], str] = {}  # each column's heading as written, for messages
    for col in cols:
        if col == "time":
            continue
        m = _COL_RE.match(col)
        if not m:
            raise InputError(path, f"column '{col}'", "write the column as 'name [unit]', e.g. 'demand:LP [t/h]'")
        name, unit = m.group(1), m.group(2)
        parts = name.split(":")
        if parts[0] == "demand" and len(parts) == 2:
            kind, ref, known = "demand", parts[1], headers
        elif parts[0] == "duty" and len(parts) == 2:
            kind, ref, known = "duty", parts[1], drives
        elif parts[:2] == ["price", "fuel"] and len(parts) == 3:
            kind, ref, known = "price:fuel", parts[2], fuels
        elif name in ("load", "price:import", "price:export", "price:co2"):
            kind, ref, known = name, "", None
        else:
            raise InputError(path, f"column '{col}'", f"unknown column '{name}' (expected demand:<header>, load, "
                             "price:import, price:export, price:fuel:<fuel>, price:co2, duty:<drive>)")
        if known is not None and ref not in known:
            raise InputError(path, f"column '{col}'", f"unknown {'header' if kind == 'demand' else 'fuel' if kind == 'price:fuel' else 'drive'} '{ref}'")
        try:
            if kind.startswith("price:"):  # "EUR/MWh" in the site's currency, as the outputs name it
                unit = in_site_currency(unit, site.site.currency)
            scale, offset = column_factor(unit, _KIND[kind])
        except UnitError as exc:
            raise InputError(path, f"column '{col}'", str(exc)) from None
        key = (kind, ref)
        if key in values:
            raise InputError(path, f"column '{col}'", f"a second column for what '{written[key]}' gives")
        values[key] = _numeric(raw[col], path, col) * scale + offset
        written[key] = col

    n = len(time)
    idx = time

    def col_or(kind: str, ref: str, default: float | None, what: str) -> pd.Series:
        s = values.get((kind, ref))
        if s is None:
            if default is None:
                raise InputError(path, "header row", f"missing column for {what}")
            return pd.Series(np.full(n, default), index=idx)
        return pd.Series(s.to_numpy(), index=idx)

    # every header needs its column: a forgotten one would silently plan for no demand
    need = 0.0 if prices_only else None
    demand = pd.DataFrame({h.id: col_or("demand", h.id, need, f"the process steam demand of header '{h.id}', "
                                        f"e.g. 'demand:{h.id} [t/h]' (a column of zeros if it has none)")
                           for h in site.headers}, index=idx)
    load = col_or("load", "", need, "the site electric load, e.g. 'load [MW]'")
    if (load < 0).any():
        row = int(np.argmax(load.to_numpy() < 0))
        raise InputError(path, f"row {row + 2}, column '{written[('load', '')]}'",
                         "the site electric load must not be negative")
    if prices_only and not any(k[0].startswith("price:") for k in values):
        raise InputError(path, "header row", "no price column (price:import, price:export, price:fuel:<fuel>, "
                         "price:co2): nothing to replace")
    keep = np.nan if prices_only else None  # NaN: the base series' column stays
    price_import = col_or("price:import", "", keep, "the import price, e.g. 'price:import [per MWh]'")
    price_export = col_or("price:export", "", np.nan if prices_only else 0.0, "")
    fuel_price = pd.DataFrame({f.id: col_or("price:fuel", f.id, np.nan if prices_only else f.price, "")
                               for f in site.fuels}, index=idx)
    co2 = col_or("price:co2", "", np.nan if prices_only else 0.0, "")
    duty = pd.DataFrame({d.id: col_or("duty", d.id, d.duty, "") for d in site.drives}, index=idx)
    for d in site.drives:
        if (duty[d.id] < 0).any():
            row = int(np.argmax(duty[d.id].to_numpy() < 0))
            raise InputError(path, f"row {row + 2}, column '{written.get(('duty', d.id), 'duty:' + d.id)}'",
                             "duty must not be negative")
    return Series(time=idx, demand=demand, load=load, price_import=price_import, price_export=price_export,
                  fuel_price=fuel_price, co2_price=co2, duty=duty, source=str(path),
                  time_note=time_note, date_order=date_order, wall=wall)


# largest magnitude a series cell may have, in its column's unit (t/h, MW, kW, per MWh ...)
MAX_CELL = 1e7


def _numeric(col: pd.Series, path: Path, name: str) -> pd.Series:
    """Parse a column of strings to floats; a blank, text or NaN cell is an error naming its row."""
    text = col.astype(str).str.strip()
    num = pd.to_numeric(text, errors="coerce")
    bad = num.isna() | ~np.isfinite(num.to_numpy(dtype=float, na_value=np.nan))
    if bad.any():
        i = int(np.argmax(bad.to_numpy()))
        cell = text.iloc[i]
        what = "an empty cell" if cell == "" else f"'{cell}' is not a finite number"
        raise InputError(path, f"row {i + 2}, column '{name}'", what)
    huge = num.abs() > MAX_CELL
    if huge.any():  # a slipped exponent or a pasted id: no plant has such a flow, load or price
        i = int(np.argmax(huge.to_numpy()))
        raise InputError(path, f"row {i + 2}, column '{name}'",
                         f"{text.iloc[i]} is beyond any plant (more than {MAX_CELL:g} in size)")
    return num.astype(float).reset_index(drop=True)


def _read_times(text: pd.Series, path: Path, dayfirst: bool = False) -> list[pd.Timestamp]:
    """Each cell as a timestamp, with its UTC offset if it carries one; an unreadable or
    empty cell, or a column mixing times with and without offsets, is an error naming its row."""
    parsed: list[pd.Timestamp] = []
    for i, t in enumerate(text):
        try:
            ts = pd.to_datetime(t, dayfirst=True) if dayfirst else pd.Timestamp(t)
        except (ValueError, TypeError):
            raise InputError(path, f"row {i + 2}, column 'time'", f"'{t}' is not a date and time") from None
        if ts is pd.NaT or (isinstance(ts, float) and math.isnan(ts)) or pd.isna(ts):
            raise InputError(path, f"row {i + 2}, column 'time'", "empty time")
        if parsed and (ts.tzinfo is None) != (parsed[0].tzinfo is None):
            raise InputError(path, f"row {i + 2}, column 'time'",
                             "mixes times with and without a UTC offset; give every row an offset or none")
        parsed.append(ts)
    return parsed


def _is_hourly(parsed: list[pd.Timestamp]) -> bool:
    """True when each time is exactly one hour after the one before."""
    return all(b - a == pd.Timedelta(hours=1) for a, b in zip(parsed, parsed[1:]))


def _slashed_reading(text: pd.Series, path: Path, month_first: list[pd.Timestamp]) -> tuple[list[pd.Timestamp], str]:
    """Dates written with '/' read either way round: the reading that makes the rows
    hourly, with a note when it is day first. When both do and they differ (a series
    within one day: 01/03/2027 is 3 January or 1 March) the file must say which."""
    try:
        day_first = _read_times(text, path, dayfirst=True)
    except InputError:
        return month_first, ""
    if day_first == month_first or not _is_hourly(day_first):
        return month_first, ""
    if _is_hourly(month_first):
        raise InputError(path, "row 2, column 'time'",
                         f"'{text.iloc[0]}' reads as {month_first[0]:%d %B %Y} (month first) or as "
                         f"{day_first[0]:%d %B %Y} (day first), and both make the rows hourly; "
                         "write dates as year-month-day (2027-03-01)")
    return day_first, (f"{path}: dates with '/' read day first, the only reading that makes the rows hourly "
                       f"('{text.iloc[0]}' is {day_first[0]:%d %B %Y})")


def _clock_change_hour(t: pd.Timestamp) -> bool:
    """Whether a naive wall-clock hour ``t`` could be skipped or repeated by a daylight-saving
    change: in March/April or September to November (either hemisphere) and between 00:00
    and 03:00, where the clocks change (common practice: 01:00 to 03:00 in Europe and North
    America, at midnight in parts of South America). A time with a UTC offset never is."""
    return t.tzinfo is None and t.month in (3, 4, 9, 10, 11) and t.hour <= 3


def _parse_time(col: pd.Series, path: Path) -> tuple[pd.DatetimeIndex, str, pd.DatetimeIndex | None]:
    """Parse the ``time`` column and check it is strictly hourly with no gap or repeat.
    Returns the times (UTC when the file gives offsets), a note on how dates written with
    '/' were read ("" when none is needed) and, with offsets, the wall-clock times."""
    text = col.astype(str).str.strip()
    parsed = _read_times(text, path)
    slash = text.str.contains("/").any()
    note = ""
    if slash:
        parsed, note = _slashed_reading(text, path, parsed)
    wall = None
    if parsed and parsed[0].tzinfo is not None:
        wall = pd.DatetimeIndex([t.tz_localize(None) for t in parsed])
        parsed = [t.tz_convert("UTC") for t in parsed]
    idx = pd.DatetimeIndex(parsed)
    if len(idx) > 1:
        step = np.diff(((idx - idx[0]) / pd.Timedelta(hours=1)).to_numpy(dtype=float))  # [h]
        if (step < 0).any():  # report disorder first: a swapped pair otherwise reads as a gap
            step = np.where(step < 0, step, 1.0)
        for i, d in enumerate(step):
            if d == 1.0:
                continue
            row = i + 3
            # the previous row as read: a time pandas read otherwise than meant ('3pm',
            # day-first dates) shows there, one row before the break is found
            prev = f"row {row - 1} '{text.iloc[i]}' read as {parsed[i]:%Y-%m-%d %H:%M}" \
                + (" UTC" if parsed[i].tzinfo is not None else "")
            if d == 0:
                # a repeated hour in a month when clocks go back is most likely the local
                # fall-back hour, unless the times carry their offsets
                back = _clock_change_hour(parsed[i])
                raise InputError(path, f"row {row}, column 'time'", f"duplicated hour {text.iloc[i + 1]}"
                                 + ("; the clocks going back? give UTC offsets" if back else ""))
            if d < 0:
                raise InputError(path, f"row {row}, column 'time'",
                                 f"{text.iloc[i + 1]} is before the previous row ({prev}): rows must be in time order")
            # one hour missing in a month when clocks change (March/April, September to
            # November, either hemisphere) is most likely the local spring-forward hour,
            # unless the times carry their UTC offsets already
            clocks = d == 2 and _clock_change_hour(parsed[i] + pd.Timedelta(hours=1))
            hint = ("dates with '/' read neither month first nor day first as hourly rows: write 2027-03-01" if slash
                    else "a daylight-saving gap? give UTC offsets" if clocks
                    else "every hour needs a row")
            if d > 1 and d == round(d):
                raise InputError(path, f"row {row}, column 'time'",
                                 f"{d - 1:g} missing hour(s) before {text.iloc[i + 1]} ({prev}); {hint}")
            raise InputError(path, f"row {row}, column 'time'",
                             f"{text.iloc[i + 1]} is {d * 60:g} min after the previous row ({prev}): rows must be "
                             "exactly one hour apart" + (f"; {hint}" if slash else ""))
    return idx, note, wall
