"""What every equipment block shares: header states, feedwater enthalpy and the term registry.

An equipment block never writes a header or power balance itself. It registers the flows it
puts into (+) or takes out of (-) each header, the power it makes or uses, the feedwater it
draws and the costs it causes; :mod:`cogendispatch.site` sums the registered terms into the
balances and the objective. That keeps one module per equipment kind and lets the results
code list every term of every balance by name.
"""

from __future__ import annotations

import math
from collections import defaultdict
from dataclasses import dataclass, field
from typing import Callable

import pyomo.environ as pyo

from ..plant.schema import SiteConfig
from ..plant.series import Series
from ..steam import SteamState, header_state, state_px
from .data import WindowData

Expr = Callable[[int], object]  # hour index -> Pyomo expression or number
RuleResult = object  # what a constraint rule returns: a Pyomo relation, or Constraint.Skip


@dataclass(frozen=True)
class SiteStates:
    """Fixed thermodynamic states of the site: the linearisation point of the model.

    Attributes
    ----------
    headers : header id -> state at header pressure and temperature
    condensers : condenser id -> saturated vapour state at condenser pressure (for pressure)
    h_feedwater : deaerator outlet, saturated liquid at deaerator pressure [kJ/kg]
    """

    headers: dict[str, SteamState]
    condensers: dict[str, SteamState]
    h_feedwater: float

    @classmethod
    def of(cls, cfg: SiteConfig) -> "SiteStates":
        """IAPWS-IF97 states of every header (at its pressure and temperature, or saturated)
        and of every condenser's saturated exhaust."""
        return cls(
            headers={h.id: header_state(h.pressure, h.temperature) for h in cfg.headers},
            condensers={c.id: state_px(c.pressure, 1.0) for c in cfg.condensers},
            h_feedwater=state_px(cfg.deaerator.pressure, 0.0).h,
        )

    def arrival_ratio(self, h_in: float, header: str) -> float:
        """Header steam made per unit of steam arriving at enthalpy ``h_in`` [t/t].

        The header is held at its own enthalpy h_H. Steam arriving hotter is desuperheated
        with feedwater (ratio > 1, the excess is spray water); steam arriving colder gives
        up the difference by condensing a share to feedwater-enthalpy drains (ratio < 1):
        r = (h_in - h_fw) / (h_H - h_fw), an energy balance on the header. At a superheated
        header the "drain" can only be spray saved on hotter arrivals in the same hour; the
        site model keeps each such header's net spray from going negative.
        """
        h_hdr = self.headers[header].h
        return (h_in - self.h_feedwater) / (h_hdr - self.h_feedwater)


@dataclass
class Term:
    """One named flow in a balance: ``expr(t)`` is its signed value in hour ``t``."""

    unit: str
    label: str
    expr: Expr


@dataclass
class ModelContext:
    """Everything a block builder needs, and the registry it fills."""

    cfg: SiteConfig
    series: Series
    states: SiteStates
    hours: list[int]
    data: WindowData
    header_terms: dict[str, list[Term]] = field(default_factory=lambda: defaultdict(list))
    power_terms: list[Term] = field(default_factory=list)
    feedwater_terms: list[Term] = field(default_factory=list)  # drawn from deaerator [t/h]
    condensate_terms: list[Term] = field(default_factory=list)  # returned to deaerator [t/h] at h
    cost_terms: dict[str, list[Expr]] = field(default_factory=lambda: defaultdict(list))
    fuel_use: dict[str, list[Expr]] = field(default_factory=lambda: defaultdict(list))  # [GJ/h]
    boilers: list[pyo.Block] = field(default_factory=list)
    # running boiler sets (indices into ``boilers``) and the steam each carries with its
    # reserve [t/h]; filled by :func:`cogendispatch.reserve.add_reserve`
    boiler_sets: list[tuple[tuple[int, ...], float]] = field(default_factory=list)
    condenser_users: dict[str, list[pyo.Block]] = field(default_factory=lambda: defaultdict(list))
    condensate_enthalpy: dict[str, float] = field(default_factory=dict)
    # per header, the water terms of arrivals colder than the header [t/h], negative
    cold_water: dict[str, list[Expr]] = field(default_factory=lambda: defaultdict(list))
    # per header, every desuperheater water and drain term of its arrivals [t/h]
    header_water: dict[str, list[Expr]] = field(default_factory=lambda: defaultdict(list))

    def add_arrival(self, header: str, unit: str, label: str, flow: Expr, h_in: float) -> float:
        """Register steam arriving at ``header`` with enthalpy ``h_in`` [kJ/kg].

        Adds the steam itself and, where the enthalpy differs from the header's, the
        desuperheating water drawn from feedwater (or the drain returned to it).
        Returns the arrival ratio (header steam per tonne arriving).
        """
        r = self.states.arrival_ratio(h_in, header)
        self.header_terms[header].append(Term(unit, label, flow))
        if abs(r - 1.0) > 1e-9:
            water = lambda t, r=r: (r - 1.0) * flow(t)  # noqa: E731
            tag = "desuperheater water" if r > 1.0 else "drain"
            self.header_terms[header].append(Term(unit, f"{label} {tag}", water))
            self.feedwater_terms.append(Term(unit, f"{label} {tag}", water))
            self.header_water[header].append(water)
            if r < 1.0:
                self.cold_water[header].append(water)
        return r

    def take(self, header: str, unit: str, label: str, flow: Expr) -> None:
        """Register steam taken out of ``header`` (``flow`` is positive, stored negated)."""
        self.header_terms[header].append(Term(unit, label, lambda t: -flow(t)))


def whole_hours(duration: float) -> int:
    """A minimum time [h] in whole hours of an hourly plan [h]: rounded up, at least 1.

    6.5 h of minimum up time holds a unit on for 7 hourly steps; rounding half to even
    would give 6 and break the limit.
    """
    return max(1, math.ceil(duration - 1e-9))


def commitment(blk: pyo.Block, min_up: float, min_down: float, initial_on: bool, initial_hours: float) -> None:
    """On/off status with start-up and shut-down indicators and minimum up/down times.

    Adds ``on`` (binary), ``start`` and ``stop`` (continuous in [0, 1], integral because
    ``on`` is) with on_t - on_{t-1} = start_t - stop_t and the turn-on/turn-off
    inequalities sum(start over last UT hours) <= on_t, sum(stop over last DT hours) <= 1 - on_t.
    The status before the first hour is the mutable parameter ``u0``; hours already spent in
    it count towards the minimum times through :func:`wanted_status`.

    Parameters
    ----------
    min_up, min_down : minimum up and down times [h]
    initial_on : status before the first hour
    initial_hours : hours already spent in that status [h]

    References
    ----------
    Rajan & Takriti, Minimum up/down polytopes of the unit commitment problem with start-up
    costs, IBM Research Report RC23628 (2005).
    """
    T = blk.model().T
    blk.on = pyo.Var(T, within=pyo.Binary)
    blk.start = pyo.Var(T, bounds=(0, 1))
    blk.stop = pyo.Var(T, bounds=(0, 1))
    blk.u0 = pyo.Param(mutable=True, initialize=1.0 if initial_on else 0.0)
    UT, DT = whole_hours(min_up), whole_hours(min_down)

    def _trans(b: pyo.Block, t: int) -> RuleResult:
        prev = b.on[t - 1] if t > 0 else b.u0
        return b.on[t] - prev == b.start[t] - b.stop[t]

    blk.transition = pyo.Constraint(T, rule=_trans)
    # built at 1 h too: start_t <= on_t and stop_t <= 1 - on_t keep a running hour from
    # counting a start and a stop at once when neither costs anything
    blk.min_up = pyo.Constraint(
        T, rule=lambda b, t: sum(b.start[k] for k in range(max(0, t - UT + 1), t + 1)) <= b.on[t])
    blk.min_down = pyo.Constraint(
        T, rule=lambda b, t: sum(b.stop[k] for k in range(max(0, t - DT + 1), t + 1)) <= 1 - b.on[t])
    blk.commit_info = CommitInfo(UT, DT, bool(initial_on), float(initial_hours))


def wanted_status(info: "CommitInfo", hours: int, available: bool = True, must_run: bool = False,
                  outages: list[tuple[int, int]] | None = None) -> dict[int, int]:
    """Hours whose on/off status is decided before the solve, and that status.

    A unit out of service is off; a must-run unit is on; a unit that has not yet served its
    minimum time in its initial status keeps it; an outage (first, last hour, inclusive)
    turns it off whatever came before.
    """
    out: dict[int, int] = {}
    if not available:
        out = {t: 0 for t in range(hours)}
    else:
        u0 = 1 if info.initial_on else 0
        hold = (info.min_up if info.initial_on else info.min_down) - info.initial_hours
        out = {t: u0 for t in range(hours) if t < hold}
        if must_run:
            out.update({t: 1 for t in range(hours) if t not in out})
    for a, b in outages or []:
        out.update({t: 0 for t in range(max(0, a), min(b, hours - 1) + 1)})
    return out


def apply_fixings(var: pyo.Var, wanted: dict, keys: list) -> list:
    """Hold ``var[k]`` at ``wanted[k]`` and free every other key; returns the entries changed.

    A status is held by equal bounds, not by fixing the variable: a fixed variable would be
    folded into the constraints as a constant, and a model re-used for the next window
    (:mod:`cogendispatch.reuse`) must be able to free it again without reloading rows.
    """
    changed = []
    for k in keys:
        v = var[k]
        if k in wanted:
            want = (float(wanted[k]), float(wanted[k]))
            seen = want
        else:  # free: no bounds of its own, its domain's (0 and 1 for a binary) apply
            want = (None, None)
            seen = tuple(v.domain.bounds())
        if (pyo.value(v.lb), pyo.value(v.ub)) != seen:
            v.setlb(want[0])
            v.setub(want[1])
            changed.append(v)
    return changed


def held_value(v: pyo.Var) -> int | None:
    """The status a binary is held at before the solve (fixed, or equal bounds), else None."""
    if v.fixed:
        return int(round(v.value))
    lo, hi = pyo.value(v.lower), pyo.value(v.upper)
    if lo is not None and hi is not None and lo == hi:
        return int(round(lo))
    return None


@dataclass(frozen=True)
class CommitInfo:
    """Minimum up/down times [h] and initial status of a committed unit (for heuristics)."""

    min_up: int
    min_down: int
    initial_on: bool
    initial_hours: float


def repair_commitment(wanted: list[int], fixed: dict[int, int], info: CommitInfo) -> list[int]:
    """Nearest on/off sequence to ``wanted`` that honours minimum up and down times.

    Greedy forward pass: a change of status is accepted only once the unit has spent its
    minimum time in the current status; hours in ``fixed`` keep their value.
    """
    u = 1 if info.initial_on else 0
    tau = info.initial_hours
    out = []
    for t, d in enumerate(wanted):
        if t in fixed:
            nxt = fixed[t]
        elif d != u and tau < (info.min_up if u == 1 else info.min_down):
            nxt = u
        else:
            nxt = d
        tau = tau + 1 if nxt == u else 1
        u = nxt
        out.append(u)
    return out
