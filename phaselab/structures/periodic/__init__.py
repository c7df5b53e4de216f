"""Periodic orbits: the result, Newton's method on return maps, the search over a region, symmetric orbits of reversible maps.

A period-k orbit is a fixed point of the k-th return map P (:mod:`phaselab.structures.returns`):
k iterates of a map, k periods of a drive, or the k-th crossing of a section plane at fixed
energy. :mod:`.shooting` solves it by Newton's method with the exact derivative of P,
:mod:`.search` finds every distinct orbit of a period in a region, :mod:`.symmetric` uses a
map's reversor (Greene's method), :mod:`.symmetries` handles flows with conserved momenta,
:mod:`.rounding` says when a residual is at the level of rounding, :mod:`.assembly` builds the
:class:`~.result.PeriodicOrbit`.
"""

from phaselab.structures.periodic.result import (PARABOLIC_TOL, REASONS, STABILITY, PeriodicOrbit, classify,
                                                 orbits_dataset)
from phaselab.structures.periodic.search import PeriodicOrbits, find_periodic_orbits
from phaselab.structures.periodic.shooting import newton, periodic_orbit
from phaselab.structures.periodic.symmetric import symmetric_orbit

__all__ = ["PeriodicOrbit", "PeriodicOrbits", "periodic_orbit", "find_periodic_orbits", "symmetric_orbit",
           "classify", "orbits_dataset", "newton", "STABILITY", "REASONS", "PARABOLIC_TOL"]
