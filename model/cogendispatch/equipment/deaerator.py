"""Deaerator: heats returned condensate and make-up water to saturation with header steam."""

from __future__ import annotations

import pyomo.environ as pyo

from ..plant.schema import Deaerator
from ..steam import state_pT
from .common import ModelContext


def heating_steam_ratio(h_fw: float, h_water_in: float, h_steam: float) -> float:
    """Heating steam per tonne of feedwater leaving the deaerator [t/t].

    Mass and energy balance of a direct-contact heater: S + W = F and
    S h_s + W h_w = F h_fw, so S / F = (h_fw - h_w) / (h_s - h_w).

    Parameters
    ----------
    h_fw : saturated liquid at deaerator pressure [kJ/kg]
    h_water_in : mixed enthalpy of the water entering (condensate and make-up) [kJ/kg]
    h_steam : enthalpy of the heating steam [kJ/kg]
    """
    return (h_fw - h_water_in) / (h_steam - h_water_in)


def add_deaerator(m: pyo.ConcreteModel, da: Deaerator, ctx: ModelContext) -> pyo.Block:
    """Add the deaerator block: ``steam``, ``makeup`` and ``overflow`` [t/h].

    Feedwater drawn (boiler feedwater and spray water, from the registry) is matched by
    heating steam, hotwell condensate, returned process condensate and make-up in mass and
    in energy. The overflow is at most the hour's returned process condensate with the
    steam that heats it to saturation.
    """
    blk = pyo.Block()
    m.add_component("deaerator", blk)
    T = m.T
    h_fw = ctx.states.h_feedwater
    h_s = ctx.states.headers[da.heating_steam].h
    h_mu = state_pT(da.pressure, da.makeup_temperature).h  # compressed liquid, below T_sat
    h_ret = state_pT(da.pressure, da.condensate_temperature).h
    ret = ctx.data.condensate_return  # [t/h] by hour
    blk.steam = pyo.Var(T, within=pyo.NonNegativeReals)
    blk.makeup = pyo.Var(T, within=pyo.NonNegativeReals)
    # the overflow drains returned process condensate the boilers cannot take, heated to
    # saturation with the steam that heats it (S = W (h_fw - h_ret) / (h_s - h_fw)); more
    # would let the deaerator quench any surplus steam in make-up water and pour it away,
    # a steam dump no deaerator is. A bound, not a row: with the hour's return as a
    # parameter (a re-used study model) the bound follows it.
    heated = (h_s - h_ret) / (h_s - h_fw)  # [t of overflow per t of condensate returned]
    blk.overflow = pyo.Var(T, bounds=lambda b, t: (0.0, heated * ret(t)))
    fw = lambda t: sum(term.expr(t) for term in ctx.feedwater_terms)  # noqa: E731
    cond = ctx.condensate_terms
    hc = [ctx.condensate_enthalpy[c.unit] for c in cond]
    blk.mass = pyo.Constraint(T, rule=lambda b, t: fw(t) + b.overflow[t]
                              == b.steam[t] + sum(c.expr(t) for c in cond) + ret(t) + b.makeup[t])
    blk.energy = pyo.Constraint(T, rule=lambda b, t: (fw(t) + b.overflow[t]) * h_fw
                                == b.steam[t] * h_s + sum(h * c.expr(t) for h, c in zip(hc, cond))
                                + ret(t) * h_ret + b.makeup[t] * h_mu)
    ctx.take(da.heating_steam, "deaerator", "deaerator heating steam", lambda t: blk.steam[t])
    if da.makeup_cost > 0:
        ctx.cost_terms["water"].append(lambda t: da.makeup_cost * (blk.makeup[t] + blk.overflow[t]))
    blk.feedwater = fw
    blk.h = {"feedwater": h_fw, "steam": h_s, "makeup": h_mu, "return": h_ret}
    blk.unit = da
    return blk
