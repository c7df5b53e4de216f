"""Model parameters: a name, a default value and an optional slider range."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Mapping

import numpy as np
import sympy as sp

from phaselab.errors import ParameterError


@dataclass(frozen=True)
class Parameter:
    """A named model parameter.

    Attributes
    ----------
    name : str
        The name used in ``params={...}`` and in expression strings.
    symbol : sympy.Symbol
        The symbol standing for it in the model's expressions.
    default : float
        The value used when a call does not override it.
    range : tuple of float or None
        ``(low, high)`` for a slider; ``None`` lets the widget choose around the default.
    """

    name: str
    symbol: sp.Symbol
    default: float
    range: tuple[float, float] | None = None


def make_parameters(spec, reserved: set[str]) -> tuple[Parameter, ...]:
    """Build :class:`Parameter` objects from the forms a user may give.

    Parameters
    ----------
    spec : None, mapping or sequence
        ``{"mu": 0.01}``, ``{"mu": (0.01, (0.0, 0.5))}``, ``{mu_symbol: 0.01}`` or a
        sequence of :class:`Parameter`.
    reserved : set of str
        Names already taken by coordinates, momenta or time.
    """
    if spec is None:
        return ()
    items = []
    if isinstance(spec, Mapping):
        for key, value in spec.items():
            if isinstance(key, sp.Symbol):
                name, symbol = key.name, key
            elif isinstance(key, str):
                name, symbol = key, sp.Symbol(key, real=True)
            else:
                raise ParameterError(f"parameter names must be strings or sympy symbols, got {key!r}")
            rng = None
            if isinstance(value, (tuple, list)):
                if len(value) != 2:
                    raise ParameterError(
                        f"parameter {name!r}: give a default or (default, (low, high)), got {value!r}")
                value, rng = value
                try:
                    rng = (float(rng[0]), float(rng[1]))
                except (TypeError, ValueError, IndexError):
                    raise ParameterError(f"parameter {name!r}: range must be (low, high), got {rng!r}") from None
                if not (math.isfinite(rng[0]) and math.isfinite(rng[1]) and rng[0] < rng[1]):
                    raise ParameterError(f"parameter {name!r}: range {rng} must be finite with low < high")
            items.append(Parameter(name, symbol, _finite(name, value), rng))
    else:
        for item in spec:
            if not isinstance(item, Parameter):
                raise ParameterError(f"expected Parameter objects, got {item!r}")
            items.append(item)
    names = [p.name for p in items]
    dupes = {n for n in names if names.count(n) > 1}
    if dupes:
        raise ParameterError(f"parameters given twice: {', '.join(sorted(dupes))}")
    clash = set(names) & reserved
    if clash:
        raise ParameterError(
            f"parameter names clash with coordinates, momenta or time: {', '.join(sorted(clash))}")
    return tuple(items)


def finite_number(value, what: str, error: type = ParameterError) -> float:
    """``float(value)``, refusing non-numbers and non-finite values with ``error`` whose
    message names ``what`` ("dt", "plane value of 'x'", ...)."""
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise error(f"{what} must be a number, got {value!r}") from None
    if not math.isfinite(v):
        raise error(f"{what} must be finite, got {v}")
    return v


def _finite(name: str, value) -> float:
    return finite_number(value, f"parameter {name!r}")


def resolve_values(parameters: tuple[Parameter, ...], overrides) -> np.ndarray:
    """Parameter values in model order, defaults replaced by ``overrides``.

    Parameters
    ----------
    parameters : tuple of Parameter
    overrides : mapping of str to float, or None

    Returns
    -------
    numpy.ndarray, shape (n_params,)

    Raises
    ------
    ParameterError
        For names the model does not have (listed) and for non-finite values.
    """
    values = np.array([p.default for p in parameters], dtype=np.float64)
    if overrides:
        if not isinstance(overrides, Mapping):
            raise ParameterError(f"params must be a mapping of name to value, got {type(overrides).__name__}")
        index = {p.name: i for i, p in enumerate(parameters)}
        unknown = [str(k) for k in overrides if str(getattr(k, "name", k)) not in index]
        if unknown:
            known = ", ".join(index) or "none"
            raise ParameterError(f"unknown parameters: {', '.join(unknown)}; this model has: {known}")
        for key, value in overrides.items():
            name = str(getattr(key, "name", key))
            values[index[name]] = _finite(name, value)
    return values
