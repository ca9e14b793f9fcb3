"""Letdown valve with desuperheater: isenthalpic throttle, then spray water to the header state."""

from __future__ import annotations

import pyomo.environ as pyo

from ..plant.schema import Letdown
from .common import ModelContext, SiteStates


def outlet_ratio(ld: Letdown, states: SiteStates) -> float:
    """Low-pressure header steam made per tonne let down [t/t].

    The valve is isenthalpic (h_out = h_in); the desuperheater adds feedwater until the
    header enthalpy is reached: m_out / m_in = (h_in - h_fw) / (h_hdr - h_fw).

    References
    ----------
    Cengel & Boles, Thermodynamics: An Engineering Approach, sec. 5-4 (throttling valves,
    mixing chambers).
    """
    return states.arrival_ratio(states.headers[ld.source].h, ld.to)


def add_letdown(m: pyo.ConcreteModel, ld: Letdown, ctx: ModelContext) -> pyo.Block:
    """Add a letdown block: ``flow`` [t/h] taken from ``from`` (before desuperheating)."""
    blk = pyo.Block()
    m.add_component(f"letdown_{ld.id}", blk)
    blk.flow = pyo.Var(m.T, bounds=(ld.min_flow, ld.max_flow))
    ctx.take(ld.source, ld.id, f"{ld.id} inlet", lambda t: blk.flow[t])
    ctx.add_arrival(ld.to, ld.id, f"{ld.id} outlet", lambda t: blk.flow[t], ctx.states.headers[ld.source].h)
    blk.ratio = outlet_ratio(ld, ctx.states)
    blk.unit = ld
    return blk
