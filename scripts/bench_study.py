"""Time a budget study on the demo site: per-window build and solve seconds, scenarios in
parallel, and how the time grows with the horizon (weeks of the series repeated)."""

from __future__ import annotations

import argparse
import resource
import time

import numpy as np
import pandas as pd

from cogendispatch.plant.load import load_site
from cogendispatch.plant.series import parse_series
from cogendispatch.solve import SolveOptions
from cogendispatch.studies import PreparedScenario, run_study


def year_like(path: str, weeks: int, hours: int | None = None) -> pd.DataFrame:
    """The demo week repeated ``weeks`` times with fresh timestamps (benchmark data only),
    cut or extended (repeating again) to ``hours`` when given."""
    wk = pd.read_csv(path)
    n = hours or weeks * len(wk)
    df = pd.concat([wk] * -(-n // len(wk)), ignore_index=True).iloc[:n]
    df["time"] = pd.date_range(wk["time"].iloc[0], periods=len(df), freq="h").strftime("%Y-%m-%dT%H:%M")
    return df


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--site", default="plant_configs/saltmarsh_refinery.toml")
    ap.add_argument("--series", default="plant_configs/saltmarsh_week.csv")
    ap.add_argument("--weeks", type=int, default=2)
    ap.add_argument("--scenarios", type=int, default=2)
    ap.add_argument("--time-limit", type=float, default=1.5, help="per window [s], as cogen study")
    ap.add_argument("--gap", type=float, default=0.005, help="as cogen study")
    a = ap.parse_args()
    cfg = load_site(a.site)
    opts = SolveOptions(gap=a.gap, time_limit=a.time_limit)
    timings = {}
    for weeks in sorted({1, a.weeks}):
        # 52 weeks stand for a year: 8760 h, the last window a single day
        ser = parse_series(year_like(a.series, weeks, 8760 if weeks == 52 else None).astype(str), cfg, "bench")
        scen = [PreparedScenario(f"s{k}", ser.window(0, ser.hours), ()) for k in range(a.scenarios)]
        t0 = time.perf_counter()
        res = run_study(cfg, scen, opts)
        timings[weeks] = time.perf_counter() - t0
        w = res[0].windows
        warm = [x for x in w if x.reused]
        new = [x for x in w if not x.reused]
        cost = [float(r.hourly_cost.to_numpy().sum()) for r in res]
        print(f"{weeks} week(s) ({ser.hours} h) x {a.scenarios} scenario(s): {timings[weeks]:.1f} s wall; "
              f"{len(warm)} of {len(w)} windows re-used a model")
        if warm:
            print(f"  re-used model: data update {np.mean([x.build_s for x in warm]):.2f} s, "
                  f"solve {np.mean([x.solve_s for x in warm]):.2f} s per window")
        print(f"  new model: build + load {np.mean([x.build_s for x in new]):.2f} s, "
              f"solve {np.mean([x.solve_s for x in new]):.2f} s per window ({len(new)} windows)")
        gaps = [x.gap for x in w if x.gap is not None and x.gap < 0.05]
        print(f"  windows whose search proved a gap below 5 %: {len(gaps)} of {len(w)}"
              + (f", largest {100 * max(gaps):.2f} %" if gaps else ""))
        print(f"  cost per scenario: {', '.join(f'{c:,.0f}' for c in cost)}; per 168 h {cost[0] / ser.hours * 168:,.0f}")
    if len(timings) > 1:
        print(f"time({a.weeks} weeks) / time(1 week) = {timings[a.weeks] / timings[1]:.1f} (linear would be {a.weeks})")
    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    kids = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024
    print(f"peak memory: main {rss:.0f} MB, largest worker {kids:.0f} MB")


if __name__ == "__main__":
    main()
