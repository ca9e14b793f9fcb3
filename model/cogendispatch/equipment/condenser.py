"""Surface condenser with vacuum ejectors, serving the condensing sections exhausting to it."""

from __future__ import annotations

import pyomo.environ as pyo

from ..plant.schema import Condenser
from ..steam import state_px
from .common import ModelContext, Term


def cooling_duty(flow: float, h_exhaust: float, h_condensate: float) -> float:
    """Heat the condenser must reject [MW].

    Q = m * (h_exhaust - h_f) with m in t/h: Q [MW] = m * dh / 3600.

    Parameters
    ----------
    flow : exhaust steam condensed [t/h]
    h_exhaust : enthalpy of the turbine exhaust [kJ/kg]
    h_condensate : saturated-liquid enthalpy at condenser pressure [kJ/kg]
    """
    return flow * (h_exhaust - h_condensate) / 3600.0


def add_condenser(m: pyo.ConcreteModel, c: Condenser, ctx: ModelContext) -> pyo.Block:
    """Add a condenser block: ``in_service`` (1 while a turbine exhausts into it, else 0)
    and the cooling and ejector constraints.

    ``flow`` is the exhaust steam condensed [t/h], ``ejector`` the ejectors' motive steam
    [t/h] and ``hotwell`` the condensate both return to the deaerator [t/h].
    """
    blk = pyo.Block()
    m.add_component(f"condenser_{c.id}", blk)
    T = m.T
    users = ctx.condenser_users.get(c.id, [])
    h_f = state_px(c.pressure, 0.0).h
    ctx.condensate_enthalpy[c.id] = h_f
    blk.in_service = pyo.Var(T, bounds=(0, 1))
    if users:
        # in service whenever any turbine exhausting into it runs, and only then: its
        # ejectors' drains return to the deaerator, so without the upper row they could
        # run as a steam path from their header to the deaerator with no turbine on
        blk.serves = pyo.Constraint(range(len(users)), T,
                                    rule=lambda b, i, t: b.in_service[t] >= users[i].on[t])
        blk.idle = pyo.Constraint(T, rule=lambda b, t: b.in_service[t] <= sum(u.on[t] for u in users))
    else:
        for t in ctx.hours:
            blk.in_service[t].fix(0)
    flow = lambda t: sum(u.condenser_flow(t) for u in users)  # noqa: E731
    duty = lambda t: sum(u.condenser_flow(t) * (u.condenser_exhaust_h - h_f) / 3600.0 for u in users)  # noqa: E731
    blk.flow = flow
    blk.duty = duty
    if users:
        blk.cooling = pyo.Constraint(T, rule=lambda b, t: duty(t) <= c.cooling_capacity)
    ejector = lambda t: 0.0  # noqa: E731
    if c.ejector_steam > 0 and c.ejector_header is not None:
        ejector = lambda t: c.ejector_steam * blk.in_service[t]  # noqa: E731
        ctx.take(c.ejector_header, c.id, f"{c.id} ejectors", ejector)
    # the ejectors' motive steam condenses in their inter- and after-condensers and drains
    # to the hotwell, so it returns to the deaerator with the exhaust condensate (at
    # hotwell enthalpy: the heat it gives up there is taken as rejected, the safe side)
    hotwell = lambda t: flow(t) + ejector(t)  # noqa: E731
    blk.ejector = ejector
    blk.hotwell = hotwell
    ctx.condensate_terms.append(Term(c.id, f"{c.id} hotwell condensate", hotwell))
    blk.unit = c
    return blk
