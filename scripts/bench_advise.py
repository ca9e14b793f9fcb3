"""Time one-hour shift advice (marginal prices + full driver table) on the demo site."""

from __future__ import annotations

import argparse
import time

from cogendispatch.decisions import advise
from cogendispatch.plant.load import load_site
from cogendispatch.plant.series import load_series


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--site", default="plant_configs/saltmarsh_refinery.toml")
    ap.add_argument("--series", default="plant_configs/saltmarsh_week.csv")
    ap.add_argument("--at", nargs="*", default=["2027-01-04T03:00", "2027-01-05T10:00", "2027-01-09T18:00"])
    ap.add_argument("--threads", type=int, default=2, help="as cogen advise --threads (default 2)")
    a = ap.parse_args()
    cfg = load_site(a.site)
    series = load_series(a.series, cfg)
    for at in a.at:
        t0 = time.perf_counter()
        adv = advise(cfg, series, at, a.series, threads=a.threads)
        wall = time.perf_counter() - t0
        flips = adv.drivers["flip_import_price"].notna().sum()
        print(f"advice at {at}, {a.threads} thread(s): {wall:.2f} s (target 2 s), {len(adv.drivers)} machines, "
              f"{flips} with a flip price in range")


if __name__ == "__main__":
    main()
