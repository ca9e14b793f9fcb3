"""Cross-checks of the optimiser: site energy conservation, an independent LP built with
scipy from the linear coefficients, and exhaustive enumeration of small MILPs."""

from __future__ import annotations

import itertools

import highspy
import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy.optimize import linprog

from cogendispatch.equipment import boiler as boiler_mod
from cogendispatch.equipment import drive as drive_mod
from cogendispatch.equipment.common import SiteStates
from cogendispatch.equipment.turbine import coefficients as tg_coefficients
from cogendispatch.results import plan_results
from cogendispatch.site import build_site_model
from cogendispatch.solve import LoadedModel, SolveOptions, solve
from cogendispatch.steam import state_pT, state_px
from tiny import series, site


def energy_audit(cfg, ser, res) -> np.ndarray:  # noqa: ANN001
    """Energy into the site boundary less energy out, per hour [MW].

    In: fuel, import, make-up water, returned process condensate, and the shortfall slacks
    of an impossible hour (surplus slacks count as negative). Out: process steam at
    header enthalpy, site load, export, shaft work delivered to the driven machines, boiler
    losses (fuel less heat absorbed), blowdown, vented steam, the heat the ejector steam
    rejects before it drains to the hotwell, deaerator overflow,
    condenser duty, generator and no-load losses, motor losses. Enthalpies from IAPWS-IF97.
    """
    stt = SiteStates.of(cfg)
    s = res.schedule
    n = len(s)
    e_in, e_out = np.zeros(n), np.zeros(n)
    da = cfg.deaerator
    h_mu = state_pT(da.pressure, da.makeup_temperature).h
    h_ret = state_pT(da.pressure, da.condensate_temperature).h
    demand = ser.demand
    for b in cfg.boilers:
        co = boiler_mod.coefficients(b, stt)
        fuel = s[f"{b.id}.fuel_GJ_h"].to_numpy() / 3.6  # [MW]
        steam = s[f"{b.id}.steam_t_h"].to_numpy()
        e_in += fuel
        e_out += fuel - steam * co.heat_per_t / 3.6  # stack and casing losses
    e_in += s["grid.import_MW"].to_numpy()
    e_out += s["grid.export_MW"].to_numpy() + ser.load.to_numpy()
    makeup = s["deaerator.makeup_t_h"].to_numpy()
    e_in += makeup * h_mu / 3600
    ret = da.process_condensate_return * demand.clip(lower=0).sum(axis=1).to_numpy()
    e_in += ret * h_ret / 3600
    for h in cfg.headers:
        e_out += demand[h.id].to_numpy() * stt.headers[h.id].h / 3600
    for b in cfg.boilers:  # blowdown leaves as saturated liquid at drum pressure
        h_bd = state_px(stt.headers[b.header].p, 0.0).h
        e_out += s[f"{b.id}.steam_t_h"].to_numpy() * b.blowdown / (1 - b.blowdown) * h_bd / 3600
    for v in cfg.vents:
        e_out += s[f"{v.id}.flow_t_h"].to_numpy() * stt.headers[v.header].h / 3600
    for c in cfg.condensers:
        e_out += s[f"{c.id}.duty_MW"].to_numpy()
        if c.ejector_header:  # the motive steam drains to the hotwell as saturated liquid
            h_hotwell = state_px(c.pressure, 0.0).h
            e_out += (s[f"{c.id}.in_service"].to_numpy() * c.ejector_steam
                      * (stt.headers[c.ejector_header].h - h_hotwell) / 3600)
    for tg in cfg.turbogenerators:
        co = tg_coefficients(tg, stt)
        f = s[f"{tg.id}.throttle_t_h"].to_numpy().copy()
        shaft = np.zeros(n)
        for k, sec in enumerate(co.sections):
            shaft += f * (sec.inlet.h - sec.outlet.h) / 3600
            if k < len(co.sections) - 1:
                f = f - s[f"{tg.id}.extraction_{sec.to}_t_h"].to_numpy()
        e_out += shaft - s[f"{tg.id}.power_MW"].to_numpy()  # generator and no-load losses
    for d in cfg.drives:
        duty = ser.duty[d.id].to_numpy()
        e_out += duty * d.count  # shaft work to the machines
        if d.motor is not None:
            e_out += s[f"{d.id}.on_motor"].to_numpy() * duty * (1 / d.motor.efficiency - 1)
    # an impossible hour's slacks inject (or remove) steam at header enthalpy and power
    bal = res.balances
    for h in cfg.headers:
        sl = bal[(bal.header == h.id) & bal.term.isin(["shortfall (unmet)", "surplus (unabsorbed)"])]
        e_in += sl.groupby("time").flow_t_h.sum().reindex(s.index, fill_value=0.0).to_numpy() * stt.headers[h.id].h / 3600
    pw = res.power[res.power.term.isin(["shortfall (unmet)", "surplus (unabsorbed)"])]
    e_in += pw.groupby("time").power_MW.sum().reindex(s.index, fill_value=0.0).to_numpy()
    return e_in - e_out


def audit_residual(cfg, ser, sm, res) -> np.ndarray:  # noqa: ANN001
    """Energy in less energy out per hour [MW], the deaerator overflow included."""
    overflow = np.array([sm.model.deaerator.overflow[t].value for t in sm.model.T])
    return energy_audit(cfg, ser, res) - overflow * SiteStates.of(cfg).h_feedwater / 3600


def _check_conservation(cfg, ser) -> None:  # noqa: ANN001
    sm = build_site_model(cfg, ser)
    solve(sm, SolveOptions(gap=1e-9))
    res = plan_results(sm)
    resid = audit_residual(cfg, ser, sm, res)
    fuel = sum(res.schedule[f"{b.id}.fuel_GJ_h"].to_numpy() for b in cfg.boilers) / 3.6
    assert np.abs(resid).max() < 1e-6 * max(1.0, fuel.max())


DRIVE = {"id": "P1", "duty": "2 MW", "motor": {"efficiency": 0.95},
         "steam_turbine": {"inlet": "HP", "exhaust": "LP", "efficiency": 0.6}}
TG = {"id": "TG", "inlet": "HP", "max_throttle": "80 t/h", "min_throttle": "5 t/h", "generator_rating": "10 MW",
      "no_load_loss": "0.2 MW", "section": [{"to": "LP", "efficiency": 0.75}]}


def test_energy_is_conserved_on_a_back_pressure_site() -> None:
    cfg = site(drive=[DRIVE], turbogenerator=[TG])
    _check_conservation(cfg, series(cfg, 4, demand_LP=[20, 60, 40, 10], demand_HP=[5, 0, 8, 2],
                                    price_import=[40, 200, 120, 30]))


def test_energy_is_conserved_on_an_extraction_condensing_site() -> None:
    cfg = site(
        header=[{"id": "HP", "pressure": "40 bar(a)", "temperature": "400 degC"},
                {"id": "MP", "pressure": "12 bar(a)", "temperature": "260 degC"},
                {"id": "LP", "pressure": "5 bar(a)", "temperature": "180 degC"}],
        boiler=[{"id": "B1", "header": "HP", "fuels": ["NG"], "max_steam": "150 t/h", "min_steam": "15 t/h",
                 "blowdown": 0.04, "efficiency_curve": {"load": [0.1, 0.5, 1.0], "efficiency": [0.8, 0.87, 0.86]}}],
        letdown=[{"id": "L1", "from": "HP", "to": "MP", "max_flow": "100 t/h"},
                 {"id": "L2", "from": "MP", "to": "LP", "max_flow": "100 t/h"}],
        condenser=[{"id": "C", "pressure": "0.1 bar(a)", "cooling_capacity": "60 MW", "ejector_steam": "1 t/h",
                    "ejector_header": "MP"}],
        turbogenerator=[{"id": "T", "inlet": "HP", "max_throttle": "100 t/h", "generator_rating": "20 MW",
                         "no_load_loss": "0.5 MW", "section": [
                             {"to": "MP", "efficiency": 0.8, "max_extraction": "80 t/h"},
                             {"to": "C", "efficiency": 0.75, "min_flow": "5 t/h"}]}],
        drive=[dict(DRIVE, steam_turbine={"inlet": "MP", "exhaust": "LP", "efficiency": 0.55})],
        deaerator={"pressure": "2 bar(a)", "heating_steam": "LP", "makeup_temperature": "15 degC",
                   "makeup_cost": "0.5 per t", "process_condensate_return": 0.6, "condensate_temperature": "90 degC"},
    )
    _check_conservation(cfg, series(cfg, 3, demand_MP=[30, 50, 20], demand_LP=[25, 35, 30],
                                    price_import=[60, 250, 120], load=8.0))


def test_independent_lp_in_scipy_gives_the_same_optimum() -> None:
    # One boiler (constant efficiency), HP->LP letdown, the pump fixed on steam, a vent and
    # the deaerator: an LP once the boiler is committed. Built here from the modules'
    # coefficients with scipy.optimize.linprog, independently of the Pyomo model.
    drive = dict(DRIVE, motor=None)
    cfg = site(drive=[drive], boiler=[{"id": "B1", "header": "HP", "fuels": ["NG"], "max_steam": "100 t/h",
                                       "min_steam": "10 t/h", "must_run": True,
                                       "efficiency_curve": {"load": [0.1, 1.0], "efficiency": [0.85, 0.85]}}])
    d_hp, d_lp, load, p_imp = [5.0, 12.0, 0.0], [30.0, 10.0, 55.0], [4.0, 6.0, 5.0], [80.0, 120.0, 60.0]
    ser = series(cfg, 3, demand_HP=d_hp, demand_LP=d_lp, load=load, price_import=p_imp)
    sm = build_site_model(cfg, ser)
    rep = solve(sm, SolveOptions(gap=1e-12))

    stt = SiteStates.of(cfg)
    b = cfg.boilers[0]
    q = boiler_mod.coefficients(b, stt).heat_per_t  # [GJ/t]
    c_steam = 10.0 * q / 0.85  # fuel price 10 per GJ, no CO2 price
    dco = drive_mod.coefficients(cfg.drives[0], stt)
    s_d = dco.steam_rate * 2.0  # [t/h] the pump's steam, fixed
    r_d = stt.arrival_ratio(dco.exhaust_h, "LP")
    r = stt.arrival_ratio(stt.headers["HP"].h, "LP")
    h_fw, h_lp = stt.h_feedwater, stt.headers["LP"].h
    da = cfg.deaerator
    h_mu, h_ret = state_pT(da.pressure, da.makeup_temperature).h, state_pT(da.pressure, da.condensate_temperature).h
    # variables per hour: B, m (letdown), V (vent), S (DA steam), M (make-up), O (overflow), I (import)
    nv = 7
    cost = np.zeros(3 * nv)
    aeq, beq = [], []
    bounds = []
    for t in range(3):
        o = nv * t
        cost[o:o + nv] = [c_steam, 0, 1.0, 0, 0.5, 0.5, p_imp[t]]
        ret = 0.5 * (d_hp[t] + d_lp[t])
        row = np.zeros(3 * nv); row[o + 0], row[o + 1] = 1, -1; aeq.append(row); beq.append(d_hp[t] + s_d)  # HP
        row = np.zeros(3 * nv); row[o + 1], row[o + 2], row[o + 3] = r, -1, -1; aeq.append(row); beq.append(d_lp[t] - r_d * s_d)  # LP
        # feedwater F = B + (r-1) m + (r_d-1) s_d; DA mass F + O = S + ret + M; energy
        row = np.zeros(3 * nv); row[o + 0], row[o + 1], row[o + 5], row[o + 3], row[o + 4] = 1, r - 1, 1, -1, -1
        aeq.append(row); beq.append(ret - (r_d - 1) * s_d)
        row = np.zeros(3 * nv); row[o + 0], row[o + 1], row[o + 5] = h_fw, (r - 1) * h_fw, h_fw
        row[o + 3], row[o + 4] = -h_lp, -h_mu
        aeq.append(row); beq.append(ret * h_ret - (r_d - 1) * s_d * h_fw)
        row = np.zeros(3 * nv); row[o + 6] = 1; aeq.append(row); beq.append(load[t])  # power: import = load
        bounds += [(10, 100), (0, 100), (0, 100), (0, None), (0, None), (0, None), (0, 50)]
    lp = linprog(cost, A_eq=np.array(aeq), b_eq=np.array(beq), bounds=bounds, method="highs-ipm")
    assert lp.status == 0
    assert rep.objective == pytest.approx(lp.fun, rel=1e-7)


# ---------------------------------------------------------------- exhaustive enumeration

@st.composite
def small_sites(draw):  # noqa: ANN001, ANN201
    hours = draw(st.integers(1, 3))
    n_drives = draw(st.integers(0, 3))
    while hours * (3 + n_drives) > 10:  # at most 2^10 LPs to enumerate
        n_drives -= 1
        if n_drives < 0:
            hours, n_drives = hours - 1, 0
    boilers = []
    for i in range(2):
        mx = draw(st.integers(40, 100))
        boilers.append({"id": f"B{i}", "header": "HP", "fuels": ["NG"], "max_steam": f"{mx} t/h",
                        "min_steam": f"{-(-mx // 4)} t/h", "initial_on": draw(st.booleans()),
                        "startup_cost": draw(st.sampled_from([0, 300, 3000])),
                        "efficiency_curve": {"load": [0.25, 1.0],
                                             "efficiency": [draw(st.floats(0.7, 0.8)), draw(st.floats(0.8, 0.9))]}})
    tg = {"id": "T", "inlet": "HP", "max_throttle": "60 t/h", "min_throttle": f"{draw(st.integers(5, 20))} t/h",
          "generator_rating": "8 MW", "no_load_loss": f"{draw(st.floats(0.0, 0.5)):.3f} MW",
          "initial_on": draw(st.booleans()), "section": [{"to": "LP", "efficiency": draw(st.floats(0.6, 0.85))}]}
    drives = [{"id": f"P{k}", "duty": f"{draw(st.integers(200, 2000))} kW", "motor": {"efficiency": 0.95},
               "steam_turbine": {"inlet": "HP", "exhaust": "LP", "efficiency": draw(st.floats(0.35, 0.7))}}
              for k in range(n_drives)]
    cfg = site(boiler=boilers, turbogenerator=[tg], drive=drives,
               letdown=[{"id": "LD", "from": "HP", "to": "LP", "max_flow": "200 t/h"}],
               reserve={"enabled": draw(st.booleans())})
    ser = series(cfg, hours, demand_LP=[draw(st.floats(10, 120)) for _ in range(hours)],
                 price_import=[draw(st.floats(20, 400)) for _ in range(hours)])
    return cfg, ser


@settings(max_examples=20, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(small_sites())
def test_milp_optimum_equals_the_best_enumerated_schedule(case) -> None:  # noqa: ANN001
    cfg, ser = case
    sm = build_site_model(cfg, ser)
    solved = build_site_model(cfg, ser)
    rep = solve(solved, SolveOptions(gap=1e-9, strengthen=False, warm_start=False))
    # every generated site also conserves energy
    assert np.abs(audit_residual(cfg, ser, solved, plan_results(solved))).max() < 1e-5
    lm = LoadedModel(sm)
    h = lm.h
    ints = lm.int_cols.astype(np.int32)
    assert len(ints) <= 10
    lm._set_integrality(False)
    best = np.inf
    for combo in itertools.product((0.0, 1.0), repeat=len(ints)):
        v = np.array(combo)
        h.changeColsBounds(len(ints), ints, v, v)
        h.run()
        if h.getModelStatus() == highspy.HighsModelStatus.kOptimal:
            best = min(best, h.getInfo().objective_function_value)
    assert rep.objective == pytest.approx(best, rel=1e-7, abs=1e-6)
