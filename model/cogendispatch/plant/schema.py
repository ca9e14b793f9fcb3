"""Schema of a site file: one pydantic model per table, values converted to SI on load.

Field values carry their units in the file ("42 bar(a)", "120 t/h"); the ``Annotated`` types
below parse them once into the internal units listed in :mod:`cogendispatch.units`.
"""

from __future__ import annotations

from typing import Annotated, Literal

from pydantic import BaseModel, BeforeValidator, ConfigDict, Field, model_validator

from ..units import parse_quantity


def _q(kind: str) -> BeforeValidator:
    return BeforeValidator(lambda v: parse_quantity(v, kind))


Pressure = Annotated[float, _q("pressure")]  # [bar(a)]
Temperature = Annotated[float, _q("temperature")]  # [degC]
MassFlow = Annotated[float, _q("mass_flow")]  # [t/h]
Power = Annotated[float, _q("power")]  # [MW]
HeatRate = Annotated[float, _q("heat_rate")]  # [GJ/h]
SteamRate = Annotated[float, _q("steam_rate")]  # [kg/kWh]
EmissionFactor = Annotated[float, _q("emission_factor")]  # [t/GJ]
PowerPerFlow = Annotated[float, _q("power_per_flow")]  # [MWh/t] = MW per t/h
Hours = Annotated[float, _q("time")]  # [h]


def _hours_each(v: object) -> object:
    """A duration, or a list of them (one per machine of a drive)."""
    if isinstance(v, list):
        return [parse_quantity(x, "time") for x in v]
    return parse_quantity(v, "time")


HoursEach = Annotated[float | list[float], BeforeValidator(_hours_each)]  # [h]
EnergyPrice = Annotated[float, _q("price_energy")]  # [currency/GJ]
PowerPrice = Annotated[float, _q("price_power")]  # [currency/MWh]
MassPrice = Annotated[float, _q("price_mass")]  # [currency/t]
Fraction = Annotated[float, Field(ge=0.0, le=1.0)]
Efficiency = Annotated[float, Field(gt=0.0, le=1.0)]
Id = Annotated[str, Field(min_length=1, max_length=40, pattern=r"^[A-Za-z][A-Za-z0-9_\-]*$")]


class _Table(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


class _Unit(_Table):
    id: Id
    name: str = ""


class SiteInfo(_Table):
    name: str
    currency: str = "EUR"
    description: str = ""


class Header(_Unit):
    """A steam header held at a fixed pressure and temperature (or saturated)."""

    pressure: Pressure
    temperature: Temperature | None = None  # None = saturated vapour


class Fuel(_Unit):
    """A fuel. Its energy [GJ] is on the heating-value basis the boiler efficiencies use
    (net or gross); the price and the CO2 factor must be on the same basis."""

    price: EnergyPrice  # default price when the series has no column for this fuel
    co2_factor: EmissionFactor = 0.0
    max_supply: HeatRate | None = None  # site-wide availability [GJ/h]


class EfficiencyCurve(_Table):
    """Boiler efficiency against load; load as a fraction of ``max_steam``."""

    load: list[Annotated[float, Field(gt=0.0, le=1.0)]] = Field(min_length=1)
    efficiency: list[Efficiency] = Field(min_length=1)

    @model_validator(mode="after")
    def _same_length(self) -> "EfficiencyCurve":
        if len(self.load) != len(self.efficiency):
            raise ValueError("'load' and 'efficiency' must have the same number of points")
        if any(b <= a for a, b in zip(self.load, self.load[1:])):
            raise ValueError("'load' points must increase strictly")
        return self


class Boiler(_Unit):
    header: str
    fuels: list[str] = Field(min_length=1)
    max_steam: MassFlow
    min_steam: MassFlow
    efficiency_curve: EfficiencyCurve
    blowdown: Annotated[float, Field(ge=0.0, lt=0.5)] = 0.0
    startup_cost: float = Field(default=0.0, ge=0.0)
    min_up: Hours = 1.0
    min_down: Hours = 1.0
    ramp_up: MassFlow | None = None  # per hour
    ramp_down: MassFlow | None = None  # per hour
    initial_on: bool = True
    initial_hours: Hours = 1000.0  # hours already spent in the initial state
    initial_steam: MassFlow | None = None
    available: bool = True
    must_run: bool = False


class TurbineSection(_Table):
    """One expansion section: from the previous point down to the header or condenser ``to``."""

    to: str
    # the slope of the section's Willans line: isentropic efficiency at full load *before*
    # the set's no-load loss, which comes on top; a datasheet's overall efficiency is lower
    efficiency: Efficiency | None = None
    max_extraction: MassFlow | None = None  # only for sections that are not the last
    min_extraction: MassFlow = 0.0
    max_flow: MassFlow | None = None  # through this section
    min_flow: MassFlow = 0.0


class TurbineEnvelope(_Table):
    """Maker's linear performance envelope: MW = a*throttle + sum(b_k*extr_k) - no_load*on."""

    no_load: Power  # power lost while running, given as a positive figure (Willans intercept) [MW]
    throttle: PowerPerFlow  # [MW per t/h]
    extraction: dict[str, PowerPerFlow] = Field(default_factory=dict)


class TurboGenerator(_Unit):
    inlet: str
    sections: list[TurbineSection] = Field(min_length=1, alias="section")
    min_throttle: MassFlow = 0.0
    max_throttle: MassFlow
    generator_rating: Power
    generator_efficiency: Efficiency = 0.97
    no_load_loss: Power = 0.0  # Willans intercept [MW]
    envelope: TurbineEnvelope | None = None
    startup_cost: float = Field(default=0.0, ge=0.0)
    min_up: Hours = 1.0
    min_down: Hours = 1.0
    initial_on: bool = True
    initial_hours: Hours = 1000.0
    available: bool = True
    must_run: bool = False
    fixed_throttle: MassFlow | None = None  # set-point used by the rule-based baseline

    model_config = ConfigDict(extra="forbid", frozen=True, populate_by_name=True)


class SteamDriver(_Table):
    inlet: str
    exhaust: str
    efficiency: Efficiency | None = None  # isentropic efficiency of the driver turbine
    steam_rate: SteamRate | None = None  # rated steam rate, instead of an efficiency

    @model_validator(mode="after")
    def _one_of(self) -> "SteamDriver":
        if (self.efficiency is None) == (self.steam_rate is None):
            raise ValueError("give exactly one of 'efficiency' or 'steam_rate'")
        return self


class Motor(_Table):
    efficiency: Efficiency


class Drive(_Unit):
    """A machine (pump, compressor, fan) with a shaft duty and one or two drivers."""

    duty: Power  # shaft power of one machine [MW]
    count: int = Field(default=1, ge=1, le=20)  # identical machines in service
    steam_turbine: SteamDriver | None = None
    motor: Motor | None = None
    normal: Literal["steam", "motor"] | None = None  # driver in the practice baseline
    min_hours_between_switches: Hours = 1.0
    initial_on_steam: int | None = None  # machines on steam before the horizon
    # [h] since the last change of driver: one figure for every machine, or one per machine
    # in the order the machines on steam come first (machine 1 is on steam if any is)
    initial_hours_since_switch: HoursEach = 1000.0

    def hours_since_switch(self, k: int) -> float:
        """[h] since machine position ``k`` (0-based, machines on steam first) last changed
        driver before the horizon."""
        v = self.initial_hours_since_switch
        return float(v[k]) if isinstance(v, list) else float(v)

    @model_validator(mode="after")
    def _drivers(self) -> "Drive":
        if self.steam_turbine is None and self.motor is None:
            raise ValueError("a drive needs a 'steam_turbine', a 'motor' or both")
        return self


class Letdown(_Unit):
    source: str = Field(alias="from")
    to: str
    max_flow: MassFlow
    min_flow: MassFlow = 0.0

    model_config = ConfigDict(extra="forbid", frozen=True, populate_by_name=True)


class Vent(_Unit):
    header: str
    max_flow: MassFlow
    cost: MassPrice = 0.0


class Condenser(_Unit):
    pressure: Pressure
    cooling_capacity: Power  # heat it can reject [MW]
    ejector_steam: MassFlow = 0.0  # motive steam while in service
    ejector_header: str | None = None


class Deaerator(_Table):
    pressure: Pressure
    heating_steam: str  # header id
    makeup_temperature: Temperature = 20.0
    makeup_cost: MassPrice = 0.0
    process_condensate_return: Fraction = 0.0
    condensate_temperature: Temperature = 80.0


class Grid(_Table):
    max_import: Power
    max_export: Power = 0.0
    min_import: Power = 0.0


class Reserve(_Table):
    enabled: bool = True
    cover: Annotated[float, Field(ge=0.0, le=1.0)] = 1.0  # share of the largest running boiler


class Penalties(_Table):
    """Prices of the balance slacks. They must exceed what any real decision could save:
    a shortfall of a few hundredths of a MW for one hour must still cost more than a boiler
    start and its minimum up time, or the optimiser reports a feasible week as short."""

    steam_shortfall: MassPrice = 1.0e6  # [currency/t]
    steam_surplus: MassPrice = 1.0e6
    power_shortfall: PowerPrice = 1.0e6  # [currency/MWh]
    power_surplus: PowerPrice = 1.0e6
    # [currency/t per hour of reserve missing] a hundredth of the shortfalls, so that a week
    # whose demand cannot be met with the reserve held shows the demand met and the reserve
    # short, never load or process steam cut to keep reserve: a t/h of boiler steam moved
    # from reserve to demand trades 1:1 against a steam shortfall, and a MW of power made
    # from steam (a machine put on its steam turbine, a turbo-generator run harder) takes
    # up to about 40 t/h of it (a small pump turbine's steam rate); still above any
    # start-up cost for a t/h missing over a few hours
    reserve_shortfall: MassPrice = 1.0e4


class SiteConfig(_Table):
    """A whole site, as written in its TOML file."""

    site: SiteInfo
    deaerator: Deaerator
    grid: Grid
    reserve: Reserve = Reserve()
    penalties: Penalties = Penalties()
    headers: list[Header] = Field(min_length=1, alias="header")
    fuels: list[Fuel] = Field(default_factory=list, alias="fuel")
    boilers: list[Boiler] = Field(default_factory=list, alias="boiler")
    turbogenerators: list[TurboGenerator] = Field(default_factory=list, alias="turbogenerator")
    drives: list[Drive] = Field(default_factory=list, alias="drive")
    letdowns: list[Letdown] = Field(default_factory=list, alias="letdown")
    vents: list[Vent] = Field(default_factory=list, alias="vent")
    condensers: list[Condenser] = Field(default_factory=list, alias="condenser")

    model_config = ConfigDict(extra="forbid", frozen=True, populate_by_name=True)
