"""The symbolic model layer: Hamiltonians, Lagrangians, maps, parameters, the safe parser.

This layer never imports numba, bokeh or ipywidgets.
"""

from phaselab.model.hamiltonian import Hamiltonian
from phaselab.model.maps import AreaPreservingMap, SymplecticMap
from phaselab.model.params import Parameter
from phaselab.model.parser import parse_expression

__all__ = ["AreaPreservingMap", "SymplecticMap", "Hamiltonian", "Parameter", "parse_expression"]
