"""What every system shares: coordinates, momenta, parameters, state order, angles, units,
pickling."""

from __future__ import annotations

import numpy as np
import sympy as sp

from phaselab.errors import ModelError
from phaselab.model import angles as angle_rules
from phaselab.model.params import Parameter, resolve_values
from phaselab.model.units import declared_units


def as_symbols(items, what: str) -> tuple[sp.Symbol, ...]:
    """Turn names or symbols into a tuple of sympy symbols (strings become real symbols)."""
    if isinstance(items, (str, sp.Symbol)):
        items = [items]
    if not isinstance(items, (list, tuple)):
        raise ModelError(f"{what} must be a name, a sympy symbol or a list of them, got {items!r:.60}")
    out = []
    for item in items:
        if isinstance(item, sp.Symbol):
            out.append(item)
        elif isinstance(item, str) and item.isidentifier() and not item.startswith("_"):
            out.append(sp.Symbol(item, real=True))
        else:
            raise ModelError(f"{what} must be names or sympy symbols, got {item!r}")
    return tuple(out)


class PhaseSpaceSystem:
    """Base of :class:`~phaselab.model.hamiltonian.Hamiltonian` and
    :class:`~phaselab.model.maps.AreaPreservingMap`.

    Subclasses set ``coords``, ``momenta`` (tuples of sympy symbols, state order) and
    ``parameters`` (tuple of :class:`Parameter`).

    Attributes
    ----------
    kind : {"flow", "map"}
        Declared by each subclass (``Hamiltonian.kind == "flow"``, ``AreaPreservingMap.kind ==
        "map"``); code reads ``system.kind`` once :func:`phaselab.engine.inputs.system` has
        checked the argument is a system.
    angle_intervals : dict of str to (float, float)
        Each state component that is an angle, with the interval ``[low, high)`` it is
        wrapped into where a point is shown or saved (:mod:`phaselab.model.angles`). A
        map's ``modulus`` fills it; a flow declares it with ``angles=``.
    units : dict of str to str
        Canonical unit strings of the coordinates, momenta, time and parameters that were
        given one (:mod:`phaselab.model.units`); the rest have none.
    """

    kind: str
    coords: tuple
    momenta: tuple
    parameters: tuple[Parameter, ...]
    angle_intervals: dict = {}
    units: dict = {}

    def _set_state(self, coords, momenta, what: str) -> None:
        """Set ``coords`` and ``momenta`` (state order), one momentum per coordinate."""
        self.coords = as_symbols(coords, "coordinates")
        self.momenta = as_symbols(momenta, "momenta")
        if len(self.coords) != len(self.momenta):
            raise ModelError(
                f"{len(self.coords)} coordinates but {len(self.momenta)} momenta; each coordinate needs one momentum")
        if not self.coords:
            raise ModelError(f"{what} needs at least one coordinate")

    @property
    def dof(self) -> int:
        """Number of degrees of freedom ``n`` (the state has ``2n`` components)."""
        return len(self.coords)

    @property
    def state_symbols(self) -> tuple[sp.Symbol, ...]:
        """``(q1..qn, p1..pn)``."""
        return self.coords + self.momenta

    @property
    def params(self) -> dict[str, float]:
        """Parameter names with their default values."""
        return {p.name: p.default for p in self.parameters}

    @property
    def param_symbols(self) -> tuple[sp.Symbol, ...]:
        return tuple(p.symbol for p in self.parameters)

    def param_values(self, params=None) -> np.ndarray:
        """Parameter values in model order; ``params`` overrides defaults by name.

        Returns
        -------
        numpy.ndarray, shape (n_params,)
        """
        return resolve_values(self.parameters, params)

    # ------------------------------------------------------------------ angles and units
    @property
    def angles(self) -> dict[str, float]:
        """The period of each angle (state component on a circle), by name; ``{}`` for none."""
        return {name: high - low for name, (low, high) in self.angle_intervals.items()}

    def angle_wrapping(self) -> tuple[np.ndarray, np.ndarray]:
        """Per-component ``(period, low)`` arrays, shape ``(2n,)``; period 0 where a component
        is not an angle."""
        return angle_rules.wrapping_arrays(self.angle_intervals, [s.name for s in self.state_symbols])

    def wrap_angles(self, states) -> np.ndarray:
        """States with every angle wrapped into its interval.

        Parameters
        ----------
        states : array_like, shape (..., 2n)

        Returns
        -------
        numpy.ndarray, same shape (a copy)
        """
        period, low = self.angle_wrapping()
        return angle_rules.wrap(states, period, low)

    def unit(self, name: str) -> str | None:
        """The unit of a coordinate, momentum, the time or a parameter, or None."""
        return self.units.get(getattr(name, "name", name))

    def _set_units(self, units, time_name: str | None) -> None:
        """Check ``units=`` against the model's names (the time is ``t`` unless named)."""
        allowed = {s.name: "state" for s in self.state_symbols}
        allowed[time_name or "t"] = "time"
        allowed.update({p.name: "parameter" for p in self.parameters})
        self.units = declared_units(units, allowed)

    def __getstate__(self):
        """The instance dict without cached lambdified functions, which cannot be pickled;
        they are rebuilt on first use after unpickling (so systems travel to Dask workers)."""
        return {k: v for k, v in self.__dict__.items()
                if not (callable(v) and getattr(v, "__name__", "") == "_lambdifygenerated")}
