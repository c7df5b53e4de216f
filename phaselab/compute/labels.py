"""What labelled results record beside their numbers: the model, the parameters, the
versions of the software that made them, and the reminder that they are model results.

One place for the provenance of every ``to_xarray()`` and data file, so that all results
describe themselves the same way. Values are plain strings and numbers (JSON text for lists
and mappings), as NetCDF and Zarr attributes require.
"""

from __future__ import annotations

import json
import platform

import numpy as np

MODEL_NOTE = ("Model results: confirm with validated tools and the responsible engineers before they "
              "inform a design.")
"""The reminder carried by structure results (orbits, manifolds, families) and their figures."""


def expression_text(system) -> str:
    """The system's defining expression as text: ``str(H)`` for a Hamiltonian, the update
    rules ``"q' = ...; p' = ..."`` for a map, ``""`` when unknown."""
    if system is None:
        return ""
    expr = getattr(system, "expr", None)
    if expr is None:
        update = getattr(system, "update", None)
        syms = getattr(system, "state_symbols", None)
        if isinstance(update, (list, tuple)) and syms is not None and len(syms) == len(update):
            return "; ".join(f"{getattr(s, 'name', s)}' = {e}" for s, e in zip(syms, update))
        return ""
    if isinstance(expr, (list, tuple)):
        return "; ".join(str(e) for e in expr)
    return str(expr)


def versions() -> dict:
    """Versions of phaselab and of the libraries its numbers depend on."""
    import numba
    import scipy
    import sympy

    from phaselab import __version__

    return {"phaselab_version": __version__, "numpy_version": np.__version__,
            "scipy_version": scipy.__version__, "sympy_version": sympy.__version__,
            "numba_version": numba.__version__, "python_version": platform.python_version()}


def _plain(value):
    if isinstance(value, (str, int, float, np.integer, np.floating)) and not isinstance(value, bool):
        return value.item() if isinstance(value, np.generic) else value
    if isinstance(value, (bool, np.bool_)):
        return int(value)
    return json.dumps(value, default=str)


def provenance(system, params=None, **extra) -> dict:
    """Attributes describing how a result was made.

    Parameters
    ----------
    system : Hamiltonian or AreaPreservingMap
    params : mapping, optional
        The parameter values used (JSON text).
    **extra
        Anything else to record (method, dt, energy, time, ...); ``None`` values are left out.

    Returns
    -------
    dict of str to str, int or float
    """
    out = {"system": getattr(system, "name", ""), "expression": expression_text(system),
           "state": json.dumps([s.name for s in getattr(system, "state_symbols", ())]),
           "params": json.dumps({str(k): float(v) for k, v in (params or {}).items()})}
    out.update(versions())
    for key, value in extra.items():
        if value is not None:
            out[key] = _plain(value)
    return out
