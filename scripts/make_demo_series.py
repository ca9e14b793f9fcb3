"""Write the invented demo series for plant_configs/ (a week, or a year with --hours 8760).

The numbers are invented: daily swings in process steam and electric load, a time-of-use
power tariff (night / shoulder / weekday peak), a flat gas price with a small weekly drift.
Seeded, so the file is reproducible.
"""

from __future__ import annotations

import argparse

import numpy as np
import pandas as pd


def demo_series(start: str = "2027-01-04 00:00", hours: int = 168, seed: int = 7) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    t = pd.date_range(start, periods=hours, freq="h")
    hod = t.hour.to_numpy()
    dow = t.day_of_week.to_numpy()
    doy = t.day_of_year.to_numpy()
    day = np.sin(2 * np.pi * (hod - 9) / 24.0)  # peaks mid-afternoon
    season = np.cos(2 * np.pi * (doy - 15) / 365.0)  # winter high
    weekend = dow >= 5

    hp = 22 + 4 * day + 2 * season + rng.normal(0, 1.2, hours)
    mp = 62 + 8 * day + 6 * season - 5 * weekend + rng.normal(0, 2.5, hours)
    lp = 48 + 8 * day + 8 * season - 4 * weekend + rng.normal(0, 2.5, hours)
    load = 34 + 4 * day + 2 * season - 2.5 * weekend + rng.normal(0, 0.6, hours)

    peak = (~weekend) & (hod >= 8) & (hod < 20)
    night = (hod < 6) | (hod >= 22)
    imp = np.where(peak, 150.0, np.where(night, 55.0, 95.0)) * (1 + 0.1 * season)
    imp = imp + rng.normal(0, 3, hours)
    exp_ = imp - 30.0
    gas = 9.0 + 0.4 * np.sin(2 * np.pi * np.arange(hours) / (24 * 7 * 5)) + 0.8 * season
    return pd.DataFrame({
        "time": t.strftime("%Y-%m-%dT%H:%M"),
        "demand:HP [t/h]": hp.round(2),
        "demand:MP [t/h]": mp.round(2),
        "demand:LP [t/h]": lp.round(2),
        "load [MW]": load.round(3),
        "price:import [per MWh]": imp.round(2),
        "price:export [per MWh]": exp_.round(2),
        "price:fuel:NG [per GJ]": gas.round(3),
        "price:co2 [per t]": np.full(hours, 85.0),
    })


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("out")
    ap.add_argument("--start", default="2027-01-04 00:00")
    ap.add_argument("--hours", type=int, default=168)
    ap.add_argument("--seed", type=int, default=7)
    a = ap.parse_args()
    demo_series(a.start, a.hours, a.seed).to_csv(a.out, index=False)


if __name__ == "__main__":
    main()
