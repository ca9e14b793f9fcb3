"""Solved schedules as tidy pandas DataFrames, cost breakdowns and shortfall diagnoses."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable

import numpy as np
import pandas as pd
import pyomo.environ as pyo

from .clock import hour_label
from .equipment.common import held_value
from .plant.schema import Boiler, Condenser, Drive, Letdown, SiteConfig, TurboGenerator, Vent
from .site import SiteModel

TOL = 1e-5  # [t/h] or [MW]: below this a slack counts as zero


def _val(x: object) -> float:
    """Numeric value of a Pyomo expression, variable or number (unset variables count 0)."""
    if isinstance(x, (int, float, np.floating)):
        return float(x)
    v = pyo.value(x, exception=False)
    return 0.0 if v is None else float(v)


def _series(fn, hours: list[int]) -> np.ndarray:  # noqa: ANN001
    return np.array([_val(fn(t)) for t in hours])


@dataclass
class PlanResults:
    """Everything a plan writes: the schedule, the balances, costs and the diagnosis."""

    schedule: pd.DataFrame
    balances: pd.DataFrame
    power: pd.DataFrame
    hourly_cost: pd.DataFrame
    totals: dict[str, object]
    diagnosis: list[str] = field(default_factory=list)

    @property
    def feasible(self) -> bool:
        """True when the diagnosis is empty: no header or electric-bus shortfall or surplus, no
        reserve short."""
        return not self.diagnosis


def schedule_frame(sm: SiteModel) -> pd.DataFrame:
    """One row per hour, one column per unit quantity: ``<unit>.<quantity>_<unit of measure>``."""
    ctx, m = sm.ctx, sm.model
    hours = ctx.hours
    cols: dict[str, np.ndarray] = {}
    for uid, blk in sm.blocks.items():
        u = getattr(blk, "unit", None)
        if isinstance(u, Boiler):
            cols[f"{uid}.on"] = _series(lambda t: blk.on[t], hours).round()
            cols[f"{uid}.steam_t_h"] = _series(lambda t: blk.steam[t], hours)
            cols[f"{uid}.fuel_GJ_h"] = _series(lambda t: blk.fuel[t], hours)
            for f in u.fuels:
                cols[f"{uid}.fuel_{f}_GJ_h"] = _series(lambda t, f=f: blk.burn[f, t], hours)
            cols[f"{uid}.start"] = _series(lambda t: blk.start[t], hours).round()
        elif isinstance(u, TurboGenerator):
            co = blk.coefficients
            cols[f"{uid}.on"] = _series(lambda t: blk.on[t], hours).round()
            cols[f"{uid}.throttle_t_h"] = _series(lambda t: blk.throttle[t], hours)
            for k, sec in enumerate(co.sections[:-1]):
                cols[f"{uid}.extraction_{sec.to}_t_h"] = _series(lambda t, k=k: blk.extraction[k, t], hours)
            last = co.sections[-1]
            n = len(co.sections) - 1
            cols[f"{uid}.exhaust_{last.to}_t_h"] = _series(lambda t: blk.flow[n, t], hours)
            cols[f"{uid}.power_MW"] = _series(lambda t: blk.power[t], hours)
            cols[f"{uid}.start"] = _series(lambda t: blk.start[t], hours).round()
        elif isinstance(u, Drive):
            on_steam = _series(blk.machines_on_steam, hours).round()
            cols[f"{uid}.on_steam"] = on_steam
            cols[f"{uid}.on_motor"] = u.count - on_steam
            if hasattr(blk, "steam_flow"):
                cols[f"{uid}.steam_t_h"] = _series(blk.steam_flow, hours)
            if u.motor is not None:
                duty = ctx.series.duty[uid].to_numpy()
                cols[f"{uid}.motor_MW"] = duty / u.motor.efficiency * (u.count - on_steam)
        elif isinstance(u, Letdown):
            cols[f"{uid}.flow_t_h"] = _series(lambda t: blk.flow[t], hours)
            cols[f"{uid}.water_t_h"] = cols[f"{uid}.flow_t_h"] * (blk.ratio - 1.0)
        elif isinstance(u, Vent):
            cols[f"{uid}.flow_t_h"] = _series(lambda t: blk.flow[t], hours)
        elif isinstance(u, Condenser):
            cols[f"{uid}.in_service"] = _series(lambda t: blk.in_service[t], hours).round()
            cols[f"{uid}.flow_t_h"] = _series(blk.flow, hours)
            cols[f"{uid}.duty_MW"] = _series(blk.duty, hours)
            cols[f"{uid}.ejector_t_h"] = _series(blk.ejector, hours)
            cols[f"{uid}.hotwell_t_h"] = _series(blk.hotwell, hours)
    da = m.deaerator
    cols["deaerator.steam_t_h"] = _series(lambda t: da.steam[t], hours)
    cols["deaerator.makeup_t_h"] = _series(lambda t: da.makeup[t], hours)
    cols["deaerator.feedwater_t_h"] = _series(da.feedwater, hours)
    # hot water beyond what the boilers and sprays draw (condensate return above the
    # feedwater, e.g. under a steam-exporting process): drained at feedwater enthalpy
    cols["deaerator.overflow_t_h"] = _series(lambda t: da.overflow[t], hours)
    cols["grid.import_MW"] = _series(lambda t: m.grid.imp[t], hours)
    cols["grid.export_MW"] = _series(lambda t: m.grid.exp[t], hours)
    df = pd.DataFrame(cols, index=pd.Index(ctx.series.stamps, name="time"))
    return df.where(df.abs() > 1e-9, 0.0)


def balance_frames(sm: SiteModel) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Every term of every header balance [t/h] and of the electric balance [MW], long format.

    Positive flows go into the header (or bus), negative ones leave it; each (time, header)
    group sums to zero.
    """
    ctx = sm.ctx
    hours, time = ctx.hours, ctx.series.stamps  # the site's clock (cogendispatch.clock)
    rows = []
    for h in [hh.id for hh in ctx.cfg.headers]:
        for term in ctx.header_terms[h]:
            rows.append(pd.DataFrame({"time": time, "header": h, "term": term.label,
                                      "flow_t_h": _series(term.expr, hours)}))
    bal = pd.concat(rows, ignore_index=True)
    prow = [pd.DataFrame({"time": time, "term": term.label, "power_MW": _series(term.expr, hours)})
            for term in ctx.power_terms]
    power = pd.concat(prow, ignore_index=True)
    return bal, power


def cost_frame(sm: SiteModel) -> pd.DataFrame:
    """Cost per hour and category [currency]."""
    ctx = sm.ctx
    data = {cat: sum((_series(term, ctx.hours) for term in terms), np.zeros(len(ctx.hours)))
            for cat, terms in ctx.cost_terms.items()}
    df = pd.DataFrame(data, index=pd.Index(ctx.series.stamps, name="time"))
    # a slack of solver round-off times a large penalty is not a cost worth printing
    return df.where(df.abs() > 1e-6, 0.0)


def _runs(mask: np.ndarray) -> list[tuple[int, int]]:
    """Consecutive runs of True as (first, last) hour indices."""
    out, start = [], None
    for i, v in enumerate(mask):
        if v and start is None:
            start = i
        if not v and start is not None:
            out.append((start, i - 1))
            start = None
    if start is not None:
        out.append((start, len(mask) - 1))
    return out


def _off(available: bool, on: pyo.Var) -> str:
    """Why a unit is off: out of service in the site file, held off before the solve (an
    outage, or a minimum down time still running from before the horizon), or chosen."""
    if not available:
        return "unavailable"
    return "held off (outage or minimum down time)" if held_value(on) == 0 else "off"


def _supplying(cfg: SiteConfig, header: str) -> set[str]:
    """``header`` and every header whose steam can reach it through letdowns and turbines."""
    links = [(ld.source, ld.to) for ld in cfg.letdowns]
    links += [(tg.inlet, sec.to) for tg in cfg.turbogenerators for sec in tg.sections]
    links += [(d.steam_turbine.inlet, d.steam_turbine.exhaust) for d in cfg.drives if d.steam_turbine is not None]
    found, grew = {header}, True
    while grew:
        grew = False
        for a, b in links:
            if b in found and a not in found:
                found.add(a)
                grew = True
    return found


def fuels_at_supply(cfg: SiteConfig, blocks: dict[str, pyo.Block], t: int,
                    val: Callable[[object], float] = _val, tol: float = 1e-4) -> dict[str, float]:
    """Fuels burnt up to their site-wide ``max_supply`` in hour ``t``, with that supply
    [GJ/h]: a boiler on them alone can make no more steam, whatever its rating. ``val``
    gives a variable's value (the loaded values by default)."""
    burnt = {f.id: sum(val(blocks[bo.id].burn[f.id, t]) for bo in cfg.boilers if f.id in bo.fuels)
             for f in cfg.fuels if f.max_supply is not None}
    return {f.id: f.max_supply for f in cfg.fuels if f.id in burnt and burnt[f.id] >= f.max_supply - tol}


def binding_limits(sm: SiteModel, t: int, power: bool = False, header: str | None = None) -> list[str]:
    """Equipment at an upper limit (or held off) in hour ``t``: what stops more supply (to
    ``header`` when given: only units on it or upstream of it)."""
    cfg, b = sm.ctx.cfg, sm.blocks
    up = _supplying(cfg, header) if header is not None else None
    out = []
    # fuels burnt up to their site-wide supply: a boiler on them alone can make no more
    capped = fuels_at_supply(cfg, b, t)
    for bo in cfg.boilers:
        if up is not None and bo.header not in up:
            continue
        blk = b[bo.id]
        if _val(blk.on[t]) < 0.5:
            out.append(f"{bo.id} {_off(bo.available, blk.on[t])}")
        elif _val(blk.steam[t]) >= bo.max_steam - 1e-4:
            out.append(f"{bo.id} at its {bo.max_steam:g} t/h rating")
        elif all(fu in capped for fu in bo.fuels):
            out.append(f"{bo.id} at its fuel's supply limit ("
                       + ", ".join(f"{fu} {capped[fu]:g} GJ/h" for fu in bo.fuels) + ")")
    for tg in cfg.turbogenerators:
        blk = b[tg.id]
        if up is not None and not any(sec.to in up for sec in tg.sections):
            continue
        if _val(blk.on[t]) > 0.5:
            if _val(blk.throttle[t]) >= tg.max_throttle - 1e-4:
                out.append(f"{tg.id} at its {tg.max_throttle:g} t/h throttle limit")
            if _val(blk.power[t]) >= tg.generator_rating - 1e-4:
                out.append(f"{tg.id} at its {tg.generator_rating:g} MW rating")
            # a full section or extraction stops more flow to a header, and more power
            for k, sec in enumerate(tg.sections):
                if sec.max_flow is not None and _val(blk.flow[k, t]) >= sec.max_flow - 1e-4:
                    out.append(f"{tg.id} section to {sec.to} at its {sec.max_flow:g} t/h limit")
                if (sec.max_extraction is not None and k < len(tg.sections) - 1
                        and _val(blk.extraction[k, t]) >= sec.max_extraction - 1e-4):
                    out.append(f"{tg.id} extraction to {sec.to} at its {sec.max_extraction:g} t/h limit")
        elif power:
            out.append(f"{tg.id} {_off(tg.available, blk.on[t])}")
    if not power:
        for ld in cfg.letdowns:
            if up is not None and ld.to not in up:
                continue
            if _val(b[ld.id].flow[t]) >= ld.max_flow - 1e-4:
                out.append(f"{ld.id} at its {ld.max_flow:g} t/h capacity")
    if power:
        # more power from steam needs somewhere for the exhaust steam to go
        for c in cfg.condensers:
            blk = b.get(c.id)
            if blk is not None and hasattr(blk, "cooling") and _val(blk.duty(t)) >= c.cooling_capacity - 1e-4:
                out.append(f"{c.id} at its {c.cooling_capacity:g} MW cooling capacity")
        for v in cfg.vents:
            if _val(b[v.id].flow[t]) >= v.max_flow - 1e-4:
                out.append(f"{v.id} venting its {v.max_flow:g} t/h maximum")
    if power and _val(sm.model.grid.imp[t]) >= cfg.grid.max_import - 1e-4:
        out.append(f"grid import at its {cfg.grid.max_import:g} MW limit")
    return out


def diagnose(sm: SiteModel, upto: int | None = None, first: int = 0) -> list[str]:
    """Name each header (or the electric bus, or the reserve) that is short, when, by how
    much, and the equipment limits binding at the worst hour; only hours before ``upto``
    when given (a rolling window's committed part). Hours are numbered from ``first``
    (a window's first hour in the whole series), as the user counts them."""
    m, ctx = sm.model, sm.ctx
    hours, time = ctx.hours[:upto], ctx.series.stamps  # the site's clock, as the file writes it
    msgs = []

    def report(values: np.ndarray, what: str, unit: str, hint: str, limits: bool = False,
               power: bool = False, header: str | None = None) -> None:
        for a, b in _runs(values > TOL):
            peak = values[a:b + 1].max()
            worst = a + int(np.argmax(values[a:b + 1]))
            if a == b:
                span = f"hour {first + a} ({hour_label(time[a])})"
            else:
                span = f"hours {first + a}-{first + b} ({hour_label(time[a])} to {hour_label(time[b])})"
            # a shortfall under a hundredth still shows its size ("0.004", not "0.00")
            msg = f"{what} {peak:{'.2f' if peak >= 0.01 else '.2g'}} {unit} at most in {span}; {hint}"
            if limits:
                bind = binding_limits(sm, worst, power, header)
                if bind:
                    msg += f"; binding in hour {first + worst}: " + ", ".join(bind)
            msgs.append(msg)

    for h in ctx.cfg.headers:
        report(_series(lambda t, h=h.id: m.steam_short[h, t], hours), f"{h.id} header short", "t/h",
               "in this schedule, the units that feed it are at their limits", limits=True, header=h.id)
        report(_series(lambda t, h=h.id: m.steam_surplus[h, t], hours), f"{h.id} header surplus", "t/h",
               "nothing can take this steam (add a vent or letdown, or lower minimum flows)")
    report(_series(lambda t: m.power_short[t], hours), "electric bus short", "MW",
           "in this schedule, generation plus the import limit fall short of the load", limits=True, power=True)
    report(_series(lambda t: m.power_surplus[t], hours), "electric bus surplus", "MW",
           "generation above load plus the export limit")
    report(_series(lambda t: m.reserve_short[t], hours), "steam reserve short", "t/h",
           reserve_hint(ctx.cfg), limits=True)
    return msgs


def reserve_uncoverable(cfg: SiteConfig) -> list[str]:
    """Each available boiler whose loss the others cannot cover even at their full ratings,
    with the load [t/h] above which its reserve is always short (the reserve row: the
    others' spare rating >= cover x its steam)."""
    c = cfg.reserve.cover
    ok = [b for b in cfg.boilers if b.available]
    out = []
    for b in ok:
        others = sum(o.max_steam for o in ok if o is not b)
        if c > 0 and c * b.max_steam > others + 1e-9:
            out.append(f"{b.id} above {others / c:.4g} t/h (the others' ratings sum to {others:.4g} t/h)")
    return out


def reserve_hint(cfg: SiteConfig) -> str:
    """Why a steam reserve can be short, for the diagnosis: a boiler whose loss the others
    cannot cover even at their full ratings is named (:func:`reserve_uncoverable`); and how
    to plan without it when the site accepts that risk."""
    never = reserve_uncoverable(cfg)
    return ("losing the largest running boiler could not be covered"
            + ("; the others can never cover " + ", ".join(never) if never else "")
            + f"; a lower [reserve] cover (now {cfg.reserve.cover:g}) or --no-reserve plans with less reserve, "
            "if the site accepts that risk")


def plan_results(sm: SiteModel) -> PlanResults:
    """Collect the schedule, balances, costs, totals and diagnosis of a solved model."""
    cfg = sm.ctx.cfg
    sched = schedule_frame(sm)
    bal, power = balance_frames(sm)
    cost = cost_frame(sm)
    fuel = {}
    co2 = 0.0
    factors = {f.id: f.co2_factor for f in cfg.fuels}
    for b in cfg.boilers:
        for f in b.fuels:
            used = float(sched[f"{b.id}.fuel_{f}_GJ_h"].sum())
            fuel[f] = fuel.get(f, 0.0) + used
            co2 += used * factors[f]
    starts = {u.id: int(sched[f"{u.id}.start"].sum()) for u in (*cfg.boilers, *cfg.turbogenerators)}
    totals: dict[str, object] = {
        "cost": {k: float(v) for k, v in cost.sum().items()},
        "fuel_GJ": {k: float(v) for k, v in fuel.items()},
        "fuel_total_GJ": float(sum(fuel.values())),
        "import_MWh": float(sched["grid.import_MW"].sum()),
        "export_MWh": float(sched["grid.export_MW"].sum()),
        "co2_t": float(co2),
        "starts": starts,
        "boiler_starts": {b.id: starts[b.id] for b in cfg.boilers},
        "running_hours": {u.id: int(sched[f"{u.id}.on"].sum()) for u in (*cfg.boilers, *cfg.turbogenerators)},
        "drive_hours": {d.id: {"steam": float(sched[f"{d.id}.on_steam"].sum()),
                               "motor": float(sched[f"{d.id}.on_motor"].sum())} for d in cfg.drives},
    }
    return PlanResults(sched, bal, power, cost, totals, diagnose(sm))


END_WINDOW_H = 24  # [h] a stop this close to the horizon's end is named by end_stops (common practice: a day)


def end_stops(cfg: SiteConfig, schedule: pd.DataFrame, within: int = END_WINDOW_H) -> list[str]:
    """Boilers and turbo-generators that run at the start of the plan and stop for good in
    its last ``within`` hours [h] (at most its last quarter: in a plan of a day, a stop in
    hour 2 is no end effect), and machines whose last driver change lies closer to the end
    than their minimum time between changes. The plan sees no hour after its last, so such a stop
    saves running cost without the restart that would follow: an end-of-horizon effect, not
    advice for the next week (rolling-horizon planning; see e.g. the look-ahead of a study)."""
    notes = []
    n = len(schedule)
    within = min(within, n // 4)
    for u in (*cfg.boilers, *cfg.turbogenerators):
        col = f"{u.id}.on"
        if col not in schedule:
            continue
        on = schedule[col].to_numpy() > 0.5
        if n == 0 or not on[0] or on[-1]:
            continue
        last_on = int(np.flatnonzero(on)[-1])
        stop = last_on + 1
        if n - stop <= within:
            notes.append(f"{u.id} stops at {hour_label(schedule.index[stop])} and stays off to the plan's end "
                         f"({n - stop} h): the plan sees no hour after its last, so this stop pays no restart; "
                         "if the site runs on, plan with the next day's series too and keep the first "
                         f"{n} h")
    for d in cfg.drives:
        col = f"{d.id}.on_steam"
        if col not in schedule or d.min_hours_between_switches <= 1 or n < 2:
            continue
        v = schedule[col].to_numpy()
        changes = np.flatnonzero(v[1:] != v[:-1]) + 1
        if len(changes) == 0:
            continue
        c = int(changes[-1])
        if n - c < min(d.min_hours_between_switches, within):
            notes.append(f"{d.id} changes from {v[c - 1]:g} to {v[c]:g} machine(s) on steam at "
                         f"{hour_label(schedule.index[c])}, {n - c} h before the plan's end, though it keeps a "
                         f"driver at least {d.min_hours_between_switches:g} h: the plan saw only part of that choice")
    return notes


def start_stops(cfg: SiteConfig, schedule: pd.DataFrame) -> list[str]:
    """Boilers and turbo-generators on before the first hour (the site file's
    ``initial_on``) that the plan has off from its first hour: a stop with no cost of its
    own in the model, easily missed in the running hours."""
    notes = []
    if len(schedule) == 0:
        return notes
    for u in (*cfg.boilers, *cfg.turbogenerators):
        col = f"{u.id}.on"
        if col in schedule and u.initial_on and u.available and schedule[col].iloc[0] < 0.5:
            off = int((schedule[col].to_numpy() < 0.5).sum())
            notes.append(f"{u.id} was on before the first hour (initial_on in the site file) and is stopped at "
                         f"{hour_label(schedule.index[0])}; off {off} of {len(schedule)} h")
    return notes
