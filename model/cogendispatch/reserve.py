"""Steam reserve: losing any one running boiler can be covered by the others.

For each boiler b and hour t (cover share c, rating M, steam s, status u):

    sum_{j != b} (M_j u_j - s_j) + r_t >= c * s_b

with r_t >= 0 the reserve shortfall, priced like unmet steam. With c = 1 this reads "the
other running boilers' ratings carry the total boiler steam".

The rows alone relax badly: the LP relaxation buys reserve with a few per cent of a boiler
and pays only that share of its no-load fuel and start. Each hour therefore also gets one
weight per *boiler set* (which boilers run), z_{k,t} >= 0 with sum_k z_{k,t} = 1 and
u_{j,t} = sum_{k contains j} z_{k,t}. For integer statuses z is the indicator of the running
set, so these rows cut off nothing; they give :mod:`cogendispatch.strengthen` the variables
in which "this set cannot carry this hour's steam" is one linear row, which turns the hour's
statuses into the convex hull of the sets that can (disjunctive programming).

References
----------
Balas, E., Disjunctive programming: properties of the convex hull of feasible points,
Discrete Applied Mathematics 89 (1998) 3-44 (hull of a union of polytopes).
"""

from __future__ import annotations

from itertools import combinations

import pyomo.environ as pyo

from .equipment.common import ModelContext

# Largest number of boilers for which every running set gets a weight per hour (2**n
# weights per hour); above it :mod:`cogendispatch.strengthen` falls back to cover rows.
MAX_SET_BOILERS = 6


def set_capacity(ratings: list[float], members: tuple[int, ...], cover: float) -> float:
    """Most total boiler steam a running set can carry with its reserve held [t/h].

    max S = sum_j s_j over 0 <= s_j <= M_j subject to every member's reserve row
    sum_{j != b} (M_j - s_j) >= c * s_b. With c = 1 this is the set's rating less its
    largest member's. With c < 1 row b reads s_b >= (S - A + M_b) / (1 - c) (A the set's
    rating), so S is reachable exactly when sum_b max(0, that) <= S and each is <= M_b;
    that holds on an interval [0, S_max], found by bisection.

    Parameters
    ----------
    ratings : maximum continuous steam of every boiler [t/h]
    members : indices of the running boilers
    cover : share of a lost boiler's steam the others must pick up [-]
    """
    M = [ratings[j] for j in members]
    if not M:
        return 0.0
    A = sum(M)
    if cover >= 1.0:
        return A - max(M)

    def reachable(S: float) -> bool:
        need = [(S - A + m) / (1.0 - cover) for m in M]
        return all(n <= m for n, m in zip(need, M)) and sum(max(0.0, n) for n in need) <= S

    lo, hi = 0.0, A
    for _ in range(80):
        mid = 0.5 * (lo + hi)
        lo, hi = (mid, hi) if reachable(mid) else (lo, mid)
    return lo


def add_reserve(m: pyo.ConcreteModel, ctx: ModelContext, enabled: bool) -> None:
    """Add the reserve shortfall ``m.reserve_short`` [t/h], the reserve rows and, for up to
    :data:`MAX_SET_BOILERS` boilers, the running-set weights ``m.boiler_set``."""
    m.reserve_short = pyo.Var(m.T, within=pyo.NonNegativeReals)
    bs = ctx.boilers
    if not (enabled and bs):
        for t in m.T:
            m.reserve_short[t].fix(0)
        return
    cover = ctx.cfg.reserve.cover
    spare = lambda t: sum(b.unit.max_steam * b.on[t] - b.steam[t] for b in bs)  # noqa: E731
    m.reserve = pyo.Constraint(
        range(len(bs)), m.T,
        rule=lambda mm, i, t: spare(t) - (bs[i].unit.max_steam * bs[i].on[t] - bs[i].steam[t])
        + m.reserve_short[t] >= cover * bs[i].steam[t])
    if len(bs) > MAX_SET_BOILERS:
        return
    n = len(bs)
    ratings = [b.unit.max_steam for b in bs]
    sets = [k for r in range(n + 1) for k in combinations(range(n), r)]
    ctx.boiler_sets = [(k, set_capacity(ratings, k, cover)) for k in sets]
    K = range(len(sets))
    m.boiler_set = pyo.Var(K, m.T, bounds=(0, 1))
    m.boiler_set_one = pyo.Constraint(m.T, rule=lambda mm, t: sum(mm.boiler_set[k, t] for k in K) == 1)
    m.boiler_set_status = pyo.Constraint(
        range(n), m.T, rule=lambda mm, j, t: bs[j].on[t] == sum(mm.boiler_set[k, t] for k in K if j in sets[k]))
