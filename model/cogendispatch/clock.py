"""The site's clock in output files.

A series may write its times with UTC offsets (``2027-03-28T03:00+02:00``). The model
matches hours in UTC, but a planner reads the schedule by the clock on the control-room
wall: every file and message gives an hour as the series wrote it, with its own offset, so
that 03:00+02:00 stays 03:00+02:00 and the two 02:00 hours of an autumn clock change stay
apart. A series without offsets is written as it came, naive.
"""

from __future__ import annotations

from collections.abc import Iterable
from datetime import timezone

import pandas as pd


def site_clock(utc: pd.DatetimeIndex, wall: pd.DatetimeIndex | None) -> pd.Index:
    """Each hour of ``utc`` on the site's clock: the wall-clock time ``wall`` with its UTC
    offset (``wall`` minus ``utc``); ``utc`` itself when the series gave no offsets. A
    ``DatetimeIndex`` with a fixed offset when every hour has the same, else an object
    ``Index`` of ``Timestamp`` (pandas holds one time zone per index)."""
    if wall is None:
        return utc
    offsets = wall - utc.tz_localize(None)
    if len(set(offsets)) <= 1:
        zone = timezone(offsets[0].to_pytimedelta()) if len(offsets) else timezone.utc
        return pd.DatetimeIndex(utc.tz_convert(zone), name=utc.name)
    return pd.Index([t.tz_convert(timezone(o.to_pytimedelta())) for t, o in zip(utc, offsets)],
                    dtype=object, name=utc.name)


def read_clock(values: Iterable[object]) -> pd.Index:
    """The ``time`` column of a file cogendispatch wrote, each hour with the offset it was
    written with (see :func:`site_clock`); naive times stay naive.

    Raises ValueError for a cell that is no time."""
    stamps = [pd.Timestamp(v) for v in values]
    if any(pd.isna(t) for t in stamps):
        raise ValueError("a time cell is empty")
    zones = {str(t.tzinfo) for t in stamps}
    if len(zones) <= 1:
        return pd.DatetimeIndex(stamps, name="time")
    return pd.Index(stamps, dtype=object, name="time")


def as_utc(index: pd.Index) -> pd.DatetimeIndex:
    """``index`` in UTC when its hours carry offsets, to match them with a series' ``time``;
    unchanged (naive) when they carry none."""
    stamps = list(index)
    if stamps and getattr(stamps[0], "tzinfo", None) is not None:
        return pd.DatetimeIndex([pd.Timestamp(t).tz_convert("UTC") for t in stamps])
    return pd.DatetimeIndex(stamps)


def hour_label(ts: pd.Timestamp) -> str:
    """An hour for a message: ``2027-10-31 02:00``, with ``+01:00`` after it when the series
    gave offsets (without, the two 02:00 hours of an autumn clock change read alike)."""
    return f"{ts:%Y-%m-%d %H:%M}" + (offset_text(ts) if ts.tzinfo is not None else "")


def offset_text(ts: pd.Timestamp) -> str:
    """The UTC offset of an hour with an offset, ISO style: ``+01:00``."""
    z = f"{ts:%z}"
    return f"{z[:3]}:{z[3:]}"
