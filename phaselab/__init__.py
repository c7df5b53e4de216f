"""phaselab: explore the phase space of Hamiltonian systems.

The error classes are imported with the package; everything else (``Hamiltonian``,
``AreaPreservingMap``, ``models``, the numerics, export and the notebook widgets) is
imported on first use, so a script pays only for what it calls.
"""

__version__ = "0.1.0"

from phaselab.errors import (ExpressionError, IntegrationError, ModelError,  # noqa: E402
                             MissingExtraError, ParameterError, PhaselabError, StudyFileError, DataFileError,
                             PhaselabWarning)

_LAZY = {
    "Hamiltonian": "phaselab.model.hamiltonian",
    "AreaPreservingMap": "phaselab.model.maps",
    "SymplecticMap": "phaselab.model.maps",
    "compose_map": "phaselab.model.elements",
    "Drift": "phaselab.model.elements",
    "ThinKick": "phaselab.model.elements",
    "LinearElement": "phaselab.model.elements",
    "models": "phaselab.model.catalogue",
    "trajectory": "phaselab.orbits.trajectory",
    "Trajectory": "phaselab.orbits.trajectory",
    "shell_seeds": "phaselab.orbits.seeds",
    "ShellSeeds": "phaselab.orbits.seeds",
    "section": "phaselab.orbits.section",
    "Section": "phaselab.orbits.section",
    "section_projection": "phaselab.orbits.slices",
    "section_slice": "phaselab.orbits.slices",
    "projection_grid": "phaselab.orbits.slices",
    "SectionSlice": "phaselab.orbits.slices",
    "level_set": "phaselab.structures.levels",
    "LevelSet": "phaselab.structures.levels",
    "equilibria": "phaselab.structures.equilibria",
    "Equilibrium": "phaselab.structures.equilibria",
    "lyapunov": "phaselab.orbits.chaos",
    "chaos_indicators": "phaselab.orbits.chaos",
    "ChaosIndicators": "phaselab.orbits.chaos",
    "chaos_map": "phaselab.scan.chaos_maps",
    "ChaosMap": "phaselab.scan.chaos_maps",
    "escape_map": "phaselab.scan.escape",
    "EscapeMap": "phaselab.scan.escape",
    "parameter_scan": "phaselab.scan.parameters",
    "ParameterScan": "phaselab.scan.parameters",
    "shell_grid": "phaselab.scan.grids",
    "state_grid": "phaselab.scan.grids",
    "frequencies": "phaselab.frequency.frequencies",
    "Frequencies": "phaselab.frequency.frequencies",
    "rotation_number": "phaselab.frequency.frequencies",
    "frequency_map": "phaselab.scan.frequency_map",
    "FrequencyMap": "phaselab.scan.frequency_map",
    "explore": "phaselab.widgets.explorer",
    "export": "phaselab.export",
    "periodic_orbit": "phaselab.structures.periodic",
    "find_periodic_orbits": "phaselab.structures.periodic",
    "PeriodicOrbit": "phaselab.structures.periodic",
    "PeriodicOrbits": "phaselab.structures.periodic",
    "continue_family": "phaselab.structures.families",
    "Family": "phaselab.structures.families",
    "branch_family": "phaselab.structures.branching",
    "manifold": "phaselab.structures.manifolds",
    "Manifold": "phaselab.structures.manifolds",
    "torus_breakup": "phaselab.structures.breakup",
    "TorusBreakup": "phaselab.structures.breakup",
    "normal_form": "phaselab.structures.normal_forms",
    "NormalForm": "phaselab.structures.normal_forms",
    "normal_form_check": "phaselab.scan.normal_form_check",
    "NormalFormCheck": "phaselab.scan.normal_form_check",
    "warm": "phaselab.engine.warm",
    "set_limits": "phaselab.engine.limits",
}

__all__ = ["PhaselabError", "ExpressionError", "ModelError", "ParameterError",
           "IntegrationError", "StudyFileError", "DataFileError", "MissingExtraError", "PhaselabWarning",
           "__version__", *_LAZY]


def __getattr__(name):
    if name in _LAZY:
        import importlib

        try:
            module = importlib.import_module(_LAZY[name])
        except ModuleNotFoundError as exc:
            if _LAZY[name].startswith("phaselab.widgets"):
                raise MissingExtraError(
                    f"phaselab.{name} needs the notebook extras ({exc.name} is missing); "
                    "install them with pip install 'phaselab[lab]'") from None
            raise
        value = module if name in ("models", "export") else getattr(module, name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'phaselab' has no attribute {name!r}")


def __dir__():
    return sorted(__all__)
