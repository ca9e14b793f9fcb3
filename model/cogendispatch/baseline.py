"""The schedule a site runs without an optimiser, priced with the same site model.

Practice rules (common practice, no published source):

* boilers are committed in merit order of full-load steam cost (the cheapest of their
  fuels at its mean price over the horizon, CO2 included, over full-load efficiency; with
  one fuel, the order of efficiency): in each hour the first k
  boilers run, k the smallest number that supplies every header and keeps the steam
  reserve; the first hour keeps the initial states, a boiler running at the start stays on
  until its ramp-down limit lets it reach its shut-down load, and the runs are stretched to
  honour minimum up and down times;
* each turbo-generator with a ``fixed_throttle`` in the site file runs at that throttle
  (its extractions follow the headers); one without keeps its initial state;
* each machine with both drivers runs on its ``normal`` driver (steam when not given);
* the committed boilers on a header are loaded in merit order: each at its minimum, then
  the best one up to its rating before the next rises (the header's total steam as the
  balances need it); where that breaks a ramp limit or the reserve, the LP shares the load
  instead, as a load allocator would;
* letdowns, vent and the grid close the balances.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .equipment import boiler as boiler_mod
from .equipment.common import SiteStates, held_value, repair_commitment
from .plant.schema import Boiler, SiteConfig
from .plant.series import Series
from .results import PlanResults, plan_results
from .site import BuildOptions, build_site_model
from .solve import LoadedModel


class NoBaselineError(RuntimeError):
    """The practice-rule schedule could not be priced (its fixed commitment has no solution)."""


@dataclass
class Baseline:
    cost: dict[str, float]  # by category over the horizon [currency]
    total: float
    results: PlanResults
    rounds: int  # commitment rounds needed
    merit_loaded: bool = True  # False: the LP shared the load (merit loading broke a limit)


def practice_baseline(cfg: SiteConfig, series: Series, build: BuildOptions = BuildOptions(),
                      time_limit: float = 60.0) -> Baseline:
    """Price the practice-rule schedule for ``series`` (see the module docstring)."""
    sm = build_site_model(cfg, series, build)
    lm = LoadedModel(sm)
    h = lm.h
    m = sm.model
    hours = list(m.T)
    blocks = sm.blocks
    fixed_cols: list[int] = []
    fixed_vals: list[float] = []

    def fix(var, value: float) -> None:  # noqa: ANN001
        c = lm.col(var)
        if c is not None:
            fixed_cols.append(c)
            fixed_vals.append(value)

    # the practice rule applies where the model leaves the choice open: a status it holds
    # (a minimum down time or a minimum time between driver changes not yet served at the
    # start, an outage) stays, or the baseline would be a schedule the plant cannot run
    def rule(var, value: float) -> float:  # noqa: ANN001
        held = held_value(var)
        return value if held is None else float(held)

    for d in cfg.drives:
        blk = blocks[d.id]
        if hasattr(blk, "on_steam"):
            v = 0.0 if d.normal == "motor" else 1.0
            for k in range(d.count):
                for t in hours:
                    fix(blk.on_steam[k, t], rule(blk.on_steam[k, t], v))
    for tg in cfg.turbogenerators:
        blk = blocks[tg.id]
        on = 1.0 if tg.fixed_throttle is not None else float(tg.initial_on)
        if not tg.available:
            on = 0.0
        for t in hours:
            on_t = rule(blk.on[t], on)
            fix(blk.on[t], on_t)
            if tg.fixed_throttle is not None and on_t:
                fix(blk.throttle[t], tg.fixed_throttle)
    base_cols = np.array(fixed_cols, dtype=np.int32)
    base_vals = np.array(fixed_vals)

    states = SiteStates.of(cfg)
    merit = sorted([b for b in cfg.boilers if b.available], key=lambda b: _full_load_steam_cost(b, cfg, states, series))
    k = np.ones(len(hours), dtype=int)
    rounds = 0
    x = None
    while True:
        rounds += 1
        cols, vals = list(base_cols), list(base_vals)
        for rank, b in enumerate(merit):
            blk = blocks[b.id]
            on = [blk.on[t] for t in hours]
            fixed = {t: h for t, h in enumerate(held_value(v) for v in on) if h is not None}
            # the first hours keep the initial state: a boiler at load cannot be dropped at once
            keep = _hours_to_shut_down(b)
            wanted = [1 if (rank < k[t] or b.must_run or t < keep) else 0 for t in hours]
            seq = repair_commitment(wanted, fixed, blk.commit_info)
            for v, s in zip(on, seq):
                c = lm.col(v)
                if c is not None:
                    cols.append(c)
                    vals.append(float(s))
        idx = np.array(cols, dtype=np.int32)
        val = np.array(vals)
        h.changeColsBounds(len(idx), idx, val, val)
        lm._run(time_limit, gap=1e-4)
        ok = h.getInfo().primal_solution_status == 2
        x = lm.solution() if ok else None
        h.changeColsBounds(len(idx), idx, lm.col_lower[idx], lm.col_upper[idx])
        if x is None:
            raise NoBaselineError("the practice-rule schedule has no solution")
        slacks = [[lm.col(m.steam_short[hh.id, t]) for hh in cfg.headers] + [lm.col(m.reserve_short[t])]
                  for t in hours]
        short = np.array([sum(x[c] for c in cs if c is not None) for cs in slacks])
        more = (short > 1e-6) & (k < len(merit))
        if not more.any():
            break
        k[more] += 1
    x, merit_loaded = _merit_loading(lm, cfg, merit, hours, idx, val, x, short, time_limit)
    for v, c in zip(lm.vars, lm.cols):
        v.set_value(x[c], skip_validation=True)
    res = plan_results(sm)
    cost = res.totals["cost"]
    return Baseline(cost=cost, total=float(sum(cost.values())), results=res, rounds=rounds,
                    merit_loaded=merit_loaded)


def _full_load_steam_cost(b: Boiler, cfg: SiteConfig, states: SiteStates, series: Series) -> float:
    """Fuel and CO2 cost of a tonne of steam at full load [currency/t], on the boiler's
    cheapest fuel at its mean price over the horizon: the order an operator ranks boilers."""
    heat = boiler_mod.coefficients(b, states).heat_per_t  # [GJ/t]
    co2 = float(series.co2_price.mean()) if len(series.co2_price) else 0.0
    factor = {f.id: f.co2_factor for f in cfg.fuels}
    price = min(float(series.fuel_price[f].mean()) + factor[f] * co2 for f in b.fuels)
    return price * heat / b.efficiency_curve.efficiency[-1]


def _hours_to_shut_down(b: Boiler) -> int:
    """Hours a boiler running at the start must stay on before it may stop [h]: at least
    the first, and as many as its ramp-down limit needs to bring the initial steam down to
    the load it may trip from (the larger of the ramp and the minimum stable load, as the
    block's ramp rows have it)."""
    if not b.initial_on:
        return 0
    if b.ramp_down is None or b.initial_steam is None:
        return 1
    last = max(b.ramp_down, b.min_steam)
    return max(1, math.ceil((b.initial_steam - last) / b.ramp_down - 1e-9))


def _merit_loading(lm: LoadedModel, cfg: SiteConfig, merit: list, hours: list[int], idx: np.ndarray,
                   val: np.ndarray, x: np.ndarray, short: np.ndarray, time_limit: float) -> tuple[np.ndarray, bool]:
    """Reload the committed boilers in merit order: each at its minimum, then the best one
    up to its rating before the next rises, header by header, keeping each header's total
    steam. Falls back to the LP's sharing (returns False) if the fixed loads would break a
    ramp limit or the reserve."""
    blocks = lm.sm.blocks
    steam_cols, steam_vals = [], []
    for hdr in cfg.headers:
        group = [b for b in merit if b.header == hdr.id]
        for t in hours:
            on = [b for b in group if (lm.col(blocks[b.id].on[t]) is None and blocks[b.id].on[t].value > 0.5)
                  or (lm.col(blocks[b.id].on[t]) is not None and x[lm.col(blocks[b.id].on[t])] > 0.5)]
            total = sum(x[lm.col(blocks[b.id].steam[t])] for b in on)
            rest = total - sum(b.min_steam for b in on)
            for b in on:
                add = min(max(rest, 0.0), b.max_steam - b.min_steam)
                rest -= add
                steam_cols.append(lm.col(blocks[b.id].steam[t]))
                steam_vals.append(b.min_steam + add)
    cols = np.concatenate([idx, np.array(steam_cols, dtype=np.int32)])
    vals = np.concatenate([val, np.array(steam_vals)])
    lm.h.changeColsBounds(len(cols), cols, vals, vals)
    lm._run(time_limit, gap=1e-4)
    ok = lm.h.getInfo().primal_solution_status == 2
    x2 = lm.solution() if ok else None
    lm.h.changeColsBounds(len(cols), cols, lm.col_lower[cols], lm.col_upper[cols])
    if x2 is None:
        return x, False
    m = lm.sm.model
    slacks = [[lm.col(m.steam_short[hh.id, t]) for hh in cfg.headers] + [lm.col(m.reserve_short[t])] for t in hours]
    short2 = np.array([sum(x2[c] for c in cs if c is not None) for cs in slacks])
    if (short2 > short + 1e-6).any():
        return x, False
    return x2, True


def savings(optimised: dict[str, float], baseline: dict[str, float]) -> dict[str, dict[str, float | None]]:
    """Saving of the optimised schedule against the baseline per cost category [currency and
    %], in the optimised schedule's category order (the plan's cost table), then total, and
    when either schedule pays a penalty, the total without it (the money). The per cent is
    None where the baseline spends nothing in the category: no share of it."""

    def pct(b: float, o: float) -> float | None:
        return 100.0 * (b - o) / abs(b) if abs(b) > 1e-9 else None

    out: dict[str, dict[str, float | None]] = {}
    for cat in [*optimised, *(c for c in baseline if c not in optimised)]:
        b, o = baseline.get(cat, 0.0), optimised.get(cat, 0.0)
        out[cat] = {"baseline": b, "optimised": o, "saving": b - o, "saving_pct": pct(b, o)}
    tb, to = sum(baseline.values()), sum(optimised.values())
    out["total"] = {"baseline": tb, "optimised": to, "saving": tb - to, "saving_pct": pct(tb, to)}
    pb, po = baseline.get("penalty", 0.0), optimised.get("penalty", 0.0)
    if abs(pb) > 1e-6 or abs(po) > 1e-6:
        # penalties price what is not met: no money. The money saved is the rest
        mb, mo = tb - pb, to - po
        out["total_without_penalty"] = {"baseline": mb, "optimised": mo, "saving": mb - mo, "saving_pct": pct(mb, mo)}
    return out

