"""What ``check`` tries so that ``render`` does not fail later: the cheap first steps of a
render, run on the checked study.

Reading a study checks every key on its own; some problems only show when the pieces meet:
an expression that the parser accepts but that cannot be evaluated with numbers, seeds that
all lie outside the escape box, a periodic-orbit search larger than the limits of
:func:`phaselab.set_limits`. :func:`try_study` meets them at check time, without compiling
or integrating anything: it evaluates the seeds (on the energy shell when the study solves a
momentum), compares them with the box, and sizes the ``[structure]`` search with the same
budget the search itself applies. Every problem is a
:class:`~phaselab.errors.StudyFileError` at the key that causes it.
"""

from __future__ import annotations

import numpy as np

from phaselab.engine import limits
from phaselab.errors import PhaselabError, StudyFileError
from phaselab.studies.fields import Fields
from phaselab.studies.normal_form_table import try_normal_form
from phaselab.studies.seeding import seed_states
from phaselab.studies.spec import Study

#: Newton steps of the structure search (the default of find_periodic_orbits)
STRUCTURE_MAXIT = 30


def guarded(f: Fields, key: str, run):
    """Run ``run()``; phaselab's errors become errors at ``key``, and so does anything numpy
    or sympy raises on a value they cannot evaluate (the last line before a traceback)."""
    try:
        return run()
    except StudyFileError:
        raise
    except PhaselabError as exc:
        raise f.error(key, str(exc)) from None
    except (ArithmeticError, TypeError, ValueError, AttributeError, NotImplementedError,
            RecursionError, MemoryError) as exc:
        text = str(exc) or type(exc).__name__
        raise f.error(key, f"cannot be evaluated with numbers ({type(exc).__name__}: {text[:200]})") from None


def try_study(study: Study) -> None:
    """Try the parts of a render that can fail on a checked study (see the module docstring).

    Raises
    ------
    StudyFileError
        ``file: key: problem`` for the first problem found.
    """
    f = Fields(study.source)
    states = _seed_states(f, study)
    _check_box(f, study, states)
    _check_structure(f, study)
    try_normal_form(f, study.normal_form, study.system, study.params)


def _seed_states(f: Fields, study: Study) -> np.ndarray:
    """The seeds' states as render makes them, and the system evaluated on them."""
    from phaselab.orbits.seeds import ShellSeeds

    key = f"system.{study.system_form}"
    seeds = guarded(f, key, lambda: seed_states(study))
    if isinstance(seeds, ShellSeeds):
        states = seeds.valid_states()
        if states.shape[0] == 0:
            first = seeds.invalid()[0][1] if seeds.invalid() else "no seeds"
            raise f.error("states", f"none of the {seeds.n_points} starting points has a state on the energy shell "
                                   f"E = {seeds.energy:g} (first: {first})")
    else:
        states = np.asarray(seeds, dtype=float)
    if study.system.kind == "flow":   # the section evaluates H at the seeds (t = 0)
        guarded(f, key, lambda: study.system.energy(states, params=study.params))
    return states


def _check_box(f: Fields, study: Study, states: np.ndarray) -> None:
    box = study.section.box
    if box is None:
        return
    inside = np.all(np.abs(states) <= box, axis=1)
    if not inside.any():
        raise f.error("section.box", f"every seed lies outside the box |component| <= {box:g}, so no "
                                     "orbit would run; give a larger box")


def _check_structure(f: Fields, study: Study) -> None:
    spec = study.structure
    if spec is None:
        return
    plane = {study.section.coordinate: study.section.value} if study.section.kind == "plane" else None
    guarded(f, "structure.returns", lambda: limits.shooting_budget(
        study.system, plane, spec.resolution ** 2, spec.returns, STRUCTURE_MAXIT, "the structure search"))


__all__ = ["try_study", "guarded", "STRUCTURE_MAXIT"]
