"""Read a site file (TOML), validate it and check that its references and physics agree."""

from __future__ import annotations

import re
import tomllib
from pathlib import Path
from typing import Any, Callable

from pydantic import ValidationError

from ..errors import InputError, InputErrors
from ..steam import P_CRIT_BAR, SteamPropertyError, header_state, saturation_temperature, theoretical_steam_rate
from ..units import STANDARD_ATMOSPHERE_BAR, UnitError, in_site_currency
from .schema import Header, SiteConfig, TurboGenerator

_TABLE_NAMES = {
    "headers": "header", "fuels": "fuel", "boilers": "boiler", "turbogenerators": "turbogenerator",
    "drives": "drive", "letdowns": "letdown", "vents": "vent", "condensers": "condenser",
    "sections": "section",
}


def _describe_loc(raw: Any, loc: tuple[Any, ...]) -> str:
    """Turn a pydantic error location into "[[boiler]] #2 (id 'B2') > max_steam" or
    "[grid] > max_import"."""
    parts: list[str] = []
    node = raw
    i = 0
    while i < len(loc):
        key = loc[i]
        name = str(key)
        if isinstance(node, dict) and key not in node and _TABLE_NAMES.get(name) in node:
            name = _TABLE_NAMES[name]
        nxt = loc[i + 1] if i + 1 < len(loc) else None
        if isinstance(nxt, int):
            item = None
            if isinstance(node, dict):
                seq = node.get(name, node.get(key))
                if isinstance(seq, list) and nxt < len(seq):
                    item = seq[nxt]
            ident = item.get("id") if isinstance(item, dict) else None
            # a scenario file's tables go by name
            called = item.get("name") if isinstance(item, dict) and ident is None else None
            # a table of tables reads [[boiler]] #2; a list of values, efficiency (value 4)
            label = f"[[{name}]] #{nxt + 1}" if isinstance(item, dict) else f"{name} (value {nxt + 1})"
            if ident is not None:
                label += f" (id '{ident}')"
            elif isinstance(called, str):
                label += f" ('{called}')"
            parts.append(label)
            node = item
            i += 2
            continue
        child = node.get(name, node.get(key)) if isinstance(node, dict) else None
        # a table at the top of the file as TOML writes it ([site], [grid]); a key as it is
        if i == 0 and isinstance(child, dict):
            name = f"[{name}]"
        elif i == 0 and isinstance(child, list) and child and all(isinstance(x, dict) for x in child):
            name = f"[[{name}]]"  # an array of tables, as TOML writes it
        parts.append(name)
        node = child
        i += 1
    return " > ".join(parts) if parts else "(top level)"


# a whole table missing at the top of the file: say so in TOML's own terms
_TOP_TABLES = {"site": "required table [site] is missing", "deaerator": "required table [deaerator] is missing",
               "grid": "required table [grid] is missing",
               "header": "no [[header]] table: a site needs at least one header"}
# the validation library's wording, in the words of the site file's reader
_LIMIT_WORDS = {"less_than_equal": "at most", "less_than": "below", "greater_than_equal": "at least",
                "greater_than": "above"}
_TYPE_WORDS = {"float_parsing": "a number", "float_type": "a number", "int_parsing": "a whole number",
               "int_type": "a whole number", "int_from_float": "a whole number", "bool_parsing": "true or false",
               "bool_type": "true or false", "string_type": "text in quotes", "list_type": "a list [...]",
               "dict_type": "a table", "model_type": "a table", "model_attributes_type": "a table"}


def validation_problems(path: Path, raw: dict[str, Any], err: ValidationError) -> list[InputError]:
    """Each pydantic error as an ``InputError`` naming the file and the table entry by its id."""
    out = []
    for e in err.errors():
        loc = tuple(x for x in e["loc"] if not (isinstance(x, str) and x.startswith("function-")))
        msg = e["msg"]
        kind, ctx, given = e["type"], e.get("ctx") or {}, e.get("input")
        if kind == "extra_forbidden" and len(loc) == 1 and isinstance(given, (dict, list)):
            known = ", ".join(sorted(f.alias or name for name, f in SiteConfig.model_fields.items()))
            msg = f"unknown table (tables: {known})"
        elif kind == "extra_forbidden":
            msg = "unknown key (check the spelling; the project's plant_configs/ folder has a complete example)"
        elif kind == "missing" and len(loc) == 1 and loc[0] in _TOP_TABLES:
            msg = _TOP_TABLES[str(loc[0])]
        elif kind == "missing":
            msg = "required key is missing"
        elif kind in _LIMIT_WORDS:
            limit = next(iter(ctx.values()), "")
            msg = f"{given!r} must be {_LIMIT_WORDS[kind]} {limit:g}" if isinstance(limit, (int, float)) \
                else f"{given!r} must be {_LIMIT_WORDS[kind]} {limit}"
        elif kind in _TYPE_WORDS:
            msg = f"{given!r} is not {_TYPE_WORDS[kind]}"
        msg = msg.removeprefix("Value error, ")
        out.append(InputError(path, _describe_loc(raw, loc), msg))
    return out


def site_currency_prices(node: Any, currency: str) -> Any:
    """``node`` with every price written with the site's own currency ("9.0 EUR/GJ") in
    the file format's form ("9.0 per GJ", :func:`units.in_site_currency`); other text, and
    a price in another currency (refused with its field's name when the field is read), is
    left as it is."""
    if isinstance(node, dict):
        return {k: site_currency_prices(v, currency) for k, v in node.items()}
    if isinstance(node, list):
        return [site_currency_prices(v, currency) for v in node]
    # a number (or a currency sign) first: a price, not a name
    if isinstance(node, str) and re.match(r"\s*(?:[$€£¥₹]\s*)?[-+]?\.?\d", node):
        try:
            return in_site_currency(node, currency)
        except UnitError:
            return node
    return node


def parse_site(raw: dict[str, Any], path: str | Path = "<site>") -> SiteConfig:
    """Validate a parsed site table and check its references and physics.

    Raises
    ------
    InputErrors with one entry per problem, each naming the table and key.
    """
    path = Path(path)
    # the model's own plural names would be read as the tables: only the singular is the format
    plural = [InputError(path, f"[[{k}]]", f"unknown table; write [[{_TABLE_NAMES[k]}]]")
              for k in raw if k in _TABLE_NAMES and k != "sections"]
    if plural:
        raise InputErrors(plural)
    site = raw.get("site")
    currency = site.get("currency", "EUR") if isinstance(site, dict) else "EUR"
    if isinstance(currency, str):
        raw = site_currency_prices(raw, currency)
    try:
        cfg = SiteConfig.model_validate(raw)
    except ValidationError as err:
        raise InputErrors(validation_problems(path, raw, err)) from None
    problems = check_site(cfg, path, raw)
    if problems:
        raise InputErrors(problems)
    return cfg


def load_site(path: str | Path) -> SiteConfig:
    """Load and validate a site file.

    Parameters
    ----------
    path : a TOML file describing the site (see ``plant_configs/`` for an example)
    """
    path = Path(path)
    try:
        text = path.read_bytes().decode("utf-8")
    except FileNotFoundError:
        raise InputError(path, "", "file not found") from None
    except IsADirectoryError:
        raise InputError(path, "", "is a folder; give the site file (TOML)") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(path, "", f"cannot read the file ({exc})") from None
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(path, "", f"not valid TOML: {exc}") from None
    return parse_site(raw, path)


# the internal units (units.py): a value written in them needs no echo in a message
_INTERNAL_UNITS = ("t/h", "bar(a)", "degC", "MW")


def check_site(cfg: SiteConfig, path: Path, raw: dict[str, Any] | None = None) -> list[InputError]:
    """Cross-table checks: ids, references, pressure order, saturation, min <= max. With
    ``raw`` (the parsed file), a message that gives values in the internal units also
    gives them as the file wrote them, when in other units (klb/h, psig, degF)."""
    problems: list[InputError] = []

    def bad(where: str, msg: str) -> None:
        problems.append(InputError(path, where, msg))

    tables = {
        "header": cfg.headers, "fuel": cfg.fuels, "boiler": cfg.boilers,
        "turbogenerator": cfg.turbogenerators, "drive": cfg.drives, "letdown": cfg.letdowns,
        "vent": cfg.vents, "condenser": cfg.condensers,
    }
    seen: dict[str, str] = {}
    for kind, items in tables.items():
        for k, item in enumerate(items):
            if item.id in seen:
                bad(f"[[{kind}]] #{k + 1} (id '{item.id}') > id", f"duplicated id '{item.id}' (also a {seen[item.id]})")
            else:
                seen[item.id] = kind
    if problems:  # references to a duplicated id would be checked against the wrong unit
        return problems

    headers = {h.id: h for h in cfg.headers}
    condensers = {c.id: c for c in cfg.condensers}
    fuels = {f.id: f for f in cfg.fuels}

    # a unit named as the reader of the file names it (see _location): its table, its place
    # among the tables of that kind, and its id
    place = {(kind, item.id): k for kind, items in tables.items() for k, item in enumerate(items)}

    def where(kind: str, uid: str, key: str) -> str:
        return f"[[{kind}]] #{place[(kind, uid)] + 1} (id '{uid}') > {key}"

    def written(kind: str, uid: str, *keys: str) -> str:
        """'; the file: min_steam = "320 klb/h", ...' for those of ``keys`` written in other
        than the internal units ("" when all are in them, or unknown)."""
        rows = (raw or {}).get(kind)
        k = place.get((kind, uid))
        if not isinstance(rows, list) or k is None or k >= len(rows) or not isinstance(rows[k], dict):
            return ""
        shown = [f'{key} = "{v.strip()}"' for key in keys if isinstance(v := rows[k].get(key), str)
                 and not v.strip().endswith(_INTERNAL_UNITS)]
        return f" (the file: {', '.join(shown)})" if shown else ""

    def need_header(kind: str, uid: str, key: str, ref: str) -> bool:
        if ref not in headers:
            known = ", ".join(headers) or "none"
            bad(where(kind, uid, key), f"unknown header '{ref}' (headers: {known})")
            return False
        return True

    for h in cfg.headers:
        if h.pressure >= P_CRIT_BAR:
            bad(where("header", h.id, "pressure"), f"{h.pressure:.2f} bar(a) is above the critical pressure"
                + written("header", h.id, "pressure"))
            continue
        try:
            header_state(h.pressure, h.temperature)
        except SteamPropertyError as exc:
            bad(where("header", h.id, "temperature"), str(exc) + written("header", h.id, "temperature", "pressure"))
        if h.pressure <= 0:
            bad(where("header", h.id, "pressure"), "pressure must be positive")

    if not cfg.boilers:
        bad("[[boiler]]", "the site has no boiler: nothing raises steam")

    for kind, units in (("boiler", cfg.boilers), ("turbogenerator", cfg.turbogenerators)):
        for u in units:
            if u.must_run and not u.available:
                bad(where(kind, u.id, "must_run"), "a unit that is not available cannot be made to run: "
                    "drop must_run, or available = false")

    for b in cfg.boilers:
        need_header("boiler", b.id, "header", b.header)
        for f in b.fuels:
            if f not in fuels:
                bad(where("boiler", b.id, "fuels"), f"unknown fuel '{f}' (fuels: {', '.join(fuels) or 'none'})")
        if b.max_steam <= 0:
            bad(where("boiler", b.id, "max_steam"), "must be positive")
        if b.min_steam < 0:
            bad(where("boiler", b.id, "min_steam"), "must not be negative")
        if b.min_steam > b.max_steam:
            bad(where("boiler", b.id, "min_steam"), f"min_steam {b.min_steam:g} t/h exceeds max_steam {b.max_steam:g} t/h"
                + written("boiler", b.id, "min_steam", "max_steam"))
        if b.efficiency_curve.load[-1] < 1.0 - 1e-9:
            bad(where("boiler", b.id, "efficiency_curve"), "the curve must reach full load (load = 1.0)")
        if b.max_steam > 0 and b.efficiency_curve.load[0] > b.min_steam / b.max_steam + 1e-9:
            bad(where("boiler", b.id, "efficiency_curve"), "the curve must start at or below the minimum stable load")
        for key in ("ramp_up", "ramp_down"):
            v = getattr(b, key)
            if v is not None and v <= 0:
                bad(where("boiler", b.id, key), "must be positive")
        if b.initial_steam is not None and b.initial_on and not (b.min_steam - 1e-9 <= b.initial_steam <= b.max_steam + 1e-9):
            bad(where("boiler", b.id, "initial_steam"), "must lie between min_steam and max_steam")
        for key in ("min_up", "min_down"):
            if getattr(b, key) < 0 or 0 < getattr(b, key) < 1:  # 0 (none) is the 1 h step; a part hour a mistake
                bad(where("boiler", b.id, key), "must be at least 1 h (the model's time step), or 0 for none")

    for t in cfg.turbogenerators:
        if not need_header("turbogenerator", t.id, "inlet", t.inlet):
            continue
        p_prev = headers[t.inlet].pressure
        for k, sec in enumerate(t.sections):
            key = f"[[section]] #{k + 1} > to"
            last = k == len(t.sections) - 1
            if sec.to in headers:
                p_to = headers[sec.to].pressure
            elif sec.to in condensers and last:
                p_to = condensers[sec.to].pressure
            elif sec.to in condensers:
                bad(where("turbogenerator", t.id, key), f"'{sec.to}' is a condenser: only the last section may exhaust to it")
                break
            else:
                known = ", ".join([*headers, *condensers]) or "none"
                bad(where("turbogenerator", t.id, key), f"unknown header or condenser '{sec.to}' (known: {known})")
                break
            if p_to >= p_prev:
                bad(where("turbogenerator", t.id, key),
                    f"'{sec.to}' at {p_to:.2f} bar(a) is not below the previous point at {p_prev:.2f} bar(a): steam cannot expand upwards")
            p_prev = p_to
            if sec.efficiency is None and t.envelope is None:
                bad(where("turbogenerator", t.id, f"[[section]] #{k + 1} > efficiency"),
                    "required unless the turbine gives an 'envelope'")
            if last and sec.max_extraction is not None:
                bad(where("turbogenerator", t.id, f"[[section]] #{k + 1} > max_extraction"), "the last section exhausts; use max_flow")
            if sec.max_extraction is not None and sec.min_extraction > sec.max_extraction:
                bad(where("turbogenerator", t.id, f"[[section]] #{k + 1} > min_extraction"),
                    f"min_extraction {sec.min_extraction:g} t/h exceeds max_extraction {sec.max_extraction:g} t/h")
            if sec.max_flow is not None and sec.min_flow > sec.max_flow:
                bad(where("turbogenerator", t.id, f"[[section]] #{k + 1} > min_flow"),
                    f"min_flow {sec.min_flow:g} t/h exceeds max_flow {sec.max_flow:g} t/h")
        if t.min_throttle > t.max_throttle:
            bad(where("turbogenerator", t.id, "min_throttle"), f"min_throttle {t.min_throttle:g} t/h exceeds max_throttle "
                f"{t.max_throttle:g} t/h" + written("turbogenerator", t.id, "min_throttle", "max_throttle"))
        if t.max_throttle <= 0:
            bad(where("turbogenerator", t.id, "max_throttle"), "must be positive")
        if t.generator_rating <= 0:
            bad(where("turbogenerator", t.id, "generator_rating"), "must be positive")
        if t.no_load_loss < 0:
            bad(where("turbogenerator", t.id, "no_load_loss"), "must not be negative")
        if t.envelope is not None:
            if t.envelope.no_load < 0:
                bad(where("turbogenerator", t.id, "envelope > no_load"),
                    "must not be negative: it is the power lost while the set runs, subtracted "
                    "(a maker's line P = -0.9 MW + 80 kWh/t x throttle is no_load = \"0.9 MW\")")
            if t.no_load_loss > 0:
                bad(where("turbogenerator", t.id, "no_load_loss"),
                    "goes with section efficiencies; with an envelope the loss is the envelope's no_load")
            extr = {s.to for s in t.sections[:-1]}
            for key in t.envelope.extraction:
                if key not in extr:
                    bad(where("turbogenerator", t.id, f"envelope > extraction > {key}"),
                        f"'{key}' is not an extraction of this turbine (extractions: {', '.join(sorted(extr)) or 'none'})")
            for k, sec in enumerate(t.sections):
                if sec.efficiency is not None:
                    bad(where("turbogenerator", t.id, f"[[section]] #{k + 1} > efficiency"),
                        "not used with an 'envelope', which sets the power and so the exhaust states: give one or the other")
            _check_envelope_work(t, {**{c: v.pressure for c, v in condensers.items()},
                                     **{hid: v.pressure for hid, v in headers.items()}}, headers, bad, where)
        if t.fixed_throttle is not None and not (t.min_throttle <= t.fixed_throttle <= t.max_throttle):
            bad(where("turbogenerator", t.id, "fixed_throttle"), "must lie between min_throttle and max_throttle")
        for key in ("min_up", "min_down"):
            if getattr(t, key) < 0 or 0 < getattr(t, key) < 1:
                bad(where("turbogenerator", t.id, key), "must be at least 1 h (the model's time step), or 0 for none")

    for d in cfg.drives:
        if d.duty <= 0:
            bad(where("drive", d.id, "duty"), "must be positive")
        if d.min_hours_between_switches < 0 or 0 < d.min_hours_between_switches < 1:
            bad(where("drive", d.id, "min_hours_between_switches"),
                "must be at least 1 h (the model's time step; 1 h or 0 lets the driver change every hour)")
        st = d.steam_turbine
        if st is not None:
            ok = need_header("drive", d.id, "steam_turbine > inlet", st.inlet)
            ok = need_header("drive", d.id, "steam_turbine > exhaust", st.exhaust) and ok
            if ok and headers[st.exhaust].pressure >= headers[st.inlet].pressure:
                bad(where("drive", d.id, "steam_turbine > exhaust"),
                    f"exhaust header '{st.exhaust}' ({headers[st.exhaust].pressure:.2f} bar(a)) is not at a lower "
                    f"pressure than inlet '{st.inlet}' ({headers[st.inlet].pressure:.2f} bar(a))")
                ok = False
            if st.steam_rate is not None and st.steam_rate <= 0:
                bad(where("drive", d.id, "steam_turbine > steam_rate"), "must be positive")
            elif st.steam_rate is not None and ok:
                try:
                    h = headers[st.inlet]
                    tsr = theoretical_steam_rate(header_state(h.pressure, h.temperature), headers[st.exhaust].pressure)
                    if st.steam_rate < tsr:
                        bad(where("drive", d.id, "steam_turbine > steam_rate"),
                            f"{st.steam_rate:g} kg/kWh is below the theoretical (isentropic) steam rate {tsr:.2f} kg/kWh "
                            f"from '{st.inlet}' to '{st.exhaust}'")
                except SteamPropertyError:
                    pass  # the header itself is reported above
        if d.normal == "steam" and st is None:
            bad(where("drive", d.id, "normal"), "'steam' but the machine has no steam_turbine")
        if d.normal == "motor" and d.motor is None:
            bad(where("drive", d.id, "normal"), "'motor' but the machine has no motor")
        if isinstance(d.initial_hours_since_switch, list) and len(d.initial_hours_since_switch) != d.count:
            bad(where("drive", d.id, "initial_hours_since_switch"),
                f"{len(d.initial_hours_since_switch)} figures for {d.count} machine(s): give one for all or one "
                "per machine")
        if d.initial_on_steam is not None and not (0 <= d.initial_on_steam <= d.count):
            bad(where("drive", d.id, "initial_on_steam"), f"must be between 0 and count ({d.count})")

    for ld in cfg.letdowns:
        ok = need_header("letdown", ld.id, "from", ld.source)
        ok = need_header("letdown", ld.id, "to", ld.to) and ok
        if ok and headers[ld.to].pressure >= headers[ld.source].pressure:
            bad(where("letdown", ld.id, "to"), f"'{ld.to}' ({headers[ld.to].pressure:.2f} bar(a)) is not at a lower "
                f"pressure than '{ld.source}' ({headers[ld.source].pressure:.2f} bar(a))")
        elif ok and headers[ld.to].temperature is not None:
            # a valve keeps the enthalpy and a desuperheater can only cool: steam let down
            # below a superheated header's enthalpy cannot reach its state (a degC/degF
            # slip, typically, that otherwise shows only as an unexplained shortfall)
            try:
                src, to = (header_state(headers[x].pressure, headers[x].temperature) for x in (ld.source, ld.to))
            except SteamPropertyError:
                pass  # the header itself is reported above
            else:
                if src.h < to.h:
                    bad(where("letdown", ld.id, "to"),
                        f"steam let down from '{ld.source}' ({src.T:.1f} degC, {src.h:.1f} kJ/kg) arrives below "
                        f"'{ld.to}''s state ({to.T:.1f} degC, {to.h:.1f} kJ/kg); a desuperheater cannot heat it "
                        "(check the header temperatures and their units)")
        if ld.max_flow <= 0:
            bad(where("letdown", ld.id, "max_flow"), "must be positive")
        if ld.min_flow > ld.max_flow:
            bad(where("letdown", ld.id, "min_flow"), f"min_flow {ld.min_flow:g} t/h exceeds max_flow {ld.max_flow:g} t/h"
                + written("letdown", ld.id, "min_flow", "max_flow"))

    for v in cfg.vents:
        need_header("vent", v.id, "header", v.header)
        if v.max_flow < 0:
            bad(where("vent", v.id, "max_flow"), "must not be negative")

    for c in cfg.condensers:
        if c.ejector_header is not None:
            need_header("condenser", c.id, "ejector_header", c.ejector_header)
        elif c.ejector_steam > 0:
            bad(where("condenser", c.id, "ejector_header"), "required when ejector_steam is given")
        if c.cooling_capacity <= 0:
            bad(where("condenser", c.id, "cooling_capacity"), "must be positive")
        if c.pressure >= 1.0:
            bad(where("condenser", c.id, "pressure"), f"{c.pressure:.3f} bar(a) is not a vacuum; a back-pressure exhaust "
                "goes to a header" + written("condenser", c.id, "pressure"))
        else:
            try:
                saturation_temperature(c.pressure)
            except SteamPropertyError as exc:
                bad(where("condenser", c.id, "pressure"), str(exc))

    da = cfg.deaerator
    if da.heating_steam not in headers:  # [deaerator] is a single table, not [[deaerator]]
        bad("[deaerator] > heating_steam", f"unknown header '{da.heating_steam}' (headers: {', '.join(headers) or 'none'})")
    elif headers[da.heating_steam].pressure <= da.pressure:
        bad("[deaerator] > heating_steam", "the heating-steam header must be above the deaerator pressure")
    try:
        t_da = saturation_temperature(da.pressure)
        for key in ("makeup_temperature", "condensate_temperature"):
            t_w = getattr(da, key)
            if t_w >= t_da:
                vacuum = (f"; the deaerator pressure, {da.pressure:.3f} bar(a), is below the atmosphere: "
                          "psia or bar(a) meant as gauge?" if da.pressure < STANDARD_ATMOSPHERE_BAR else "")
                bad(f"[deaerator] > {key}", f"{t_w:g} degC is not below the deaerator saturation temperature "
                    f"{t_da:.1f} degC at {da.pressure:.3f} bar(a)" + vacuum)
            elif t_w <= 0:
                bad(f"[deaerator] > {key}", f"{t_w:g} degC: liquid water must be above 0 degC")
    except SteamPropertyError as exc:
        bad("[deaerator] > pressure", str(exc))

    g = cfg.grid
    if g.max_import < 0 or g.max_export < 0 or g.min_import < 0:
        bad("[grid]", "limits must not be negative")
    if g.min_import > g.max_import:
        bad("[grid] > min_import", "exceeds max_import")
    if g.min_import > 0 and g.max_export > 0:
        # one connection point meters the net flow: a floor on the import (a reverse-power
        # relay, a contract) rules out export in every hour
        bad("[grid] > min_import", f"{g.min_import:g} MW with max_export {g.max_export:g} MW: a minimum "
            "import means the site never exports; set max_export = \"0 MW\" or drop min_import")
    return problems


def _check_envelope_work(t: TurboGenerator, pressures: dict[str, float], states: dict[str, Header],
                         bad: Callable[[str, str], None], where: Callable[[str, str, str], str]) -> None:
    """Walk an envelope's sections as :func:`equipment.turbine.coefficients` does: the steam
    leaving section k has done the envelope's work w_k [kJ/kg]. Each section's share,
    w_k - w_(k-1), must be positive and no more than an isentropic expansion from where the
    section starts to its pressure (more would take an efficiency above 1, entropy falling)."""
    from ..equipment.turbine import envelope_work
    from ..steam import isentropic_drop, state_ph

    if t.inlet not in states or any(sec.to not in pressures for sec in t.sections):
        return  # references are reported elsewhere
    try:
        h = states[t.inlet]
        state = header_state(h.pressure, h.temperature)
        h_in = state.h
        work = envelope_work(t)
        coeffs = t.envelope.extraction if t.envelope is not None else {}
        prev, prev_at = 0.0, t.inlet
        for k, (sec, w) in enumerate(zip(t.sections, work)):
            last = k == len(t.sections) - 1
            given = last or sec.to in coeffs
            key = "envelope > throttle" if last else f"envelope > extraction > {sec.to}"
            leaving = "exhaust" if last else f"extraction to '{sec.to}'"
            hint = "" if given else " (no coefficient given for it, so 0)"
            ideal = isentropic_drop(state, pressures[sec.to])
            if w - prev <= 1e-9:
                bad(where("turbogenerator", t.id, key),
                    f"steam leaving at the {leaving}{hint} would do {w:.1f} kJ/kg of work, no more than steam "
                    f"leaving at '{prev_at}' ({prev:.1f} kJ/kg): each section must do some")
            elif w - prev > ideal + 1e-9:
                if k == 0:
                    bad(where("turbogenerator", t.id, key),
                        f"steam leaving at the {leaving}{hint} would do {w:.1f} kJ/kg of work (generator efficiency "
                        f"included), more than the {ideal:.1f} kJ/kg of an isentropic expansion from '{t.inlet}' "
                        f"to '{sec.to}'")
                else:  # figures of this section alone, from where the one before leaves the steam
                    bad(where("turbogenerator", t.id, key),
                        f"steam leaving at the {leaving}{hint} would do {w:.1f} kJ/kg of work from '{t.inlet}' "
                        f"(generator efficiency included), {w - prev:.1f} of it in this section: more than the "
                        f"{ideal:.1f} kJ/kg of an isentropic expansion from the state at '{prev_at}' "
                        f"({state.h:.1f} kJ/kg, where the section before leaves it, not the header's) to '{sec.to}'")
                return  # later sections would start from an impossible state
            state = state_ph(pressures[sec.to], h_in - w)
            prev, prev_at = w, sec.to
    except SteamPropertyError:
        pass  # the header itself is reported elsewhere
