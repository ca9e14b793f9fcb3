"""Shift advice for one hour: marginal steam prices, turbine-versus-motor table, what-ifs.

The hour is modelled alone, with the boilers' and turbo-generators' on/off states held (from
a plan, or from the hour optimised on its own). Marginal prices are the duals of the LP
re-solved with every binary fixed. Driver costs come from full re-solves of the hour with
the machine forced to each driver; the power price at which the answer flips is found by a
bracketing search on the import price, each step a full re-solve, and set beside the
marginal estimate steam rate x (inlet price - exhaust price x arrival ratio) against
shaft power / motor efficiency x power price.

All changes are made to the HiGHS model in place (bounds and costs) and undone after, so
the model is built and loaded once per hour of advice.
"""

from __future__ import annotations

import copy
import math
import re
import threading
from dataclasses import asdict, dataclass, field, replace
from pathlib import Path
from typing import Callable

import highspy
import numpy as np
import pandas as pd
from pyomo.repn import generate_standard_repn

from .clock import as_utc, hour_label, read_clock
from .equipment.common import SiteStates
from .equipment.drive import position_history
from .errors import InputError
from .plant.schema import Drive, SiteConfig
from .plant.series import Series
from .prices import set_by
from .results import fuels_at_supply
from .site import BuildOptions, SiteModel, build_site_model
from .solve import LoadedModel

TOL = 1e-6
TIE = 0.01  # [currency/h] steam and motor closer than this cost the same for the flip search


@dataclass
class WhatIf:
    """Changes for a what-if: drivers forced, units tripped, prices and demands changed."""

    force: dict[str, str | int] = field(default_factory=dict)  # drive id -> "steam" | "motor" | machines on steam
    trip: list[str] = field(default_factory=list)  # boiler or turbo-generator ids
    price_import: float | None = None  # [currency/MWh]
    price_export: float | None = None
    fuel_price: dict[str, float] = field(default_factory=dict)  # fuel id -> [currency/GJ]
    demand: dict[str, float] = field(default_factory=dict)  # header id -> change [t/h]

    def empty(self) -> bool:
        """True when the what-if changes nothing."""
        return not (self.force or self.trip or self.price_import is not None or self.price_export is not None
                    or self.fuel_price or self.demand)


@dataclass
class HourState:
    """Outcome of one solve of the hour."""

    cost: float
    on: dict[str, int]
    on_steam: dict[str, int]
    letdown: dict[str, float]
    vent: dict[str, float]
    short: dict[str, float]
    power_short: float
    reserve_short: float = 0.0  # [t/h] of the one-boiler-trip reserve not kept
    surplus: dict[str, float] = field(default_factory=dict)  # [t/h] steam no unit can take, per header
    power_surplus: float = 0.0  # [MW] generation beyond load and the export limit
    penalty: float = 0.0  # [currency] the hour's "penalty" cost: every slack at its price
    steam: dict[str, float] = field(default_factory=dict)  # [t/h] each boiler's steam
    power: dict[str, float] = field(default_factory=dict)  # [MW] each turbo-generator's output
    grid: dict[str, float] = field(default_factory=dict)  # [MW] "import" and "export"


def _hour_options(h: highspy.Highs) -> None:
    """HiGHS options of an hour's re-solves (a twin's too)."""
    h.setOptionValue("mip_rel_gap", 1e-9)
    h.setOptionValue("presolve", "off")  # faster on a model this small


class HourModel:
    """One hour of the site, loaded once into HiGHS, re-solved under changes."""

    def __init__(self, cfg: SiteConfig, series: Series, index: int, held: dict[str, int],
                 build: BuildOptions = BuildOptions(), steam_before: dict[str, float] | None = None) -> None:
        self.cfg = _hold_initial_states(cfg, held, steam_before)
        self.series1 = series.window(index, 1)
        # what-ifs change prices on the loaded model: import and export kept apart always
        self.sm: SiteModel = build_site_model(self.cfg, self.series1, replace(build, grid_exclusive=True))
        self.lm = LoadedModel(self.sm)
        self.h: highspy.Highs = self.lm.h
        _hour_options(self.h)
        self.held = held
        m = self.sm.model
        self.blocks = self.sm.blocks
        self.on_col = {uid: self.lm.col(self.blocks[uid].on[0]) for uid in held}
        self.drive_cols = {d.id: [self.lm.col(self.blocks[d.id].on_steam[k, 0]) for k in range(d.count)]
                           for d in self.cfg.drives if hasattr(self.blocks[d.id], "on_steam")}
        self.imp_col = self.lm.col(m.grid.imp[0])
        self.exp_col = self.lm.col(m.grid.exp[0])
        self.header_row = {hh.id: self.lm.opt._pyomo_con_to_solver_con_map[m.header_balance[hh.id, 0]]
                           for hh in self.cfg.headers}
        self.power_row = self.lm.opt._pyomo_con_to_solver_con_map[m.power_balance[0]]
        # the model's own penalty term (site.py), linear in the slacks: (variable, price) pairs
        repn = generate_standard_repn(sum(term(0) for term in self.sm.ctx.cost_terms["penalty"]))
        self.penalty_terms = list(zip(repn.linear_vars, repn.linear_coefs))
        # each boiler's ramp-down row of the hour: a trip stops a boiler from any load
        self.stop_rows = {b.id: self.lm.opt._pyomo_con_to_solver_con_map[self.blocks[b.id].ramp_down[0]]
                          for b in self.cfg.boilers if self.blocks[b.id].component("ramp_down") is not None
                          and 0 in self.blocks[b.id].ramp_down}
        self.reserve_rows = self.lm.reserve_rows()
        lp = self.h.getLp()
        self.cost0 = np.array(lp.col_cost_, dtype=float)
        self.rlo0 = np.array(lp.row_lower_, dtype=float)
        self.rup0 = np.array(lp.row_upper_, dtype=float)
        self.fuel_cols: dict[str, list[int]] = {}
        for b in self.cfg.boilers:
            for f in b.fuels:
                c = self.lm.col(self.blocks[b.id].burn[f, 0])
                if c is not None:
                    self.fuel_cols.setdefault(f, []).append(c)
        self.co2 = {f.id: f.co2_factor for f in self.cfg.fuels}
        self.co2_price = float(self.series1.co2_price.iloc[0])
        self.base_import = float(self.series1.price_import.iloc[0])
        self.feedwater_price = 0.0  # [currency/t], set by marginal_prices()
        # [machines on steam] (fewest, most) the minimum time between driver changes allows
        # each machine this hour, from the drivers of the hour before (advise sets them); a
        # machine a what-if forces is not held to them
        self.driver_limits: dict[str, tuple[int, int]] = {}

    def twin(self) -> "HourModel":
        """A copy of this hour in a HiGHS instance of its own (same columns and rows, the
        same held states and limits), for re-solves in another thread; the Pyomo model is
        shared and only read."""
        other = copy.copy(self)
        other.lm = self.lm.spare()
        other.lm.stop = threading.Event()  # set: the twin's runs stop soon (an error elsewhere)
        other.h = other.lm.h
        _hour_options(other.h)
        other.driver_limits = dict(self.driver_limits)
        return other

    # -- changes -------------------------------------------------------------------------
    def _reset(self) -> None:
        lm = self.lm
        n = len(lm.col_lower)
        allc = np.arange(n, dtype=np.int32)
        self.h.changeColsBounds(n, allc, lm.col_lower, lm.col_upper)
        self.h.changeColsCost(n, allc, self.cost0)
        r = len(self.rlo0)
        self.h.changeRowsBounds(r, np.arange(r, dtype=np.int32), self.rlo0, self.rup0)
        lm._set_integrality(True)

    def _fix(self, col: int | None, v: float) -> None:
        if col is not None:
            self.h.changeColBounds(col, v, v)

    def trips_a_boiler(self, w: WhatIf) -> bool:
        """Whether ``w`` trips a boiler that is running in the hour as held."""
        return any(self.held.get(b.id) == 1 for b in self.cfg.boilers if b.id in w.trip)

    def _apply(self, w: WhatIf, hold: str) -> None:
        if self.trips_a_boiler(w) and len(self.reserve_rows):
            # after a running boiler's trip the site is in the contingency the reserve was
            # kept for: the remaining boilers may use all of their rating (a turbo-generator's
            # trip, or a unit already off, is not that contingency)
            n = len(self.reserve_rows)
            self.h.changeRowsBounds(n, self.reserve_rows, np.full(n, -highspy.kHighsInf), np.full(n, highspy.kHighsInf))
        for uid, c in self.on_col.items():
            if uid in w.trip:
                self._fix(c, 0.0)
                if uid in self.stop_rows:  # a trip, not a planned ramp down
                    self.h.changeRowBounds(self.stop_rows[uid], -highspy.kHighsInf, highspy.kHighsInf)
            elif hold == "all" or (hold == "on" and self.held[uid] == 1) or (hold == "off" and self.held[uid] == 0):
                self._fix(c, float(self.held[uid]))
        for did, (lo, hi) in self.driver_limits.items():
            if did in w.force or did not in self.drive_cols:
                continue
            for k, c in enumerate(self.drive_cols[did]):
                if k < lo:
                    self._fix(c, 1.0)
                elif k >= hi:
                    self._fix(c, 0.0)
        for did, drv in w.force.items():
            # "steam", "motor", or a number of machines on steam (the driver table's splits)
            n = len(self.drive_cols[did]) if drv == "steam" else 0 if drv == "motor" else int(drv)
            for k, c in enumerate(self.drive_cols[did]):
                self._fix(c, 1.0 if k < n else 0.0)
        if w.price_import is not None and self.imp_col is not None:
            self.h.changeColCost(self.imp_col, w.price_import)
        if w.price_export is not None and self.exp_col is not None:
            self.h.changeColCost(self.exp_col, -w.price_export)
        for f, p in w.fuel_price.items():
            for c in self.fuel_cols.get(f, []):
                self.h.changeColCost(c, p + self.co2[f] * self.co2_price)
        for hh, d in w.demand.items():
            r = self.header_row[hh]
            self.h.changeRowBounds(r, self.rlo0[r] + d, self.rup0[r] + d)

    def cost(self, w: WhatIf = WhatIf(), hold: str = "all") -> float:
        """Cost of the hour under ``w`` [currency], without collecting the state."""
        self._reset()
        self._apply(w, hold)
        self.lm._run(30.0)
        if self.h.getInfo().primal_solution_status != 2:
            raise RuntimeError("the hour has no solution")
        # [MW] the import of this solve: the cost's slope in the import price (envelope
        # theorem), which the flip search uses
        self.last_import = float(self.h.getSolution().col_value[self.imp_col]) if self.imp_col is not None else 0.0
        return float(self.h.getInfo().objective_function_value)

    def solve(self, w: WhatIf = WhatIf(), hold: str = "all") -> HourState:
        """Re-solve the hour under ``w``. ``hold``: "all" keeps every unit's held on/off
        state; "on" keeps running units on but lets stopped ones start (paying their start-up
        cost); "off" keeps stopped units off but lets running ones stop; "none" frees the
        commitment. Tripped units are off in every case."""
        c = self.cost(w, hold)
        return self._state(self.lm.solution(), c)

    def _state(self, x: np.ndarray, cost: float) -> HourState:
        def v(var) -> float:  # noqa: ANN001
            c = self.lm.col(var)
            return float(var.value) if c is None else float(x[c])

        m = self.sm.model
        on = {uid: int(round(v(self.blocks[uid].on[0]))) for uid in self.held}
        on_steam = {}
        for d in self.cfg.drives:
            blk = self.blocks[d.id]
            on_steam[d.id] = int(round(sum(v(blk.on_steam[k, 0]) for k in range(d.count)))) \
                if hasattr(blk, "on_steam") else int(blk.machines_on_steam(0))
        return HourState(
            cost=cost, on=on, on_steam=on_steam,
            letdown={ld.id: v(self.blocks[ld.id].flow[0]) for ld in self.cfg.letdowns},
            vent={vt.id: v(self.blocks[vt.id].flow[0]) for vt in self.cfg.vents},
            short={hh.id: v(m.steam_short[hh.id, 0]) for hh in self.cfg.headers},
            power_short=v(m.power_short[0]),
            surplus={hh.id: v(m.steam_surplus[hh.id, 0]) for hh in self.cfg.headers},
            power_surplus=v(m.power_surplus[0]),
            reserve_short=v(m.reserve_short[0]) if m.component("reserve_short") is not None else 0.0,
            penalty=sum(price * v(var) for var, price in self.penalty_terms),
            steam={b.id: v(self.blocks[b.id].steam[0]) for b in self.cfg.boilers},
            power={t.id: v(self.blocks[t.id].power[0]) for t in self.cfg.turbogenerators},
            grid={"import": v(m.grid.imp[0]), "export": v(m.grid.exp[0])},
        )

    def marginal_prices(self, w: WhatIf = WhatIf()) -> tuple[dict[str, float], float, np.ndarray]:
        """Marginal cost of 1 t/h more demand in each header [currency/t] and of 1 MW more
        load [currency/MWh]: duals of the LP with every binary fixed at its optimum."""
        self.solve(w)
        ints = self.lm.int_cols
        x = self.lm._fixed_run(list(ints), list(np.round(self.lm.solution()[ints])), 30.0, None, keep_duals=True)
        dual = self.lm.fixed_duals
        if x is None or dual is None:
            raise RuntimeError("the hour's LP with every on/off and driver held has no optimal solution")
        # a row 'terms - demand == 0' is loaded with bounds = demand: d(cost)/d(bound) is the
        # price of one more t/h demanded
        prices = {hh: float(dual[r]) for hh, r in self.header_row.items()}
        # feedwater: one more t/h drawn adds 1 to the deaerator's mass row and h_fw to its
        # energy row (both 'body == 0'), i.e. lowers their bounds by those amounts
        da = self.sm.model.deaerator
        cmap = self.lm.opt._pyomo_con_to_solver_con_map
        y_m, y_e = dual[cmap[da.mass[0]]], dual[cmap[da.energy[0]]]
        self.feedwater_price = float(-(y_m + y_e * self.sm.ctx.states.h_feedwater))
        power = float(dual[self.power_row])
        # a binding reserve row (the running boilers' spare rating just covers the largest)
        # raises the steam prices above any unit's cost, and through the turbines the power
        # price: the same LP without the reserve rows says by how much (currency/t per
        # header, currency/MWh for power)
        self.reserve_part = {b: 0.0 for b in [*prices, "power"]}
        if len(self.reserve_rows) and np.abs(dual[self.reserve_rows]).max() > 1e-9:
            free = self.lm.duals_with_rows_free(self.reserve_rows, x, 30.0)
            if free is not None:
                self.reserve_part = {hh: prices[hh] - float(free[r]) for hh, r in self.header_row.items()}
                self.reserve_part["power"] = power - float(free[self.power_row])
        return prices, power, x


def _hold_initial_states(cfg: SiteConfig, held: dict[str, int],
                         steam_before: dict[str, float] | None = None) -> SiteConfig:
    """The site with each committed unit's initial state set to its held state and free
    drivers: one hour seen on its own. A boiler running in the hour before and held on
    keeps its ramp limits from its steam then (``steam_before`` [t/h]); the others have
    no ramp history."""
    before = steam_before or {}
    boilers = [b.model_copy(update={"initial_on": bool(held.get(b.id, b.initial_on)), "initial_hours": 1e6,
                                    "initial_steam": before.get(b.id) if held.get(b.id) == 1 else None})
               for b in cfg.boilers]
    tgs = [t.model_copy(update={"initial_on": bool(held.get(t.id, t.initial_on)), "initial_hours": 1e6})
           for t in cfg.turbogenerators]
    drives = [d.model_copy(update={"initial_on_steam": None}) for d in cfg.drives]
    return cfg.model_copy(update={"boilers": boilers, "turbogenerators": tgs, "drives": drives})


def _slashed_at(series: Series, at: str, path: str) -> str:
    """``at`` written with '/' in its date, in ISO form, read the way round the series' own
    dates were read (month first or day first, :attr:`Series.date_order`). Refused for a
    series written year-month-day: 5/1/2027 is 1 May in one country and 5 January in
    another, and the series gives no hint which."""
    import warnings

    if not series.date_order:
        raise InputError(None, "--at", f"'{at}': write the date as year-month-day, as the series does, e.g. "
                         f"'{series.wall_time[0]:%Y-%m-%d}T10:00'")
    try:
        with warnings.catch_warnings():  # pandas warns when it reads a date the other way round
            warnings.simplefilter("ignore")
            ts = pd.to_datetime(at, dayfirst=series.date_order == "day first", format="mixed")
    except (ValueError, TypeError):
        raise InputError(None, "--at", f"'{at}' is not a date and time") from None
    if ts.tzinfo is not None:
        return ts.isoformat()
    return ts.strftime("%Y-%m-%dT%H:%M")


def hour_index(series: Series, at: str, path: str) -> int:
    """Row of ``series`` at time ``at`` (year-month-day, or with '/' as a series may be
    written: :func:`_slashed_at`)."""
    if "/" in re.split(r"[T ]", at.strip())[0]:
        at = _slashed_at(series, at, path)
    try:
        ts = pd.Timestamp(at)
    except (ValueError, TypeError):
        raise InputError(None, "--at", f"'{at}' is not a date and time") from None
    if "/" in at or "." in at.split("T")[0].split(" ")[0]:
        # 5/1/2027 is 1 May in one country and 5 January in another
        raise InputError(None, "--at", f"'{at}': write the date as year-month-day, e.g. '2027-01-05T10:00'")
    first = pd.Timestamp(series.wall_time[0])  # the site's clock, as the series wrote it
    if not re.search(r"\d{4}-\d{2}-\d{2}", at):  # '10:00' reads as today, not as a day of the series
        raise InputError(None, "--at", f"'{at}' gives no date; write the date and the hour, e.g. "
                         f"'{first:%Y-%m-%d}T{ts:%H:%M}' (the series runs {hour_label(series.stamps[0])} to "
                         f"{hour_label(series.stamps[-1])})")
    if not re.search(r"\d[T ]\d", at.strip()):  # a date alone would silently mean midnight
        raise InputError(None, "--at", f"'{at}' gives no hour; write e.g. '{ts:%Y-%m-%d}T10:00'")
    span = f"the series runs {series.stamps[0]} to {series.stamps[-1]}"
    if ts.tzinfo is None and series.time.tz is not None:
        # the supervisor's wall clock, as the series wrote it without its offset: one hour,
        # but for the hour that comes twice when the clocks go back
        hits = np.flatnonzero(series.wall_time == ts)
        if len(hits) > 1:
            twice = " or ".join(f"'{series.stamps[i].isoformat()}'" for i in hits)
            raise InputError(path, "--at", f"{at} comes twice in the series (the clocks go back): give its UTC "
                             f"offset, {twice}")
        if len(hits) == 0 and series.wall_time[0] < ts < series.wall_time[-1]:
            k = int(np.searchsorted(series.wall_time, ts))  # the hour after the gap
            raise InputError(path, "--at", f"{at} is no hour of the site's clock: the clocks skip it (the series "
                             f"goes from {hour_label(series.stamps[k - 1])} to {hour_label(series.stamps[k])})")
    else:
        if ts.tzinfo is not None:
            ts = ts.tz_convert("UTC")
        if ts.tzinfo is not None and series.time.tz is None:
            raise InputError(path, "--at", f"{at} has a UTC offset but the series has none ({span}): give --at "
                             "without it")
        hits = np.flatnonzero(series.time == ts)
    if len(hits) == 0:
        raise InputError(path, "--at", f"{at} is not an hour of the series ({span})")
    return int(hits[0])


@dataclass(frozen=True)
class DriverHistory:
    """A dual-driver machine's drivers before the hour, position by position (position k is
    on steam only if k - 1 is, drive.py): ``positions[k]`` = (1 on steam or 0 on motor in
    the hour before, hours [h] it has kept that driver), and ``min_hours`` [h] between a
    position's changes, as the plan's turn-on/turn-off rows hold them."""

    positions: tuple[tuple[int, float], ...]
    min_hours: int

    @property
    def before(self) -> int:
        """Machines on steam in the hour before."""
        return sum(state for state, _ in self.positions)

    def allowed(self) -> tuple[int, int]:
        """Fewest and most machines on steam that the minimum time between driver changes
        allows this hour: a position that changed less than ``min_hours`` ago keeps its
        driver (position k is on steam only if k - 1 is, so the range is whole)."""
        n = len(self.positions)
        if self.min_hours <= 1:
            return 0, n
        held = [(k, state) for k, (state, hours) in enumerate(self.positions) if hours < self.min_hours]
        lo = max((k + 1 for k, state in held if state == 1), default=0)
        hi = min((k for k, state in held if state == 0), default=n)
        return lo, max(lo, hi)

    def held_for(self, steam: bool) -> int:
        """Hours [h] before every machine may run on steam (``steam``) or on motor: the
        longest that a position which must change is still held (0: allowed now)."""
        if self.min_hours <= 1:
            return 0
        return max([int(math.ceil(self.min_hours - hours - 1e-9)) for state, hours in self.positions
                    if state != int(steam) and hours < self.min_hours], default=0)


def driver_history(cfg: SiteConfig, index: int, sched: pd.DataFrame | None) -> dict[str, DriverHistory]:
    """Each dual-driver machine's drivers before hour ``index`` of a plan: from the plan's
    schedule rows before it (``sched``, starting at the plan's first hour) joined to the site
    file's state before the horizon; for the first hour, from the site file alone. A driver
    kept since the plan began with none given before it is free to change, as the plan's own
    rows take it (their first hour counts no change). Machines whose drivers before the hour
    are unknown (a later hour without a plan; the first hour with no driver in the site file)
    are left out."""
    from .equipment.common import whole_hours

    out: dict[str, DriverHistory] = {}
    for d in cfg.drives:
        if d.steam_turbine is None or d.motor is None:
            continue
        L = whole_hours(d.min_hours_between_switches)
        init = d.initial_on_steam
        if index == 0:
            if init is not None:
                out[d.id] = DriverHistory(tuple((int(k < init), d.hours_since_switch(k)) for k in range(d.count)),
                                          L)
            continue
        if sched is None or f"{d.id}.on_steam" not in sched or len(sched) < index:
            continue
        count = sched[f"{d.id}.on_steam"].to_numpy()[:index]
        out[d.id] = DriverHistory(tuple(position_history(d, count)), L)
    return out


def held_states(cfg: SiteConfig, series: Series, index: int, plan_dir: str | None,
                build: BuildOptions = BuildOptions()
                ) -> tuple[dict[str, int], dict[str, int] | None, dict[str, DriverHistory], dict[str, float]]:
    """On/off states to hold, the plan's drivers, the drivers' history and the steam [t/h]
    of each boiler running in the hour before ``index`` (its ramp history).

    From ``plan_dir/schedule.csv`` when given; otherwise from the hour optimised alone with
    the site file's initial states (the drivers' history and the steam before then known
    for the first hour only, from the site file).
    """
    units = [u.id for u in (*cfg.boilers, *cfg.turbogenerators)]
    site_before = {b.id: b.initial_steam for b in cfg.boilers if b.initial_on and b.initial_steam is not None}
    if plan_dir is None:
        hm = HourModel(cfg, series, index, {u.id: int(u.initial_on) for u in (*cfg.boilers, *cfg.turbogenerators)},
                       build)
        st = hm.solve(hold="none")
        return st.on, None, driver_history(cfg, index, None), site_before if index == 0 else {}
    path = Path(plan_dir) / "schedule.csv"
    try:
        sched = pd.read_csv(path, index_col="time")
        sched.index = as_utc(read_clock(sched.index))  # matched with the series' time, UTC with offsets
    except FileNotFoundError:
        raise InputError(path, "--plan", "no schedule.csv in the plan folder") from None
    except (ValueError, KeyError) as exc:
        raise InputError(path, "--plan", f"cannot read the schedule ({exc})") from None
    t = series.time[index]
    idx = sched.index
    if getattr(idx, "tz", None) is not None and t.tzinfo is None:
        t = t.tz_localize("UTC")
    if t not in idx:
        raise InputError(path, "--at", f"{series.stamps[index]} is not an hour of the plan")
    row = sched.loc[t]
    missing = [u for u in units if f"{u}.on" not in row]
    if missing:
        raise InputError(path, "header row", f"the plan has no on/off column for {', '.join(missing)}: "
                         "was it made for another site?")
    on = {u: int(round(float(row[f"{u}.on"]))) for u in units}
    drivers = {d.id: int(round(float(row[f"{d.id}.on_steam"]))) for d in cfg.drives if f"{d.id}.on_steam" in row}
    pos = int(idx.get_loc(t))  # the plan's own hour: it may have begun before the series
    if pos == 0:
        before = site_before if index == 0 else {}
    else:
        prev = sched.iloc[pos - 1]
        before = {b.id: float(prev[f"{b.id}.steam_t_h"]) for b in cfg.boilers
                  if f"{b.id}.steam_t_h" in prev and round(float(prev[f"{b.id}.on"])) == 1}
    return on, drivers, driver_history(cfg, pos, sched), before


def valuer(lm: LoadedModel, x: np.ndarray) -> Callable[[object], float]:
    """A variable's value in the schedule ``x`` (column values of ``lm``); a variable the
    solver never saw (fixed in the model) by its own value."""
    def val(var) -> float:  # noqa: ANN001
        c = lm.col(var)
        return float(var.value or 0.0) if c is None else float(x[c])

    return val


def price_reasons(hm: HourModel, x: np.ndarray) -> tuple[dict[str, str], str]:
    """One line per header (and for power) saying what sets the marginal price."""
    cfg, b, m, lm = hm.cfg, hm.blocks, hm.sm.model, hm.lm

    val = valuer(lm, x)
    def free(var, lo: float, hi: float) -> bool:  # noqa: ANN001
        v = val(var)
        return lo + 1e-6 < v < hi - 1e-6

    out: dict[str, str] = {}
    # fuels burnt up to their site-wide max_supply this hour: a boiler on them alone is not
    # at the margin, however far it sits from its steam limits
    capped = fuels_at_supply(cfg, b, 0, val, tol=1e-6)
    reserve_short = val(m.reserve_short[0]) if m.component("reserve_short") is not None else 0.0
    for hh in cfg.headers:
        hid = hh.id
        if val(m.steam_short[hid, 0]) > 1e-6:
            out[hid] = f"{hid}: short {val(m.steam_short[hid, 0]):.2f} t/h, priced at the shortfall penalty"
            continue
        if val(m.steam_surplus[hid, 0]) > 1e-6:
            out[hid] = f"{hid}: surplus nothing can take, priced at the surplus penalty"
            continue
        reason = None
        part = getattr(hm, "reserve_part", {}).get(hid, 0.0)
        if reserve_short > 1e-6 and abs(part) > 0.005:
            # the penalty is in this price (the same LP without the reserve rows prices it
            # otherwise); a header that vents, say, does not carry it
            reason = (f"{hid}: the steam reserve is {reserve_short:.2f} t/h short; the price carries its penalty "
                      f"({cfg.penalties.reserve_shortfall:g} per t of reserve), not a cost of steam")
        for vt in cfg.vents:
            if reason is None and vt.header == hid and val(b[vt.id].flow[0]) > 1e-6:
                reason = f"{hid}: surplus, vented through {vt.id}"
        # boilers between their limits with fuel to burn: one inside a segment of its curve
        # first (one sitting on a curve point has no single slope: the other moves)
        marginal = [bo for bo in cfg.boilers
                    if reason is None and bo.header == hid and val(b[bo.id].on[0]) > 0.5
                    and free(b[bo.id].steam[0], bo.min_steam, bo.max_steam) and not all(fu in capped for fu in bo.fuels)]
        for bo in sorted(marginal, key=lambda bo: any(abs(val(b[bo.id].steam[0]) - s) < 1e-6
                                                      for s in b[bo.id].coefficients.steam)):
            reason = f"{hid}: boiler {bo.id} on its efficiency curve"
            break
        if reason is None:
            for tg in cfg.turbogenerators:
                if val(b[tg.id].on[0]) < 0.5 or val(b[tg.id].power[0]) >= tg.generator_rating - 1e-6:
                    continue
                co = b[tg.id].coefficients
                for k, sec in enumerate(tg.sections[:-1]):  # the site file's limits, not the coefficients
                    hi = sec.max_extraction if sec.max_extraction is not None else math.inf
                    if sec.to == hid and free(b[tg.id].extraction[k, 0], sec.min_extraction, hi):
                        reason = f"{hid}: extraction from {tg.id} (the inlet price less the power it makes)"
                if reason is None and co.sections[-1].to == hid \
                        and free(b[tg.id].throttle[0], tg.min_throttle, tg.max_throttle):
                    reason = f"{hid}: exhaust of {tg.id} (the inlet price less the power it makes)"
                if reason:
                    break
        if reason is None:
            for ld in cfg.letdowns:
                if ld.to == hid and free(b[ld.id].flow[0], ld.min_flow, ld.max_flow):
                    reason = f"{hid}: letdown {ld.id} from {ld.source} (the {ld.source} price, spread over the desuperheated flow)"
                    break
        if reason is None:  # nothing into the header moves: a letdown out of it can
            for ld in cfg.letdowns:
                if ld.source == hid and free(b[ld.id].flow[0], ld.min_flow, ld.max_flow):
                    reason = f"{hid}: letdown {ld.id} to {ld.to} (the {ld.to} price carried back through it)"
                    break
        at_supply = [bo.id for bo in cfg.boilers if bo.header == hid and val(b[bo.id].on[0]) > 0.5
                     and all(fu in capped for fu in bo.fuels)]
        out[hid] = reason or (f"{hid}: no single unit is marginal (the units serving it sit at limits"
                              + (f"; {', '.join(at_supply)} at {'their' if len(at_supply) > 1 else 'its'} fuel's "
                                 "max_supply" if at_supply else "") + ")")
        if reserve_short <= 1e-6 and abs(part) > 0.005:
            out[hid] += (f"; the steam reserve binds (the running boilers' spare rating just covers losing the "
                         f"largest) and adds {part:,.2f} {cfg.site.currency}/t")
    if val(m.power_short[0]) > 1e-6:
        pw = f"power: short {val(m.power_short[0]):.2f} MW, priced at the shortfall penalty"
    elif val(m.power_surplus[0]) > 1e-6:
        pw = "power: surplus beyond load and export, priced at the surplus penalty"
    elif free(m.grid.imp[0], cfg.grid.min_import, cfg.grid.max_import):
        pw = "power: grid import at the hour's import price"
    elif free(m.grid.exp[0], 0.0, cfg.grid.max_export):
        pw = "power: grid export at the hour's export price"
    else:
        pw = "power: set by on-site generation (import at a limit)"
        for tg in cfg.turbogenerators:
            if val(b[tg.id].on[0]) > 0.5 and free(b[tg.id].power[0], 0.0, tg.generator_rating):
                pw = f"power: turbo-generator {tg.id} (the steam it takes, priced in its headers)"
                break
    part = getattr(hm, "reserve_part", {}).get("power", 0.0)
    if reserve_short <= 1e-6 and abs(part) > 0.005 and not pw.startswith(("power: short", "power: surplus")):
        pw += f"; the steam reserve binds and adds {part:,.2f} {cfg.site.currency}/MWh through the steam's price"
    return out, pw


def marginal_flip_estimate(cfg: SiteConfig, d: Drive, prices: dict[str, float],
                           feedwater_price: float = 0.0) -> float | None:
    """Marginal estimate of the import price at which steam and motor cost the same [currency/MWh].

    Steam per MWh of shaft work: SR [t/MWh]. It is taken from the inlet header, arrives at
    the exhaust header as r t per t (r: the exhaust's arrival ratio) and draws r - 1 t of
    feedwater as desuperheater spray, so it costs
    SR * (lambda_in - r * lambda_ex + (r - 1) * lambda_fw). The motor costs price / eta_m per
    MWh of shaft work. Equal when price = eta_m * SR * (lambda_in - r lambda_ex + (r - 1) lambda_fw).
    """
    from .equipment.drive import coefficients

    if d.steam_turbine is None or d.motor is None:
        return None
    st = SiteStates.of(cfg)
    co = coefficients(d, st)
    r = st.arrival_ratio(co.exhaust_h, d.steam_turbine.exhaust)
    lam_in, lam_ex = prices[d.steam_turbine.inlet], prices[d.steam_turbine.exhaust]
    return co.motor_efficiency * co.steam_rate * (lam_in - r * lam_ex + (r - 1.0) * feedwater_price)


def driver_table(hm: HourModel, now: dict[str, int], prices: dict[str, float],
                 history: dict[str, DriverHistory] | None = None, tol: float = 0.5,
                 price_set_by: dict[str, str] | None = None,
                 set_by_tg: dict[str, str] | None = None, threads: int = 1) -> pd.DataFrame:
    """One row per dual-driver machine: cost of the hour on steam and on motor (full
    re-solves), the saving, the import price at which the answer flips (bracketing and
    bisection to ``tol`` [currency/MWh], each step two full re-solves) and the marginal
    estimate beside it; for spared machines, every number on steam between (``best_on_steam``,
    ``cost_best``; ``saving`` is the best against the dearer of all on steam and all on
    motor; ``saving_vs_now`` the best against the number on steam in ``now``); with the machine's ``history``, the machines on steam in the hour
    before and ``steam_blocked_h`` / ``motor_blocked_h``, the hours before the site's minimum time
    between driver changes lets every machine run on steam / on motor (0: allowed now; NaN:
    history unknown). ``price_set_by`` (per balance, :func:`prices.set_by`) leaves out a
    marginal estimate whose prices a penalty sets: it would be no price of steam;
    ``set_by_tg`` (header id -> turbo-generator id whose extraction or exhaust sets its
    price) notes an estimate whose steam prices move with the power price. ``note``
    says why a flip price or an estimate is missing. Sorted by saving. With ``threads`` > 1
    the machines are shared out among that many copies of the loaded hour (:meth:`HourModel.twin`),
    each in its own thread: HiGHS gives up Python's lock while it solves, and each machine's
    rows are its own hundred or so small re-solves."""
    history = history or {}
    drives = [d for d in hm.cfg.drives if d.id in hm.drive_cols]

    def row(model: HourModel, d: Drive) -> dict:
        return _driver_row(model, d, now, prices, history, tol, price_set_by, set_by_tg)

    n = min(threads, len(drives))
    if n <= 1:
        rows = [row(hm, d) for d in drives]
    else:
        rows = _shared_out(hm, drives, n, row)
    df = pd.DataFrame(rows)
    if not df.empty:
        df = df.sort_values("saving", ascending=False, kind="stable").reset_index(drop=True)
    return df


def _shared_out(hm: HourModel, drives: list[Drive], n: int, row: Callable[[HourModel, Drive], dict]) -> list[dict]:
    """:func:`driver_table`'s rows in ``drives``' order, the machines taken in turn by ``hm``
    in this thread and ``n`` - 1 twins of it in others. The first error, Ctrl-C included
    (also one that comes while this thread waits for the others), stops every model's
    solves and is raised here once all have ended: no search goes on behind a return."""
    twins = [hm.twin() for _ in range(n - 1)]
    models = [hm, *twins]
    out: list[dict | None] = [None] * len(drives)
    # spared machines first: each of their steps re-solves every number on steam
    todo = sorted(range(len(drives)), key=lambda k: -drives[k].count)
    lock = threading.Lock()
    errors: list[BaseException] = []
    held_stop, hm.lm.stop = hm.lm.stop, threading.Event()

    def halt(exc: BaseException) -> None:
        errors.append(exc)
        for m in models:
            if m.lm.stop is not None:
                m.lm.stop.set()

    def work(model: HourModel, done: threading.Event | None = None) -> None:
        try:
            while not errors:
                with lock:
                    if not todo:
                        return
                    k = todo.pop(0)
                out[k] = row(model, drives[k])
        except BaseException as exc:  # noqa: BLE001 - handed to the caller's thread
            halt(exc)
        finally:
            if done is not None:
                done.set()

    pool: list[tuple[threading.Thread, threading.Event]] = []
    try:
        for t in twins:
            ended = threading.Event()  # set by the thread as it ends
            th = threading.Thread(target=work, args=(t, ended), name="cogen-advice", daemon=True)
            pool.append((th, ended))
            th.start()
        work(hm)
    except BaseException as exc:  # noqa: BLE001 - Ctrl-C while starting the threads
        halt(exc)
    finally:
        # the others end within a HiGHS call back of their stop; Thread.join is not used:
        # interrupted by Ctrl-C, Python 3.11 takes the thread for ended
        while any(th.is_alive() and not done.is_set() for th, done in pool):
            try:
                for th, done in pool:
                    while th.is_alive() and not done.wait(0.1):
                        pass
            except KeyboardInterrupt as exc:
                halt(exc)
        hm.lm.stop = held_stop
    if errors:
        raise errors[0]
    return [r for r in out if r is not None]


def _driver_row(hm: HourModel, d: Drive, now: dict[str, int], prices: dict[str, float],
                history: dict[str, DriverHistory], tol: float, price_set_by: dict[str, str] | None,
                set_by_tg: dict[str, str] | None) -> dict:
    """One machine's row of :func:`driver_table`."""
    p0 = hm.base_import
    on_steam = hm.solve(WhatIf(force={d.id: "steam"}))
    on_motor = hm.solve(WhatIf(force={d.id: "motor"}))
    c_steam, c_motor = on_steam.cost, on_motor.cost
    d0 = c_steam - c_motor
    # spared machines: every split too (1 of 2 on steam can beat both extremes)
    costs = {0: c_motor, d.count: c_steam}
    for n in range(1, d.count):
        costs[n] = hm.cost(WhatIf(force={d.id: n}))
    best_n = min(costs, key=lambda n: (costs[n], -n))
    worst = max(c_steam, c_motor)
    if worst - costs[best_n] <= TOL:
        better, best_n = "either", (d.count if d0 <= 0 else 0)
    elif best_n == d.count:
        better = "steam"
    elif best_n == 0:
        better = "motor"
    else:
        better = f"{best_n} of {d.count} on steam"
    est = marginal_flip_estimate(hm.cfg, d, prices, hm.feedwater_price)
    if d.count > 1 and better != "either":
        # where the best number on steam changes: all on motor and all on steam may
        # cost the same at a price where a split beats both
        margin = costs[best_n] - min(c for n, c in costs.items() if n != best_n)
        flip, other = _flip_prices(hm, d.id, p0, margin, est, tol, split=(d.count, best_n))
    else:
        flip, other = _flip_prices(hm, d.id, p0, d0, est, tol)
    notes = []
    cur = hm.cfg.site.currency
    if 0 < best_n < d.count and better != "either" and flip is not None:
        notes.append(f"the flip price is where {best_n} of {d.count} on steam stops being the cheapest")
    if flip is None:
        lo, hi = _search_range(p0)
        notes.append(f"no flip between {lo:,.0f} and {hi:,.0f} {cur}/MWh of import")
    elif other is not None:
        notes.append(f"the answer also changes at {other:,.1f} {cur}/MWh of import, "
                     f"{'above' if other > p0 else 'below'} the hour's {p0:,.1f}")
    penalised = [f"{b} price set by " + ("a penalty of another header or hour" if why == "penalty elsewhere"
                                         else f"the {why}")
                 for b in (d.steam_turbine.inlet, d.steam_turbine.exhaust, "power")
                 # a price the reserve raises is still a cost: the estimate holds
                 if (why := (price_set_by or {}).get(b, "cost")) not in ("cost", "reserve limit")]
    if est is not None and penalised:
        est = None
        notes.append("marginal estimate left out: " + ", ".join(dict.fromkeys(penalised)))
    tg_set = [f"{b} by {t}" for b in dict.fromkeys((d.steam_turbine.inlet, d.steam_turbine.exhaust))
              if (t := (set_by_tg or {}).get(b))]
    if est is not None and tg_set:
        # lambda_in - r lambda_ex is then the turbo-generator's power per t at the power
        # price: the estimate is a multiple of the hour's price, not a fixed flip
        notes.append("marginal estimate with steam prices set by a turbo-generator (" + ", ".join(tg_set)
                     + "), which move with the power price: it holds only near the hour's price")
    if est is not None and better in ("steam", "motor") and (est < p0) != (better == "steam"):
        # the estimate holds for a small change at the hour's prices; a whole machine's
        # steam can move them (its exhaust vented, a letdown closed)
        notes.append(f"the marginal estimate ({est:,.1f}) points to {'steam' if est < p0 else 'motor'} at the "
                     f"hour's {p0:,.1f} {cur}/MWh; the full re-solves, which count the whole machine's steam, "
                     f"say {better}")
    return {
        "machine": d.id, "count": d.count, "now_on_steam": now.get(d.id),
        "cost_on_steam": c_steam, "cost_on_motor": c_motor, "best_on_steam": best_n,
        "cost_best": costs[best_n], "saving": worst - costs[best_n],
        # against the machines on steam now (the plan's, else the hour's own choice)
        "saving_vs_now": costs[now[d.id]] - costs[best_n] if now.get(d.id) in costs else None,
        "better": better,
        "flip_import_price": flip,
        "marginal_estimate": est,
        "steam_leaves_short": _short(on_steam), "motor_leaves_short": _short(on_motor),
        # steam or power that nothing can take (no vent, export at its limit): a penalty too
        "steam_leaves_surplus": _surplus(on_steam), "motor_leaves_surplus": _surplus(on_motor),
        "steam_reserve_short_t_h": on_steam.reserve_short, "motor_reserve_short_t_h": on_motor.reserve_short,
        "on_steam_hour_before": history[d.id].before if d.id in history else None,
        "steam_blocked_h": float(history[d.id].held_for(True)) if d.id in history else float("nan"),
        "motor_blocked_h": float(history[d.id].held_for(False)) if d.id in history else float("nan"),
        # whether the minimum time between driver changes allows the best number now
        "best_allowed_now": _in_range(best_n, history[d.id].allowed()) if d.id in history else None,
        "note": "; ".join(notes),
    }


def _in_range(n: int, bounds: tuple[int, int]) -> bool:
    return bounds[0] <= n <= bounds[1]


def _short(st: HourState) -> bool:
    return any(v > 1e-4 for v in st.short.values()) or st.power_short > 1e-4


def _surplus(st: HourState) -> bool:
    return any(v > 1e-4 for v in st.surplus.values()) or st.power_surplus > 1e-4


def _priced(hm: HourModel, w: WhatIf) -> tuple[float, float | None]:
    """The hour's cost under ``w`` [currency] and its slope in the import price [MWh]: the
    import of the schedule found (None from a model that does not say)."""
    c = hm.cost(w)
    return c, getattr(hm, "last_import", None)


def _split_margin(hm: HourModel, did: str, count: int, best: int,
                  price: float) -> tuple[float, float | None, list[float]]:
    """Cost with ``best`` of ``count`` spared machines on steam less the cheapest other
    number on steam, at an import price [currency/h]: negative while ``best`` stays the
    cheapest; its slope in the import price [MWh]; and where each other number's cost line
    would cross ``best``'s [currency/MWh] (the lines through this price with their slopes).
    count + 1 re-solves."""
    got = {n: _priced(hm, WhatIf(force={did: "motor" if n == 0 else "steam" if n == count else n},
                                 price_import=price)) for n in range(count + 1)}
    other = min((n for n in got if n != best), key=lambda n: got[n][0])
    slope = got[best][1] - got[other][1] if got[best][1] is not None and got[other][1] is not None else None
    cross = [price - (got[best][0] - c) / (got[best][1] - sl) for n, (c, sl) in got.items()
             if n != best and sl is not None and got[best][1] is not None and abs(got[best][1] - sl) > 1e-9]
    return got[best][0] - got[other][0], slope, cross


def _flip_prices(hm: HourModel, did: str, p0: float, d0: float, est: float | None,
                 tol: float, split: tuple[int, int] | None = None) -> tuple[float | None, float | None]:
    """Import prices where steam and motor cost the same [currency/MWh]: the nearest to the
    hour's price ``p0``, and one on the other side of it when that side was searched as far
    (None when no price in :func:`_search_range` flips the answer); ``d0`` is steam less
    motor at ``p0``. With ``split`` = (count, best) for spared machines, where the best
    number on steam changes instead (``d0`` then from :func:`_split_margin`): 1 of 2 on
    steam can be the best answer between the prices where all on motor and all on steam are.

    A dearer import price usually favours steam, but with the rest of the hour re-solved at
    each price the difference need not be monotone: a turbo-generator's load and the
    letdowns move with the import price, and with them what the machine's exhaust steam is
    worth. So both sides are searched, stepping out geometrically from ``p0`` (the marginal
    estimate ``est``, when it lies on a side, is that side's first step and that side is
    searched first; the steps nearer than it are kept), then narrowed to ``tol`` [currency/MWh]. Once a flip is found, the
    other side is searched only as far from ``p0`` as it lies: each step is count + 1
    re-solves (two for one machine). A flip between two steps that flips back before the next is missed."""
    if abs(d0) <= TIE:
        return p0, None
    if split is None:  # one machine, d0 = steam less motor: the better of the two against the other
        split, d0 = (1, 0 if d0 > 0 else 1), -abs(d0)

    def diff(q: float) -> tuple[float, float | None, list[float]]:
        return _split_margin(hm, did, *split, q)

    bottom, top = _search_range(p0)
    first_up = est is not None and est > p0
    found: list[float] = []
    for up in (first_up, not first_up):
        # geometric-like steps out to the end of the range on each side (few: each step is
        # two re-solves)
        # steps of similar size near the hour's price on both sides (a band where the
        # other driver wins can be a few tens per MWh wide: steps of 0.25 and 0.6 of the
        # way to zero stepped over one from 128 to 68 on the demo site)
        fractions = (0.006, 0.015, 0.03, 0.08, 0.37, 1.0) if up else (0.1, 0.25, 0.45, 0.7, 1.0)
        steps = [p0 + (top - p0) * f if up else p0 - (p0 - bottom) * f for f in fractions]
        if est is not None and bottom <= est <= top and ((est > p0) if up else (est < p0)):
            # the estimate is a step, not a leap: the steps nearer than it stay (a band where
            # the other driver wins can lie between the hour's price and the estimate)
            q_est = est + 0.02 * abs(est) * (1 if up else -1)
            steps = sorted([*steps, q_est], key=lambda q: abs(q - p0))
        if found:  # no further than the flip in hand: a nearer one is all that could matter
            reach = abs(found[0] - p0)
            steps = [q for q in steps if abs(q - p0) < reach] + [p0 + reach if up else p0 - reach]
            steps = [q for q in steps if bottom <= q <= top]
        flip = _bracket_and_bisect(diff, p0, d0, steps, tol) if steps else None
        if flip is not None:
            found.append(flip)
    found.sort(key=lambda q: abs(q - p0))
    return (found[0] if found else None), (found[1] if len(found) > 1 else None)


def _search_range(p0: float) -> tuple[float, float]:
    """[currency/MWh] lowest and highest import price the flip search tries around the
    hour's ``p0``: from 0 to 20 times it (at least 1 000); a negative price (an hour paid
    to take power) is searched from as far again below it (at least 100) up to 1 000."""
    if p0 > 0.0:
        return 0.0, max(20.0 * p0, 1000.0)
    return p0 - max(abs(p0), 100.0), 1000.0


def _bracket_and_bisect(diff: Callable[[float], tuple], p0: float, d0: float,
                        steps: list[float], tol: float) -> float | None:
    """The first price along ``steps`` from ``p0`` where the choice better at ``p0`` stops
    being better by more than :data:`TIE` [currency/h] (``diff``: the cost difference at a
    price, its slope in the price and, optionally, where the lines of the choices it
    compares cross; ``d0`` its value at ``p0``), narrowed to ``tol`` and
    interpolated in its last bracket; None without one. (Where steam and motor cost the
    same to a cent over a range of prices, the flip is that range's far edge, not a point
    inside it chosen by round-off.)"""
    shift = TIE if d0 > 0 else -TIE
    slopes: dict[float, float | None] = {}
    crossings: dict[float, list[float]] = {}

    def g(q: float) -> float:
        got = diff(q)
        v, slopes[q] = got[0], got[1]
        crossings[q] = list(got[2]) if len(got) > 2 else ([q - v / got[1]] if got[1] else [])
        return v - shift

    a, fa = p0, d0 - shift
    slopes[p0] = None
    queue = list(steps)
    while queue:
        q = queue.pop(0)
        fq = g(q)
        if fq * fa <= 0:
            b, fb = q, fq
            break
        a, fa = q, fq
        # the schedule at q stays optimal over a range of prices, along which the difference
        # is the line through q with its slope: where that line crosses zero before the next
        # step, look there first (just past the crossing), or a narrow band where the other
        # driver wins is stepped over
        if queue:
            way = 1.0 if queue[0] > q else -1.0
            ahead = [r + way * 0.5 * tol for r in crossings.get(q, [])]
            ahead = [r for r in ahead if (r - q) * way > tol and (queue[0] - r) * way > tol]
            if ahead:
                queue.insert(0, min(ahead, key=lambda r: abs(r - q)))
    else:
        return None
    # false position and halving steps in turn (two halvings running when a step did not
    # halve the bracket): the difference is piecewise linear in the price (an LP's optimum
    # in a cost coefficient), so false position lands on the root of a linear piece in one
    # step, and the halving steps keep it from crawling along a flat piece or a kink (a
    # bracketing hybrid in the manner of Dekker's method, from memory)
    halve = False
    for _ in range(60):
        width = abs(b - a)
        if width <= tol:
            break
        mid = 0.5 * (a + b) if halve or fa == fb else a + (b - a) * fa / (fa - fb)
        # each solve's import is the slope of its cost in the price: a Newton step from the
        # end nearer zero lands on the root when the two lie on one linear piece (each
        # solve's schedule is optimal over a range of prices), in one re-solve
        newton = [q - f / s for q, f in sorted(((a, fa), (b, fb)), key=lambda e: abs(e[1]))
                  if (s := slopes.get(q)) and abs(s) > 1e-9]
        # (not onto an end: a step that lands there learns nothing; it happens at a kink)
        newton = [q for q in newton if min(a, b) + 0.25 * tol < q < max(a, b) - 0.25 * tol]
        if newton and not halve:
            mid = newton[0]
        if not (min(a, b) < mid < max(a, b)):
            mid = 0.5 * (a + b)
        fm = g(mid)
        if abs(fm) <= 1e-6 * max(1.0, abs(fa), abs(fb)):
            a = b = mid
            break
        if fm * fa < 0:
            b, fb = mid, fm
        else:
            a, fa = mid, fm
        halve = not halve or abs(b - a) > 0.5 * width
    # the root inside the last bracket; a flip within the tolerance above a zero import
    # price is zero (the motor is better only when power is free)
    p = a if a == b else (a + (b - a) * fa / (fa - fb) if fa != fb else 0.5 * (a + b))
    return 0.0 if 0.0 <= p < tol else p


def what_if_changes(base: HourState, new: HourState) -> list[str]:
    """Plain-language list of what a what-if changed."""
    out = []
    for u, v in new.on.items():
        if v != base.on.get(u):
            out.append(f"{u} {'started' if v else 'stopped'}")
    for d, n in new.on_steam.items():
        if n != base.on_steam.get(d):
            out.append(f"{d}: {base.on_steam.get(d)} -> {n} machine(s) on steam")
    # who picks up the load: boilers' steam and turbo-generators' power that moved
    for label, was, now, unit, digits in (("boiler", base.steam, new.steam, "t/h", 1),
                                          ("turbo-generator", base.power, new.power, "MW", 2),
                                          ("letdown", base.letdown, new.letdown, "t/h", 1),
                                          ("vent", base.vent, new.vent, "t/h", 1),
                                          ("grid", base.grid, new.grid, "MW", 2)):
        for uid, f in now.items():
            b = was.get(uid, 0.0)
            before, after = f"{b:.{digits}f}", f"{f:.{digits}f}"
            if before != after:  # a change that shows at the digits printed
                out.append(f"{label} {uid} {before} -> {after} {unit}")
    for h, s in new.short.items():
        if s > 1e-4:
            out.append(f"{h} header SHORT {s:.2f} t/h")
    for h, s in new.surplus.items():
        if s > 1e-4:
            out.append(f"{h} header SURPLUS {s:.2f} t/h that nothing can take")
    if new.power_short > 1e-4:
        out.append(f"electric bus SHORT {new.power_short:.2f} MW")
    if new.power_surplus > 1e-4:
        out.append(f"electric bus SURPLUS {new.power_surplus:.2f} MW beyond load and export")
    return out


@dataclass
class Advice:
    time: str
    held: dict[str, int]
    cost: float
    prices: dict[str, float]
    power_price: float
    reasons: dict[str, str]
    power_reason: str
    drivers: pd.DataFrame
    what_if: dict[str, object] | None
    seconds: float
    set_by: dict[str, str] = field(default_factory=dict)  # per balance, as a plan's prices.csv (prices.set_by)
    not_met: list[str] = field(default_factory=list)  # the hour as given: what is short, one line each
    # the hour as given: boilers [t/h], turbo-generators [MW], grid [MW], machines on steam
    dispatch: dict[str, dict[str, float]] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)  # what the advice changed in what it was given
    # per balance, the part of the price the steam reserve makes [currency/t or /MWh]
    reserve_part: dict[str, float] = field(default_factory=dict)


def _asked_prices(w: WhatIf, series: Series, i: int, cur: str) -> list[str]:
    """A line per price the what-if sets, with the hour's own beside it: the change it
    reports is then read as the price's doing, not the dispatch's alone."""
    out = []
    for what, new, was in (("import", w.price_import, series.price_import.iloc[i]),
                           ("export", w.price_export, series.price_export.iloc[i])):
        if new is not None:
            out.append(f"{what} price {was:,.2f} -> {new:,.2f} {cur}/MWh")
    for f, p in w.fuel_price.items():
        out.append(f"fuel {f} price {series.fuel_price[f].iloc[i]:,.2f} -> {p:,.2f} {cur}/GJ")
    for hid, d in w.demand.items():
        out.append(f"{hid} demand {series.demand[hid].iloc[i]:,.1f} -> {series.demand[hid].iloc[i] + d:,.1f} t/h")
    return out


def _with_demand(series: Series, i: int, change: dict[str, float]) -> Series:
    """``series`` with hour ``i``'s process demand changed by ``change`` [t/h per header]."""
    demand = series.demand.copy()
    for hid, d in change.items():
        demand.iloc[i, demand.columns.get_loc(hid)] += d
    return replace(series, demand=demand)


def advise(cfg: SiteConfig, series: Series, at: str, series_path: str, plan_dir: str | None = None,
           what_if: WhatIf | None = None, build: BuildOptions = BuildOptions(), allow_starts: bool = False,
           keep_drivers: bool = False, allow_stops: bool = False, threads: int = 1) -> Advice:
    """Advice for the hour ``at``: marginal prices, driver table and an optional what-if.

    The what-if holds every boiler's and turbo-generator's on/off state: within the hour a
    cold unit cannot take load, and a running one is not stopped on a whim. With
    ``allow_starts`` a stopped unit may start (its whole start-up cost charged to the hour),
    to ask whether a change would be worth a start; with ``allow_stops`` a running unit may
    stop for the hour. With ``keep_drivers`` (a plan needed)
    every machine keeps the plan's drivers in the hour, except the machine a row of the
    driver table or the what-if forces."""
    import time as _time

    t0 = _time.perf_counter()
    i = hour_index(series, at, series_path)
    held, plan_drivers, history, before = held_states(cfg, series, i, plan_dir, build)
    held_notes = []
    asked = pd.Timestamp(at)
    if asked.tzinfo is not None and asked.utcoffset() != series.stamps[i].utcoffset():
        # +02:00 typed from summer habit in winter: the same instant, another wall-clock hour
        held_notes.append(f"{at} is {hour_label(series.stamps[i])} as the series writes it (the same instant "
                          "in the series' offset for that hour)")
    for u in (*cfg.boilers, *cfg.turbogenerators):
        if not u.available and held.get(u.id) == 1:  # the site file has it out since the plan
            held[u.id] = 0
            held_notes.append(f"{u.id} runs in the plan but is unavailable in the site file: held off")
    _check_what_if(cfg, what_if)
    if allow_starts and what_if is not None and what_if.trip:
        raise InputError(None, "--allow-starts", "does not go with --trip: after a trip no other unit can "
                         "start within the hour")
    hm = HourModel(cfg, series, i, held, build, before)
    hm.driver_limits = {did: h.allowed() for did, h in history.items()}
    if keep_drivers:
        if plan_drivers is None:
            raise InputError(None, "--keep-drivers", "needs --plan: the drivers kept are the plan's in the hour")
        hm.driver_limits = {did: (n, n) for did, n in plan_drivers.items() if did in hm.drive_cols}
        missing = [did for did in hm.drive_cols if did not in plan_drivers]
        if missing:
            raise InputError(Path(plan_dir or "") / "schedule.csv", "--keep-drivers",
                             f"the plan gives no driver for {', '.join(missing)} (no '<machine>.on_steam' column)")
    base = hm.solve()
    prices, power_price, x = hm.marginal_prices()
    reasons, pw_reason = price_reasons(hm, x)
    m = hm.sm.model

    val = valuer(hm.lm, x)
    categories = {b: set_by(m, val, b, 0, power_price if b == "power" else prices.get(b), cfg.penalties,
                            hm.reserve_part.get(b, 0.0))
                  for b in [*reasons, "power"]}
    for b, why in categories.items():
        if why == "penalty elsewhere":  # the unit named moves, but a shortfall elsewhere prices it
            note = ("; the price carries the penalty of a shortfall or surplus elsewhere (another header, "
                    "through a letdown or the deaerator's steam), not a cost")
            if b == "power":
                pw_reason += note
            else:
                reasons[b] += note
    # the reserve is one for the site, though each header's price carries it: named once
    not_met = [reasons[h] for h, v in base.short.items() if v > TOL] + \
        ([pw_reason] if base.power_short > TOL else []) + \
        ([f"steam reserve: the steam reserve is {base.reserve_short:.2f} t/h short"] if base.reserve_short > TOL else [])
    now = plan_drivers if plan_drivers is not None else base.on_steam
    # headers whose price a turbo-generator's extraction or exhaust sets (price_reasons)
    by_tg = {h: tg.id for h, text in reasons.items() for tg in cfg.turbogenerators
             if f"from {tg.id} (" in text or f"of {tg.id} (" in text}
    drivers = driver_table(hm, now, prices, history, price_set_by=categories, set_by_tg=by_tg, threads=threads)
    wi = None
    if what_if is not None and not what_if.empty():
        # the change is measured against the hour as held; the what-if holds it too unless
        # starts are asked for (never with a trip: advise refuses that above)
        base_free = hm.solve(hold="all")
        # which held states the what-if may change: starts, stops, both or neither
        hold = {(False, False): "all", (True, False): "on", (False, True): "off", (True, True): "none"}[
            (allow_starts, allow_stops)]
        if what_if.demand:
            # more (or less) process steam also returns more (or less) condensate to the
            # deaerator: the hour is built again on the changed demand, not just its rows
            hw = HourModel(cfg, _with_demand(series, i, what_if.demand), i, held, build, before)
            hw.driver_limits = hm.driver_limits
            new = hw.solve(replace(what_if, demand={}), hold=hold)
        else:
            new = hm.solve(what_if, hold=hold)
        notes = [f"{u} was already off" for u in what_if.trip if held.get(u) == 0]
        reserve_change = cfg.penalties.reserve_shortfall * (new.reserve_short - base_free.reserve_short)
        if hm.trips_a_boiler(what_if) and len(hm.reserve_rows):
            note = "steam reserve no longer kept: the site is in the contingency it was kept for"
            less = base_free.cost - new.cost
            freed = -reserve_change if reserve_change < -1.0 else 0.0
            if less > 1.0 and freed > 0.0:
                # a trip that makes the hour cheaper by the reserve's penalty, which is no
                # saving to plan for; the rest (a poor unit's minimum load no longer burnt,
                # say) is the dispatch
                if abs(less - freed) <= 1.0:  # to the currency unit: a real saving is not hidden
                    note += (f"; the hour costs {less:,.0f} less only because the reserve no longer counts "
                             f"({freed:,.0f} of it was the reserve's penalty, not money spent)")
                else:
                    note += (f"; the hour costs {less:,.0f} less, of which {freed:,.0f} was the reserve's "
                             "penalty (not money spent) and the rest the dispatch without the tripped unit")
            notes.append(note)
        if new.reserve_short > base_free.reserve_short + 1e-4:
            idle = [b.id for b in cfg.boilers if new.on.get(b.id) == 0 and b.id not in what_if.trip]
            notes.append(f"steam reserve {new.reserve_short:.2f} t/h short (was {base_free.reserve_short:.2f}): "
                         f"{reserve_change:,.0f} of the change is its "
                         "penalty, not money spent"
                         + (f"; starting {', '.join(idle)} (--allow-starts) may keep it" if idle and not allow_starts
                            else "")
                         + ("; stopping a unit (--allow-stops) may too" if not allow_stops else ""))
        slack_change = new.penalty - base_free.penalty - reserve_change  # header and bus slacks
        if slack_change > 1.0:  # a penalty of 10^6 per t turns solver round-off into cents
            notes.append(f"{slack_change:,.0f} of the change is the penalty for steam or power the site "
                         "cannot supply or take, not money spent")
        wi = {"cost": new.cost, "base_cost": base_free.cost, "change": new.cost - base_free.cost,
              "changes": _asked_prices(what_if, series, i, cfg.site.currency) + notes
              + what_if_changes(base_free, new) + _blocked_changes(base_free, new, history),
              "short": any(s > 1e-4 for s in new.short.values()) or new.power_short > 1e-4,
              "surplus": any(s > 1e-4 for s in new.surplus.values()) or new.power_surplus > 1e-4,
              "reserve_short_t_h": new.reserve_short,
              "penalty_change": new.penalty - base_free.penalty,
              "asked": {**asdict(what_if), "allow_starts": allow_starts, "allow_stops": allow_stops}}
    dispatch = {"boilers_t_h": base.steam, "turbogenerators_MW": base.power, "grid_MW": base.grid,
                "machines_on_steam": {k: float(v) for k, v in base.on_steam.items()}}
    return Advice(str(series.stamps[i]), held, base.cost, prices, power_price, reasons, pw_reason, drivers, wi,
                  _time.perf_counter() - t0, categories, not_met, dispatch, held_notes,
                  {b: hm.reserve_part.get(b, 0.0) for b in [*prices, "power"]})


def _blocked_changes(base: HourState, new: HourState, history: dict[str, DriverHistory]) -> list[str]:
    """A line for each driver change of a what-if that the site's minimum time between
    driver changes does not allow this hour, counted from the drivers of the hour before
    (``history``; machines with no known history are not judged). The hour's re-solve
    itself does not hold that minimum time: it is the plan's, across hours."""
    out = []
    for did, n in new.on_steam.items():
        h = history.get(did)
        if h is None or n == base.on_steam.get(did) or n == h.before:
            continue
        wait = h.held_for(n > h.before)
        if wait > 0:
            out.append(f"{did}: {h.before} -> {n} machine(s) on steam against the hour before is not allowed for "
                       f"{wait} h by the minimum time between driver changes ({h.min_hours} h)")
    return out


def _check_what_if(cfg: SiteConfig, w: WhatIf | None) -> None:
    if w is None:
        return
    dual = {d.id for d in cfg.drives if d.steam_turbine is not None and d.motor is not None}
    for did, drv in w.force.items():
        if did not in dual:
            raise InputError(None, "--force", f"'{did}' is not a machine with both a steam turbine and a motor "
                             f"(those are: {', '.join(sorted(dual)) or 'none'})")
        if drv not in ("steam", "motor"):
            raise InputError(None, "--force", f"'{drv}' must be 'steam' or 'motor'")
    units = {u.id for u in (*cfg.boilers, *cfg.turbogenerators)}
    for u in w.trip:
        if u not in units:
            raise InputError(None, "--trip", f"'{u}' is not a boiler or turbo-generator "
                             f"({', '.join(x.id for x in (*cfg.boilers, *cfg.turbogenerators))})")
    fuels = {f.id for f in cfg.fuels}
    for f in w.fuel_price:
        if f not in fuels:
            raise InputError(None, "--price", f"unknown fuel '{f}'")
    headers = {h.id for h in cfg.headers}
    for h in w.demand:
        if h not in headers:
            raise InputError(None, "--demand", f"unknown header '{h}'")

