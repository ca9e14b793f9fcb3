"""Machine drives: a pump, compressor or fan driven by a steam turbine, a motor, or either.

Identical machines in service together form one drive entry with ``count``; position k is
on steam only if position k-1 is (``on_steam[k] <= on_steam[k-1]``), so the solver never
explores the symmetric copies of "which of the identical pumps is on steam".
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

import pyomo.environ as pyo

from ..plant.schema import Drive
from ..steam import isentropic_drop
from .common import ModelContext, RuleResult, SiteStates, Term, apply_fixings, whole_hours


@dataclass(frozen=True)
class DriveCoefficients:
    """steam_rate : steam per shaft energy of the driver turbine [kg/kWh = t/MWh];
    exhaust_h : enthalpy of its exhaust [kJ/kg]; efficiency : isentropic efficiency [-];
    motor_efficiency : [-]; dual : both drivers present."""

    steam_rate: float | None
    exhaust_h: float | None
    efficiency: float | None
    motor_efficiency: float | None
    dual: bool


def turbine_steam_rate(drop_s: float, efficiency: float) -> float:
    """Actual steam rate of a turbine driver [kg/kWh].

    SR = 3600 / (eta_s * (h_in - h_out,s))

    Parameters
    ----------
    drop_s : isentropic enthalpy drop [kJ/kg]
    efficiency : isentropic efficiency, shaft losses included [-]

    References
    ----------
    MIL-HDBK-1003/7 (1990), Table 8 (theoretical steam rate, eta = 1).
    """
    return 3600.0 / (efficiency * drop_s)


def coefficients(d: Drive, states: SiteStates) -> DriveCoefficients:
    """Linear coefficients of a drive at its header states.

    With an isentropic efficiency given, the steam rate follows from the isentropic drop
    (``turbine_steam_rate``); with a rated steam rate [kg/kWh] given, the efficiency follows
    from it. The exhaust enthalpy [kJ/kg] is the inlet enthalpy less the shaft work per kg,
    3600 / SR (first law, no heat loss from the casing).
    """
    st = d.steam_turbine
    sr = h_ex = eff = None
    if st is not None:
        inlet = states.headers[st.inlet]
        drop = isentropic_drop(inlet, states.headers[st.exhaust].p)
        if st.efficiency is not None:
            eff = st.efficiency
            sr = turbine_steam_rate(drop, eff)
        else:
            sr = st.steam_rate
            eff = 3600.0 / (sr * drop)
        h_ex = inlet.h - 3600.0 / sr  # all shaft work leaves the steam
    return DriveCoefficients(sr, h_ex, eff, d.motor.efficiency if d.motor else None,
                             st is not None and d.motor is not None)


def wanted_drivers(d: Drive, hours: list[int]) -> dict[tuple[int, int], int]:
    """Driver of each position fixed before the solve: a switch made less than the minimum
    time before the horizon holds the driver it chose (1 steam, 0 motor)."""
    init = d.initial_on_steam
    L = whole_hours(d.min_hours_between_switches)
    if init is None or L <= 1:
        return {}
    return {(k, t): (1 if k < init else 0) for k in range(d.count) for t in hours
            if t < L - d.hours_since_switch(k)}


def position_history(d: Drive, count: np.ndarray) -> list[tuple[int, float]]:
    """Each machine position's driver at the end of ``count`` (machines on steam hour by
    hour) and the hours [h] it has kept it: position k is on steam while more than k
    machines are (the order rows). A position that kept its driver all through adds the
    site file's time before it (:meth:`Drive.hours_since_switch`) when that driver is the
    one the site file gives; with no driver given before, the time is unknown (inf)."""
    init = d.initial_on_steam
    out = []
    for k in range(d.count):
        v = (np.asarray(count).round() > k).astype(int)
        last = int(v[-1])
        changed = np.flatnonzero(v != last)
        n = float(len(v) - (changed[-1] + 1 if len(changed) else 0))
        if not len(changed):  # kept since the schedule began: add the time before it
            if init is None:
                n = math.inf
            elif int(k < init) == last:
                n += d.hours_since_switch(k)
        out.append((last, n))
    return out


def add_drive(m: pyo.ConcreteModel, d: Drive, ctx: ModelContext) -> pyo.Block:
    """Add a drive block: ``on_steam[k, t]`` (binary for dual drivers) per machine position."""
    co = coefficients(d, ctx.states)
    blk = pyo.Block()
    m.add_component(f"drive_{d.id}", blk)
    T, hours = m.T, ctx.hours
    K = list(range(d.count))
    data = ctx.data
    if co.dual:
        blk.on_steam = pyo.Var(K, T, within=pyo.Binary)
        if d.count > 1:
            blk.order = pyo.Constraint(K[1:], T, rule=lambda b, k, t: b.on_steam[k, t] <= b.on_steam[k - 1, t])
        L = whole_hours(d.min_hours_between_switches)
        if L > 1:
            # A minimum time L between driver changes is a minimum up and down time of L on
            # ``on_steam``; the turn-on/turn-off inequalities are the tight (convex hull) form.
            blk.to_steam = pyo.Var(K, T, bounds=(0, 1))
            blk.to_motor = pyo.Var(K, T, bounds=(0, 1))
            init = d.initial_on_steam
            # driver of each position before the first hour (mutable for the next window)
            blk.prev_on_steam = pyo.Param(K, mutable=True, initialize=lambda b, k: 1.0 if (init or 0) > k else 0.0)

            def _change(b: pyo.Block, k: int, t: int) -> RuleResult:
                if t == 0 and init is None:  # status before the horizon unknown: no change counted
                    b.to_steam[k, t].fix(0)
                    b.to_motor[k, t].fix(0)
                    return pyo.Constraint.Skip
                p = b.on_steam[k, t - 1] if t > 0 else b.prev_on_steam[k]
                return b.on_steam[k, t] - p == b.to_steam[k, t] - b.to_motor[k, t]

            blk.switch_change = pyo.Constraint(K, T, rule=_change)
            blk.switch_stay_steam = pyo.Constraint(K, T, rule=lambda b, k, t: sum(
                b.to_steam[k, j] for j in range(max(0, t - L + 1), t + 1)) <= b.on_steam[k, t])
            blk.switch_stay_motor = pyo.Constraint(K, T, rule=lambda b, k, t: sum(
                b.to_motor[k, j] for j in range(max(0, t - L + 1), t + 1)) <= 1 - b.on_steam[k, t])
            apply_fixings(blk.on_steam, wanted_drivers(d, hours), [(k, t) for k in K for t in hours])
        steam_n = lambda t: sum(blk.on_steam[k, t] for k in K)  # noqa: E731
    else:
        fixed = d.count if d.steam_turbine is not None else 0
        steam_n = lambda t: fixed  # noqa: E731
    blk.machines_on_steam = steam_n

    if co.steam_rate is not None:
        sr, st = co.steam_rate, d.steam_turbine
        flow = lambda t: sr * data.duty(d.id, t) * steam_n(t)  # noqa: E731  [t/h]
        ctx.take(st.inlet, d.id, f"{d.id} turbine inlet", flow)
        ctx.add_arrival(st.exhaust, d.id, f"{d.id} turbine exhaust", flow, co.exhaust_h)
        blk.steam_flow = flow
    if co.motor_efficiency is not None:
        eta = co.motor_efficiency
        ctx.power_terms.append(Term(d.id, f"{d.id} motors",
                                    lambda t: -data.duty(d.id, t) / eta * (d.count - steam_n(t))))
    blk.coefficients = co
    blk.unit = d
    return blk
