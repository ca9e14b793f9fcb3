"""The site model: equipment blocks joined by header, power and feedwater balances.

Balances carry shortfall and surplus slacks priced far above any real cost, so an
impossible week still has a schedule and the slacks say where and when it breaks.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field

import pyomo.environ as pyo

from .equipment import REGISTRY
from .equipment.common import ModelContext, SiteStates, Term, apply_fixings, wanted_status
from .equipment.data import WindowData
from .equipment.deaerator import add_deaerator
from .equipment.grid import add_grid
from .plant.schema import SiteConfig
from .plant.series import Series
from .reserve import add_reserve


@dataclass(frozen=True)
class BuildOptions:
    """Switches for the model: ``reserve`` overrides the site file's reserve setting;
    ``outages`` lists (unit id, first hour, last hour) when a boiler or turbo-generator is
    unavailable (hour indices of the series, inclusive); ``mutable`` enters the hourly data
    and initial states as parameters, so that :mod:`cogendispatch.reuse` can give the built
    model the next window's data."""

    reserve: bool | None = None
    outages: tuple[tuple[str, int, int], ...] = ()
    mutable: bool = False
    # keep import and export apart with a binary in every hour, not only where the prices
    # invite both: for models whose prices change after the build (one hour's what-ifs)
    grid_exclusive: bool = False


@dataclass
class SiteModel:
    """A built Pyomo model with its registry and build time."""

    model: pyo.ConcreteModel
    ctx: ModelContext
    build_seconds: float
    blocks: dict[str, pyo.Block] = field(default_factory=dict)


def shortfall_prices(cfg: SiteConfig) -> dict[str, float]:
    """Price of a t/h of steam missing from each header [currency/t]: the site's
    ``steam_shortfall`` at the lowest-pressure header, half as much again for each header
    above it. Imaginary steam in a high-pressure header would also pass a turbine and make
    power on its way down, so at one price an impossible week shows its shortfall upstream
    (a turbine's inlet) rather than where the process goes short; graded, the lack lands in
    the lowest header it can, and a header's own demand is cut only when it cannot be
    passed down. A half step is far above what a tonne makes on its way down (about 0.1
    MWh, 10^5 even at the power shortfall price)."""
    levels = sorted({h.pressure for h in cfg.headers})  # headers at one pressure share a price
    return {h.id: cfg.penalties.steam_shortfall * (1.0 + 0.5 * levels.index(h.pressure)) for h in cfg.headers}


def build_site_model(cfg: SiteConfig, series: Series, options: BuildOptions = BuildOptions()) -> SiteModel:
    """Build the dispatch MILP for ``series.hours`` hours.

    Parameters
    ----------
    cfg : validated site
    series : hourly demands and prices
    options : model switches

    Returns
    -------
    SiteModel with the Pyomo model; objective in currency over the horizon.
    """
    t0 = time.perf_counter()
    states = SiteStates.of(cfg)
    hours = list(range(series.hours))
    m = pyo.ConcreteModel(name=cfg.site.name)
    m.T = pyo.Set(initialize=hours, ordered=True)
    ctx = ModelContext(cfg=cfg, series=series, states=states, hours=hours,
                       data=WindowData(m, cfg, series, options.mutable))
    blocks: dict[str, pyo.Block] = {}
    for attr, builder in REGISTRY:
        for unit in getattr(cfg, attr):
            blocks[unit.id] = builder(m, unit, ctx)
    fix_statuses(blocks, cfg, len(hours), options.outages)
    blocks["grid"] = add_grid(m, cfg.grid, ctx, every_hour=options.grid_exclusive)
    blocks["deaerator"] = add_deaerator(m, cfg.deaerator, ctx)

    # process demand
    data = ctx.data
    for h in cfg.headers:
        if data.any_demand(h.id):
            ctx.header_terms[h.id].append(Term("process", "process demand", lambda t, h=h.id: -data.demand(h, t)))

    # shortfall/surplus slacks and the balances
    H = [h.id for h in cfg.headers]
    pen = cfg.penalties
    m.steam_short = pyo.Var(H, m.T, within=pyo.NonNegativeReals)
    m.steam_surplus = pyo.Var(H, m.T, within=pyo.NonNegativeReals)
    for h in H:
        ctx.header_terms[h].append(Term("balance", "shortfall (unmet)", lambda t, h=h: m.steam_short[h, t]))
        ctx.header_terms[h].append(Term("balance", "surplus (unabsorbed)", lambda t, h=h: -m.steam_surplus[h, t]))
    m.header_balance = pyo.Constraint(
        H, m.T, rule=lambda mm, h, t: sum(term.expr(t) for term in ctx.header_terms[h]) == 0)

    # colder steam cannot superheat itself: at a superheated header it only lets hotter
    # arrivals take less spray, so the hour's spray water net of it stays >= 0 (at a
    # saturated header its moisture drains instead)
    cold = [h for h in H if ctx.cold_water.get(h) and ctx.states.headers[h].phase == "superheated"]
    if cold:
        m.net_spray = pyo.Constraint(
            cold, m.T, rule=lambda mm, h, t: sum(w(t) for w in ctx.header_water[h]) >= 0)

    ctx.power_terms.append(Term("process", "site load", lambda t: -data.load(t)))
    m.power_short = pyo.Var(m.T, within=pyo.NonNegativeReals)
    m.power_surplus = pyo.Var(m.T, within=pyo.NonNegativeReals)
    ctx.power_terms.append(Term("balance", "shortfall (unmet)", lambda t: m.power_short[t]))
    ctx.power_terms.append(Term("balance", "surplus (unabsorbed)", lambda t: -m.power_surplus[t]))
    m.power_balance = pyo.Constraint(
        m.T, rule=lambda mm, t: sum(term.expr(t) for term in ctx.power_terms) == 0)

    # fuel availability
    for f in cfg.fuels:
        if f.max_supply is not None and ctx.fuel_use.get(f.id):
            uses = ctx.fuel_use[f.id]
            m.add_component(f"supply_{f.id}", pyo.Constraint(
                m.T, rule=lambda mm, t, uses=uses, cap=f.max_supply: sum(u(t) for u in uses) <= cap))

    # steam reserve: the spare capacity of the other running boilers covers any one of them
    add_reserve(m, ctx, cfg.reserve.enabled if options.reserve is None else options.reserve)

    short_price = shortfall_prices(cfg)
    ctx.cost_terms["penalty"].append(lambda t: sum(
        short_price[h] * m.steam_short[h, t] + pen.steam_surplus * m.steam_surplus[h, t] for h in H)
        + pen.power_shortfall * m.power_short[t] + pen.power_surplus * m.power_surplus[t]
        + pen.reserve_shortfall * m.reserve_short[t])
    m.cost = pyo.Objective(expr=sum(term(t) for terms in ctx.cost_terms.values() for term in terms
                                    for t in hours), sense=pyo.minimize)
    return SiteModel(m, ctx, time.perf_counter() - t0, blocks)


def fix_statuses(blocks: dict[str, pyo.Block], cfg: SiteConfig, hours: int,
                 outages: tuple[tuple[str, int, int], ...]) -> list[pyo.Var]:
    """Fix the on/off status of every committed unit where it is decided before the solve
    (out of service, must run, minimum time not yet served, outage); free it elsewhere.

    Returns the variables whose fixing changed (for a model already loaded in a solver).
    """
    changed: list[pyo.Var] = []
    for u in (*cfg.boilers, *cfg.turbogenerators):
        blk = blocks[u.id]
        spans = [(a, b) for uid, a, b in outages if uid == u.id]
        wanted = wanted_status(blk.commit_info, hours, u.available, getattr(u, "must_run", False), spans)
        changed += apply_fixings(blk.on, wanted, list(range(hours)))
        if blk.component("stop_room0") is not None:
            forced_stop = blk.commit_info.initial_on and wanted.get(0) == 0
            blk.stop_room0 = max(blk.stop_ramp, pyo.value(blk.s0)) if forced_stop else blk.stop_ramp
    return changed
