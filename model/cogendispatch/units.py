"""Quantities with units, converted once on load into the plant's internal SI units.

Internal units: pressure bar(a), temperature degC, mass flow t/h, power MW, energy GJ,
specific enthalpy kJ/kg, steam rate kg/kWh, emission factor t/GJ, time h. Prices are
numbers of the site's currency per internal unit (per GJ, per MWh, per t).

A value is written as a number followed by its unit, e.g. ``"42 bar(a)"``, ``"150 psig"``,
``"400 degC"``, ``"120 t/h"``, ``"850 kW"``; a price as ``"7.5 per GJ"`` or ``"7.5 /MMBtu"``.
Gauge pressures (``bar(g)``, ``barg``, ``psig``, ``kPa(g)``, ``MPa(g)``) are referred to the
standard atmosphere, 1.01325 bar (ISO 2533 / ICAO standard atmosphere), and so is a vacuum
(``inHg(vac)``, ``mmHg(vac)``, read down from it); plain ``kPa`` and ``MPa`` are absolute, as
in SI and the steam tables, while plain ``bar``, ``psi``, ``inHg`` and ``mmHg``, which plant
documents use both ways, are refused.
"""

from __future__ import annotations

import math
import re
from functools import lru_cache

import pint

STANDARD_ATMOSPHERE_BAR = 1.01325  # [bar] ISO 2533 standard atmosphere


class UnitError(ValueError):
    """A value has no unit, an unknown unit, or a unit of the wrong dimension."""


_ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
# the International Table Btu (1 Btu/lb = 2.326 kJ/kg exactly), which steam tables and fuel
# data use; pint's plain "Btu" is the ISO 1055.056 J
_ureg.define("MMBtu = 1e6 * Btu_it")
_ureg.define("MMBTU = MMBtu")
_ureg.define("klb = 1000 * pound")
# the US gas trade's dekatherm, ten US therms (about one MMBtu)
_ureg.define("Dth = 10 * US_therm")

# kind -> (internal unit, a description for messages)
KINDS: dict[str, tuple[str, str]] = {
    "pressure": ("bar", "a pressure such as '42 bar(a)', '40 bar(g)' or '600 psig'"),
    "temperature": ("degC", "a temperature such as '400 degC', '750 degF' or '673 K'"),
    "mass_flow": ("t/h", "a mass flow such as '120 t/h', '30 kg/s' or '250 klb/h'"),
    "power": ("MW", "a power such as '12 MW', '850 kW' or '1200 hp'"),
    "energy": ("GJ", "an energy such as '5 GJ' or '4.7 MMBtu'"),
    "specific_energy": ("kJ/kg", "a specific energy such as '150 kJ/kg' or '65 Btu/lb'"),
    "steam_rate": ("kg/kWh", "a steam rate such as '12 kg/kWh' or '26 lb/kWh'"),
    "emission_factor": ("t/GJ", "an emission factor such as '0.0561 t/GJ' or '53 kg/MMBtu'"),
    "power_per_flow": ("MWh/t", "power per unit flow such as '85 kWh/t' ('85 kW per t/h')"),
    "time": ("h", "a duration such as '4 h' or '30 min'"),
    "heat_rate": ("GJ/h", "a heat flow such as '150 GJ/h' or '140 MMBtu/h'"),
}

# kind -> (energy/mass/... unit the price is per, description)
PRICE_KINDS: dict[str, tuple[str, str]] = {
    "price_energy": ("GJ", "a price such as '7.5 per GJ' or '8 per MMBtu'"),
    "price_power": ("MWh", "a price such as '85 per MWh' or '0.085 per kWh'"),
    "price_mass": ("t", "a price such as '2.5 per t' or '1.1 per klb'"),
    "price_start": ("", "a cost per event such as '1500'"),
}

_NUMBER = r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?"
_VALUE_RE = re.compile(rf"^\s*({_NUMBER})\s*(.*?)\s*$")
_PRICE_RE = re.compile(rf"^\s*({_NUMBER})\s*(?:per\b|/)\s*(.+?)\s*$")

_GAUGE = {"bar(g)": "bar", "barg": "bar", "psig": "psi", "psi(g)": "psi", "kpa(g)": "kPa", "kpag": "kPa",
          "mpa(g)": "MPa", "mpag": "MPa"}
_ABS = {"bar(a)": "bar", "bara": "bar", "psia": "psi", "psi(a)": "psi", "kpa(a)": "kPa", "kpaa": "kPa",
        "mpa(a)": "MPa", "mpaa": "MPa", "inhg(a)": "inHg", "inhga": "inHg", "mmhg(a)": "mmHg", "mmhga": "mmHg"}
# plain kPa and MPa are taken as absolute, the SI convention (steam tables give MPa absolute)
# pressure units that trade use writes both as gauge and as absolute: refused without the marker
_AMBIGUOUS = {"bar": "12 bar(a)' or '11 bar(g)", "psi": "150 psig' or '165 psia", "mbar": "0.12 bar(a)",
              # condenser gauges read inches or mm of mercury of vacuum; tables give them absolute
              "inhg": "27.5 inHg(vac)' or '2.4 inHg(a)", "mmhg": "700 mmHg(vac)' or '60 mmHg(a)"}
# a vacuum: so far below the standard atmosphere
_VACUUM = {"inhg(vac)": "inHg", "inhgvac": "inHg", "inhgv": "inHg", "mmhg(vac)": "mmHg", "mmhgvac": "mmHg"}
_ALIASES = {"°c": "degC", "°f": "degF", "c": "degC", "f": "degF", "tph": "t/h", "klb/hr": "klb/h",
            "bhp": "hp"}  # brake horsepower on pump data sheets: the mechanical horsepower
_BTU_RE = re.compile(r"\bBtu\b", re.IGNORECASE)
# horsepower-hour written as one word in steam rates: "lb/hp-h", "lb/hph", "lb/hp-hr"
_HPH_RE = re.compile(r"\bhp[-·.]?hr?\b", re.IGNORECASE)
# apparent power: a generator's MVA is its MW over the power factor, which the model lacks
_VA_RE = re.compile(r"(?<![A-Za-z])[kM]?VA\b")
_KCAL_RE = re.compile(r"\b(k|M|G)?cal\b")  # the International Table calorie of fuel data, not the thermochemical
# "ton" is 0.907 t (short) in the US, 1.016 t (long) in old British data and often meant as
# the metric tonne: refused until the writer says which
_TON_RE = re.compile(r"\btons?\b", re.IGNORECASE)


# "M" before lb or Btu is a thousand in US trade use (the Roman numeral: 250 Mlb/h, MBtu/h;
# MMBtu a million) and a million (mega) in SI: refused until the writer says which
_ROMAN_M_RE = re.compile(r"(?<![A-Za-z])M(lbs?|btu)\b", re.IGNORECASE)


def _normalise_unit(unit: str) -> tuple[str, bool]:
    """Map trade spellings onto pint; return (pint unit, is_gauge)."""
    roman = _ROMAN_M_RE.search(unit)
    if roman and roman.group(0)[0] == "M":
        what = "lb" if roman.group(1).lower().startswith("lb") else "Btu"
        raise UnitError(f"'{unit}' is ambiguous ('M{roman.group(1)}' is a thousand {what} in US use, a "
                        f"million in SI); write " + ("'klb' for a thousand pounds" if what == "lb"
                                                     else "'kBtu' for a thousand Btu or 'MMBtu' for a million"))
    if _VA_RE.search(unit):
        raise UnitError(f"'{unit}' is an apparent power; write the real power in MW (MVA times the power "
                        "factor, e.g. '40 MVA' at 0.85 is '34 MW')")
    if _TON_RE.search(unit):
        raise UnitError(f"'{unit}' is ambiguous (short, long or metric ton); write 't' for the metric "
                        "tonne, or 'short_ton' or 'long_ton'")
    key = unit.strip().lower().replace(" ", "")
    if key in _GAUGE:
        return _GAUGE[key], True
    if key in _ABS:
        return _ABS[key], False
    if key in _VACUUM:
        return _VACUUM[key], True  # below the atmosphere: a negative gauge (see convert)
    if key in _ALIASES:
        return _ALIASES[key], False
    text = _HPH_RE.sub("(hp*h)", _BTU_RE.sub("Btu_it", unit.strip()))
    text = text.replace("/hr", "/h")
    return _KCAL_RE.sub(lambda m: f"{m.group(1) or ''}cal_it", text), False


@lru_cache(maxsize=1024)
def _factor(unit: str, target: str) -> tuple[float, float]:
    """Linear map (scale, offset) from ``unit`` to ``target``: y = scale * x + offset."""
    q0 = _ureg.Quantity(0.0, unit).to(target).magnitude
    q1 = _ureg.Quantity(1.0, unit).to(target).magnitude
    return q1 - q0, q0


def convert(value: float, unit: str, kind: str) -> float:
    """Convert a number in ``unit`` to the internal unit of ``kind``.

    Parameters
    ----------
    value : the number, in ``unit``
    unit : a unit string understood by pint or a trade spelling (psig, bar(g), t/h ...)
    kind : one of :data:`KINDS`

    Raises
    ------
    UnitError for an unknown unit or one of the wrong dimension.
    """
    target, desc = KINDS[kind]
    pint_unit, gauge = _normalise_unit(unit)
    if gauge and kind != "pressure":
        raise UnitError(f"'{unit}' is a gauge pressure unit; expected {desc}")
    key = unit.strip().lower().replace(" ", "")
    if kind == "pressure" and key in _AMBIGUOUS:
        # plant drawings use both; 1 bar of difference is about 25 degC of saturation at LP
        raise UnitError(f"'{unit}' does not say gauge or absolute; write e.g. '{_AMBIGUOUS[key]}'")
    try:
        scale, offset = _factor(pint_unit, target)
    except pint.errors.DimensionalityError:
        raise UnitError(f"'{unit}' is not {desc}") from None
    except (pint.errors.UndefinedUnitError, AttributeError, TypeError, ValueError, AssertionError):
        raise UnitError(f"unknown unit '{unit}'; expected {desc}") from None
    except Exception:  # pint raises assorted parser errors on malformed unit strings
        raise UnitError(f"unknown unit '{unit}'; expected {desc}") from None
    out = scale * value + offset
    if key in _VACUUM:  # a vacuum reads down from the atmosphere
        out = STANDARD_ATMOSPHERE_BAR - out
        if out <= 0:
            raise UnitError(f"'{value:g} {unit}' is more vacuum than the standard atmosphere holds "
                            f"({STANDARD_ATMOSPHERE_BAR / scale:.2f} {_VACUUM[key]})")
    elif gauge:
        out += STANDARD_ATMOSPHERE_BAR
    return out


def parse_quantity(text: object, kind: str) -> float:
    """Parse ``"<number> <unit>"`` into the internal unit of ``kind``.

    Parameters
    ----------
    text : the value as written in the site file, e.g. ``"150 psig"``
    kind : one of :data:`KINDS` or :data:`PRICE_KINDS`

    Returns
    -------
    The value in the internal unit (see the module docstring).

    Raises
    ------
    UnitError when the unit is missing, unknown or of the wrong dimension.
    """
    if kind in PRICE_KINDS:
        return parse_price(text, kind)
    desc = KINDS[kind][1]
    if isinstance(text, bool) or not isinstance(text, str):
        raise UnitError(f"{text!r} has no unit; write {desc}")
    m = _VALUE_RE.match(text)
    if not m:
        raise UnitError(f"'{text}' is not a number followed by a unit; write {desc}")
    number, unit = m.group(1), m.group(2)
    if not unit:
        raise UnitError(f"'{text}' has no unit; write {desc}")
    out = convert(float(number), unit, kind)
    if not math.isfinite(out):
        raise UnitError(f"'{text}' is not a finite number")
    return out


def parse_price(text: object, kind: str) -> float:
    """Parse a price ``"<number> per <unit>"`` into currency per internal unit.

    Parameters
    ----------
    text : e.g. ``"7.5 per GJ"``, ``"8 /MMBtu"``, ``"85 per MWh"``, ``"2 per t"``; for
        ``price_start`` a plain number (currency per start)
    kind : one of :data:`PRICE_KINDS`
    """
    per, desc = PRICE_KINDS[kind]
    if kind == "price_start":
        if isinstance(text, bool) or not isinstance(text, (int, float)):
            raise UnitError(f"{text!r} is not a number; write {desc}")
        return float(text)
    if isinstance(text, bool) or not isinstance(text, str):
        raise UnitError(f"{text!r} has no unit; write {desc}")
    m = _PRICE_RE.match(text)
    if not m:
        c = _CURRENCY_UNIT.match(text)
        if c:  # the site's own currency was taken off before: this is another one
            raise UnitError(f"'{text}' is in {c.group(2)}, not the site's currency (no exchange rate is "
                            f"applied); write {desc}")
        raise UnitError(f"'{text}' is not a price; write {desc}")
    return float(m.group(1)) / price_unit_factor(m.group(2), kind)


def price_unit_factor(unit: str, kind: str) -> float:
    """How many internal units one ``unit`` is (e.g. 1 MMBtu = 1.055 GJ) [-]."""
    per, desc = PRICE_KINDS[kind]
    pint_unit, _ = _normalise_unit(unit)
    try:
        return float(_ureg.Quantity(1.0, pint_unit).to(per).magnitude)
    except pint.errors.DimensionalityError:
        raise UnitError(f"'per {unit}' is not {desc}") from None
    except Exception:
        raise UnitError(f"unknown unit '{unit}'; expected {desc}") from None


# a price's unit that names a currency: "EUR/MWh", "180 EUR per MWh"
_CURRENCY_UNIT = re.compile(rf"^\s*((?:{_NUMBER})?)\s*([A-Z]{{3}})\s*(?:/|per\b)\s*(\S.*)$")


# a currency's sign, before or after the number ("$4.20/MMBtu", "4.20 $/MMBtu"), and the
# ISO 4217 codes written with it: the sign is read as the site's currency when that is one
# of them (no exchange rate is ever applied)
CURRENCY_SIGNS: dict[str, frozenset[str]] = {
    "$": frozenset({"USD", "CAD", "AUD", "NZD", "SGD", "HKD", "MXN", "CLP", "COP", "ARS"}),
    "€": frozenset({"EUR"}), "£": frozenset({"GBP"}), "¥": frozenset({"JPY", "CNY"}), "₹": frozenset({"INR"}),
}
_SIGN_RE = re.compile(rf"^\s*(?:([$€£¥₹])\s*({_NUMBER})|({_NUMBER})?\s*([$€£¥₹]))\s*(?=/|per\b)")


def _sign_to_code(text: str, currency: str) -> str:
    """``text`` with a currency sign in front of its price unit replaced by ``currency``
    when the sign is written for it; unchanged without a sign.

    Raises UnitError for a sign of another currency.
    """
    m = _SIGN_RE.match(text)
    if not m:
        return text
    sign, number = (m.group(1), m.group(2)) if m.group(1) else (m.group(4), m.group(3) or "")
    if currency not in CURRENCY_SIGNS[sign]:
        raise UnitError(f"'{text.strip()}' is in '{sign}', not the site's currency {currency} "
                        "(no exchange rate is applied)")
    return f"{number} {currency}{text[m.end():]}".strip()


def in_site_currency(text: str, currency: str) -> str:
    """``text`` (a price, "180 EUR/MWh", or a price unit, "EUR/MWh") with the site's own
    ``currency`` written as the file formats write it ("180 per MWh", "per MWh"); text
    naming no currency is returned as it is. The currency's sign may stand for its code
    ("$4.20/MMBtu" at a site in USD, :data:`CURRENCY_SIGNS`).

    Raises UnitError for another currency: no exchange rate is applied.
    """
    text = _sign_to_code(text, currency)
    m = _CURRENCY_UNIT.match(text)
    if not m:
        return text
    if m.group(2) != currency:
        raise UnitError(f"'{text.strip()}' is in {m.group(2)}, not the site's currency {currency} "
                        "(no exchange rate is applied)")
    return f"{m.group(1)} per {m.group(3)}".strip()


def column_factor(unit: str, kind: str) -> tuple[float, float]:
    """Scale and offset that take a series column in ``unit`` to the internal unit.

    For prices (``kind`` in :data:`PRICE_KINDS`) ``unit`` is written ``per MWh`` etc.
    """
    if kind in PRICE_KINDS:
        u = re.sub(r"^\s*(per\b|/)\s*", "", unit)
        return 1.0 / price_unit_factor(u, kind), 0.0
    return convert(1.0, unit, kind) - convert(0.0, unit, kind), convert(0.0, unit, kind)
