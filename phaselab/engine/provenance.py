"""What labelled results record beside their numbers: the model, the parameters, the
versions of the software that made them, and the reminder that they are model results.

The one place for the provenance of every labelled result (``to_xarray()``, data files):
orbits, manifolds and families in the compute layer, and the scans
(:mod:`phaselab.scan.datasets` builds their datasets on these functions).
"""

from __future__ import annotations

import json
import platform

import numpy as np

from phaselab.errors import MissingExtraError

NOTE = ("model results; confirm with validated tools and the responsible engineers before they "
        "inform a design decision")
"""The reminder every labelled result carries."""

MODEL_NOTE = ("Model results: confirm with validated tools and the responsible engineers before they "
              "inform a design.")
"""The same reminder as a sentence, for figures."""

LIBRARIES = ("numpy", "scipy", "sympy", "numba", "xarray", "zarr", "netCDF4", "dask", "distributed")
"""Libraries whose versions are recorded (those installed)."""


def xarray_module():
    """xarray, or a clear error naming the extra that installs it."""
    try:
        import xarray
    except ImportError:
        raise MissingExtraError("labelled results need xarray; install it with "
                                "pip install 'phaselab[lab]'") from None
    return xarray



def expression_text(system) -> str:
    """The system's defining expression as text: ``str(H.expr)``, or a map's update rules as
    ``"q' = ...; p' = ..."``; '' when unknown."""
    if system is None:
        return ""
    expr = getattr(system, "expr", None)
    if expr is not None:
        return "; ".join(str(e) for e in expr) if isinstance(expr, (list, tuple)) else str(expr)
    update = getattr(system, "update", None)
    syms = getattr(system, "state_symbols", None)
    if update is not None and syms is not None and len(update) == len(syms):
        return "; ".join(f"{s.name}' = {e}" for s, e in zip(syms, update))
    return ""


def versions() -> dict:
    """Versions of phaselab, Python and the numeric libraries installed, as
    ``{"phaselab_version": ..., "numpy_version": ..., ...}`` (read from the installed
    packages' metadata, without importing them)."""
    from importlib import metadata

    import phaselab

    out = {"phaselab_version": phaselab.__version__, "python_version": platform.python_version()}
    for name in LIBRARIES:
        try:
            out[f"{name}_version"] = metadata.version(name)
        except metadata.PackageNotFoundError:
            continue
    return out


def state_names(system, width: int | None = None) -> list[str]:
    """Names of the state components (``z0, z1, ...`` when the system gives none)."""
    names = [s.name for s in getattr(system, "state_symbols", ())]
    if not names and width is not None:
        names = [f"z{k}" for k in range(width)]
    return names


def provenance(system=None, params=None, **fields) -> dict:
    """The record kept beside a result's numbers.

    Parameters
    ----------
    system : Hamiltonian or AreaPreservingMap, optional
    params : mapping, optional
        Parameter values used (the system's defaults fill the rest).
    **fields
        What else describes the computation: ``energy``, ``method``, ``dt``, ``t``, ...
        (None is kept and written as JSON ``null`` in files).

    Returns
    -------
    dict
        ``system`` (name), ``system_kind`` ("flow" or "map"), ``expression``, ``state``,
        ``params``, the model's ``angles`` (name -> [low, high]) and ``units`` (name -> unit)
        where it declares any (:func:`model_labels`), the given fields, ``note``, and the
        versions of :func:`versions`.
    """
    used = {}
    if system is not None:
        try:
            values = system.param_values(params)
            used = {p.name: float(v) for p, v in zip(system.parameters, values)}
        except Exception:  # a result rebuilt without its system: keep what was given
            used = {str(k): float(v) for k, v in (params or {}).items()}
    else:
        used = {str(k): v for k, v in (params or {}).items()}
    meta = {
        "system": str(getattr(system, "name", "") or "") if system is not None else "",
        "system_kind": system.kind if system is not None else "",
        "expression": expression_text(system),
        "state": state_names(system),
        "params": used,
    }
    meta.update(model_labels(system))
    meta.update(fields)
    meta["note"] = NOTE
    meta.update(versions())
    return meta


def model_labels(system) -> dict:
    """``{"angles": {name: [low, high]}, "units": {name: unit}}`` of a system, each key only
    where the model declares something (so files of systems without them are unchanged)."""
    out = {}
    intervals = getattr(system, "angle_intervals", None) or {}
    if intervals:
        out["angles"] = {str(k): [float(a), float(b)] for k, (a, b) in intervals.items()}
    units = getattr(system, "units", None) or {}
    if units:
        out["units"] = {str(k): str(v) for k, v in units.items()}
    return out


def netcdf_attrs(meta: dict) -> dict:
    """Attributes that NetCDF and Zarr can hold: dicts, lists and None become JSON text,
    booleans become 0/1."""
    out = {}
    for key, value in meta.items():
        if isinstance(value, (dict, list, tuple)) or value is None:
            out[key] = json.dumps(plain(value), allow_nan=True)
        elif isinstance(value, (bool, np.bool_)):
            out[key] = int(value)
        elif isinstance(value, np.generic):
            out[key] = value.item()
        else:
            out[key] = value
    return out


def plain(value, nan_as_none: bool = False):
    """numpy scalars and arrays inside ``value`` (dicts, lists and tuples, to any depth)
    turned into Python numbers and lists, for JSON and for file attributes; with
    ``nan_as_none`` non-finite floats become ``None`` (JSON ``null``)."""
    if isinstance(value, dict):
        return {str(k): plain(v, nan_as_none) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [plain(v, nan_as_none) for v in value]
    if isinstance(value, np.ndarray):
        return plain(value.tolist(), nan_as_none)
    if isinstance(value, np.generic):
        value = value.item()
    if nan_as_none and isinstance(value, float) and not np.isfinite(value):
        return None
    return value


# ----------------------------------------------------------------------------- CF conventions
CF_CONVENTIONS = "CF-1.10"
"""The version of the CF conventions every NetCDF and Zarr file follows."""

PHASELAB_UNIT_WORDS = ("model time", "iterate", "log10", "per ")
"""Words of phaselab's own unit wording that a CF reader cannot parse (such a wording is kept
in the variable's ``comment`` instead of its ``units``)."""


def cf_dataset(ds, title: str | None = None):
    """A shallow copy of ``ds`` carrying the CF attributes (the one place they are written).

    Global: ``Conventions`` (:data:`CF_CONVENTIONS`), ``title``, ``history`` (UTC date and the
    phaselab version, added once: a dataset that has it keeps its date), ``source`` (phaselab and the system).
    Per variable and coordinate: ``long_name`` (from its ``description``, else its name) and
    ``units`` only where a unit is known (phaselab's own wording such as "model time units"
    moves to ``comment``). Provenance already in ``ds.attrs`` is kept.

    Parameters
    ----------
    ds : xarray.Dataset
    title : str, optional
        Default: the system's name and the kind of result.

    Returns
    -------
    xarray.Dataset
    """
    import datetime

    import phaselab

    out = ds.copy()
    attrs = dict(out.attrs)
    system = str(attrs.get("system") or "")
    attrs["Conventions"] = CF_CONVENTIONS
    if title or not attrs.get("title"):
        attrs["title"] = title or (f"phaselab result for {system}" if system else "phaselab result")
    stamp = datetime.datetime.now(datetime.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
    line = f"{stamp} written by phaselab {phaselab.__version__}"
    earlier = str(attrs.get("history") or "")
    attrs["history"] = earlier if "phaselab" in earlier else (f"{earlier}\n{line}" if earlier else line)
    if not attrs.get("source"):
        expression = str(attrs.get("expression") or "")
        attrs["source"] = (f"phaselab {phaselab.__version__}"
                           + (f", system {system}" if system else "")
                           + (f": {expression}" if expression else ""))
    out.attrs = attrs
    time_unit = model_time_unit(attrs)
    for name in list(out.variables):
        var_attrs = dict(out[name].attrs)
        var_attrs.setdefault("long_name", str(var_attrs.get("description") or name))
        unit = var_attrs.get("units")
        if unit == "model time units" and time_unit:
            var_attrs["units"] = unit = time_unit      # the model declares its time's unit
        if isinstance(unit, str) and any(w in unit for w in PHASELAB_UNIT_WORDS):
            del var_attrs["units"]
            var_attrs.setdefault("comment", f"in {unit}")
        out[name].attrs = var_attrs
    return out


def model_time_unit(attrs: dict) -> str | None:
    """The unit the model declares for its time, read from a result's attributes (``units``
    minus the state components and the parameters, written by :func:`provenance`), or None."""
    def read(key, empty):
        value = attrs.get(key, empty)
        try:
            return json.loads(value) if isinstance(value, str) else (value or empty)
        except ValueError:
            return empty
    units, state, params = read("units", {}), read("state", []), read("params", {})
    if not isinstance(units, dict):
        return None
    named = set(state if isinstance(state, list) else []) | set(params if isinstance(params, dict) else [])
    return next((str(u) for k, u in units.items() if k not in named), None)
