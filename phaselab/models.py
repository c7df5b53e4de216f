"""Published model systems: ``phaselab.models.henon_heiles()`` and the rest.

A thin public name for :mod:`phaselab.model.catalogue`; see there for the list and the
sources of each model.
"""

from phaselab.model.catalogue import (MODELS, available, double_pendulum, driven_pendulum,
                                      fput_chain, henon_heiles, kepler, pendulum,
                                      restricted_three_body, spatial_restricted_three_body,
                                      standard_map, toda_lattice)

__all__ = ["MODELS", "available", "pendulum", "henon_heiles", "kepler", "double_pendulum",
           "restricted_three_body", "spatial_restricted_three_body", "toda_lattice", "fput_chain",
           "driven_pendulum", "standard_map"]
