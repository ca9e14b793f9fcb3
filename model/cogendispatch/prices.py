"""Hourly marginal prices of a plan: what one more t/h of steam in each header, or one more
MW of site load, would have cost in each hour of the chosen schedule.

They are the duals of the header and electric balances in the LP that remains when every
on/off and driver decision is held at the schedule (the continuous re-dispatch around it):
the price a planner would put on a process change too small to move any unit's status.
A header whose price is near zero is venting or letting down surplus; a price near the
boilers' fuel per tonne means the marginal steam comes from a boiler. A header's price is
for steam delivered to it; condensate the process sends back is credited at the deaerator,
not in this price.

References
----------
Bertsimas & Tsitsiklis, Introduction to Linear Optimization (1997), sec. 5.2 (dual prices as
the sensitivity of the optimal cost to the right-hand side).
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Callable

import numpy as np
import pandas as pd
import pyomo.environ as pyo

if TYPE_CHECKING:
    from .plant.schema import Penalties
    from .solve import LoadedModel


# a price this share of a penalty or more is the penalty's, reached through another
# header or hour (a letdown, a ramp limit), not a cost: steam at 5 000 per t or power at
# 50 000 per MWh (with the default penalties) is far beyond any fuel or market price
PENALTY_SHARE = 0.5
RESERVE_PART_MIN = 0.01  # [currency/t or /MWh] below it a reserve part is round-off


def set_by(m: pyo.ConcreteModel, val: Callable[[pyo.Var], float], balance: str, t: int,
           price: float | None = None, penalties: Penalties | None = None, reserve_part: float = 0.0) -> str:
    """What sets the price of ``balance`` (a header id or "power") in hour ``t``: "cost", or
    the penalty it carries ("shortfall penalty", "surplus penalty", "reserve penalty", or
    "penalty elsewhere": another header's or hour's, through a letdown or a ramp limit),
    when it is no cost of steam or power. ``val`` gives a variable's value in the schedule;
    with the hour's ``price`` and the site's ``penalties``, a price of the size of a penalty
    is named so even where this balance's own slacks are idle. A cost of which the steam
    reserve, held exactly, makes a part (``reserve_part`` [currency/t or /MWh], at least
    1 % of the price) is "reserve limit": the running boilers' spare rating just covers the
    largest, so more steam costs more than any unit's own cost."""
    short, surplus = (m.power_short[t], m.power_surplus[t]) if balance == "power" else \
        (m.steam_short[balance, t], m.steam_surplus[balance, t])
    if val(short) > 1e-6:
        return "shortfall penalty"
    if val(surplus) > 1e-6:
        return "surplus penalty"
    if price is not None and penalties is not None:
        # the least penalty that can price this balance: a steam shortfall or surplus (and,
        # a tenth of it, the reserve) for a header; for power, a tenth of its own
        worst = min(penalties.steam_shortfall, penalties.steam_surplus) if balance != "power" else \
            0.1 * min(penalties.power_shortfall, penalties.power_surplus)
        if abs(price) >= PENALTY_SHARE * worst:
            return "penalty elsewhere"
        if balance != "power" and abs(price) >= PENALTY_SHARE * penalties.reserve_shortfall:
            return "reserve penalty" if m.component("reserve") is not None else "penalty elsewhere"
    reserve = m.component("reserve_short")
    if reserve is not None and val(reserve[t]) > 1e-6:
        # power bought or sold between the grid's limits is priced by the grid, and a header
        # that vents by its vent, reserve or not
        if balance == "power" and any(_inside(v, val) for v in (m.grid.imp[t], m.grid.exp[t])):
            return "cost"
        if balance != "power" and any(
                blk.name.startswith("vent_") and getattr(blk.unit, "header", None) == balance
                and _inside(blk.flow[t], val) for blk in m.component_data_objects(pyo.Block, descend_into=False)):
            return "cost"
        return "reserve penalty"
    if price is not None and abs(reserve_part) > max(RESERVE_PART_MIN, 0.01 * abs(price)):
        return "reserve limit"
    return "cost"


def _inside(v: pyo.Var, val: Callable[[pyo.Var], float]) -> bool:
    """Whether ``v`` lies strictly between its bounds (a fixed one never does)."""
    if v.fixed:
        return False
    x, lo, hi = val(v), pyo.value(v.lb), pyo.value(v.ub)
    return (lo is None or x > lo + 1e-6) and (hi is None or x < hi - 1e-6)


def hourly_prices(lm: LoadedModel, x: np.ndarray, time_limit: float = 60.0) -> pd.DataFrame | None:
    """Marginal prices of the schedule ``x`` (column values of ``lm``), tidy: one row per hour
    and balance, columns ``time``, ``balance`` (a header id or ``power``), ``price`` and
    ``unit`` ([currency/t] for a header, [currency/MWh] for power), ``reserve_part`` (the part
    of the price the steam reserve makes where it is held exactly: the price less that of
    the same LP without the reserve rows, 0 where no reserve row binds) and ``set_by``
    (:func:`set_by`: "cost", "reserve limit", or the penalty that sets the price, which is
    then no cost of steam or power). None when the LP does not solve within ``time_limit``
    [s]. ``lm``'s bounds and integrality are left as they were (:meth:`LoadedModel._fixed_run`).

    A balance row 'terms - demand == 0' is loaded with its bounds at the demand, so the dual
    of the row is d(cost)/d(demand): the price of one more t/h (or MW) demanded.
    """
    sm = lm.sm
    m, hours = sm.model, sm.ctx.hours
    cmap = lm.opt._pyomo_con_to_solver_con_map
    rows = {(h.id, t): cmap.get(m.header_balance[h.id, t]) for h in sm.ctx.cfg.headers for t in hours}
    rows.update({("power", t): cmap.get(m.power_balance[t]) for t in hours})
    ints = lm.int_cols.tolist()
    lm._fixed_run(ints, np.round(x[lm.int_cols]).tolist(), time_limit, gap=None, keep_duals=True)
    dual = lm.fixed_duals
    if dual is None:
        return None
    cur = sm.ctx.cfg.site.currency
    time = sm.ctx.series.stamps

    def val(var) -> float:  # noqa: ANN001
        c = lm.col(var)
        return float(var.value or 0.0) if c is None else float(x[c])

    pen = sm.ctx.cfg.penalties
    part = _reserve_parts(lm, x, rows, dual, time_limit)
    out = [{"time": time[t], "balance": b, "price": (p := float(dual[r]) if r is not None else float("nan")),
            "unit": f"{cur}/MWh" if b == "power" else f"{cur}/t",
            "reserve_part": (q := part.get((b, t), 0.0)),
            "set_by": set_by(m, val, b, t, p if r is not None else None, pen, q)}
           for (b, t), r in rows.items()]
    return pd.DataFrame(out).sort_values(["time", "balance"], kind="stable").reset_index(drop=True)


def _reserve_parts(lm: LoadedModel, x: np.ndarray, rows: dict[tuple[str, int], int | None], dual: np.ndarray,
                   time_limit: float) -> dict[tuple[str, int], float]:
    """Per (balance, hour), the part of the price ``dual`` that the steam reserve makes: the
    price less that of the same fixed LP with every reserve row free (the rows of
    :mod:`cogendispatch.reserve` and the running-set rows added after the model's own).
    Empty when no reserve row binds (one LP saved) or that LP fails."""
    idx = lm.reserve_rows()
    if len(idx) == 0 or np.abs(dual[idx]).max() <= 1e-9:
        return {}
    free = lm.duals_with_rows_free(idx, x, time_limit)
    if free is None:
        return {}
    return {k: float(dual[r] - free[r]) for k, r in rows.items() if r is not None}
