"""Normal forms near elliptic equilibria of Hamiltonian flows (Birkhoff and resonant, by Lie series)."""

from phaselab.structures.normal_forms.compute import normal_form
from phaselab.structures.normal_forms.result import NormalForm

__all__ = ["normal_form", "NormalForm"]
