"""What every system shares: coordinates, momenta, parameters, state order, pickling."""

from __future__ import annotations

import numpy as np
import sympy as sp

from phaselab.model.params import Parameter, resolve_values


class PhaseSpaceSystem:
    """Base of :class:`~phaselab.model.hamiltonian.Hamiltonian` and
    :class:`~phaselab.model.maps.AreaPreservingMap`.

    Subclasses set ``coords``, ``momenta`` (tuples of sympy symbols, state order) and
    ``parameters`` (tuple of :class:`Parameter`).
    """

    coords: tuple
    momenta: tuple
    parameters: tuple[Parameter, ...]

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

    def __getstate__(self):
        """The instance dict without cached lambdified functions, which cannot be pickled;
        they are rebuilt on first use after unpickling (so systems travel to Dask workers)."""
        return {k: v for k, v in self.__dict__.items()
                if not (callable(v) and getattr(v, "__name__", "") == "_lambdifygenerated")}
