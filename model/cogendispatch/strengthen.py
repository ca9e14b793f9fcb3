"""Valid inequalities that make the steam reserve's relaxation tight enough to branch on.

The reserve row for boiler b, sum_{j != b} (M_j on_j - s_j) + rs >= c s_b, lets the LP
relaxation "buy" reserve with a boiler committed a few per cent: the relaxation carries
that boiler's no-load fuel for a fraction of the hour only, and the proven bound stays far
below the best schedule. Integer reasoning does better once the hour's total boiler steam
S_t is known to be large:

1. Minimum steam: drop every constraint that links hours (commitment transitions, minimum
   up/down times, ramps, switching limits) and integrality; then the hours decouple, and
   one LP minimising sum_t (S_t + K * shortfall_t) gives each hour's minimum
   L_t <= S_t + K * shortfall_t, valid for every schedule of the full model.
2. Covers: with the reserve, sum_{j != b} M_j on_j + rs >= S_t - (1 - c) M_b, so a set C of
   the other boilers whose joint rating exceeds what may be off,
   sum_C M_j > sum_{j != b} M_j - R_b (R_b = L_t - (1 - c) M_b), cannot be off together
   without slack g_C = R_b - (sum_{j != b} M_j - sum_C M_j):

       sum_{j in C} on_j + (rs + K * shortfall_t) / g_C >= 1.

Both are implied by the model (no schedule is cut off); the slacks keep them valid in hours
that cannot be met.

References
----------
Nemhauser & Wolsey, Integer and Combinatorial Optimization (1988), sec. II.2 (cover
inequalities for knapsack sets).
"""

from __future__ import annotations

from itertools import combinations

import highspy
import numpy as np
import pyomo.environ as pyo

from .equipment.common import held_value

K_SHORT = 5.0  # [t of boiler steam per t/h of header shortfall] weight in the bound (any K > 0 is valid)
_LINKING = ("transition", "min_up", "min_down", "ramp_up", "ramp_down", "switch_change", "switch_stay_steam",
            "switch_stay_motor")


def _row(opt, con) -> int | None:  # noqa: ANN001
    return opt._pyomo_con_to_solver_con_map.get(con)


def minimum_steam(lm, time_limit: float) -> np.ndarray | None:  # noqa: ANN001
    """Each hour's lower bound L_t on S_t + K * shortfall_t [t/h], from the decoupled LP."""
    m = lm.sm.model
    h: highspy.Highs = lm.h
    hours = list(m.T)
    steam_cols = [[lm.col(b.steam[t]) for b in lm.sm.ctx.boilers] for t in hours]
    short_cols = [[lm.col(m.steam_short[hh, t]) for hh in [x.id for x in lm.sm.ctx.cfg.headers]] for t in hours]
    rows = []
    for blk in m.component_data_objects(pyo.Block, descend_into=False):
        for name in _LINKING:
            c = blk.component(name)
            if isinstance(c, pyo.Constraint):
                rows += [r for r in (_row(lm.opt, cd) for cd in c.values()) if r is not None]
    lp = h.getLp()
    cost0 = np.array(lp.col_cost_, dtype=float)
    rlo = np.array(lp.row_lower_, dtype=float)
    rup = np.array(lp.row_upper_, dtype=float)
    cost = np.zeros_like(cost0)
    for t in range(len(hours)):
        for c in steam_cols[t]:
            if c is not None:
                cost[c] = 1.0
        for c in short_cols[t]:
            if c is not None:
                cost[c] = K_SHORT
    all_cols = np.arange(len(cost), dtype=np.int32)
    idx = np.array(rows, dtype=np.int32)
    inf = highspy.kHighsInf
    try:
        h.changeColsCost(len(all_cols), all_cols, cost)
        if len(idx):
            h.changeRowsBounds(len(idx), idx, np.full(len(idx), -inf), np.full(len(idx), inf))
        lm._set_integrality(False)
        lm._run(time_limit)
        ok = h.getModelStatus() == highspy.HighsModelStatus.kOptimal
        x = lm.solution()
    finally:
        lm._set_integrality(True)
        h.changeColsCost(len(all_cols), all_cols, cost0)
        if len(idx):
            h.changeRowsBounds(len(idx), idx, rlo[idx], rup[idx])
    if not ok:
        return None
    return np.array([sum(x[c] for c in steam_cols[t] if c is not None)
                     + K_SHORT * sum(x[c] for c in short_cols[t] if c is not None) for t in range(len(hours))])


def add_reserve_covers(lm, time_limit: float = 30.0) -> int:  # noqa: ANN001
    """Add the cover inequalities of the module docstring to the loaded HiGHS model.

    Returns the number of rows added (0 when the reserve is off or nothing is implied).
    """
    m = lm.sm.model
    if m.component("reserve") is None:
        return 0
    boilers = lm.sm.ctx.boilers
    cover = lm.sm.ctx.cfg.reserve.cover
    L = minimum_steam(lm, time_limit)
    if L is None:
        return 0
    headers = [x.id for x in lm.sm.ctx.cfg.headers]
    rate = [b.unit.max_steam for b in boilers]
    n_rows = 0
    for t in m.T:
        on_cols = [lm.col(b.on[t]) for b in boilers]
        fixed_on = [held_value(b.on[t]) for b in boilers]
        slack = [(lm.col(m.reserve_short[t]), 1.0)] + [(lm.col(m.steam_short[hh, t]), K_SHORT) for hh in headers]
        slack = [(c, a) for c, a in slack if c is not None]
        seen: set[tuple[int, ...]] = set()
        for b in range(len(boilers)):
            others = [j for j in range(len(boilers)) if j != b]
            R = L[t] * (1 - 1e-7) - 1e-6 - (1.0 - cover) * rate[b]
            A = sum(rate[j] for j in others)
            if R <= 0:
                continue
            for size in range(1, len(others) + 1):
                for C in combinations(others, size):
                    mc = sum(rate[j] for j in C)
                    g = R - (A - mc)
                    if g <= 1e-6 or C in seen:
                        continue
                    if any(set(C2) < set(C) for C2 in seen):
                        continue  # a smaller cover already holds: this one is dominated
                    seen.add(C)
                    if any(fixed_on[j] == 1 for j in C):
                        continue  # already satisfied by a fixed status
                    cols = [on_cols[j] for j in C if on_cols[j] is not None]
                    if not cols:
                        continue
                    idx = np.array(cols + [c for c, _ in slack], dtype=np.int32)
                    val = np.array([1.0] * len(cols) + [a / g for _, a in slack])
                    lm.h.addRow(1.0, highspy.kHighsInf, len(idx), idx, val)
                    n_rows += 1
    return n_rows
