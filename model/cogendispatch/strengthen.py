"""Valid inequalities that make the steam reserve's relaxation tight enough to branch on.

The reserve rows (:mod:`cogendispatch.reserve`) let the LP relaxation "buy" reserve with a
boiler committed a few per cent: it carries that boiler's no-load fuel, minimum load and
start for a fraction only, and the proven bound stays far below the best schedule. Integer
reasoning does better once the hour's total boiler steam S_t is known to be large:

1. Minimum steam: drop every constraint that links hours (commitment transitions, minimum
   up/down times, ramps, switching limits) and integrality; then the hours decouple, and
   one LP minimising sum_t (S_t + K_s * steam shortfall_t + K_p * power shortfall_t) gives
   each hour's minimum L_t <= S_t + K_s * steam shortfall_t + K_p * power shortfall_t,
   valid for every schedule of the full model and any weights K > 0. The power shortfall
   must be in it: on a site whose import is capped, the steam that machines on motors
   would save has to be made on site as power, so shaving the steam peak has a floor.
2. Running sets: a set k of running boilers carries at most C_k t/h with its reserve
   (:func:`cogendispatch.reserve.set_capacity`), so a set with C_k < L_t can run only on
   slack. With the set weights z_{k,t} of the reserve module, one row per hour says so:

       sum_{k: C_k < L_t} (L_t - C_k) z_{k,t} <= r_t / c + K_s * steam shortfall_t + K_p * power shortfall_t

   With cover c < 1, each t/h of reserve shortfall r_t lets a set carry up to 1/c t/h more
   (two equal boilers: 2/(1 + c)): take the steam down by r_t / c, shared in any way, and
   every reserve row gains at least c * r_t / c = r_t, so (S_t - r_t / c) is carried
   without shortfall and S_t <= C_k + r_t / c. Without slack the hour's statuses lie in the convex hull of the sets that can carry
   L_t, e.g. "at least three boilers" or "the large boiler runs".
3. On sites with more boilers than the set weights allow, cover rows instead: a set C of
   the other boilers whose joint rating exceeds what may be off,
   sum_C M_j > sum_{j != b} M_j - R_b (R_b = L_t - (1 - c) M_b), cannot be off together
   without slack g_C = R_b - (sum_{j != b} M_j - sum_C M_j):

       sum_{j in C} u_j + (r_t + K_s * steam shortfall_t + K_p * power shortfall_t) / g_C >= 1.

All are implied by the model (no schedule is cut off); the slacks keep them valid in hours
that cannot be met. The weights K set how dearly the relaxation pays for escaping a row
through a slack (penalty / K per t/h): a small K makes the rows bite harder but lets the
minimum-steam LP trade steam for slack, which lowers L_t. Both effects depend on the site,
so the rows are written for a small and a large power weight; each set is valid.

References
----------
Balas, E., Disjunctive programming: properties of the convex hull of feasible points,
Discrete Applied Mathematics 89 (1998) 3-44.
Nemhauser & Wolsey, Integer and Combinatorial Optimization (1988), sec. II.2 (cover
inequalities for knapsack sets).
"""

from __future__ import annotations

from itertools import combinations
from typing import TYPE_CHECKING

import highspy
import numpy as np

from .equipment.common import held_value

if TYPE_CHECKING:  # solve.py imports this module
    from .solve import LoadedModel

K_SHORT = 5.0  # [t/h of boiler steam per t/h of header shortfall] weight in the bound (any K > 0 is valid)
# [t/h of boiler steam per MW of power shortfall]: a small and a large weight (module docstring)
K_POWER = (2.0, 50.0)


def linking_rows(lm: LoadedModel) -> np.ndarray:
    """Rows of the loaded model whose columns belong to more than one hour (commitment
    transitions, minimum up/down times, ramps, switching limits, whatever a new equipment
    kind adds), or to no hour at all (such a column could tie hours together).

    Found from the matrix rather than from constraint names, so that no block's linking
    rows can be missed: one left in would make the decoupled LP's L_t too high and the
    running-set rows would cut off schedules. Rows of one hour that hold the initial state
    (a minimum down time at hour 0) stay; every schedule meets them, so L_t stays a bound.
    """
    hours = lm.col_hours()
    a = lm.h.getLp().a_matrix_
    start, index = np.asarray(a.start_), np.asarray(a.index_)
    n_rows = lm.h.getNumRow()
    if a.format_ == highspy.MatrixFormat.kRowwise:
        row_of, col_of = np.repeat(np.arange(n_rows), np.diff(start)), index
    else:
        row_of, col_of = index, np.repeat(np.arange(a.num_col_), np.diff(start))
    first = np.full(n_rows, np.iinfo(np.int64).max)
    last = np.full(n_rows, -1)
    np.minimum.at(first, row_of, hours[col_of])
    np.maximum.at(last, row_of, hours[col_of])
    used = np.zeros(n_rows, dtype=bool)
    used[row_of] = True
    return np.flatnonzero(used & ((first != last) | (first < 0))).astype(np.int32)


def _slack_cols(lm: LoadedModel, t: int, k_power: float, reserve: float | None = 1.0) -> list[tuple[int, float]]:
    """(column, weight) of hour t's steam and power shortfalls in L_t, and unless ``reserve``
    is None the reserve shortfall, with weight ``reserve``."""
    m = lm.sm.model
    cols = [(lm.col(m.power_short[t]), k_power)] + ([(lm.col(m.reserve_short[t]), reserve)] if reserve else [])
    cols += [(lm.col(m.steam_short[hh.id, t]), K_SHORT) for hh in lm.sm.ctx.cfg.headers]
    return [(c, a) for c, a in cols if c is not None]


def _decoupled_lp(lm: LoadedModel, cost: dict[int, float], time_limit: float) -> np.ndarray | None:
    """Column values minimising sum(cost[c] * x[c]) over the LP relaxation without the rows
    that link hours, so that each hour's part of the optimum is that hour's own minimum;
    None when the LP does not solve. The loaded model is restored afterwards."""
    h: highspy.Highs = lm.h
    idx = linking_rows(lm)
    lp = h.getLp()
    cost0 = np.array(lp.col_cost_, dtype=float)
    rlo = np.array(lp.row_lower_, dtype=float)
    rup = np.array(lp.row_upper_, dtype=float)
    c_new = np.zeros_like(cost0)
    for c, a in cost.items():
        c_new[c] = a
    all_cols = np.arange(len(c_new), dtype=np.int32)
    inf = highspy.kHighsInf
    try:
        h.changeColsCost(len(all_cols), all_cols, c_new)
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
    return x if ok else None


def minimum_steam(lm: LoadedModel, time_limit: float, k_power: float = K_POWER[-1]) -> np.ndarray | None:
    """Each hour's lower bound L_t on S_t + K_s * steam shortfall_t + K_p * power shortfall_t
    [t/h], from the decoupled LP (module docstring, item 1); ``k_power`` is K_p [t/h per MW]."""
    m = lm.sm.model
    hours = list(m.T)
    steam_cols = [[c for c in (lm.col(b.steam[t]) for b in lm.sm.ctx.boilers) if c is not None] for t in hours]
    slack_cols = [_slack_cols(lm, t, k_power, reserve=None) for t in hours]
    cost = {c: 1.0 for cols in steam_cols for c in cols}
    cost.update({c: a for cols in slack_cols for c, a in cols})
    x = _decoupled_lp(lm, cost, time_limit)
    if x is None:
        return None
    return np.array([sum(x[c] for c in steam_cols[t]) + sum(a * x[c] for c, a in slack_cols[t])
                     for t in range(len(hours))])


def _floor(L: float) -> float:
    # a hair below the LP value, so that round-off never cuts off a schedule
    return L * (1 - 1e-7) - 1e-6


def add_set_rows(lm: LoadedModel, L: np.ndarray, k_power: float, skip: np.ndarray | None = None) -> int:
    """Add the running-set rows (module docstring, item 2) for the bounds ``L`` [t/h]
    found with power weight ``k_power``; hours where ``skip`` is true get none.
    Returns the number of rows added."""
    m = lm.sm.model
    sets = lm.sm.ctx.boiler_sets
    cover = lm.sm.ctx.cfg.reserve.cover
    # each t/h of reserve shortfall lets a set carry at most 1/cover t/h more than C_k (module
    # docstring, item 2); with cover 0 the reserve rows hold nothing back and C_k is the rating
    per_reserve = 1.0 / cover if cover > 0 else 0.0
    n_rows = 0
    for t in m.T:
        if skip is not None and skip[t]:
            continue
        Lt = _floor(L[t])
        terms = [(lm.col(m.boiler_set[k, t]), Lt - cap) for k, (_, cap) in enumerate(sets) if cap < Lt]
        terms = [(c, a) for c, a in terms if c is not None and lm.col_upper[c] > 0]
        if not terms:
            continue
        terms += [(c, -a) for c, a in _slack_cols(lm, t, k_power, reserve=per_reserve or None)]
        idx = np.array([c for c, _ in terms], dtype=np.int32)
        lm.h.addRow(-highspy.kHighsInf, 0.0, len(idx), idx, np.array([a for _, a in terms]))
        n_rows += 1
    return n_rows


def add_reserve_covers(lm: LoadedModel, L: np.ndarray, k_power: float, skip: np.ndarray | None = None) -> int:
    """Add the cover rows (module docstring, item 3) for the bounds ``L`` [t/h] found with
    power weight ``k_power``; hours where ``skip`` is true get none.

    Returns the number of rows added.
    """
    m = lm.sm.model
    boilers = lm.sm.ctx.boilers
    cover = lm.sm.ctx.cfg.reserve.cover
    rate = [b.unit.max_steam for b in boilers]
    n_rows = 0
    for t in m.T:
        if skip is not None and skip[t]:
            continue
        on_cols = [lm.col(b.on[t]) for b in boilers]
        fixed_on = [held_value(b.on[t]) for b in boilers]
        slack = _slack_cols(lm, t, k_power)
        seen: set[tuple[int, ...]] = set()
        for b in range(len(boilers)):
            others = [j for j in range(len(boilers)) if j != b]
            R = _floor(L[t]) - (1.0 - cover) * rate[b]
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


def add_reserve_rows(lm: LoadedModel, time_limit: float = 30.0) -> int:
    """Add the rows of the module docstring to the loaded HiGHS model, for each power
    weight in :data:`K_POWER`: running-set rows where the model has set weights, covers
    otherwise. An hour whose bound does not drop with the small weight keeps only the
    small weight's row (it is the stronger one).

    Returns the number of rows added (0 when the reserve is off or nothing is implied).
    """
    m = lm.sm.model
    if m.component("reserve") is None:
        return 0
    n_rows = 0
    first: np.ndarray | None = None
    for k_power in K_POWER:
        L = minimum_steam(lm, time_limit, k_power)
        if L is None:
            continue
        skip = None if first is None else L <= first + 1e-6
        add = add_set_rows if m.component("boiler_set") is not None else add_reserve_covers
        n_rows += add(lm, L, k_power, skip)
        first = L if first is None else np.maximum(first, L)
    return n_rows
