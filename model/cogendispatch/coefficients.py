"""The linear coefficients the model uses, as tables a planner can sanity-check."""

from __future__ import annotations

import pandas as pd

from .equipment import boiler as boiler_mod
from .equipment import drive as drive_mod
from .equipment import turbine as turbine_mod
from .equipment.common import SiteStates
from .equipment.letdown import outlet_ratio
from .plant.schema import SiteConfig
from .steam import state_pT, state_px


def coefficient_tables(cfg: SiteConfig) -> dict[str, pd.DataFrame]:
    """Tables of header states and per-unit linear coefficients, keyed by table name."""
    st = SiteStates.of(cfg)
    hdr = pd.DataFrame([
        {"header": h.id, "pressure_bar_a": s.p, "temperature_C": s.T, "enthalpy_kJ_kg": s.h,
         "entropy_kJ_kgK": s.s, "superheat_K": s.superheat, "state": s.phase}
        for h, s in ((h, st.headers[h.id]) for h in cfg.headers)])

    brows = []
    for b in cfg.boilers:
        co = boiler_mod.coefficients(b, st)
        if not co.convex:
            curve = "non-convex (binaries)"
        elif co.hull_shortfall > 0:
            curve = f"convex hull, up to {100 * co.hull_shortfall:.3f} % below the curve"
        else:
            curve = "convex"
        for load, eta in zip(b.efficiency_curve.load, b.efficiency_curve.efficiency):
            s = load * b.max_steam
            f = s * co.heat_per_t / eta
            brows.append({"boiler": b.id, "load_fraction": load, "steam_t_h": s, "efficiency": eta, "fuel_GJ_h": f,
                          "fuel_GJ_per_t": f / s, "model_fuel_GJ_h": boiler_mod.fuel_at(co, s),
                          "heat_to_steam_GJ_per_t": co.heat_per_t, "curve": curve})
    boilers = pd.DataFrame(brows)

    trows = []
    for tg in cfg.turbogenerators:
        co = turbine_mod.coefficients(tg, st)
        # at the generator terminals, before the Willans no-load loss (counted once per set);
        # for a maker's envelope these are its own slopes, section by section
        terminal = 1000 * tg.generator_efficiency
        loss = tg.no_load_loss if tg.envelope is None else tg.envelope.no_load
        for k, sec in enumerate(co.sections):
            arrival = None if sec.to_condenser else st.arrival_ratio(sec.outlet.h, sec.to)
            limits = ({"min_throttle_t_h": tg.min_throttle, "max_throttle_t_h": tg.max_throttle,
                       "generator_rating_MW": tg.generator_rating} if k == 0 else {})
            # the site file's limits on the flow through the section and on the extraction
            # at its end (none after the last section: its flow is the exhaust's, e.g. the
            # minimum condenser flow)
            given = tg.sections[k]
            last = k == len(co.sections) - 1
            limits.update({"min_flow_t_h": given.min_flow, "max_flow_t_h": given.max_flow,
                           "min_extraction_t_h": None if last else given.min_extraction,
                           "max_extraction_t_h": None if last else given.max_extraction})
            trows.append({"turbine": tg.id, "kind": co.kind, "section": k + 1, "to": sec.to, **limits,
                          "p_out_bar_a": sec.p_out, "isentropic_drop_kJ_kg": sec.drop_s,
                          "efficiency": sec.efficiency, "shaft_kW_per_t_h": 1000 * sec.mw_per_tph,
                          "shaft_steam_rate_kg_kWh": sec.steam_rate,
                          "terminal_kW_per_t_h": terminal * sec.mw_per_tph,
                          "no_load_loss_MW": loss if k == 0 else None, "exhaust_T_C": sec.outlet.T,
                          "exhaust_quality": sec.outlet.x, "exhaust_h_kJ_kg": sec.outlet.h,
                          "header_t_per_t": arrival})
    turbines = pd.DataFrame(trows)

    drows = []
    for d in cfg.drives:
        co = drive_mod.coefficients(d, st)
        st_ = d.steam_turbine
        row = {"drive": d.id, "count": d.count, "duty_kW": 1000 * d.duty,
               "drivers": "steam+motor" if co.dual else ("steam" if co.steam_rate else "motor"),
               "inlet": st_.inlet if st_ else None, "exhaust": st_.exhaust if st_ else None,
               "min_h_between_changes": d.min_hours_between_switches if co.dual else None,
               "steam_rate_kg_kWh": co.steam_rate, "efficiency": co.efficiency,
               "steam_t_h_per_machine": (co.steam_rate * d.duty) if co.steam_rate else None,
               "exhaust_h_kJ_kg": co.exhaust_h,
               "header_t_per_t": st.arrival_ratio(co.exhaust_h, d.steam_turbine.exhaust) if co.steam_rate else None,
               "motor_efficiency": co.motor_efficiency,
               "motor_MW_per_machine": (d.duty / co.motor_efficiency) if co.motor_efficiency else None}
        drows.append(row)
    drives = pd.DataFrame(drows)

    lrows = []
    for ld in cfg.letdowns:
        r = outlet_ratio(ld, st)
        out = state_pT(st.headers[ld.to].p, st.headers[ld.to].T) if st.headers[ld.to].superheat > 0 else st.headers[ld.to]
        lrows.append({"letdown": ld.id, "from": ld.source, "to": ld.to, "min_flow_t_h": ld.min_flow,
                      "max_flow_t_h": ld.max_flow, "outlet_t_per_t": r,
                      "water_t_per_t": r - 1.0, "valve_outlet_h_kJ_kg": st.headers[ld.source].h,
                      "header_h_kJ_kg": out.h})
    letdowns = pd.DataFrame(lrows)

    # vents: what the site file gives, so a planner can see they were read
    vents = pd.DataFrame([{"vent": v.id, "header": v.header, "max_flow_t_h": v.max_flow, f"cost_{cfg.site.currency}_t": v.cost}
                          for v in cfg.vents])

    deaerator = _deaerator_table(cfg, st)
    return {"headers": hdr, "boilers": boilers, "turbines": turbines, "drives": drives,
            "letdowns": letdowns, "vents": vents, "deaerator": deaerator,
            "condensers": _condenser_table(cfg, st), "fuels": _fuel_table(cfg), "grid": _grid_table(cfg)}


def _condenser_table(cfg: SiteConfig, st: SiteStates) -> pd.DataFrame:
    """One row per turbine section exhausting into each condenser: the heat each t/h of
    that exhaust brings, (h_exhaust - h_f) / 3600 [MW per t/h], with h_f the saturated
    liquid at condenser pressure (IAPWS-IF97), and the exhaust flow at which the cooling
    capacity is reached, as the model's cooling row has it."""
    rows = []
    for c in cfg.condensers:
        sat = state_px(c.pressure, 0.0)
        base = {"condenser": c.id, "pressure_bar_a": c.pressure, "saturation_T_C": sat.T,
                "hotwell_h_kJ_kg": sat.h, "cooling_capacity_MW": c.cooling_capacity,
                "ejector_steam_t_h": c.ejector_steam, "ejector_header": c.ejector_header}
        users = [(tg.id, k + 1, sec) for tg in cfg.turbogenerators
                 for k, sec in enumerate(turbine_mod.coefficients(tg, st).sections)
                 if sec.to_condenser and sec.to == c.id]
        for tg_id, k, sec in users:
            per = (sec.outlet.h - sat.h) / 3600.0
            rows.append({**base, "turbine": tg_id, "section": k, "exhaust_h_kJ_kg": sec.outlet.h,
                         "heat_MW_per_t_h": per, "exhaust_t_h_at_capacity": c.cooling_capacity / per})
        if not users:
            rows.append(base)
    return pd.DataFrame(rows)


def _fuel_table(cfg: SiteConfig) -> pd.DataFrame:
    """The fuels as read: default price [currency/GJ], CO2 factor [t/GJ], supply limit
    [GJ/h], and which boilers burn each."""
    cur = cfg.site.currency
    return pd.DataFrame([{"fuel": f.id, f"price_{cur}_GJ": f.price, "co2_t_GJ": f.co2_factor,
                          "max_supply_GJ_h": f.max_supply,
                          "burned_by": " ".join(b.id for b in cfg.boilers if f.id in b.fuels)} for f in cfg.fuels])


def _grid_table(cfg: SiteConfig) -> pd.DataFrame:
    """The grid connection's limits as read [MW]."""
    g = cfg.grid
    return pd.DataFrame([{"connection": "grid", "max_import_MW": g.max_import, "max_export_MW": g.max_export,
                          "min_import_MW": g.min_import}])


def _deaerator_table(cfg: SiteConfig, st: SiteStates) -> pd.DataFrame:
    """One row per water stream entering the deaerator: its enthalpy and the heating steam
    each tonne of it needs to leave as saturated feedwater [t/t], as the model's mass and
    energy balance has it (each stream is linear on its own: S_i = W_i (h_fw - h_i) / (h_s - h_fw))."""
    da = cfg.deaerator
    h_fw = st.h_feedwater
    h_s = st.headers[da.heating_steam].h
    streams = [("make-up", state_pT(da.pressure, da.makeup_temperature), "the balance of the feedwater"),
               ("process condensate", state_pT(da.pressure, da.condensate_temperature),
                f"{da.process_condensate_return:.0%} of the hour's process steam demand")]
    streams += [(f"{c.id} hotwell condensate", state_px(c.pressure, 0.0), f"the steam {c.id} condenses" + (" and its ejector steam" if c.ejector_steam > 0 else ""))
                for c in cfg.condensers]
    return pd.DataFrame([{
        "stream": name, "temperature_C": w.T, "enthalpy_kJ_kg": w.h,
        "steam_t_per_t_water": (h_fw - w.h) / (h_s - h_fw),
        "flow": basis, "heating_steam": da.heating_steam,
        "deaerator_bar_a": da.pressure, "feedwater_h_kJ_kg": h_fw} for name, w, basis in streams])
