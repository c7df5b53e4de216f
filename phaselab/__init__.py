"""phaselab: explore the phase space of Hamiltonian systems.

``Hamiltonian`` and the error classes are imported with the package; everything else
(``AreaPreservingMap``, ``models``, the numerics, export and the notebook widgets) is
imported on first use, so a script pays only for what it calls.
"""

__version__ = "0.1.0"

from phaselab.errors import (ExpressionError, IntegrationError, ModelError,  # noqa: E402
                             ParameterError, PhaselabError, PhaselabWarning, StudyFileError)
from phaselab.model.hamiltonian import Hamiltonian  # noqa: E402

_LAZY = {
    "AreaPreservingMap": "phaselab.model.maps",
    "models": "phaselab.models",
    "trajectory": "phaselab.compute.trajectory",
    "Trajectory": "phaselab.compute.trajectory",
    "shell_seeds": "phaselab.compute.seeds",
    "ShellSeeds": "phaselab.compute.seeds",
    "section": "phaselab.compute.section",
    "Section": "phaselab.compute.section",
    "level_set": "phaselab.compute.levels",
    "LevelSet": "phaselab.compute.levels",
    "equilibria": "phaselab.compute.equilibria",
    "Equilibrium": "phaselab.compute.equilibria",
    "lyapunov": "phaselab.compute.chaos",
    "chaos_indicators": "phaselab.compute.chaos",
    "ChaosIndicators": "phaselab.compute.chaos",
    "chaos_map": "phaselab.scan.chaos_maps",
    "ChaosMap": "phaselab.scan.chaos_maps",
    "escape_map": "phaselab.scan.escape",
    "EscapeMap": "phaselab.scan.escape",
    "parameter_scan": "phaselab.scan.parameters",
    "ParameterScan": "phaselab.scan.parameters",
    "shell_grid": "phaselab.scan.grids",
    "state_grid": "phaselab.scan.grids",
    "frequencies": "phaselab.compute.frequencies",
    "Frequencies": "phaselab.compute.frequencies",
    "rotation_number": "phaselab.compute.frequencies",
    "frequency_map": "phaselab.scan.frequency_map",
    "FrequencyMap": "phaselab.scan.frequency_map",
    "explore": "phaselab.widgets.explorer",
    "export": "phaselab.export",
    "periodic_orbit": "phaselab.compute.periodic",
    "find_periodic_orbits": "phaselab.compute.periodic",
    "PeriodicOrbit": "phaselab.compute.periodic",
    "PeriodicOrbits": "phaselab.compute.periodic",
    "continue_family": "phaselab.compute.families",
    "Family": "phaselab.compute.families",
    "manifold": "phaselab.compute.manifolds",
    "Manifold": "phaselab.compute.manifolds",
    "torus_breakup": "phaselab.compute.symmetric",
    "TorusBreakup": "phaselab.compute.symmetric",
    "warm": "phaselab.compute.warm",
    "set_limits": "phaselab.compute.inputs",
}

__all__ = ["Hamiltonian", "PhaselabError", "ExpressionError", "ModelError", "ParameterError",
           "IntegrationError", "StudyFileError", "PhaselabWarning", "__version__", *_LAZY]


def __getattr__(name):
    if name in _LAZY:
        import importlib

        try:
            module = importlib.import_module(_LAZY[name])
        except ModuleNotFoundError as exc:
            if _LAZY[name].startswith("phaselab.widgets"):
                raise PhaselabError(
                    f"phaselab.{name} needs the notebook extras ({exc.name} is missing); "
                    "install them with pip install 'phaselab[lab]'") from None
            raise
        value = module if name in ("models", "export") else getattr(module, name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'phaselab' has no attribute {name!r}")


def __dir__():
    return sorted(__all__)
