"""Return maps in reduced coordinates, with their exact derivatives.

A periodic orbit is a fixed point of a return map, and an invariant manifold a curve grown
by it. Three kinds, one interface (:class:`ReturnMap`):

- a map (``system.kind == "map"``): ``k`` iterates, unwrapped; the coordinates are the
  whole state;
- a time-periodic Hamiltonian: ``k`` periods of the drive (stroboscopic map), integrated in
  extended phase space; the coordinates are ``(q, p)``;
- an autonomous flow: the ``k``-th crossing of a section plane at fixed energy (the plane
  convention of :func:`phaselab.section`). The coordinates are the state components other
  than the plane's and the one solved from H = E (for a plane ``x = 0`` of a two degree of
  freedom system solving ``px``: ``(y, py)``).

``apply(u)`` evaluates the map on a batch of coordinates in one compiled call and returns
the images with the Jacobians d(image)/du, computed from the exact tangent maps of the
integrator (no finite differences).
"""

from __future__ import annotations

import numpy as np

from phaselab.engine import inputs
from phaselab.engine.status import OFF_SHELL
from phaselab.errors import ModelError, ParameterError



from phaselab.structures.flow_returns import PlaneReturn, StrobeReturn
from phaselab.structures.return_base import MapReturn, ReturnImages, ReturnMap

__all__ = ["return_map", "ReturnMap", "ReturnImages", "MapReturn", "StrobeReturn", "PlaneReturn", "OFF_SHELL"]


def return_map(system, k, plane=None, energy=None, guess=None, direction=1, solve_for=None,
               params=None, dt=None, method="auto", box=None, t_max=None) -> ReturnMap:
    """The return map of ``system`` for the given kind of section (see the module docstring).

    ``guess`` (shape (m,) or (N, m)) fixes the energy of a plane section when ``energy`` is
    not given (H at the first guess) and the step.
    """
    prm = system.param_values(params)
    k = inputs.count(k, "returns")
    lo, hi = inputs.box(system, box)
    kind = system.kind
    if kind == "map":
        return MapReturn(system, k, prm, lo, hi)
    where = inputs.plane(system, plane)
    if not system.is_autonomous:
        if where.kind == "fixed":
            raise ModelError("a time-dependent Hamiltonian is sectioned stroboscopically: leave plane out")
        ret = StrobeReturn(system, k, prm, lo, hi, inputs.step(dt), method)
        if guess is not None:
            ret.set_step(np.atleast_2d(guess))
        return ret
    if where.kind != "fixed":
        raise ParameterError("an autonomous flow needs a section plane, e.g. plane={'x': 0.0}")
    if energy is None:
        if guess is None:
            raise ParameterError("give energy=... (or a guess to take it from)")
        energy = float(np.atleast_1d(system.energy(np.atleast_2d(guess)[:1], params=params))[0])
    ret = PlaneReturn(system, k, prm, lo, hi, where, energy, direction, solve_for, inputs.step(dt),
                      method, None if t_max is None else inputs.positive_number(t_max, "t_max"))
    if guess is not None:
        ret.set_step(np.atleast_2d(guess))
    return ret
