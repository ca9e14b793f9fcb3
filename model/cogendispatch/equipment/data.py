"""Hourly data as the model sees them: plain numbers, or Pyomo mutable parameters.

A weekly plan is built once and solved once, so its hourly demands, loads, duties and prices
enter the model as numbers. A budget study solves window after window of the same shape;
there the same data enter as mutable parameters (``mutable=True``), so that the next window
overwrites their values in the model already loaded into HiGHS instead of building a new
one (see :mod:`cogendispatch.reuse`). Equipment blocks ask this object for every hourly
value and never read the series themselves, so both builds share one code path.
"""

from __future__ import annotations

import numpy as np
import pyomo.environ as pyo

from ..plant.schema import SiteConfig
from ..plant.series import Series

Value = float | pyo.Param  # a number, or an indexed mutable parameter's entry


class WindowData:
    """Hourly demands [t/h], site load and duties [MW], prices and returned condensate.

    Parameters
    ----------
    m : the model the parameters are added to (``mutable=True`` only)
    cfg : the site (header, fuel and drive ids; the deaerator's condensate return share)
    series : the hours of the window
    mutable : parameters instead of numbers
    """

    def __init__(self, m: pyo.ConcreteModel, cfg: SiteConfig, series: Series, mutable: bool) -> None:
        self.mutable = mutable
        self.headers = [h.id for h in cfg.headers]
        self.fuels = [f.id for f in cfg.fuels]
        self.drives = [d.id for d in cfg.drives]
        self.return_share = cfg.deaerator.process_condensate_return
        self._arrays(series)
        if mutable:
            T = m.T
            m.data_demand = pyo.Param(self.headers, T, mutable=True, initialize=0.0)
            m.data_load = pyo.Param(T, mutable=True, initialize=0.0)
            m.data_duty = pyo.Param(self.drives, T, mutable=True, initialize=0.0)
            m.data_import = pyo.Param(T, mutable=True, initialize=0.0)
            m.data_export = pyo.Param(T, mutable=True, initialize=0.0)
            m.data_fuel = pyo.Param(self.fuels, T, mutable=True, initialize=0.0)
            m.data_co2 = pyo.Param(T, mutable=True, initialize=0.0)
            m.data_return = pyo.Param(T, mutable=True, initialize=0.0)
            self.m = m
            self._store()

    def _arrays(self, s: Series) -> None:
        self.a_demand = {h: s.demand[h].to_numpy(dtype=float) for h in self.headers}
        self.a_load = s.load.to_numpy(dtype=float)
        self.a_duty = {d: s.duty[d].to_numpy(dtype=float) for d in self.drives}
        self.a_import = s.price_import.to_numpy(dtype=float)
        self.a_export = s.price_export.to_numpy(dtype=float)
        self.a_fuel = {f: s.fuel_price[f].to_numpy(dtype=float) for f in self.fuels}
        self.a_co2 = s.co2_price.to_numpy(dtype=float)
        # process condensate returned to the deaerator [t/h]: a share of the steam consumed
        self.a_return = self.return_share * s.demand.clip(lower=0.0).sum(axis=1).to_numpy(dtype=float)

    def _store(self) -> None:
        m = self.m
        for t in m.T:
            for h in self.headers:
                m.data_demand[h, t] = self.a_demand[h][t]
            for d in self.drives:
                m.data_duty[d, t] = self.a_duty[d][t]
            for f in self.fuels:
                m.data_fuel[f, t] = self.a_fuel[f][t]
            m.data_load[t] = self.a_load[t]
            m.data_import[t] = self.a_import[t]
            m.data_export[t] = self.a_export[t]
            m.data_co2[t] = self.a_co2[t]
            m.data_return[t] = self.a_return[t]

    def set_series(self, s: Series) -> None:
        """Overwrite every parameter with the hours of ``s`` (same length; mutable builds)."""
        if not self.mutable:
            raise ValueError("a model built with numbers cannot take new data; build it with mutable=True")
        if s.hours != len(self.a_load):
            raise ValueError(f"window of {s.hours} h given to a model of {len(self.a_load)} h")
        self._arrays(s)
        self._store()

    # -- what the blocks ask for ------------------------------------------------------------
    def _pick(self, name: str, t: int, key: str | None = None) -> Value:
        """The parameter ``data_<name>`` (mutable builds) or the number from ``a_<name>``."""
        if self.mutable:
            param = getattr(self.m, f"data_{name}")
            return param[key, t] if key is not None else param[t]
        arr = getattr(self, f"a_{name}")
        return float((arr[key] if key is not None else arr)[t])

    def demand(self, header: str, t: int) -> Value:
        """Process steam demand [t/h] (negative: process waste-heat boilers export)."""
        return self._pick("demand", t, header)

    def load(self, t: int) -> Value:
        """Site electric load [MW]."""
        return self._pick("load", t)

    def duty(self, drive: str, t: int) -> Value:
        """Shaft power of one machine of a drive [MW]."""
        return self._pick("duty", t, drive)

    def price_import(self, t: int) -> Value:
        """[currency/MWh]"""
        return self._pick("import", t)

    def price_export(self, t: int) -> Value:
        """[currency/MWh]"""
        return self._pick("export", t)

    def fuel_price(self, fuel: str, t: int) -> Value:
        """[currency/GJ]"""
        return self._pick("fuel", t, fuel)

    def co2_price(self, t: int) -> Value:
        """[currency/t CO2]"""
        return self._pick("co2", t)

    def condensate_return(self, t: int) -> Value:
        """Process condensate returned to the deaerator [t/h]."""
        return self._pick("return", t)

    def any_demand(self, header: str) -> bool:
        """Whether the header's demand term is needed (always, in a mutable build)."""
        return self.mutable or bool(np.any(self.a_demand[header] != 0))
