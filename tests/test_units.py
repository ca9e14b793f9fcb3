"""Checks of cogendispatch.units: parse_quantity, parse_price, column_factor.

Internal units: pressure bar(a), temperature degC, mass flow t/h, power MW, energy GJ;
prices per GJ, per MWh, per t.
"""

from __future__ import annotations

import pytest

from cogendispatch.units import UnitError, column_factor, parse_price, parse_quantity

# --- conversion constants, each with its source ---------------------------------------
ATM_BAR = 1.01325  # [bar] standard atmosphere, 101 325 Pa (ISO 2533:1975; exact)
LB_KG = 0.45359237  # [kg] international avoirdupois pound (NIST SP 811, App. B; exact)
G_N = 9.80665  # [m/s2] standard acceleration of gravity (NIST SP 811 / 3rd CGPM 1901; exact)
INCH_M = 0.0254  # [m] (NIST SP 811, App. B; exact)
FOOT_M = 0.3048  # [m] (NIST SP 811, App. B; exact)
PSI_BAR = LB_KG * G_N / INCH_M**2 / 1e5  # lbf/in2 = 6894.757 Pa (NIST SP 811, App. B)
HP_W = 550.0 * FOOT_M * LB_KG * G_N  # 550 ft lbf/s = 745.69987 W (NIST SP 811, App. B)
# [J] British thermal unit, International Table: 1 Btu_IT/lb = 2.326 kJ/kg exactly, so
# 1 Btu_IT = 1055.05585262 J (NIST SP 811, App. B, which rounds it to 1.055 056 E+03 J)
BTU_J = 2326.0 * LB_KG
INHG_PA = 3386.389  # [Pa] conventional inch of mercury (NIST SP 811, App. B.8: 3.386 389 E+03 Pa)
MMHG_PA = 133.3224  # [Pa] conventional millimetre of mercury (NIST SP 811, App. B.8: 1.333 224 E+02 Pa)
US_THERM_J = 1.054804e8  # [J] therm (U.S.) (NIST SP 811, App. B.8: 1.054 804 E+08 J)

REL = 1e-9


def P(text):
    return parse_quantity(text, "pressure")


# --- pressure ---------------------------------------------------------------------------


def test_constants_sanity():
    assert PSI_BAR * 1e5 == pytest.approx(6894.757, rel=1e-7)  # NIST SP 811: 6.894 757 E+03 Pa
    assert HP_W == pytest.approx(745.69987, rel=1e-7)  # NIST SP 811: 7.456 999 E+02 W


@pytest.mark.parametrize(
    "text, expected",
    [
        ("42 bar(a)", 42.0),
        ("42 bara", 42.0),
        ("40 bar(g)", 40.0 + ATM_BAR),  # gauge + standard atmosphere (ISO 2533)
        ("40 barg", 40.0 + ATM_BAR),  # gauge + standard atmosphere (ISO 2533)
        ("0 bar(g)", ATM_BAR),  # ISO 2533
        ("-0.5 bar(g)", ATM_BAR - 0.5),  # vacuum below atmosphere
        ("150 psig", 150.0 * PSI_BAR + ATM_BAR),  # NIST SP 811 psi; ISO 2533 atmosphere
        ("150 PSIG", 150.0 * PSI_BAR + ATM_BAR),
        ("0 psig", ATM_BAR),  # ISO 2533
        ("150 psia", 150.0 * PSI_BAR),  # NIST SP 811 psi
        ("14.6959487755 psia", ATM_BAR),  # 1 atm in psi (ISO 2533 / NIST SP 811)
        ("101.325 kPa", ATM_BAR),  # ISO 2533
        ("500 kPa(g)", 5.0 + ATM_BAR),  # ISO 2533
        ("4.2 MPa", 42.0),  # SI: 1 MPa = 10 bar
        ("4.2 MPa(a)", 42.0),
        ("4 MPa(g)", 40.0 + ATM_BAR),  # ISO 2533
        ("150 psi(g)", 150.0 * PSI_BAR + ATM_BAR),  # NIST SP 811 psi; ISO 2533 atmosphere
        ("150 psi(a)", 150.0 * PSI_BAR),
        ("1e2 bar(a)", 100.0),
        (" 7.5bar(a) ", 7.5),
    ],
)
def test_pressure(text, expected):
    assert P(text) == pytest.approx(expected, rel=REL)


@pytest.mark.parametrize(
    "text, expected",
    [
        # a condenser's vacuum reads down from the standard atmosphere (ISO 2533); inHg and
        # mmHg conventional (NIST SP 811, given there to 7 digits)
        ("27.5 inHg(vac)", ATM_BAR - 27.5 * INHG_PA / 1e5),
        ("27.5 inHg vac", ATM_BAR - 27.5 * INHG_PA / 1e5),
        ("2.4 inHg(a)", 2.4 * INHG_PA / 1e5),
        ("700 mmHg(vac)", ATM_BAR - 700 * MMHG_PA / 1e5),
        ("60 mmHg(a)", 60 * MMHG_PA / 1e5),
    ],
)
def test_vacuum_and_mercury_columns(text, expected):
    assert P(text) == pytest.approx(expected, rel=2e-6)


def test_psi_value():
    # 150 psig = 11.3554 bar(a): 150 x 0.0689476 bar (NIST SP 811) + 1.01325 (ISO 2533)
    assert P("150 psig") == pytest.approx(11.355386, abs=1e-6)


# --- temperature ------------------------------------------------------------------------


@pytest.mark.parametrize(
    "text, expected",
    [
        ("400 degC", 400.0),
        ("400 °C", 400.0),
        ("400 C", 400.0),
        ("673.15 K", 400.0),  # T/degC = T/K - 273.15 (SI Brochure / NIST SP 811)
        ("273.15 K", 0.0),
        ("32 degF", 0.0),  # degF: T/degC = (T/degF - 32)/1.8 (NIST SP 811, App. B)
        ("212 degF", 100.0),
        ("212 °F", 100.0),
        ("-40 degF", -40.0),
        ("750 degF", (750.0 - 32.0) / 1.8),
    ],
)
def test_temperature(text, expected):
    assert parse_quantity(text, "temperature") == pytest.approx(expected, rel=REL, abs=1e-9)


# --- mass flow --------------------------------------------------------------------------


@pytest.mark.parametrize(
    "text, expected",
    [
        ("120 t/h", 120.0),
        ("120 tph", 120.0),
        ("1 kg/s", 3.6),  # 3600 s/h / 1000 kg/t
        ("30 kg/s", 108.0),
        ("250 klb/h", 250.0 * LB_KG),  # 1 lb = 0.45359237 kg (NIST SP 811; exact)
        ("250 klb/hr", 250.0 * LB_KG),
        ("1000 kg/h", 1.0),
    ],
)
def test_mass_flow(text, expected):
    assert parse_quantity(text, "mass_flow") == pytest.approx(expected, rel=REL)


# --- power and energy -------------------------------------------------------------------


@pytest.mark.parametrize(
    "text, expected",
    [
        ("12 MW", 12.0),
        ("850 kW", 0.85),
        ("1000 hp", 1000.0 * HP_W / 1e6),  # mechanical hp, 745.69987 W (NIST SP 811)
        ("1000 bhp", 1000.0 * HP_W / 1e6),  # brake horsepower: shaft power in mechanical hp
    ],
)
def test_power(text, expected):
    assert parse_quantity(text, "power") == pytest.approx(expected, rel=REL)


@pytest.mark.parametrize(
    "text, expected",
    [
        ("5 GJ", 5.0),
        ("5000 MJ", 5.0),
        ("1 MMBtu", BTU_J * 1e6 / 1e9),  # Btu_IT (NIST SP 811)
        ("4.7 MMBtu", 4.7 * BTU_J * 1e-3),
    ],
)
def test_energy(text, expected):
    assert parse_quantity(text, "energy") == pytest.approx(expected, rel=REL)


def test_other_kinds():
    # 1 Btu/lb = 2.326 kJ/kg exactly (IT Btu, NIST SP 811; pint's own "Btu" is the ISO
    # 1055.056 J, which would give 2.3260003)
    assert parse_quantity("1 Btu/lb", "specific_energy") == pytest.approx(2.326, rel=1e-12)
    # 1 kcal_IT/kg = 4.1868 kJ/kg (IT calorie, NIST SP 811; the thermochemical is 4.184)
    assert parse_quantity("1 kcal/kg", "specific_energy") == pytest.approx(4.1868, rel=1e-12)
    assert parse_quantity("1 Gcal", "energy") == pytest.approx(4.1868, rel=1e-12)
    # 1 lb/kWh = 0.45359237 kg/kWh (NIST SP 811)
    assert parse_quantity("26 lb/kWh", "steam_rate") == pytest.approx(26 * LB_KG, rel=REL)
    # a drive's steam rate per horsepower-hour, as US data sheets write it (NIST SP 811 hp)
    for unit in ("lb/hp-h", "lb/hph", "lb/hp-hr", "lb/(hp*h)"):
        assert parse_quantity(f"34 {unit}", "steam_rate") == pytest.approx(34 * LB_KG / (HP_W / 1e3), rel=REL)
    # 140 MMBtu/h = 147.70784 GJ/h (Btu_IT, NIST SP 811)
    assert parse_quantity("140 MMBtu/h", "heat_rate") == pytest.approx(140 * BTU_J * 1e-3, rel=REL)
    assert parse_quantity("30 min", "time") == pytest.approx(0.5, rel=REL)
    assert parse_quantity("85 kWh/t", "power_per_flow") == pytest.approx(0.085, rel=REL)
    # 53 kg/MMBtu -> t/GJ with Btu_IT (NIST SP 811)
    assert parse_quantity("53 kg/MMBtu", "emission_factor") == pytest.approx(
        53e-3 / (BTU_J * 1e-3), rel=REL
    )


# --- prices -----------------------------------------------------------------------------


@pytest.mark.parametrize(
    "text, kind, expected",
    [
        ("7.5 per GJ", "price_energy", 7.5),
        ("7.5 /GJ", "price_energy", 7.5),
        ("8 per MMBtu", "price_energy", 8.0 / (BTU_J * 1e-3)),  # Btu_IT (NIST SP 811)
        ("8 /MMBtu", "price_energy", 8.0 / (BTU_J * 1e-3)),
        ("85 per MWh", "price_power", 85.0),
        ("0.085 per kWh", "price_power", 85.0),
        ("0.085/kWh", "price_power", 85.0),
        ("2.5 per t", "price_mass", 2.5),
        ("1.1 per klb", "price_mass", 1.1 / LB_KG),  # 1 lb = 0.45359237 kg (NIST SP 811)
        ("4 per Dth", "price_energy", 4.0 / (10 * US_THERM_J * 1e-9)),  # dekatherm = 10 US therms (NIST SP 811)
    ],
)
def test_parse_price(text, kind, expected):
    assert parse_price(text, kind) == pytest.approx(expected, rel=REL)
    # parse_quantity delegates price kinds to parse_price
    assert parse_quantity(text, kind) == pytest.approx(expected, rel=REL)


def test_price_start_is_plain_number():
    assert parse_price(1500, "price_start") == 1500.0
    assert parse_price(1500.5, "price_start") == 1500.5
    with pytest.raises(UnitError, match="not a number"):
        parse_price("1500", "price_start")
    with pytest.raises(UnitError):
        parse_price(True, "price_start")


@pytest.mark.parametrize(
    "text, kind, match",
    [
        ("7.5", "price_energy", "not a price"),
        (7.5, "price_energy", "no unit"),
        ("7.5 per foo", "price_energy", "unknown unit"),
        ("7.5 per t", "price_power", "is not a price"),
    ],
)
def test_price_errors(text, kind, match):
    with pytest.raises(UnitError, match=match):
        parse_price(text, kind)


# --- errors -----------------------------------------------------------------------------


@pytest.mark.parametrize(
    "text, kind, match",
    [
        ("42", "pressure", "has no unit"),  # bare number in a string
        (42, "pressure", "has no unit"),  # a number as int
        (42.0, "pressure", "has no unit"),  # a number as float
        (True, "pressure", "has no unit"),
        (None, "pressure", "has no unit"),
        ("42 foo", "pressure", "unknown unit"),
        ("42 t/h", "pressure", "is not a pressure"),  # wrong dimension
        ("10 degC", "pressure", "is not a pressure"),
        ("5 kg", "mass_flow", "is not a mass flow"),
        ("150 psig", "temperature", "gauge pressure"),  # gauge unit for a temperature
        ("40 bar(g)", "temperature", "gauge pressure"),
        ("abc bar", "pressure", "not a number followed by a unit"),
        ("", "pressure", "not a number followed by a unit"),
        ("1e400 bar(a)", "pressure", "not a finite number"),
        # trade use writes both gauge and absolute pressures as plain bar or psi
        ("12 bar", "pressure", "does not say gauge or absolute"),
        ("42 psi", "pressure", "does not say gauge or absolute"),
        ("120 mbar", "pressure", "does not say gauge or absolute"),
        # a condenser gauge reads vacuum, a steam table absolute
        ("27.5 inHg", "pressure", "does not say gauge or absolute"),
        ("700 mmHg", "pressure", "does not say gauge or absolute"),
        ("31 inHg(vac)", "pressure", "more vacuum than the standard atmosphere holds"),
        # a generator's apparent power: MW needs the power factor
        ("40 MVA", "power", "apparent power"),
        ("900 kVA", "power", "apparent power"),
    ],
)
def test_parse_quantity_errors(text, kind, match):
    with pytest.raises(UnitError, match=match) as info:
        parse_quantity(text, kind)
    assert str(info.value)  # a message is given


def test_unit_error_is_value_error():
    assert issubclass(UnitError, ValueError)


# --- column_factor ----------------------------------------------------------------------


@pytest.mark.parametrize(
    "unit, kind, scale, offset",
    [
        ("bar(a)", "pressure", 1.0, 0.0),
        ("psig", "pressure", PSI_BAR, ATM_BAR),  # NIST SP 811 psi; ISO 2533 atmosphere
        ("bar(g)", "pressure", 1.0, ATM_BAR),  # ISO 2533
        ("degF", "temperature", 1.0 / 1.8, -32.0 / 1.8),  # NIST SP 811, App. B
        ("K", "temperature", 1.0, -273.15),
        ("kg/s", "mass_flow", 3.6, 0.0),
        ("klb/h", "mass_flow", LB_KG, 0.0),  # NIST SP 811
        ("kW", "power", 1e-3, 0.0),
        ("hp", "power", HP_W / 1e6, 0.0),  # NIST SP 811
        ("per MMBtu", "price_energy", 1.0 / (BTU_J * 1e-3), 0.0),  # NIST SP 811 Btu_IT
        ("/kWh", "price_power", 1000.0, 0.0),
        ("per klb", "price_mass", 1.0 / LB_KG, 0.0),  # NIST SP 811
    ],
)
def test_column_factor(unit, kind, scale, offset):
    a, b = column_factor(unit, kind)
    assert a == pytest.approx(scale, rel=1e-9)
    assert b == pytest.approx(offset, rel=1e-9, abs=1e-9)


def test_column_factor_matches_parse_quantity():
    a, b = column_factor("psig", "pressure")
    assert a * 600.0 + b == pytest.approx(P("600 psig"), rel=REL)
    a, b = column_factor("degF", "temperature")
    assert a * 825.0 + b == pytest.approx(parse_quantity("825 degF", "temperature"), rel=REL)


def test_column_factor_errors():
    with pytest.raises(UnitError):
        column_factor("t/h", "pressure")
    with pytest.raises(UnitError):
        column_factor("psig", "temperature")
    with pytest.raises(UnitError):
        column_factor("per foo", "price_energy")


@pytest.mark.parametrize("text, kind", [("5 ton/h", "mass_flow"), ("5 tons/h", "mass_flow"), ("3 per ton", "price_mass")])
def test_ton_is_refused_as_ambiguous(text: str, kind: str) -> None:
    # short ton 907.18474 kg, long ton 1016.0469 kg (NIST SP 811, App. B), metric 1000 kg:
    # 9 % apart, so the bare word is refused as plain "bar" is
    with pytest.raises(UnitError, match="ambiguous"):
        parse_quantity(text, kind)
    assert parse_quantity("5 short_ton/h", "mass_flow") == pytest.approx(5 * 2000 * LB_KG / 1000, rel=REL)


def test_a_price_may_name_the_site_currency_and_no_other() -> None:
    """'180 EUR/MWh' and a column unit 'EUR/MWh' read as the site's own currency (the
    outputs name their money columns so); another currency is refused, naming it, since
    no exchange rate is applied."""
    from cogendispatch.units import UnitError, in_site_currency, parse_price

    assert in_site_currency("180 EUR/MWh", "EUR") == "180 per MWh"
    assert in_site_currency("EUR/MWh", "EUR") == "per MWh"
    assert in_site_currency("per MWh", "EUR") == "per MWh"
    with pytest.raises(UnitError, match="in USD, not the site's currency EUR"):
        in_site_currency("180 USD per MWh", "EUR")
    with pytest.raises(UnitError, match="in USD, not the site's currency"):
        parse_price("9.0 USD/GJ", "price_energy")
    # the currency's sign, before or after the number, stands for the site's own
    assert in_site_currency("4.20 $/MMBtu", "USD") == "4.20 per MMBtu"
    assert in_site_currency("$4.20/MMBtu", "USD") == "4.20 per MMBtu"
    assert in_site_currency("$/MMBtu", "CAD") == "per MMBtu"
    assert in_site_currency("€ 9 per GJ", "EUR") == "9 per GJ"
    with pytest.raises(UnitError, match="is in '\\$', not the site's currency EUR"):
        in_site_currency("$4.20/MMBtu", "EUR")


def test_a_series_price_column_in_the_site_currency_reads_as_per() -> None:
    import pandas as pd

    from cogendispatch.errors import InputError
    from cogendispatch.plant.series import parse_series
    from tiny import site

    cfg = site()

    def table(unit: str) -> pd.DataFrame:
        return pd.DataFrame({"time": ["2027-03-01T00:00"], "demand:HP [t/h]": ["0"], "demand:LP [t/h]": ["20"],
                             "load [MW]": ["5"], f"price:import [{unit}]": ["80"]})

    assert parse_series(table("EUR/MWh"), cfg).price_import.iloc[0] == pytest.approx(80.0)
    with pytest.raises(InputError, match=r"price:import \[USD/MWh\].*in USD"):
        parse_series(table("USD/MWh"), cfg)


def test_values_beyond_any_site_get_a_note() -> None:
    """An import price headed per kWh but written per MWh reads a thousand times too high;
    such values are noted (common-practice limits, Series.notes), not refused."""
    import pandas as pd

    from cogendispatch.plant.series import parse_series
    from tiny import site

    cfg = site()

    def table(price_head: str, load: str) -> pd.DataFrame:
        return pd.DataFrame({"time": ["2027-03-01T00:00"], "demand:HP [t/h]": ["0"], "demand:LP [t/h]": ["20"],
                             "load [MW]": [load], f"price:import [{price_head}]": ["170"]})

    assert parse_series(table("per MWh", "5"), cfg).notes() == []
    notes = parse_series(table("per kWh", "5"), cfg).notes()
    assert len(notes) == 1 and "import price reaches 170,000 per MWh" in notes[0]
    notes = parse_series(table("per MWh", "0.033"), cfg).notes()
    assert len(notes) == 1 and "load is at most 0.033 MW" in notes[0]
    notes = parse_series(table("per MWh", "33600"), cfg).notes()  # kW in the MW column
    assert len(notes) == 1 and "load reaches 33,600 MW" in notes[0]
    assert parse_series(table("per MWh", "0"), cfg).notes() == []  # every load a drive's motor
    low = table("per MWh", "5").assign(**{"price:import [per MWh]": ["0.06"]})  # per kWh values
    assert "import price is at most 0.060 per MWh" in parse_series(low, cfg).notes()[0]


@pytest.mark.parametrize(("text", "kind", "write"), [
    ("250 Mlb/h", "mass_flow", "klb"), ("2 Mlbs/h", "mass_flow", "klb"),
    ("4.2 per MBtu", "price_energy", "MMBtu"), ("5 MBTU", "energy", "MMBtu"), ("900 MBtu/h", "heat_rate", "kBtu"),
])
def test_roman_thousand_is_refused_as_ambiguous(text: str, kind: str, write: str) -> None:
    """'M' before lb or Btu is a thousand in US use (250 Mlb/h, MBtu/h) and a million in SI:
    read as mega it made a 250 klb/h boiler 113 000 t/h; refused, naming what to write."""
    with pytest.raises(UnitError, match=rf"ambiguous.*'{write}'"):
        parse_quantity(text, kind)
    # the unambiguous spellings stay: klb (a thousand), MMBtu (a million), kBtu
    assert parse_quantity("250 klb/h", "mass_flow") == pytest.approx(250 * LB_KG, rel=REL)
    assert parse_quantity("1 MMBtu", "energy") == pytest.approx(1.055056, rel=1e-6)
    assert parse_quantity("1000 kBtu", "energy") == pytest.approx(1.055056, rel=1e-6)


def test_tables_in_us_units_by_hand() -> None:
    """Factors from NIST SP 811 App. B: 1 lb = 0.45359237 kg, 1 psi = 6.894757 kPa,
    1 Btu_IT/lb = 2.326 kJ/kg and 1 Btu_IT/(lb degR) = 4.1868 kJ/(kg K) exactly."""
    import pandas as pd

    from cogendispatch.us_columns import in_us_units

    si = pd.DataFrame({"unit": ["X"], "pressure_bar_a": [42.0], "temperature_C": [400.0], "superheat_K": [100.0],
                       "enthalpy_kJ_kg": [2326.0], "entropy_kJ_kgK": [4.1868], "max_flow_t_h": [100.0],
                       "steam_rate_kg_kWh": [10.0], "fuel_GJ_h": [105.505585262], "fuel_GJ_per_t": [1.0],
                       "shaft_kW_per_t_h": [100.0], "price_EUR_GJ": [10.0], "cost_EUR_t": [1.0],
                       "header_t_per_t": [1.05], "duty_kW": [650.0], "state": ["superheated"]})
    us = in_us_units(si).iloc[0]
    assert us["pressure_psia"] == pytest.approx(4200.0 / 6.894757, rel=1e-6)  # 609.2 psia
    assert us["temperature_F"] == pytest.approx(752.0) and us["superheat_F"] == pytest.approx(180.0)
    assert us["enthalpy_Btu_lb"] == pytest.approx(1000.0, rel=1e-9)
    assert us["entropy_Btu_lbR"] == pytest.approx(1.0, rel=1e-9)
    assert us["max_flow_klb_h"] == pytest.approx(100.0 / LB_KG, rel=1e-9)  # 220.46 klb/h
    assert us["steam_rate_lb_kWh"] == pytest.approx(10.0 / LB_KG, rel=1e-9)
    assert us["fuel_MMBtu_h"] == pytest.approx(100.0, rel=1e-9)
    # 1 GJ/t = 1/1.05505585 MMBtu per 2.2046 klb
    assert us["fuel_MMBtu_per_klb"] == pytest.approx(LB_KG / 1.05505585262, rel=1e-9)
    assert us["shaft_kW_per_klb_h"] == pytest.approx(100.0 * LB_KG, rel=1e-9)
    assert us["price_EUR_MMBtu"] == pytest.approx(10.55055853, rel=1e-9)
    assert us["cost_EUR_klb"] == pytest.approx(LB_KG, rel=1e-9)
    # ratios, powers and text as they were
    assert us["header_t_per_t"] == 1.05 and us["duty_kW"] == 650.0 and us["state"] == "superheated"


def test_inspect_prints_us_units_and_keeps_the_csv_si(tmp_path, capsys) -> None:  # noqa: ANN001
    from pathlib import Path

    from cogendispatch.cli import main

    site = Path(__file__).resolve().parents[1] / "plant_configs" / "saltmarsh_refinery.toml"
    assert main(["inspect", str(site), "--units", "us", "--csv", str(tmp_path / "c")]) == 0
    out = capsys.readouterr().out
    assert "pressure_psia" in out and "609.2" in out and "steam_rate_lb_kWh" in out
    assert "pressure_bar_a" in (tmp_path / "c" / "headers.csv").read_text()
