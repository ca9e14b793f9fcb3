"""Turbo-generator: back-pressure, extraction-back-pressure or extraction-condensing.

The machine is a chain of sections. Section k expands the steam left after the earlier
extractions from its inlet state to the pressure of its ``to`` header (or condenser); the
steam then either leaves as an extraction or goes on to the next section. Power is the sum
over sections of flow x isentropic drop x section efficiency, times the generator efficiency,
less a Willans no-load loss while the set runs. A maker's linear envelope may replace the
section physics.
"""

from __future__ import annotations

from dataclasses import dataclass

import pyomo.environ as pyo

from ..plant.schema import TurboGenerator
from ..steam import SteamState, expansion_end, isentropic_drop, state_ph
from .common import ModelContext, SiteStates, Term, commitment


@dataclass(frozen=True)
class SectionCoefficients:
    """One section: where it exhausts and what a tonne through it gives.

    to : header or condenser id; p_out : exhaust pressure [bar(a)]; inlet : state entering
    the section; outlet : actual state leaving it; drop_s : isentropic drop [kJ/kg];
    mw_per_tph : shaft power per t/h through the section [MW/(t/h)];
    steam_rate : actual steam rate of the section [kg/kWh]; to_condenser : bool.
    """

    to: str
    p_out: float
    inlet: SteamState
    outlet: SteamState
    drop_s: float
    efficiency: float | None
    mw_per_tph: float
    to_condenser: bool

    @property
    def steam_rate(self) -> float:
        """Shaft steam rate of the section [kg/kWh]."""
        return 1.0 / self.mw_per_tph if self.mw_per_tph > 0 else float("inf")


@dataclass(frozen=True)
class TurbineCoefficients:
    sections: tuple[SectionCoefficients, ...]
    kind: str  # "back-pressure", "extraction-back-pressure", "condensing", "extraction-condensing"


def section_power(flow: float, drop_s: float, efficiency: float) -> float:
    """Shaft power of a turbine section [MW].

    P = m * (h_in - h_out,s) * eta_s, with m in t/h: P [MW] = m [t/h] * dh [kJ/kg] * eta / 3600.

    Parameters
    ----------
    flow : steam through the section [t/h]
    drop_s : isentropic enthalpy drop [kJ/kg]
    efficiency : isentropic efficiency of the section [-]

    References
    ----------
    Cengel & Boles, Thermodynamics: An Engineering Approach, sec. 7-12 and Example 10-8.
    """
    return flow * drop_s * efficiency / 3600.0


def envelope_work(tg: TurboGenerator) -> list[float]:
    """Shaft work a tonne of steam does before it leaves at each section's end [kJ/kg]:
    for an extraction, (a + b_k) / eta_gen; for the exhaust, a / eta_gen, with a the
    envelope's MW per t/h of throttle and b_k its MW per t/h extracted at section k
    (1 MW per t/h = 3600 kJ/kg). The no-load loss is taken off the terminals, as in the
    section model: like there, the linear model lets it leave the cycle rather than warm
    the exhaust (on the safe side; see :mod:`cogendispatch.verify`).

    With these, the first law on the casing closes exactly: throttle x h_in less each
    leaving flow x (h_in - its work) is a x throttle + sum(b_k x extraction_k) over eta_gen.
    """
    env = tg.envelope
    if env is None:
        raise ValueError(f"turbo-generator {tg.id} has no envelope")
    a = env.throttle
    work = [3600.0 * (a + env.extraction.get(sec.to, 0.0)) / tg.generator_efficiency for sec in tg.sections[:-1]]
    return [*work, 3600.0 * a / tg.generator_efficiency]


def coefficients(tg: TurboGenerator, states: SiteStates) -> TurbineCoefficients:
    """Expand along the sections from the inlet header state with IAPWS-IF97.

    A maker's envelope sets the power; the steam then leaves each section at the enthalpy
    the envelope's work implies (:func:`envelope_work`), so that the exhausts carry what
    the generator did not take, and the efficiency shown is the one that implies."""
    inlet = states.headers[tg.inlet]
    h_in = inlet.h
    work = envelope_work(tg) if tg.envelope is not None else None
    out = []
    for k, sec in enumerate(tg.sections):
        to_cond = sec.to in states.condensers
        p_out = states.condensers[sec.to].p if to_cond else states.headers[sec.to].p
        drop = isentropic_drop(inlet, p_out)
        if work is None:
            eff = sec.efficiency
            outlet = expansion_end(inlet, p_out, eff)
            mw = section_power(1.0, drop, eff)
        else:
            outlet = state_ph(p_out, h_in - work[k])
            mw = (inlet.h - outlet.h) / 3600.0
            eff = (inlet.h - outlet.h) / drop if drop > 0 else float("nan")
        out.append(SectionCoefficients(sec.to, p_out, inlet, outlet, drop, eff, mw, to_cond))
        inlet = outlet
    condensing = out[-1].to_condenser
    kind = ("extraction-" if len(out) > 1 else "") + ("condensing" if condensing else "back-pressure")
    return TurbineCoefficients(tuple(out), kind)


def add_turbogenerator(m: pyo.ConcreteModel, tg: TurboGenerator, ctx: ModelContext) -> pyo.Block:
    """Add a turbo-generator block: ``on``, ``throttle``, ``extraction[k]``, ``flow[k]``, ``power``."""
    co = coefficients(tg, ctx.states)
    blk = pyo.Block()
    m.add_component(f"tg_{tg.id}", blk)
    T = m.T
    n = len(co.sections)
    S = list(range(n))
    X = list(range(n - 1))  # sections that end in an extraction
    commitment(blk, tg.min_up, tg.min_down, tg.initial_on, tg.initial_hours)
    blk.throttle = pyo.Var(T, bounds=(0, tg.max_throttle))
    blk.flow = pyo.Var(S, T, within=pyo.NonNegativeReals)  # through each section [t/h]
    blk.extraction = pyo.Var(X, T, within=pyo.NonNegativeReals)
    blk.power = pyo.Var(T, bounds=(0, tg.generator_rating))  # at the generator terminals [MW]

    blk.throttle_max = pyo.Constraint(T, rule=lambda b, t: b.throttle[t] <= tg.max_throttle * b.on[t])
    if tg.min_throttle > 0:
        blk.throttle_min = pyo.Constraint(T, rule=lambda b, t: b.throttle[t] >= tg.min_throttle * b.on[t])
    blk.first = pyo.Constraint(T, rule=lambda b, t: b.flow[0, t] == b.throttle[t])
    if X:
        blk.passing = pyo.Constraint(
            X, T, rule=lambda b, k, t: b.flow[k + 1, t] == b.flow[k, t] - b.extraction[k, t])
    for k, sec in enumerate(tg.sections):
        if sec.max_extraction is not None and k < n - 1:
            blk.add_component(f"extr_max_{k}", pyo.Constraint(
                T, rule=lambda b, t, k=k, v=sec.max_extraction: b.extraction[k, t] <= v * b.on[t]))
        if sec.min_extraction > 0 and k < n - 1:
            blk.add_component(f"extr_min_{k}", pyo.Constraint(
                T, rule=lambda b, t, k=k, v=sec.min_extraction: b.extraction[k, t] >= v * b.on[t]))
        if sec.max_flow is not None:
            blk.add_component(f"flow_max_{k}", pyo.Constraint(
                T, rule=lambda b, t, k=k, v=sec.max_flow: b.flow[k, t] <= v * b.on[t]))
        if sec.min_flow > 0:
            blk.add_component(f"flow_min_{k}", pyo.Constraint(
                T, rule=lambda b, t, k=k, v=sec.min_flow: b.flow[k, t] >= v * b.on[t]))

    if tg.envelope is None:
        a = [s.mw_per_tph * tg.generator_efficiency for s in co.sections]
        blk.power_def = pyo.Constraint(T, rule=lambda b, t: b.power[t] == sum(
            a[k] * b.flow[k, t] for k in S) - tg.no_load_loss * b.on[t])
    else:
        env = tg.envelope
        idx = {co.sections[k].to: k for k in X}
        blk.power_def = pyo.Constraint(T, rule=lambda b, t: b.power[t] == env.throttle * b.throttle[t] + sum(
            c * b.extraction[idx[h], t] for h, c in env.extraction.items()) - env.no_load * b.on[t])
    blk.rating = pyo.Constraint(T, rule=lambda b, t: b.power[t] <= tg.generator_rating * b.on[t])

    # registry
    ctx.take(tg.inlet, tg.id, f"{tg.id} throttle", lambda t: blk.throttle[t])
    for k in X:
        sec = co.sections[k]
        ctx.add_arrival(sec.to, tg.id, f"{tg.id} extraction", lambda t, k=k: blk.extraction[k, t], sec.outlet.h)
    last = co.sections[-1]
    if last.to_condenser:
        ctx.condenser_users[last.to].append(blk)
        blk.condenser_flow = lambda t: blk.flow[n - 1, t]
        blk.condenser_exhaust_h = last.outlet.h
    else:
        ctx.add_arrival(last.to, tg.id, f"{tg.id} exhaust", lambda t: blk.flow[n - 1, t], last.outlet.h)
    ctx.power_terms.append(Term(tg.id, f"{tg.id} generation", lambda t: blk.power[t]))
    if tg.startup_cost > 0:
        ctx.cost_terms["startup"].append(lambda t: tg.startup_cost * blk.start[t])
    blk.coefficients = co
    blk.unit = tg
    return blk
