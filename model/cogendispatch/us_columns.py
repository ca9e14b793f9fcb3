"""Tables shown in US customary units: columns renamed and scaled by their unit suffix.

The files stay in the SI of the model (t/h, GJ, bar(a), degC, kJ/kg); this is for a table
a planner reads on the terminal beside US data sheets (``cogen inspect --units us``). The
factors come from :func:`cogendispatch.units.convert` (pint; the International Table Btu,
1 Btu/lb = 2.326 kJ/kg exactly, NIST SP 811 App. B), not from constants written here.
Ratios (t/t), power (kW, MW) and CO2 tonnes are left as they are.
"""

from __future__ import annotations

import re
from functools import lru_cache

import pandas as pd

from .units import convert


@lru_cache(maxsize=1)
def _rules() -> list[tuple[re.Pattern[str], str, float, float]]:
    """(suffix pattern, replacement, scale, offset): SI value x scale + offset = US value.
    Longer suffixes first, as ``_kJ_kgK`` also ends like ``_kg...``."""
    klb = 1.0 / convert(1.0, "klb/h", "mass_flow")  # [klb per t]
    mmbtu = 1.0 / convert(1.0, "MMBtu", "energy")  # [MMBtu per GJ]
    btu_lb = 1.0 / convert(1.0, "Btu/lb", "specific_energy")  # [Btu/lb per kJ/kg]
    psia = 1.0 / convert(1.0, "psia", "pressure")  # [psia per bar(a)]
    return [
        (re.compile(r"_kJ_kgK$"), "_Btu_lbR", btu_lb / 1.8, 0.0),  # a kelvin is 1.8 degR
        (re.compile(r"_kJ_kg$"), "_Btu_lb", btu_lb, 0.0),
        (re.compile(r"_GJ_per_t$"), "_MMBtu_per_klb", mmbtu / klb, 0.0),
        (re.compile(r"_per_t_h$"), "_per_klb_h", 1.0 / klb, 0.0),
        (re.compile(r"_t_h(?=$|_per_machine$|_at_capacity$)"), "_klb_h", klb, 0.0),
        (re.compile(r"_kg_kWh$"), "_lb_kWh", klb, 0.0),  # lb per kg = klb per t
        (re.compile(r"_bar_a$"), "_psia", psia, 0.0),
        (re.compile(r"(temperature|_T)_C$"), r"\1_F", 1.8, 32.0),
        (re.compile(r"^superheat_K$"), "superheat_F", 1.8, 0.0),  # a difference: degF, no offset
        (re.compile(r"_GJ_h$"), "_MMBtu_h", mmbtu, 0.0),
        (re.compile(r"_t_GJ$"), "_t_MMBtu", 1.0 / mmbtu, 0.0),  # CO2 t per MMBtu (metric tonnes)
        (re.compile(r"_([A-Z]{3})_GJ$"), r"_\1_MMBtu", 1.0 / mmbtu, 0.0),  # a price per GJ
        (re.compile(r"_([A-Z]{3})_t$"), r"_\1_klb", 1.0 / klb, 0.0),  # a price per t
    ]


def in_us_units(df: pd.DataFrame) -> pd.DataFrame:
    """``df`` with each column whose name ends in an SI unit renamed and scaled to US
    customary units (e.g. ``max_flow_t_h`` [t/h] -> ``max_flow_klb_h`` [klb/h],
    ``enthalpy_kJ_kg`` -> ``enthalpy_Btu_lb``, ``pressure_bar_a`` -> ``pressure_psia``,
    ``temperature_C`` -> ``temperature_F``); text cells are left as they are."""
    out = {}
    for col in df.columns:
        name, values = str(col), df[col]
        for pattern, repl, scale, offset in _rules():
            if pattern.search(name):
                num = pd.to_numeric(values, errors="coerce")
                values = values.where(num.isna(), num * scale + offset)
                name = pattern.sub(repl, name)
                break
        out[name] = values
    return pd.DataFrame(out, index=df.index)
