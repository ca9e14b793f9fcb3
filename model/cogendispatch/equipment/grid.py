"""Grid connection: import and export with hourly prices and limits."""

from __future__ import annotations

import pyomo.environ as pyo

from ..plant.schema import Grid
from .common import ModelContext, Term


def add_grid(m: pyo.ConcreteModel, g: Grid, ctx: ModelContext, every_hour: bool = False) -> pyo.Block:
    """Add the grid block: ``imp`` and ``exp`` [MW].

    Where an hour pays more for export than it charges for import (or in every hour, with
    ``every_hour``, for a model whose prices change later), a binary keeps the site from
    importing and exporting at once; elsewhere the prices already prevent it.
    """
    blk = pyo.Block()
    m.add_component("grid", blk)
    T = m.T
    pi, pe = ctx.data.a_import, ctx.data.a_export
    blk.imp = pyo.Var(T, bounds=(g.min_import, g.max_import))
    blk.exp = pyo.Var(T, bounds=(0, g.max_export))
    arb = [t for t in ctx.hours if (every_hour or pe[t] > pi[t]) and g.max_export > 0]
    if arb:
        blk.importing = pyo.Var(arb, within=pyo.Binary)
        blk.imp_side = pyo.Constraint(arb, rule=lambda b, t: b.imp[t] <= g.max_import * b.importing[t])
        blk.exp_side = pyo.Constraint(arb, rule=lambda b, t: b.exp[t] <= g.max_export * (1 - b.importing[t]))
    ctx.power_terms.append(Term("grid", "import", lambda t: blk.imp[t]))
    ctx.power_terms.append(Term("grid", "export", lambda t: -blk.exp[t]))
    data = ctx.data
    ctx.cost_terms["import"].append(lambda t: data.price_import(t) * blk.imp[t])
    ctx.cost_terms["export"].append(lambda t: -data.price_export(t) * blk.exp[t])
    blk.arbitrage_hours = tuple(arb)
    blk.unit = g
    return blk
