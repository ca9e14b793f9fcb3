"""Charts as inline SVG strings (matplotlib, Agg backend, text kept as text)."""

from __future__ import annotations

import io
import re

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402

plt.rcParams.update({
    "svg.fonttype": "none", "font.size": 9, "axes.spines.top": False, "axes.spines.right": False,
    "axes.grid": True, "grid.color": "#dfe3e8", "grid.linewidth": 0.6, "legend.frameon": False,
    # clip-path ids from the content, not at random: a rebuilt page is the same file
    "svg.hashsalt": "cogendispatch",
})
# our own palette: deep teal, ochre, slate, brick, moss, plum, sand, steel
PALETTE = ["#1f6f78", "#d19a2e", "#5b6770", "#b5523b", "#6a8d3a", "#7d4e7e", "#c9b27c", "#4a7fb0",
           "#2f9e8f", "#e0b85c", "#8c99a3", "#d27a63"]


def _svg(fig: plt.Figure) -> str:
    buf = io.StringIO()
    fig.savefig(buf, format="svg", bbox_inches="tight")
    plt.close(fig)
    text = buf.getvalue()
    text = re.sub(r"<metadata>.*?</metadata>", "", text[text.index("<svg"):], flags=re.S)
    return text


def stacked_balance(frame: pd.DataFrame, demand: pd.Series | None, title: str, ylabel: str,
                    line_label: str = "process demand") -> str:
    """Sources stacked above zero, sinks below, with the demand drawn as a line.

    frame : columns = terms, rows = hours, signed (+ into the balance, - out of it)
    """
    fig, ax = plt.subplots(figsize=(9.5, 3.2))
    x = np.arange(len(frame))
    pos = frame.clip(lower=0.0)
    neg = frame.clip(upper=0.0)
    pos = pos.loc[:, pos.abs().sum() > 1e-9]
    neg = neg.loc[:, neg.abs().sum() > 1e-9]
    k = 0
    if not pos.empty:
        ax.stackplot(x, pos.T.to_numpy(), labels=list(pos.columns),
                     colors=[PALETTE[(k + i) % len(PALETTE)] for i in range(pos.shape[1])], alpha=0.9)
        k += pos.shape[1]
    if not neg.empty:
        ax.stackplot(x, neg.T.to_numpy(), labels=list(neg.columns),
                     colors=[PALETTE[(k + i) % len(PALETTE)] for i in range(neg.shape[1])], alpha=0.55)
    if demand is not None:
        ax.plot(x, demand.to_numpy(), color="#111111", lw=1.2, label=line_label)
    ax.axhline(0, color="#333333", lw=0.6)
    _time_axis(ax, frame.index)
    ax.set_title(title, loc="left")
    ax.set_ylabel(ylabel)
    ax.legend(loc="upper left", bbox_to_anchor=(1.0, 1.0), fontsize=7)
    return _svg(fig)


def lines(frame: pd.DataFrame, title: str, ylabel: str, step: bool = False) -> str:
    """One line chart of the frame's columns by hour, as inline SVG text for the report."""
    fig, ax = plt.subplots(figsize=(9.5, 2.8))
    x = np.arange(len(frame))
    for i, c in enumerate(frame.columns):
        style = {"color": PALETTE[i % len(PALETTE)], "lw": 1.2, "label": str(c)}
        if step:
            ax.step(x, frame[c].to_numpy(), where="post", **style)
        else:
            ax.plot(x, frame[c].to_numpy(), **style)
    _time_axis(ax, frame.index)
    ax.set_title(title, loc="left")
    ax.set_ylabel(ylabel)
    ax.legend(loc="upper left", bbox_to_anchor=(1.0, 1.0), fontsize=7)
    return _svg(fig)


def stacked_bars(frame: pd.DataFrame, title: str, ylabel: str, horizontal: bool = False) -> str:
    """rows = groups (days, scenarios, machines), columns = stacked parts."""
    fig, ax = plt.subplots(figsize=(9.5, max(2.6, 0.35 * len(frame) + 1.0) if horizontal else 3.0))
    idx = np.arange(len(frame))
    base_pos = np.zeros(len(frame))
    base_neg = np.zeros(len(frame))
    for i, c in enumerate(frame.columns):
        v = frame[c].to_numpy(dtype=float)
        bottom = np.where(v >= 0, base_pos, base_neg)
        col = PALETTE[i % len(PALETTE)]
        if horizontal:
            ax.barh(idx, v, left=bottom, color=col, label=str(c))
        else:
            ax.bar(idx, v, bottom=bottom, color=col, label=str(c))
        base_pos += np.where(v >= 0, v, 0)
        base_neg += np.where(v < 0, v, 0)
    labels = [str(i) for i in frame.index]
    if horizontal:
        ax.set_yticks(idx, labels)
        ax.set_xlabel(ylabel)
    else:
        ax.set_xticks(idx, labels, rotation=30 if len(labels) > 6 else 0, ha="right" if len(labels) > 6 else "center")
        ax.set_ylabel(ylabel)
    ax.set_title(title, loc="left")
    ax.legend(loc="upper left", bbox_to_anchor=(1.0, 1.0), fontsize=7)
    return _svg(fig)


def grouped_bars(frame: pd.DataFrame, title: str, ylabel: str, horizontal: bool = False) -> str:
    """rows = groups (months, machines), columns = bars side by side (scenarios): for
    quantities that add up within a bar but not across scenarios."""
    n, k = frame.shape
    fig, ax = plt.subplots(figsize=(9.5, max(2.6, 0.3 * n * max(1, k) / 2 + 1.0) if horizontal else 3.0))
    idx = np.arange(n)
    width = 0.8 / max(1, k)
    for i, c in enumerate(frame.columns):
        pos = idx - 0.4 + width * (i + 0.5)
        v = frame[c].to_numpy(dtype=float)
        if horizontal:
            ax.barh(pos, v, height=width, color=PALETTE[i % len(PALETTE)], label=str(c))
        else:
            ax.bar(pos, v, width=width, color=PALETTE[i % len(PALETTE)], label=str(c))
    labels = [str(i) for i in frame.index]
    if horizontal:
        ax.set_yticks(idx, labels)
        ax.set_xlabel(ylabel)
    else:
        ax.set_xticks(idx, labels)
        ax.set_ylabel(ylabel)
    ax.set_title(title, loc="left")
    ax.legend(loc="upper left", bbox_to_anchor=(1.0, 1.0), fontsize=7)
    return _svg(fig)


def time_ticks(index: pd.Index) -> tuple[list[int], list[str]]:
    """Rows of an hourly ``index`` to mark on a time axis, and their labels: the site's
    midnights (more than 48 h), else every few hours on the clock. By each hour's own wall
    clock, so that across a clock change the days stay days (a day of 23 or 25 rows) and
    the repeated hour is marked once."""
    n = len(index)
    stamps = [pd.Timestamp(t) for t in index]
    step = 24 if n > 48 else max(1, n // 8)  # [h]
    ticks = [k for k, t in enumerate(stamps)
             if t.hour % step == 0 and (k == 0 or stamps[k - 1].hour != t.hour)]
    if not ticks:  # fewer rows than the step from the first marked hour: every step-th row
        ticks = list(range(0, n, step))
    return ticks, [stamps[t].strftime("%a %d %b" if n > 48 else "%d %b %H:%M") for t in ticks]


def _time_axis(ax: plt.Axes, index: pd.Index) -> None:
    n = len(index)
    ticks, labels = time_ticks(index)
    ax.set_xticks(ticks, labels, rotation=0)
    ax.set_xlim(0, max(1, n - 1))
    ax.set_xlabel("time [h]")
