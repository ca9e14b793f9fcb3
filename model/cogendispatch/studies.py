"""Budget studies: a long horizon under price scenarios, by rolling horizon, in parallel.

A scenario file (TOML) names scenarios; each changes the base series:

    [[scenario]]
    name = "gas +30 %"
    fuel.NG = { multiply = 1.3 }                 # any fuel by id
    import = { add = "5 per MWh", months = [6, 7, 8] }
    export = { multiply = 0.9 }
    co2 = { add = "20 per t" }
    demand = { LP = 1.05 }                       # scale a header's process demand
    prices = "high_prices.csv"                   # replacement price columns (optional)
      [[scenario.outage]]
      unit = "B3"
      from = "2027-03-01T00:00"
      to = "2027-03-14T23:00"                    # inclusive

The year is planned in windows of one week plus a look-ahead (24 h by default) whose
decisions are discarded; unit states, hours in state, boiler loads and driver states carry
from one window to the next, so minimum up/down times, ramps and switching limits hold
across window edges. Each window re-uses the model loaded for the previous window of the
same shape (:mod:`cogendispatch.reuse`): its data, initial states and outages are
overwritten in place, and the previous window's schedule, moved on by one window, is the
guess its starting schedule is built from (same hour of the week before). Scenarios are independent and run in a process
pool (spawn start method, one HiGHS thread per worker, each worker building its own
models) or on a Dask distributed scheduler.
"""

from __future__ import annotations

import contextlib
import datetime as dt
import math
import multiprocessing as mp
import os
import re
import signal
import threading
import time
import tomllib
from collections.abc import Iterator
from concurrent.futures import ProcessPoolExecutor
from multiprocessing import resource_tracker
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Annotated, Any, Callable

import numpy as np
import pandas as pd
from pydantic import BaseModel, ConfigDict, Field, ValidationError, field_validator, model_validator

from .errors import InputError, InputErrors, SolveError
from .plant.load import validation_problems
from .plant.schema import SiteConfig
from .plant.series import Series, parse_series, read_table
from .equipment.drive import position_history
from .results import TOL, cost_frame, diagnose, schedule_frame
from .site import BuildOptions, build_site_model
from .reuse import WindowModels
from .solve import LoadedModel, SolveOptions, SolveReport

WEEK = 168
# [s] least time for a window with no earlier schedule to start from: it starts from the LP
# relaxation, which with the reserve rows takes about 10 s for 192 h of the demo site
# (measured, 2 cores; the LP may run past this limit), and the rounded start needs more
COLD_MIN = 20.0
# [s] least time for a window that has a schedule to start from but a newly built model,
# whose LPs have no basis to start from yet
NEW_MODEL_MIN = 6.0


class _T(BaseModel):
    # the keys as documented only ('from', 'to', 'import', 'scenario', 'outage'), not the
    # field names behind them
    model_config = ConfigDict(extra="forbid", frozen=True)


MAX_PRICE_FACTOR = 20.0  # see PriceChange.multiply


class PriceChange(_T):
    # a factor, not a per cent: above 20 (a price twenty times over, beyond the year-on-year
    # swings of the gas and power markets, common practice) is most likely "130" meant as
    # +30 %; larger swings are given as a price file
    multiply: float = Field(default=1.0, ge=0.0, allow_inf_nan=False)
    add: str | None = None  # a price with its unit, e.g. "5 per MWh"
    # a fixed price with its unit, in place of the series' (a budget's flat gas price, a
    # contract's fixed export price); alone, as "set and multiply" has no one reading
    set_: str | None = Field(default=None, alias="set")
    months: list[Annotated[int, Field(ge=1, le=12)]] | None = None

    @model_validator(mode="after")
    def _set_alone(self) -> "PriceChange":
        if self.set_ is not None and (self.add is not None or "multiply" in self.model_fields_set):
            raise ValueError("'set' fixes the price and goes alone: leave out multiply and add")
        return self

    @field_validator("multiply")
    @classmethod
    def _a_factor(cls, v: float) -> float:
        if v > MAX_PRICE_FACTOR:
            raise ValueError(f"{v:g} is a factor, at most {MAX_PRICE_FACTOR:g}: 1.3 for +30 %, not 130 (a larger "
                             "change goes in a price file)")
        return v


class Outage(_T):
    unit: str
    start: str = Field(alias="from")
    end: str = Field(alias="to")

    @field_validator("start", "end", mode="before")
    @classmethod
    def _toml_dates(cls, v: object) -> object:
        # a date or date-time written without quotes is TOML's own type: take it as text
        return v.isoformat() if isinstance(v, (dt.date, dt.datetime)) else v


class Scenario(_T):
    name: str = Field(min_length=1, max_length=60)

    @field_validator("name")
    @classmethod
    def _no_edge_spaces(cls, v: str) -> str:
        if v != v.strip():
            raise ValueError(f"'{v}' begins or ends with a space, which no table shows")
        return v
    fuel: dict[str, PriceChange] = Field(default_factory=dict)
    import_: PriceChange | None = Field(default=None, alias="import")
    export: PriceChange | None = None
    co2: PriceChange | None = None
    # factors, not per cent: above 10 is most likely "105" meant as 105 %
    demand: dict[str, Annotated[float, Field(ge=0.0, le=10.0)]] = Field(default_factory=dict)
    load: float | None = Field(default=None, ge=0.0, le=10.0, allow_inf_nan=False)  # scales the site electric load
    prices: str | None = None
    outages: list[Outage] = Field(default_factory=list, alias="outage")


class ScenarioFile(_T):
    scenarios: list[Scenario] = Field(min_length=1, alias="scenario")

    @model_validator(mode="after")
    def _unique(self) -> "ScenarioFile":
        # names that differ only in capitals read as one in the tables and the file names
        names = [s.name.casefold() for s in self.scenarios]
        dup = {s.name for s in self.scenarios if names.count(s.name.casefold()) > 1}
        if dup:
            raise ValueError(f"duplicated scenario name(s), capitals aside: {', '.join(sorted(dup))}")
        return self


@dataclass(frozen=True)
class PreparedScenario:
    """A scenario applied: its series and outages as hour ranges."""

    name: str
    series: Series
    outages: tuple[tuple[str, int, int], ...]
    notes: tuple[str, ...] = ()  # what the scenario file asks that changes nothing here
    price_file: str | None = None  # the replacement price file it read, resolved


def load_scenarios(path: str | Path, cfg: SiteConfig, base: Series, site_path: str = "") -> list[PreparedScenario]:
    """Read, validate and apply a scenario file to the base series.

    Raises InputError naming the file, the scenario and the key (unknown fuel, header or
    unit, a price without its unit, outage dates outside the series).
    """
    path = Path(path)
    try:
        raw = tomllib.loads(path.read_bytes().decode("utf-8"))
    except FileNotFoundError:
        raise InputError(path, "", "file not found") from None
    except OSError as exc:  # a folder, no permission
        raise InputError(path, "", f"cannot be read: {exc.strerror or exc}") from None
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise InputError(path, "", f"not valid TOML: {exc}") from None
    try:
        sf = ScenarioFile.model_validate(raw)
    except ValidationError as err:
        raise InputErrors(validation_problems(path, raw, err)) from None
    return [_apply(path, k, sc, cfg, base) for k, sc in enumerate(sf.scenarios)]


def _price(path: Path, where: str, ch: PriceChange, kind: str, values: pd.Series, currency: str,
           notes: list[str], months: np.ndarray) -> pd.Series:
    from .plant.load import site_currency_prices
    from .units import UnitError, parse_price

    def price(key: str, text: str) -> float:
        try:
            return parse_price(site_currency_prices(text, currency), kind)
        except UnitError as exc:
            raise InputError(path, f"{where} > {key}", str(exc)) from None

    if ch.set_ is not None:
        new = pd.Series(price("set", ch.set_), index=values.index, dtype=float)
    else:
        new = values * ch.multiply + (price("add", ch.add) if ch.add is not None else 0.0)
    if ch.months:
        mask = np.isin(months, ch.months)  # the site's months (wall clock), not UTC's
        if not mask.any():  # a year's scenario file tried on a shorter series, or a slip
            notes.append(f"{where} > months {ch.months} has no hour in the series: the change does nothing")
        new = values.where(~mask, new)
    return new


def _apply(path: Path, k: int, sc: Scenario, cfg: SiteConfig, base: Series) -> PreparedScenario:
    here = f"[[scenario]] #{k + 1} ('{sc.name}')"
    fuels = {f.id for f in cfg.fuels}
    headers = {h.id for h in cfg.headers}
    units = {u.id for u in (*cfg.boilers, *cfg.turbogenerators)}
    s = base
    notes: list[str] = []
    if sc.prices is not None:
        p = Path(sc.prices)
        if not p.is_absolute():
            p = path.parent / p
        if not p.is_file():
            raise InputError(path, here + " > prices", f"'{p}' is not a file")
        raw = read_table(p)  # read once: its columns name what the price file leaves out below
        repl = parse_series(raw, cfg, p, prices_only=True)
        others = [c for c in (str(c).strip() for c in raw.columns) if c != "time" and not c.startswith("price:")]
        if others:  # a price file replaces prices only; say what it leaves out
            notes.append(f"{here} > prices: {p.name} also has {', '.join(others)}, left out (a price file "
                         "replaces price columns only; demand and load change with 'demand' and 'load')")
        if (repl.time.tz is None) != (base.time.tz is None):
            has, lacks = ("the price file", "the series") if repl.time.tz is not None else ("the series", "the price file")
            raise InputError(path, here + " > prices", f"{p}: {has} gives its times with UTC offsets and {lacks} "
                             "without; write both alike")
        if len(repl.time) != len(base.time) or (repl.time != base.time).any():
            missing = [i for i, t in enumerate(base.time) if t not in set(repl.time)]
            extra = [i for i, t in enumerate(repl.time) if t not in set(base.time)]
            what = "; ".join(part for part in (  # each file's hours as it wrote them
                f"{len(missing)} hour(s) of the series missing, the first {base.stamps[missing[0]]}" if missing else "",
                f"{len(extra)} hour(s) not in the series, the first {repl.stamps[extra[0]]}" if extra else "") if part)
            raise InputError(path, here + " > prices", f"{p} does not cover the same hours as the base series"
                             + (f": {what}" if what else ""))

        def kept(new: pd.Series, old: pd.Series) -> pd.Series:  # a column the file leaves out keeps the base's
            return old if new.isna().all() else pd.Series(new.to_numpy(), index=old.index)

        s = Series(time=s.time, demand=s.demand, load=s.load,
                   price_import=kept(repl.price_import, s.price_import),
                   price_export=kept(repl.price_export, s.price_export),
                   fuel_price=pd.DataFrame({f: kept(repl.fuel_price[f], s.fuel_price[f]) for f in s.fuel_price},
                                           index=s.fuel_price.index),
                   co2_price=kept(repl.co2_price, s.co2_price), duty=s.duty, source=s.source, wall=s.wall)
    fuel_price = s.fuel_price.copy()
    cur = cfg.site.currency
    months = base.wall_time.month.to_numpy()
    for fid, ch in sc.fuel.items():
        if fid not in fuels:
            raise InputError(path, here + f" > fuel > {fid}", f"unknown fuel '{fid}' (fuels: {', '.join(sorted(fuels))})")
        fuel_price[fid] = _price(path, here + f" > fuel > {fid}", ch, "price_energy", fuel_price[fid], cur, notes,
                                 months)
    imp = _price(path, here + " > import", sc.import_, "price_power", s.price_import, cur, notes, months) \
        if sc.import_ else s.price_import
    exp = _price(path, here + " > export", sc.export, "price_power", s.price_export, cur, notes, months) \
        if sc.export else s.price_export
    co2 = _price(path, here + " > co2", sc.co2, "price_mass", s.co2_price, cur, notes, months) if sc.co2 else s.co2_price
    demand = s.demand.copy()
    for hid, f in sc.demand.items():
        if hid not in headers:
            raise InputError(path, here + f" > demand > {hid}",
                             f"unknown header '{hid}' (headers: {', '.join(sorted(headers))})")
        demand[hid] = demand[hid] * f
    outages = []
    for j, o in enumerate(sc.outages):
        w = here + f" > [[outage]] #{j + 1}"  # as the validation messages write it
        if o.unit not in units:
            raise InputError(path, w + " > unit", f"'{o.unit}' is not a boiler or turbo-generator "
                             f"(those are: {', '.join(sorted(units))})")
        a = _outage_time(path, w + " > from", o.start, base, end=False, notes=notes)
        b = _outage_time(path, w + " > to", o.end, base, end=True, notes=notes)
        if a > b:
            raise InputError(path, w + " > to", "is before 'from'")
        if b < base.time[0] or a > base.time[-1]:
            raise InputError(path, w, f"{o.start} to {o.end} lies wholly outside the series "
                             f"({base.stamps[0]} to {base.stamps[-1]})")
        # an outage running past either end of the series counts for the hours it covers
        i0 = int(np.searchsorted(base.time, a))
        i1 = int(np.searchsorted(base.time, b, side="right")) - 1
        outages.append((o.unit, i0, i1))
    load = s.load * sc.load if sc.load is not None else s.load
    ser = Series(time=s.time, demand=demand, load=load, price_import=imp, price_export=exp,
                 fuel_price=fuel_price, co2_price=co2, duty=s.duty, source=s.source, wall=s.wall)
    # the base series' plausibility notes, for the prices and load the scenario made: a
    # factor given as a per cent (multiply = 120) reads a hundred times too high
    said = set(base.notes())
    notes += [f"{path}: {here}: " + n.split(": ", 1)[-1].replace(
        "check the column's unit", "check the scenario's multiply, add or set, or the price file's column unit")
        for n in ser.notes() if n not in said]
    return PreparedScenario(sc.name, ser, tuple(outages), tuple(notes),
                            str(p.resolve()) if sc.prices is not None else None)


def _outage_time(path: Path, where: str, text: str, series: Series, end: bool,
                 notes: list[str] | None = None) -> pd.Timestamp:
    """An outage's 'from' or 'to' as a time comparable with the series' ``time``. A date
    alone is the day's first hour for 'from' and its last for 'to' (both inclusive). A time
    with a UTC offset needs a series with them; one without, against a series with offsets,
    is the site's wall-clock time: the hour that comes twice when the clocks go back is its
    first for 'from' and its second for 'to', and a time the series does not hold (an hour
    the clocks skip, or beyond its ends) takes the offset of the series' hour nearest it.
    Either choice at a clock change is said in ``notes``."""
    times = series.time
    if "/" in text or "." in re.split(r"[T ]", text.strip())[0]:
        # 5/1/2027 is 1 May in one country and 5 January in another
        raise InputError(path, where, f"'{text}': write the date as year-month-day, e.g. '2027-01-05T06:00'")
    # year-month-day in full, then optionally the hour: other spellings pandas reads
    # ('2027-3-14', '20270314', '2027-03') lose the whole-day reading of a date alone
    if not re.fullmatch(r"\s*\d{4}-\d{2}-\d{2}(?:[T ]\d{2}:\d{2}(?::\d{2})?(?:Z|[+-]\d{2}:?\d{2})?)?\s*", text):
        raise InputError(path, where, f"'{text}': write a date as '2027-03-14' (the whole day) or a time as "
                         "'2027-03-14T06:00', optionally with its UTC offset ('+01:00')")
    try:
        t = pd.Timestamp(text)
    except (ValueError, TypeError):
        raise InputError(path, where, f"'{text}' is not a date and time, e.g. '2027-03-01T06:00'") from None
    date_alone = re.fullmatch(r"\s*\d{4}-\d{2}-\d{2}\s*", text) is not None
    if end and date_alone:
        t = t + pd.Timedelta(hours=23)
    if t.tzinfo is not None and times.tz is None:
        raise InputError(path, where, f"'{text}' has a UTC offset but the series' times have none (e.g. "
                         f"'{series.stamps[0].isoformat()}'): give it without")
    if t.tzinfo is None and times.tz is not None:
        return _wall_to_utc(t, series, end, f"{path}: {where}: '{text}'", notes)
    return t


def _wall_to_utc(t: pd.Timestamp, series: Series, end: bool, what: str = "",
                 notes: list[str] | None = None) -> pd.Timestamp:
    """The site's wall-clock time ``t`` (naive) as the UTC time of ``series`` (which has
    offsets); see :func:`_outage_time` for the hours it does not hold once, which are
    said in ``notes`` (``what`` names the time)."""
    wall, times = series.wall_time, series.time
    hits = np.flatnonzero(wall == t)
    said = notes if notes is not None else []
    if len(hits):
        k = int(hits[-1] if end else hits[0])
        if len(hits) > 1:
            said.append(f"{what} comes twice (the clocks go back): taken as {series.stamps[k]}, the "
                        f"{'second' if end else 'first'}; give the offset to choose")
        return times[k]
    i = int(np.searchsorted(wall, t))  # wall-clock times rise but for the hour repeated
    if 0 < i < len(wall):  # inside the series: an hour the clocks skip, so the next or the one before
        k = i - 1 if end else i
        said.append(f"{what} is an hour the clocks skip: taken as {series.stamps[k]}")
        return times[k]
    k = 0 if i == 0 else len(wall) - 1
    return (t - (wall[k] - times[k].tz_localize(None))).tz_localize("UTC")


# ------------------------------------------------------------------ rolling horizon

@dataclass
class WindowReport:
    start: str
    end: str
    build_s: float
    solve_s: float
    status: str
    gap: float | None  # None: the search stopped before it had a finite bound
    tries: int
    reused: bool = False  # the model of an earlier window was given this window's data


@dataclass
class ScenarioResult:
    name: str
    schedule: pd.DataFrame
    hourly_cost: pd.DataFrame
    shortfall_hours: int
    windows: list[WindowReport] = field(default_factory=list)
    diagnosis: list[str] = field(default_factory=list)  # as for a plan; hours of the whole series
    # each hour's month ("2027-04") on the site's wall clock, for the monthly summary
    months: list[str] | None = None


def carry_states(cfg: SiteConfig, sched: pd.DataFrame, prev: SiteConfig) -> SiteConfig:
    """The site with its initial states set from the end of a committed schedule."""

    def run_length(col: pd.Series, prior: float) -> tuple[int, float]:
        v = col.to_numpy().round().astype(int)
        last = v[-1]
        n = 0
        for x in v[::-1]:
            if x != last:
                break
            n += 1
        return int(last), float(n + (prior if n == len(v) else 0.0))

    boilers = []
    for b, pb in zip(cfg.boilers, prev.boilers):
        prior = pb.initial_hours if bool(pb.initial_on) == bool(round(sched[f"{b.id}.on"].iloc[0])) else 0.0
        on, hrs = run_length(sched[f"{b.id}.on"], prior)
        boilers.append(b.model_copy(update={"initial_on": bool(on), "initial_hours": hrs,
                                            "initial_steam": float(sched[f"{b.id}.steam_t_h"].iloc[-1]) if on else 0.0}))
    tgs = []
    for t, pt in zip(cfg.turbogenerators, prev.turbogenerators):
        prior = pt.initial_hours if bool(pt.initial_on) == bool(round(sched[f"{t.id}.on"].iloc[0])) else 0.0
        on, hrs = run_length(sched[f"{t.id}.on"], prior)
        tgs.append(t.model_copy(update={"initial_on": bool(on), "initial_hours": hrs}))
    drives = []
    for d, pd_ in zip(cfg.drives, prev.drives):
        count = sched[f"{d.id}.on_steam"].to_numpy()
        # each machine position's own time since its last change: one figure for all would
        # hold a machine that has kept its driver for days by the change another made an
        # hour ago; a time unknown before the first window counts from its start
        since = [n if math.isfinite(n) else float(len(count)) for _, n in position_history(pd_, count)]
        n = int(round(count[-1]))
        drives.append(d.model_copy(update={"initial_on_steam": n,
                                           "initial_hours_since_switch": since if d.count > 1 else since[0]}))
    return cfg.model_copy(update={"boilers": boilers, "turbogenerators": tgs, "drives": drives})


def rolling_horizon(cfg: SiteConfig, ps: PreparedScenario, options: SolveOptions,
                    window: int = WEEK, lookahead: int = 24, build: BuildOptions = BuildOptions(),
                    on_window: Callable[[int, int], None] | None = None) -> ScenarioResult:
    """Plan ``ps.series`` window by window; returns the committed hours joined."""
    n = ps.series.hours
    starts = list(range(0, n, window))
    scheds, costs, reports = [], [], []
    diagnosis: list[str] = []
    cur = cfg
    models = WindowModels(options.highs_threads)  # one thread goes to the helper, if any
    last_lm, last_x = None, None
    last_outs: tuple[tuple[str, int, int], ...] = ()
    for w, s0 in enumerate(starts):
        length = min(window + lookahead, n - s0)
        keep = min(window, n - s0)
        ser = ps.series.window(s0, length)
        outs = tuple((u, a - s0, b - s0) for u, a, b in ps.outages if b >= s0 and a < s0 + length)
        opts = BuildOptions(reserve=build.reserve, outages=outs)
        tries, last_err = 0, None
        reused_before = models.reused
        while tries < 2:
            tries += 1
            try:
                if tries == 1:
                    lm = models.model_for(cur, ser, opts)
                    o = options
                    # start from the previous window's schedule, same hour of the week
                    hint = lm.guess_from(last_lm, last_x) if last_x is not None else None
                    if hint is None:  # no schedule to start from: the LP relaxation needs longer
                        o = replace(options, time_limit=max(COLD_MIN, options.time_limit))
                    elif models.reused == reused_before:  # a new model: its first LPs start cold
                        o = replace(options, time_limit=max(NEW_MODEL_MIN, options.time_limit))
                else:  # the retry builds a fresh model and allows twice the time
                    models.forget(cur, ser, opts)
                    lm = LoadedModel(build_site_model(cur, ser, opts), threads=options.highs_threads)
                    o = replace(options, time_limit=2 * max(COLD_MIN, options.time_limit))
                    hint = None
                sm = lm.sm
                rep = lm.solve_mip(o, hint=hint)
                if not rep.has_solution:
                    raise SolveError(f"HiGHS stopped ({rep.status}) without any schedule")
                # the week before is a poor guess where it left demand unmet, or where an
                # outage sets this window or the one before apart: its odd week (a unit out,
                # the others carrying it) would otherwise be copied into a normal one
                if hint is not None and (_short(lm) or outs or last_outs):
                    rep = _second_opinion(lm, rep, replace(options, time_limit=max(COLD_MIN, options.time_limit)))
                break
            except (SolveError, RuntimeError) as exc:  # retried once, then reported
                last_err = exc
        else:
            raise SolveError(f"scenario '{ps.name}': window {ser.stamps[0]} to {ser.stamps[-1]} failed twice: {last_err}")
        last_lm, last_x, last_outs = lm, lm.schedule, outs
        # the schedule and costs only: a study writes no balances
        schedule, hourly = schedule_frame(sm), cost_frame(sm)
        diagnosis += diagnose(sm, keep, first=s0)
        sched = schedule.iloc[:keep]
        scheds.append(sched)
        costs.append(hourly.iloc[:keep])
        reports.append(WindowReport(str(ser.stamps[0]), str(ser.stamps[keep - 1]),
                                    rep.seconds["build"] + rep.seconds["load"],
                                    rep.seconds["solve"] + rep.seconds.get("start", 0.0)
                                    + rep.seconds.get("strengthen", 0.0), rep.status,
                                    proven_gap(rep.gap, rep.objective), tries,
                                    reused=tries == 1 and models.reused > reused_before))
        cur = carry_states(cur, sched, cur)
        if on_window:
            on_window(w + 1, len(starts))
    schedule = pd.concat(scheds)
    hourly = pd.concat(costs).fillna(0.0)
    bal_short = int(short_hours(cfg, hourly).sum())
    months = ps.series.wall_time.to_period("M").astype(str).tolist()
    return ScenarioResult(ps.name, schedule, hourly, bal_short, reports, diagnosis, months)


def window_gap_words(row: pd.Series) -> str:
    """A scenario's largest window gap in words, from its row of ``summarise``: the per cent
    when every window proved one, else how many did not and what the others proved (a
    folder written before those columns: "none proven")."""
    g = row.get("largest_window_gap", float("nan"))
    if g == g:
        return f"{100 * g:.2f} %"
    if "windows" not in row:
        return "none proven"
    words = f"none proven in {int(row.windows - row.windows_proven)} of {int(row.windows)} window(s)"
    if row.windows_proven:
        words += f" (the others within {100 * row.largest_proven_window_gap:.2f} %)"
    return words


def proven_gap(gap: float, objective: float = 1.0) -> float | None:
    """A window's gap [-] as a study reports it: None ("none proven") for no finite bound,
    and, for a positive cost ``objective``, for a gap of 100 % or more, whose bound (at or
    below zero; HiGHS stopped before its root LP) proves nothing about it."""
    if not math.isfinite(gap) or (objective > 0 and gap >= 1.0):
        return None
    return gap


def _short(lm: LoadedModel) -> bool:
    """Whether the schedule loaded in ``lm`` leaves any demand or reserve unmet."""
    m = lm.sm.model
    slacks = [*m.steam_short.values(), *m.power_short.values(), *m.reserve_short.values()]
    return any((v.value or 0.0) > 1e-6 for v in slacks)


def _second_opinion(lm: LoadedModel, rep: SolveReport, options: SolveOptions) -> SolveReport:
    """A window started from the week before that leaves demand unmet is solved again from
    its own LP relaxation: the week before may have had a unit out that is back now. The
    cheaper of the two schedules is kept (and loaded into the model)."""
    first = lm.schedule
    lm.refresh()  # the first solve's reserve rows: the second adds its own
    again = lm.solve_mip(options)
    if again.has_solution and again.objective < rep.objective:
        again.seconds["solve"] += rep.seconds["solve"] + rep.seconds.get("start", 0.0)
        return again
    lm.schedule = first
    for v, c in zip(lm.vars, lm.cols):
        v.set_value(first[c], skip_validation=True)
    return rep


# ------------------------------------------------------------------ summaries

def short_hours(cfg: SiteConfig, hourly: pd.DataFrame) -> pd.Series:
    """Hours with any slack in use, from the penalty column of an hourly cost frame (only
    slacks are priced there): more than the results' zero tolerance at the cheapest slack
    price, so that round-off in a solution never counts as a shortfall."""
    if "penalty" not in hourly:
        return pd.Series(False, index=hourly.index)
    p = cfg.penalties
    cheapest = min(p.steam_shortfall, p.steam_surplus, p.power_shortfall, p.power_surplus, p.reserve_shortfall)
    return hourly["penalty"] > TOL * cheapest


def summarise(cfg: SiteConfig, r: ScenarioResult, by_month: bool = False) -> pd.DataFrame:
    """Totals per scenario (and month): cost by category, fuel, import/export, CO2, starts,
    running hours per unit, hours on steam per machine, hours with a shortfall."""
    s, c = r.schedule, r.hourly_cost
    factors = {f.id: f.co2_factor for f in cfg.fuels}
    frame = pd.DataFrame(index=s.index)
    for cat in c.columns:
        frame[f"cost_{cat}"] = c[cat]
    frame["cost_total"] = c.sum(axis=1)
    # what is money: the penalties price demand and reserve not met, and can dwarf the rest
    frame["cost_total_without_penalty"] = frame["cost_total"] - (c["penalty"] if "penalty" in c else 0.0)
    fuel_cols = {f.id: [f"{b.id}.fuel_{f.id}_GJ_h" for b in cfg.boilers if f.id in b.fuels] for f in cfg.fuels}
    for fid, cols in fuel_cols.items():
        frame[f"fuel_{fid}_GJ"] = s[cols].sum(axis=1) if cols else 0.0
    frame["fuel_GJ"] = frame[[f"fuel_{f}_GJ" for f in fuel_cols]].sum(axis=1)
    frame["import_MWh"] = s["grid.import_MW"]
    frame["export_MWh"] = s["grid.export_MW"]
    frame["co2_t"] = sum(frame[f"fuel_{f}_GJ"] * factors[f] for f in fuel_cols)
    frame["boiler_starts"] = sum(s[f"{b.id}.start"] for b in cfg.boilers)
    # cost_startup counts these too
    frame["turbogenerator_starts"] = sum((s[f"{t.id}.start"] for t in cfg.turbogenerators
                                          if f"{t.id}.start" in s), start=pd.Series(0.0, index=s.index))
    for u in (*cfg.boilers, *cfg.turbogenerators):
        frame[f"{u.id}.hours_on_h"] = s[f"{u.id}.on"]  # named as the schedule's columns: unit.quantity_unit
    for d in cfg.drives:
        if d.steam_turbine is not None and d.motor is not None:  # a choice to report
            frame[f"{d.id}.machine_hours_on_steam_h"] = s[f"{d.id}.on_steam"]
    frame["shortfall_hours"] = short_hours(cfg, c).astype(int)
    if by_month:
        # the site's months: a series with UTC offsets is held in UTC, whose months begin
        # an hour or two off the site's
        months = r.months if r.months is not None and len(r.months) == len(frame) else \
            [f"{pd.Timestamp(t):%Y-%m}" for t in s.index]  # each hour on its own clock
        out = frame.groupby(np.asarray(months)).sum()
        out.index.name = "month"
        out.insert(0, "scenario", r.name)
        return out.reset_index()
    out = frame.sum().to_frame().T
    out.insert(0, "scenario", r.name)
    # how far each window's search stayed from its proven bound: differences between
    # scenarios smaller than this are within the search's tolerance
    # (NaN, "none proven", when any window ended without a finite bound)
    gaps = [w.gap for w in r.windows]
    known = [g for g in gaps if g is not None and math.isfinite(g)]
    proven = bool(gaps) and len(known) == len(gaps)
    out["largest_window_gap"] = max(known) if proven else float("nan")
    # a window started from the week before has no LP relaxation of its own and seldom a
    # bound within a short limit: what the others proved still says something
    out["windows_proven"] = len(known)
    out["windows"] = len(gaps)
    out["largest_proven_window_gap"] = max(known) if known else float("nan")
    return out


# ------------------------------------------------------------------ parallel runs

def _scenario_job(args: tuple[Any, ...]) -> ScenarioResult:
    """One scenario in a worker process. ``stop`` (an event of the parent's manager, whose
    process ignores Ctrl-C) set: the study was interrupted, so a scenario still queued does
    not start and a running one ends after its current window."""
    cfg, ps, options, window, lookahead, build, queue, stop = args

    def on_window(i: int, n: int) -> None:
        if stop.is_set():
            raise KeyboardInterrupt
        if queue is not None:
            queue.put((ps.name, i, n))

    _take_ctrl_c()
    try:
        on_window(0, 1)
        return rolling_horizon(cfg, ps, options, window, lookahead, build, on_window)
    finally:
        _take_ctrl_c(False)


def run_study(cfg: SiteConfig, scenarios: list[PreparedScenario], options: SolveOptions,
              window: int = WEEK, lookahead: int = 24, build: BuildOptions = BuildOptions(),
              workers: int | None = None, cluster: str | None = None,
              progress: Callable[[str, int, int], None] | None = None) -> list[ScenarioResult]:
    """Run every scenario; in a local process pool by default, or on the Dask scheduler at
    ``cluster``. Results come back in the scenarios' order."""
    # one thread per window (windows run side by side); a window's accuracy rests on its
    # start, so no time is held back from improving it for a bound
    opts = SolveOptions(gap=options.gap, time_limit=options.time_limit, threads=1,
                        warm_start=options.warm_start, strengthen=options.strengthen, search_share=0.0,
                        settle=options.settle)
    if cluster is not None:
        from distributed import Client

        with Client(cluster) as client:
            futs = client.map(_scenario_job, [(cfg, ps, opts, window, lookahead, build, None, _NEVER)
                                              for ps in scenarios], pure=False)
            out = client.gather(futs)
        if progress:
            for ps in scenarios:
                progress(ps.name, 1, 1)
        return list(out)
    n_workers = workers or min(len(scenarios), os.cpu_count() or 1)
    if n_workers <= 1 or len(scenarios) == 1:
        return [rolling_horizon(cfg, ps, opts, window, lookahead, build,
                                (lambda i, n, name=ps.name: progress(name, i, n)) if progress else None)
                for ps in scenarios]
    ctx = mp.get_context("spawn")
    with contextlib.ExitStack() as stack:
        with _ctrl_c_blocked():  # the manager's process starts as the workers do, below
            manager = stack.enter_context(ctx.Manager())
        queue = manager.Queue() if progress else None
        stop = manager.Event()
        with ProcessPoolExecutor(max_workers=n_workers, mp_context=ctx) as pool:
            try:
                # the workers start with Ctrl-C blocked (the mask passes to a spawned
                # process): one arriving while they import Pyomo and HiGHS would end them
                # with a traceback from inside multiprocessing; it waits for _take_ctrl_c
                with _ctrl_c_blocked():
                    futs = [pool.submit(_scenario_job, (cfg, ps, opts, window, lookahead, build, queue, stop))
                            for ps in scenarios]
                while not all(f.done() for f in futs):
                    _drain(queue, progress)
                    time.sleep(0.2)
            except BaseException:
                # Ctrl-C (or an error here): scenarios not yet started are dropped and running
                # ones end after their window, instead of the queue running to its end
                stop.set()
                # and wait for the workers here: a second shutdown (leaving the block) no
                # longer waits, and the manager must outlive them (queued calls unpickle
                # its proxies)
                pool.shutdown(wait=True, cancel_futures=True)
                raise
            _drain(queue, progress)
            return [f.result() for f in futs]


@contextlib.contextmanager
def _ctrl_c_blocked() -> Iterator[None]:
    """Within the block, SIGINT waits in this thread (and in the processes it spawns); on
    leaving, a Ctrl-C that came meanwhile is taken, as KeyboardInterrupt. Nothing on a
    system without signal masks, or outside the main thread."""
    if not hasattr(signal, "pthread_sigmask") or threading.current_thread() is not threading.main_thread():
        yield
        return
    # the resource tracker, started with the first spawned process, unblocks SIGINT as it
    # starts (multiprocessing.resource_tracker.ensure_running): started first, it leaves
    # the mask alone
    resource_tracker.ensure_running()
    before = signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGINT})
    try:
        yield
    finally:
        signal.pthread_sigmask(signal.SIG_SETMASK, before)


def _take_ctrl_c(take: bool = True) -> None:
    """In a study worker (started within :func:`_ctrl_c_blocked`): take Ctrl-C while its
    scenario runs, and hold it again after (``take`` False): an idle worker waiting for
    its next scenario inside multiprocessing would end with a traceback. One that came
    while the worker started or waited is raised as it takes Ctrl-C, before a scenario
    begins."""
    if hasattr(signal, "pthread_sigmask") and threading.current_thread() is threading.main_thread():
        signal.pthread_sigmask(signal.SIG_UNBLOCK if take else signal.SIG_BLOCK, {signal.SIGINT})


class _Never:
    """A stop event that is never set (a Dask cluster's workers are stopped by Dask)."""

    def is_set(self) -> bool:
        return False


_NEVER = _Never()


def _drain(queue: Any, progress: Callable[[str, int, int], None] | None) -> None:
    if queue is None or progress is None:
        return
    while True:
        try:
            name, i, n = queue.get_nowait()
        except Exception:  # queue.Empty through the manager proxy
            return
        progress(name, i, n)
