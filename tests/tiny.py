"""Small sites built in code for tests whose optimum is known by reasoning."""

from __future__ import annotations

import copy
from typing import Any

import pandas as pd

from cogendispatch.plant.load import parse_site
from cogendispatch.plant.schema import SiteConfig
from cogendispatch.plant.series import Series, parse_series

BASE: dict[str, Any] = {
    "site": {"name": "tiny test site", "currency": "EUR"},
    "deaerator": {"pressure": "2 bar(a)", "heating_steam": "LP", "makeup_temperature": "20 degC",
                  "makeup_cost": "0.5 per t", "process_condensate_return": 0.5,
                  "condensate_temperature": "80 degC"},
    "grid": {"max_import": "50 MW", "max_export": "0 MW"},
    "reserve": {"enabled": False},
    "header": [
        {"id": "HP", "pressure": "40 bar(a)", "temperature": "400 degC"},
        {"id": "LP", "pressure": "5 bar(a)", "temperature": "180 degC"},
    ],
    "fuel": [{"id": "NG", "price": "10 per GJ", "co2_factor": "0.056 t/GJ"}],
    "boiler": [
        {"id": "B1", "header": "HP", "fuels": ["NG"], "max_steam": "100 t/h", "min_steam": "10 t/h",
         "efficiency_curve": {"load": [0.1, 1.0], "efficiency": [0.85, 0.85]}, "initial_on": True},
    ],
    "letdown": [{"id": "LD", "from": "HP", "to": "LP", "max_flow": "100 t/h"}],
    "vent": [{"id": "V", "header": "LP", "max_flow": "100 t/h", "cost": "1 per t"}],
}


def site(**changes: Any) -> SiteConfig:
    """The base tiny site with top-level tables replaced or added."""
    raw = copy.deepcopy(BASE)
    for k, v in changes.items():
        if v is None:
            raw.pop(k, None)
        else:
            raw[k] = v
    return parse_site(raw, "<tiny>")


def series(cfg: SiteConfig, hours: int, **cols: Any) -> Series:
    """Hourly series: ``demand_LP=[...]`` -> 'demand:LP [t/h]', ``load``, ``price_import`` ..."""
    names = {"load": "load [MW]", "price_import": "price:import [per MWh]",
             "price_export": "price:export [per MWh]", "price_co2": "price:co2 [per t]"}
    data: dict[str, list[str]] = {"time": [str(t) for t in pd.date_range("2027-03-01", periods=hours, freq="h")]}
    for h in cfg.headers:  # the series needs every header's demand column
        cols.setdefault(f"demand_{h.id}", 0.0)
    cols.setdefault("load", 5.0)
    cols.setdefault("price_import", 100.0)
    for k, v in cols.items():
        name = f"demand:{k[7:]} [t/h]" if k.startswith("demand_") else names[k]
        vals = v if isinstance(v, (list, tuple)) else [v] * hours
        data[name] = [str(x) for x in vals]
    return parse_series(pd.DataFrame(data), cfg, "<tiny series>")
