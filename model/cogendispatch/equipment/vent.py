"""Vent: surplus steam to atmosphere, at a cost (the make-up water it forces is counted too)."""

from __future__ import annotations

import pyomo.environ as pyo

from ..plant.schema import Vent
from .common import ModelContext


def add_vent(m: pyo.ConcreteModel, v: Vent, ctx: ModelContext) -> pyo.Block:
    """Add a vent block: ``flow`` [t/h] out of its header."""
    blk = pyo.Block()
    m.add_component(f"vent_{v.id}", blk)
    blk.flow = pyo.Var(m.T, bounds=(0, v.max_flow))
    ctx.take(v.header, v.id, f"{v.id} vent", lambda t: blk.flow[t])
    if v.cost > 0:
        ctx.cost_terms["vent"].append(lambda t: v.cost * blk.flow[t])
    blk.unit = v
    return blk
