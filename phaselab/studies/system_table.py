"""The reader of a study file's ``[system]`` table with its ``[parameters]``: the model (a
Hamiltonian, a Lagrangian, a map's rules or a catalogue model), its parameters and their
overrides, the driving period, the angles (a map's modulus), the units, and the check that
every declared parameter is used. Every problem is a
:class:`~phaselab.errors.StudyFileError` naming the file, the dotted key and what is wrong.
"""

from __future__ import annotations

import inspect

from phaselab.errors import PhaselabError, StudyFileError
from phaselab.studies.fields import Fields

_SYSTEM_FORMS = ("hamiltonian", "lagrangian", "map", "model")
_SYSTEM_KEYS = _SYSTEM_FORMS + ("coordinates", "momenta", "velocities", "time", "period",
                                "modulus", "angles", "units", "name", "options")


# ====================================================================== [system], [parameters]
def read_system(f: Fields, data: dict):
    from phaselab.model.hamiltonian import Hamiltonian
    from phaselab.model.maps import AreaPreservingMap

    sysd = f.table(data, "", "system", required=True)
    f.only_keys(sysd, "system", _SYSTEM_KEYS)
    forms = [k for k in _SYSTEM_FORMS if k in sysd]
    if len(forms) != 1:
        got = ", ".join(f"system.{k}" for k in forms) or "none"
        raise f.error("system", "give exactly one of system.hamiltonian, system.lagrangian, "
                                f"system.map or system.model (got {got})")
    form = forms[0]
    allowed_extra = {
        "hamiltonian": {"coordinates", "momenta", "time", "period", "angles", "units", "name"},
        "lagrangian": {"coordinates", "velocities", "momenta", "time", "period", "angles", "units", "name"},
        "map": {"coordinates", "momenta", "modulus", "angles", "units", "name"},
        "model": {"options"},
    }[form]
    extra = [k for k in sysd if k != form and k not in allowed_extra]
    if extra:
        raise f.error(", ".join(f"system.{k}" for k in extra),
                      f"not used with system.{form}; keys for this form: "
                      + ", ".join(sorted(allowed_extra | {form})))
    prm_table = f.table(data, "", "parameters")

    if form == "model":
        system = _catalogue_model(f, sysd)
        params = _parameter_overrides(f, prm_table, system)
        return system, form, params

    declared = _declared_parameters(f, prm_table)
    name = f.string(sysd, "system", "name", default=None, max_length=80)
    coords = f.names(sysd, "system", "coordinates", required=True)
    time = f.name(sysd["time"], "system.time") if "time" in sysd else None
    try:
        if form == "hamiltonian":
            expr = f.string(sysd, "system", "hamiltonian", required=True)
            momenta = f.names(sysd, "system", "momenta", required=True)
            angles, units = _angles_and_units(f, sysd, form, coords, momenta, time, declared)
            system = _guard("system.hamiltonian", f, lambda: Hamiltonian(
                expr, coords, momenta, params=declared, time=time,
                period=_period(f, sysd, declared), name=name, angles=angles, units=units))
        elif form == "lagrangian":
            expr = f.string(sysd, "system", "lagrangian", required=True)
            velocities = f.names(sysd, "system", "velocities", required=True)
            momenta = f.names(sysd, "system", "momenta")
            angles, units = _angles_and_units(f, sysd, form, coords, momenta or [f"p_{c}" for c in coords],
                                              time, declared)
            system = _guard("system.lagrangian", f, lambda: Hamiltonian.from_lagrangian(
                expr, coords, velocities, params=declared, time=time,
                period=_period(f, sysd, declared), name=name, momenta=momenta, angles=angles, units=units))
        else:
            momenta = f.names(sysd, "system", "momenta", required=True)
            rules = _map_rules(f, sysd["map"])
            modulus = _modulus(f, sysd, coords + momenta)
            angles, units = _angles_and_units(f, sysd, form, coords, momenta, None, declared)
            system = _guard("system.map", f, lambda: AreaPreservingMap(
                rules, coords, momenta, params=declared, modulus=modulus, name=name, angles=angles,
                units=units))
    except RecursionError:  # pragma: no cover - _guard catches it first
        raise f.error(f"system.{form}", "expression too deeply nested") from None
    _refuse_unused(f, system, form, declared)
    params = {p.name: p.default for p in system.parameters}
    return system, form, params


def _angles_and_units(f: Fields, sysd: dict, form: str, coords, momenta, time, declared):
    """``system.angles`` and ``system.units``, checked here by the model's own readers (so a
    problem is reported at its key) and handed to the constructor as the API takes them:
    ``angles = { theta = "2*pi" }`` (a period, or ``[low, high]``) or a list of names (period
    2 pi each); ``units = { x = "m", px = "kg m/s", t = "s", mu = "1" }``."""
    from phaselab.model.angles import declared_angles, interval
    from phaselab.model.units import declared_units

    angles = sysd.get("angles")
    if angles is not None:
        if not isinstance(angles, (dict, list, str)):
            raise f.error("system.angles", "must be a table of coordinate = period (or [low, high]), or a "
                                           "list of coordinate names")
        state = list(coords) + list(momenta)
        if form == "map":   # a map may wrap any component (its modulus by another name)
            for key in (angles if isinstance(angles, dict) else []):
                if key not in state:
                    raise f.error(f"system.angles.{key}", "not a coordinate or momentum; the state is "
                                                          + ", ".join(state))
        try:
            if form == "map":
                for key, entry in (angles.items() if isinstance(angles, dict) else []):
                    interval(entry, key)
            else:
                declared_angles(angles, state, list(coords))
        except PhaselabError as exc:
            raise f.error("system.angles", str(exc)) from None
    units = sysd.get("units")
    if units is not None:
        if not isinstance(units, dict):
            raise f.error("system.units", "must be a table of name = \"unit\", e.g. { x = \"m\", t = \"s\" }")
        allowed = {name: "state" for name in list(coords) + list(momenta)}
        allowed[time or "t"] = "time"
        allowed.update({name: "parameter" for name in declared})
        try:
            declared_units(units, allowed)
        except PhaselabError as exc:
            raise f.error("system.units", str(exc)) from None
    return angles, units


def _refuse_unused(f: Fields, system, form: str, declared: dict) -> None:
    """A parameter declared in ``[parameters]`` that the system never uses is a mistake in the
    file (a misspelt name, a leftover): refused, naming it."""
    if form == "model" or not declared:
        return
    if system.kind == "map":
        used = set().union(*(e.free_symbols for e in system.update))
        where = "system.map"
    else:
        used = set(system.expr.free_symbols)
        if getattr(system, "period", None) is not None and hasattr(system.period, "free_symbols"):
            used |= system.period.free_symbols
        where = f"system.{form}" + (" or system.period" if system.period is not None else "")
    names = {s.name for s in used}
    for key in declared:
        if key not in names:
            raise f.error(f"parameters.{key}", f"declared but not used by {where}; remove it, or use it")


def _guard(key: str, f: Fields, build):
    """Run a model constructor, turning its errors into errors at ``key``.

    This is where text from the file meets sympy, so besides phaselab's own errors any
    exception sympy raises on odd input (``NotImplementedError``, its polynomial errors,
    arithmetic and type errors) becomes a :class:`StudyFileError` at ``key``."""
    try:
        return build()
    except StudyFileError:
        raise
    except PhaselabError as exc:
        raise f.error(key, str(exc)) from None
    except RecursionError:
        raise f.error(key, "expression too deeply nested") from None
    except MemoryError:
        raise f.error(key, "the system is too large to build") from None
    except Exception as exc:  # sympy refusing odd input, in whatever way it does
        text = str(exc) or type(exc).__name__
        if len(text) > 200:
            text = text[:197] + "..."
        raise f.error(key, f"cannot build the system ({type(exc).__name__}): {text}") from None


def _period(f: Fields, sysd: dict, declared: dict):
    if "period" not in sysd:
        return None
    value = sysd["period"]
    if isinstance(value, bool) or not isinstance(value, (int, float, str)):
        raise f.error("system.period", "must be a number or an expression string in the parameters")
    if not isinstance(value, str):
        f.get_number(sysd, "system", "period", positive=True)
        return float(value)
    from phaselab.model.parser import parse_expression

    try:  # checked here so that a problem is reported at its own key
        parse_expression(value, allowed=set(declared))
    except PhaselabError as exc:
        raise f.error("system.period", str(exc)) from None
    return value


def _declared_parameters(f: Fields, table: dict) -> dict:
    """``[parameters]`` of a file's own system: name = value or {default, range}."""
    out = {}
    for key, value in table.items():
        full = f"parameters.{key}"
        f.name(key, full)
        if isinstance(value, dict):
            f.only_keys(value, full, ("default", "range"))
            default = f.get_number(value, full, "default", required=True)
            if "range" in value:
                low, high = f.numbers(value["range"], f"{full}.range", length=2)
                if not low < high:
                    raise f.error(f"{full}.range", f"must be [low, high] with low < high, got [{low:g}, {high:g}]")
                if not low <= default <= high:
                    raise f.error(f"{full}.default", f"{default:g} lies outside its range [{low:g}, {high:g}]")
                out[key] = (default, (low, high))
            else:
                out[key] = default
        else:
            out[key] = f.number(value, full)
    return out


def _parameter_overrides(f: Fields, table: dict, system) -> dict:
    """``[parameters]`` of a catalogue model: overrides of its own parameters by name."""
    known = {p.name: p for p in system.parameters}
    out = {}
    for key, value in table.items():
        full = f"parameters.{key}"
        if key not in known:
            raise f.error(full, f"model {system.name!r} has no parameter {key!r}; its parameters: "
                                + (", ".join(known) or "none"))
        if isinstance(value, dict):
            raise f.error(full, "a catalogue model's parameter takes a value only (its range is "
                                "the model's own)")
        out[key] = f.number(value, full)
    return out


def _catalogue_model(f: Fields, sysd: dict):
    from phaselab.model.catalogue import MODELS

    name = sysd["model"]
    if not isinstance(name, str) or name not in MODELS:
        shown = name if isinstance(name, str) else type(name).__name__
        raise f.error("system.model", f"unknown model {shown!r}; the catalogue has: "
                                      + ", ".join(MODELS))
    options = f.table(sysd, "system", "options")
    build = MODELS[name]
    accepted = set(inspect.signature(build).parameters)
    kwargs = {}
    for key, value in options.items():
        full = f"system.options.{key}"
        if key not in accepted:
            raise f.error(full, f"model {name!r} takes no option {key!r}; its options: "
                                + (", ".join(sorted(accepted)) or "none"))
        if isinstance(value, bool) or not isinstance(value, (int, float, str)):
            raise f.error(full, f"must be a number or a string, got {type(value).__name__}")
        if isinstance(value, int) and not 0 <= value <= 256:
            raise f.error(full, f"must lie between 0 and 256, got {value}")
        kwargs[key] = value
    return _guard(f"system.model", f, lambda: build(**kwargs))


def _map_rules(f: Fields, rules):
    """``system.map``: a list of strings (new values in state order, all in the old values)
    or of ``[target, expression]`` pairs applied one after another."""
    if not isinstance(rules, list) or not rules:
        raise f.error("system.map", "must be a list of expression strings or of [target, expression] pairs")
    if len(rules) > 200:
        raise f.error("system.map", f"has {len(rules)} rules; the limit is 200")
    out = []
    for i, rule in enumerate(rules):
        full = f"system.map[{i}]"
        if isinstance(rule, str):
            out.append(rule)
        elif isinstance(rule, list) and len(rule) == 2 and all(isinstance(r, str) for r in rule):
            out.append((f.name(rule[0], f"{full}[0]"), rule[1]))
        else:
            raise f.error(full, "must be an expression string or a [target, expression] pair of strings")
    return out


def _modulus(f: Fields, sysd: dict, state_names: list[str]):
    """``system.modulus``: one period for every component, or a table by component name of a
    period or a [low, high] interval (components not named are not wrapped)."""
    if "modulus" not in sysd:
        return None
    value = sysd["modulus"]
    if not isinstance(value, dict):
        return f.number(value, "system.modulus")
    entries = []
    for name in value:
        if name not in state_names:
            raise f.error(f"system.modulus.{name}", f"not a coordinate or momentum; the state is "
                                                    + ", ".join(state_names))
    for name in state_names:
        if name not in value:
            entries.append(None)
            continue
        full = f"system.modulus.{name}"
        entry = value[name]
        if isinstance(entry, list):
            low, high = f.numbers(entry, full, length=2)
            if not low < high:
                raise f.error(full, f"must be [low, high] with low < high, got [{low:g}, {high:g}]")
            entries.append((low, high))
        else:
            period = f.number(entry, full)
            if not period > 0:
                raise f.error(full, f"a period must be positive, got {period:g}")
            entries.append(period)
    return entries


