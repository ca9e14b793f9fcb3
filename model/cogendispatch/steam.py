"""Water and steam properties from IAPWS-IF97, in the plant's SI units.

Every function takes pressure in bar(a) and temperature in degC and returns specific
enthalpy in kJ/kg and specific entropy in kJ/(kg K). The heavy lifting is done by the
``iapws`` package; this module fixes the units, handles states that sit exactly on the
saturation line, and provides the expansions the equipment models need.

References
----------
.. [1] IAPWS R7-97(2012), Revised Release on the IAPWS Industrial Formulation 1997 for the
   Thermodynamic Properties of Water and Steam.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

from iapws import IAPWS97
from iapws.iapws97 import _PSat_T, _TSat_P

KELVIN = 273.15  # [K] at 0 degC
P_CRIT_BAR = 220.64  # [bar(a)] critical pressure, IAPWS R7-97 eq. 2
T_MIN_C = 0.0
T_MAX_C = 800.0  # upper limit of IF97 regions 1-3 [degC]
P_MAX_BAR = 1000.0  # [bar(a)]


class SteamPropertyError(ValueError):
    """A requested state lies outside IAPWS-IF97 or is not physically meaningful."""


@dataclass(frozen=True)
class SteamState:
    """A water/steam state.

    Attributes
    ----------
    p : pressure [bar(a)]
    T : temperature [degC]
    h : specific enthalpy [kJ/kg]
    s : specific entropy [kJ/(kg K)]
    x : vapour quality [-]; 0 or 1 for single-phase liquid or vapour as iapws reports it,
        between 0 and 1 inside the two-phase dome
    phase : "liquid", "two-phase", "saturated vapour" or "superheated"
    """

    p: float
    T: float
    h: float
    s: float
    x: float
    phase: str

    @property
    def superheat(self) -> float:
        """Degrees above saturation at this pressure [K]; 0 for wet or saturated steam."""
        if self.phase != "superheated" or self.p >= P_CRIT_BAR:
            return 0.0
        return self.T - saturation_temperature(self.p)


P_MIN_BAR = 0.00611213  # [bar(a)] triple-point pressure, the lower limit of IAPWS-IF97


def _check_pressure(p: float) -> None:
    if not (P_MIN_BAR <= p <= P_MAX_BAR):
        raise SteamPropertyError(f"pressure {p:g} bar(a) is outside IAPWS-IF97 ({P_MIN_BAR:.5f}-{P_MAX_BAR:g} bar(a))")


def _iapws(p: float, **kw: float) -> IAPWS97:
    """Call iapws, turning its out-of-range errors into SteamPropertyError."""
    try:
        return IAPWS97(P=p / 10.0, **kw)
    except (NotImplementedError, ValueError, ZeroDivisionError, OverflowError) as exc:
        raise SteamPropertyError(f"IAPWS-IF97 has no state at {p:g} bar(a), {kw}: {exc}") from None


def _from_iapws(st: IAPWS97, p: float) -> SteamState:
    if st.status != 1 or st.h is None:
        raise SteamPropertyError(f"IAPWS-IF97 found no state at {p:g} bar(a): {st.msg}")
    x = float(st.x)
    T = float(st.T) - KELVIN
    if p < P_CRIT_BAR and 0.0 < x < 1.0:
        phase = "two-phase"
    elif x >= 1.0:
        above = p >= P_CRIT_BAR or T > saturation_temperature(p) + 1e-6
        phase = "superheated" if above else "saturated vapour"
    else:
        phase = "liquid"
    return SteamState(p=p, T=T, h=float(st.h), s=float(st.s), x=x, phase=phase)


@lru_cache(maxsize=4096)
def saturation_temperature(p: float) -> float:
    """Saturation temperature at a pressure [degC].

    Parameters
    ----------
    p : pressure [bar(a)], below the critical point

    References
    ----------
    IAPWS R7-97(2012), region 4 backward equation (eq. 31).
    """
    _check_pressure(p)
    if p >= P_CRIT_BAR:
        raise SteamPropertyError(f"no saturation above the critical pressure ({p:g} bar(a))")
    try:
        return float(_TSat_P(p / 10.0)) - KELVIN
    except NotImplementedError as exc:
        raise SteamPropertyError(str(exc)) from None


@lru_cache(maxsize=4096)
def saturation_pressure(T: float) -> float:
    """Saturation pressure at a temperature [bar(a)].

    Parameters
    ----------
    T : temperature [degC], 0-373.946 degC

    References
    ----------
    IAPWS R7-97(2012), region 4 equation (eq. 30).
    """
    if not (T_MIN_C <= T <= 373.946):
        raise SteamPropertyError(f"no saturation pressure at {T:g} degC")
    return float(_PSat_T(T + KELVIN)) * 10.0


@lru_cache(maxsize=4096)
def state_pT(p: float, T: float) -> SteamState:
    """State from pressure and temperature.

    Parameters
    ----------
    p : pressure [bar(a)]
    T : temperature [degC]

    Returns
    -------
    SteamState. A (p, T) pair exactly on the saturation line is ambiguous (any quality fits):
    use :func:`state_px` for saturated headers; here it raises ``SteamPropertyError``.

    References
    ----------
    IAPWS R7-97(2012), regions 1, 2, 3 and 5.
    """
    _check_pressure(p)
    if not (T_MIN_C <= T <= 2000.0) or (T > T_MAX_C and p > 500.0):
        raise SteamPropertyError(f"{p:g} bar(a), {T:g} degC is outside IAPWS-IF97")
    if p < P_CRIT_BAR and abs(T - saturation_temperature(p)) < 1e-6:
        raise SteamPropertyError(
            f"{p:g} bar(a), {T:g} degC lies on the saturation line: give a quality instead"
        )
    return _from_iapws(_iapws(p, T=T + KELVIN), p)


@lru_cache(maxsize=4096)
def state_px(p: float, x: float) -> SteamState:
    """Saturated state from pressure and vapour quality.

    Parameters
    ----------
    p : pressure [bar(a)], below the critical point
    x : vapour quality [-], 0 = saturated liquid, 1 = saturated vapour

    References
    ----------
    IAPWS R7-97(2012), region 4 with regions 1 and 2 on the saturation line.
    """
    _check_pressure(p)
    if not (0.0 <= x <= 1.0):
        raise SteamPropertyError(f"quality {x:g} is outside 0-1")
    if p >= P_CRIT_BAR:
        raise SteamPropertyError(f"no saturation above the critical pressure ({p:g} bar(a))")
    st = _iapws(p, x=x)
    if st.status != 1:
        raise SteamPropertyError(f"IAPWS-IF97 found no state at {p:g} bar(a), x={x:g}: {st.msg}")
    Ts = saturation_temperature(p)
    phase = "two-phase" if 0.0 < x < 1.0 else ("saturated vapour" if x == 1.0 else "liquid")
    return SteamState(p=p, T=Ts, h=float(st.h), s=float(st.s), x=x, phase=phase)


@lru_cache(maxsize=4096)
def state_ph(p: float, h: float) -> SteamState:
    """State from pressure and specific enthalpy.

    Parameters
    ----------
    p : pressure [bar(a)]
    h : specific enthalpy [kJ/kg]

    References
    ----------
    IAPWS R7-97(2012), backward equations T(p, h) for regions 1-3 and region 4 quality.
    """
    _check_pressure(p)
    if p < P_CRIT_BAR:
        hf, hg = state_px(p, 0.0).h, state_px(p, 1.0).h
        if hf <= h <= hg:
            return state_px(p, (h - hf) / (hg - hf))
    return _from_iapws(_iapws(p, h=h), p)


@lru_cache(maxsize=4096)
def state_ps(p: float, s: float) -> SteamState:
    """State from pressure and specific entropy.

    Parameters
    ----------
    p : pressure [bar(a)]
    s : specific entropy [kJ/(kg K)]

    References
    ----------
    IAPWS R7-97(2012), backward equations T(p, s) and region 4 quality.
    """
    _check_pressure(p)
    if p < P_CRIT_BAR:
        sat_l, sat_v = state_px(p, 0.0), state_px(p, 1.0)
        if sat_l.s <= s <= sat_v.s:
            x = (s - sat_l.s) / (sat_v.s - sat_l.s)
            st = state_px(p, x)
            return st
    return _from_iapws(_iapws(p, s=s), p)


def header_state(p: float, T: float | None) -> SteamState:
    """State of a steam header: superheated at (p, T), or saturated vapour if ``T`` is None.

    Parameters
    ----------
    p : header pressure [bar(a)]
    T : header temperature [degC], or None for a saturated header

    Raises
    ------
    SteamPropertyError if the temperature is at or below saturation (the header would hold
    wet steam or water, which a fixed-state header cannot represent).
    """
    if T is None:
        return state_px(p, 1.0)
    Ts = saturation_temperature(p) if p < P_CRIT_BAR else None
    if Ts is not None and T <= Ts + 1e-6:
        raise SteamPropertyError(
            f"{T:g} degC is not above the saturation temperature {Ts:.2f} degC at {p:g} bar(a)"
        )
    return state_pT(p, T)


def isentropic_end(inlet: SteamState, p_out: float) -> SteamState:
    """End state of an isentropic expansion (or compression) to ``p_out``.

    Parameters
    ----------
    inlet : state before the expansion
    p_out : pressure after the expansion [bar(a)]

    References
    ----------
    IAPWS R7-97(2012), backward equations in (p, s).
    """
    return state_ps(p_out, inlet.s)


def expansion_end(inlet: SteamState, p_out: float, efficiency: float) -> SteamState:
    """Actual end state of an adiabatic expansion with an isentropic efficiency.

    h_out = h_in - efficiency * (h_in - h_out,s)

    Parameters
    ----------
    inlet : state before the expansion
    p_out : exhaust pressure [bar(a)]
    efficiency : isentropic efficiency [-], in (0, 1]

    References
    ----------
    Cengel & Boles, Thermodynamics: An Engineering Approach, sec. 7-12 (isentropic
    efficiency of turbines).
    """
    if not (0.0 < efficiency <= 1.0):
        raise ValueError(f"isentropic efficiency {efficiency:g} is outside (0, 1]")
    h_s = isentropic_end(inlet, p_out).h
    return state_ph(p_out, inlet.h - efficiency * (inlet.h - h_s))


def isentropic_drop(inlet: SteamState, p_out: float) -> float:
    """Isentropic enthalpy drop from ``inlet`` to ``p_out`` [kJ/kg]."""
    return inlet.h - isentropic_end(inlet, p_out).h


def theoretical_steam_rate(inlet: SteamState, p_out: float) -> float:
    """Theoretical (isentropic) steam rate of a turbine [kg/kWh].

    TSR = 3600 / (h_in - h_out,s)

    References
    ----------
    MIL-HDBK-1003/7, Steam Power Plants - Fossil Fueled (1990), Table 8 (in lb/kWh with
    3413 Btu/kWh).
    """
    return 3600.0 / isentropic_drop(inlet, p_out)


def throttled_state(inlet: SteamState, p_out: float) -> SteamState:
    """State after an adiabatic throttle (letdown valve): isenthalpic to ``p_out``."""
    return state_ph(p_out, inlet.h)


def spray_water_ratio(h_steam_in: float, h_target: float, h_water: float) -> float:
    """Desuperheating water per unit of inlet steam [kg/kg].

    Energy balance of a mixing desuperheater: m_s h_in + m_w h_w = (m_s + m_w) h_target,
    so m_w / m_s = (h_in - h_target) / (h_target - h_w). Negative when the steam arrives
    below the target enthalpy (then it is the fraction that condenses, as a drain).

    Parameters
    ----------
    h_steam_in : enthalpy of the steam entering [kJ/kg]
    h_target : enthalpy wanted at the outlet [kJ/kg]
    h_water : enthalpy of the spray water [kJ/kg]
    """
    if h_target <= h_water:
        raise ValueError("target enthalpy must exceed the spray-water enthalpy")
    return (h_steam_in - h_target) / (h_target - h_water)
