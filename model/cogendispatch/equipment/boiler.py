"""Fired boiler: steam to a header, fuel from a part-load efficiency curve, unit commitment."""

from __future__ import annotations

from dataclasses import dataclass

import pyomo.environ as pyo

from ..plant.schema import Boiler
from ..steam import state_px
from .common import ModelContext, RuleResult, SiteStates, Term, commitment


def heat_to_steam(h_steam: float, h_feedwater: float, blowdown: float, h_blowdown: float) -> float:
    """Heat absorbed per unit of steam delivered, blowdown included [kJ/kg].

    q = (h_s - h_fw) + b / (1 - b) * (h_bd - h_fw), with b the blowdown as a share of the
    feedwater, leaving as saturated liquid at drum pressure.

    Parameters
    ----------
    h_steam : enthalpy of the steam delivered [kJ/kg]
    h_feedwater : enthalpy of the feedwater [kJ/kg]
    blowdown : blowdown share of feedwater [-]
    h_blowdown : enthalpy of the blowdown water, saturated liquid at drum pressure [kJ/kg]

    References
    ----------
    US DOE, Steam Tip Sheet #15, Benchmark the Fuel Cost of Steam Generation (energy to raise
    steam from feedwater); blowdown term from the boiler mass and energy balance.
    """
    return (h_steam - h_feedwater) + blowdown / (1.0 - blowdown) * (h_blowdown - h_feedwater)


# Largest share by which the convex hull of an efficiency curve may fall below a measured
# point and still replace the curve [-]. Common practice: efficiency points from acceptance
# tests are uncertain to several tenths of a per cent, so a "non-convexity" smaller than this
# is measurement noise, and modelling it would cost a binary per segment and hour.
HULL_TOLERANCE = 1e-3


@dataclass(frozen=True)
class BoilerCoefficients:
    """Linear data of one boiler.

    steam : load points the model uses [t/h]; fuel : heat input at those points [GJ/h];
    heat_per_t : heat absorbed per tonne of steam [GJ/t]; convex : whether fuel(steam) is
    convex so that the epigraph form is exact; feedwater_per_t : feedwater per tonne of
    steam [t/t]; hull_shortfall : largest share by which the model's curve lies below a given
    point (0 when the given curve is used as it is) [-].
    """

    steam: tuple[float, ...]
    fuel: tuple[float, ...]
    heat_per_t: float
    convex: bool
    feedwater_per_t: float
    hull_shortfall: float = 0.0

    @property
    def slopes(self) -> list[float]:
        """Incremental heat input per tonne between load points [GJ/t]."""
        s, f = self.steam, self.fuel
        return [(f[k + 1] - f[k]) / (s[k + 1] - s[k]) for k in range(len(s) - 1)]


def lower_hull(steam: tuple[float, ...], fuel: tuple[float, ...]) -> list[int]:
    """Indices of the points on the lower convex hull of (steam, fuel), in load order.

    Andrew's monotone chain, lower half (points sorted by steam already).
    """
    keep: list[int] = []
    for k in range(len(steam)):
        while len(keep) >= 2:
            a, b = keep[-2], keep[-1]
            cross = (steam[b] - steam[a]) * (fuel[k] - fuel[a]) - (fuel[b] - fuel[a]) * (steam[k] - steam[a])
            if cross <= 0:  # b lies on or above the chord a-k
                keep.pop()
            else:
                break
        keep.append(k)
    return keep


def coefficients(b: Boiler, states: SiteStates) -> BoilerCoefficients:
    """Fuel heat input at each load point of the efficiency curve.

    fuel_k [GJ/h] = steam_k [t/h] * q [kJ/kg] / 1000 / eta_k.

    A curve whose convex hull lies at most ``HULL_TOLERANCE`` below every given point is
    replaced by that hull (convex, no binaries); a curve further from convex keeps its
    points and is modelled with ordering binaries.
    """
    hdr = states.headers[b.header]
    h_bd = state_px(hdr.p, 0.0).h
    q = heat_to_steam(hdr.h, states.h_feedwater, b.blowdown, h_bd) / 1000.0  # [GJ/t]
    steam = tuple(L * b.max_steam for L in b.efficiency_curve.load)
    fuel = tuple(s * q / eta for s, eta in zip(steam, b.efficiency_curve.efficiency))
    fw = 1.0 / (1.0 - b.blowdown)
    sl = [(fuel[k + 1] - fuel[k]) / (steam[k + 1] - steam[k]) for k in range(len(steam) - 1)]
    if all(sl[k + 1] >= sl[k] - 1e-9 for k in range(len(sl) - 1)):
        return BoilerCoefficients(steam, fuel, q, True, fw)
    keep = lower_hull(steam, fuel)
    hs, hf = tuple(steam[k] for k in keep), tuple(fuel[k] for k in keep)
    hull = BoilerCoefficients(hs, hf, q, True, fw)
    short = max((f - fuel_at(hull, s)) / f for s, f in zip(steam, fuel))
    if short <= HULL_TOLERANCE:
        return BoilerCoefficients(hs, hf, q, True, fw, hull_shortfall=max(0.0, short))
    return BoilerCoefficients(steam, fuel, q, False, fw)


def fuel_at(co: BoilerCoefficients, steam: float) -> float:
    """Heat input at a steam load on the piecewise-linear curve [GJ/h] (0 when off)."""
    if steam <= 1e-9:
        return 0.0
    s, f = co.steam, co.fuel
    if len(s) == 1:
        return steam * f[0] / s[0]
    if steam <= s[0]:
        return f[0] + (steam - s[0]) * (f[1] - f[0]) / (s[1] - s[0])
    for k in range(len(s) - 1):
        if steam <= s[k + 1] + 1e-9:
            return f[k] + (steam - s[k]) * (f[k + 1] - f[k]) / (s[k + 1] - s[k])
    return f[-1]


def add_boiler(m: pyo.ConcreteModel, b: Boiler, ctx: ModelContext) -> pyo.Block:
    """Add a boiler block: ``on``, ``steam`` [t/h], ``fuel`` [GJ/h] and fuel split ``burn``."""
    co = coefficients(b, ctx.states)
    blk = pyo.Block()
    m.add_component(f"boiler_{b.id}", blk)
    T = m.T
    commitment(blk, b.min_up, b.min_down, b.initial_on, b.initial_hours)
    blk.steam = pyo.Var(T, bounds=(0, b.max_steam))
    blk.fuel = pyo.Var(T, within=pyo.NonNegativeReals)
    blk.burn = pyo.Var(b.fuels, T, within=pyo.NonNegativeReals)
    blk.max_load = pyo.Constraint(T, rule=lambda k, t: k.steam[t] <= b.max_steam * k.on[t])
    blk.min_load = pyo.Constraint(T, rule=lambda k, t: k.steam[t] >= b.min_steam * k.on[t])
    blk.fuel_split = pyo.Constraint(T, rule=lambda k, t: sum(k.burn[f, t] for f in b.fuels) == k.fuel[t])

    s, f = co.steam, co.fuel
    if len(s) == 1:
        blk.fuel_curve = pyo.Constraint(T, rule=lambda k, t: k.fuel[t] == f[0] / s[0] * k.steam[t])
    elif co.convex:
        # convex curve: fuel >= each segment's line; the minimisation lands on the curve
        segs = range(len(s) - 1)
        sl = co.slopes
        blk.fuel_curve = pyo.Constraint(
            segs, T, rule=lambda k, j, t: k.fuel[t] >= sl[j] * k.steam[t] + (f[j] - sl[j] * s[j]) * k.on[t])
    else:
        # non-convex curve: incremental (delta) formulation with ordering binaries
        segs = list(range(len(s) - 1))
        lengths = [s[j + 1] - s[j] for j in segs]
        sl = co.slopes
        blk.delta = pyo.Var(segs, T, within=pyo.NonNegativeReals)
        blk.fill = pyo.Var(segs[:-1], T, within=pyo.Binary)
        blk.steam_def = pyo.Constraint(
            T, rule=lambda k, t: k.steam[t] == s[0] * k.on[t] + sum(k.delta[j, t] for j in segs))
        blk.fuel_curve = pyo.Constraint(
            T, rule=lambda k, t: k.fuel[t] == f[0] * k.on[t] + sum(sl[j] * k.delta[j, t] for j in segs))
        blk.delta_first = pyo.Constraint(T, rule=lambda k, t: k.delta[0, t] <= lengths[0] * k.on[t])
        blk.delta_full = pyo.Constraint(
            segs[:-1], T, rule=lambda k, j, t: k.delta[j, t] >= lengths[j] * k.fill[j, t])
        blk.delta_next = pyo.Constraint(
            segs[:-1], T, rule=lambda k, j, t: k.delta[j + 1, t] <= lengths[j + 1] * k.fill[j, t])

    # ramp limits [t/h per hour]; a start may jump to the minimum stable load. The steam
    # before the first hour is the parameter ``s0``; with none given, hour 0 has no ramp limit.
    s0 = b.initial_steam
    blk.s0 = pyo.Param(mutable=True, initialize=0.0 if s0 is None else s0)
    if b.ramp_up is not None:
        su = max(b.ramp_up, b.min_steam)

        def _up(k: pyo.Block, t: int) -> RuleResult:
            if t == 0:
                if s0 is None:
                    return pyo.Constraint.Skip
                return k.steam[t] - k.s0 <= b.ramp_up * k.u0 + su * k.start[t]
            return k.steam[t] - k.steam[t - 1] <= b.ramp_up * k.on[t - 1] + su * k.start[t]

        blk.ramp_up = pyo.Constraint(T, rule=_up)
    if b.ramp_down is not None:
        sd = max(b.ramp_down, b.min_steam)
        blk.stop_ramp = sd  # [t/h] the most a planned stop may drop from
        # a stop in the first hour forced by an outage or by the unit being out of service
        # comes from whatever load it had (a trip, not a planned ramp down): fix_statuses
        # raises this to s0 then, so that the data do not make the hour infeasible
        blk.stop_room0 = pyo.Param(mutable=True, initialize=sd)

        def _down(k: pyo.Block, t: int) -> RuleResult:
            if t == 0:
                if s0 is None:
                    return pyo.Constraint.Skip
                return k.s0 - k.steam[t] <= b.ramp_down * k.on[t] + k.stop_room0 * k.stop[t]
            return k.steam[t - 1] - k.steam[t] <= b.ramp_down * k.on[t] + sd * k.stop[t]

        blk.ramp_down = pyo.Constraint(T, rule=_down)

    # registry: steam into its header, feedwater from the deaerator, fuel and start-up costs
    ctx.header_terms[b.header].append(Term(b.id, f"{b.id} steam", lambda t: blk.steam[t]))
    fw = co.feedwater_per_t
    ctx.feedwater_terms.append(Term(b.id, f"{b.id} feedwater", lambda t: fw * blk.steam[t]))
    data = ctx.data
    factors = {fu.id: fu.co2_factor for fu in ctx.cfg.fuels}
    for fu in b.fuels:
        ctx.cost_terms["fuel"].append(lambda t, fu=fu: data.fuel_price(fu, t) * blk.burn[fu, t])
        if factors[fu] > 0:
            ctx.cost_terms["co2"].append(
                lambda t, fu=fu: data.co2_price(t) * factors[fu] * blk.burn[fu, t])
        ctx.fuel_use[fu].append(lambda t, fu=fu: blk.burn[fu, t])
    if b.startup_cost > 0:
        ctx.cost_terms["startup"].append(lambda t: b.startup_cost * blk.start[t])
    blk.coefficients = co
    blk.unit = b
    ctx.boilers.append(blk)
    return blk
