"""The ``[normal_form]`` table of a study file: a normal form at an equilibrium (or a map's
fixed point) of the study's system, written by ``[[output.normal_form]]``.

::

    [normal_form]
    at = [0.0, 0.0, 0.0, 0.0]     # the equilibrium, one number per state component (q then p)
    order = 6                     # highest degree in the distance from it (2..16)
    resonances = [[2, -1]]        # optional: resonance vectors whose terms are kept
    arithmetic = "auto"           # optional: "auto", "exact" or "float"

Reading checks every key; ``check`` also tries, without any symbolic work, what the
computation would meet first: the size budget of the order
(:func:`phaselab.structures.normal_forms.expansion.check_size`) and that ``at`` is an
equilibrium (the vector field vanishes there) or a fixed point of the map. ``render``
computes the normal form with :func:`phaselab.normal_form` at the study's parameters.
Every problem is a :class:`~phaselab.errors.StudyFileError` at its key.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from phaselab.errors import PhaselabError, StudyFileError
from phaselab.model.numeric import numeric_function
from phaselab.structures.normal_forms.arguments import MAX_ORDER, check_resonances
from phaselab.structures.normal_forms.compute import ARITHMETICS
from phaselab.structures.normal_forms.expansion import check_size
from phaselab.studies.fields import Fields

KEYS = ("at", "order", "resonances", "arithmetic")
#: what ``at`` may miss by and still count as an equilibrium (or fixed point) at check time,
#: relative to 1 + |at|; the computation applies its own, finer test
EQUILIBRIUM_TOLERANCE = 1e-6
#: suffixes of ``[[output.normal_form]]`` files
SUFFIXES = (".tex", ".json", ".nc", ".svg", ".pdf", ".png")


@dataclass
class NormalFormSpec:
    """The checked ``[normal_form]`` table.

    Attributes
    ----------
    at : tuple of float
        The equilibrium or fixed point, in state order.
    order : int
    resonances : tuple of tuple of int
    arithmetic : str
    """

    at: tuple
    order: int
    resonances: tuple = ()
    arithmetic: str = "auto"


def read_normal_form(f: Fields, data: dict, system) -> NormalFormSpec | None:
    """The optional ``[normal_form]`` table (see the module docstring)."""
    if "normal_form" not in data:
        return None
    table = f.table(data, "", "normal_form")
    f.only_keys(table, "normal_form", KEYS)
    if system.kind == "flow" and not system.is_autonomous:
        raise f.error("normal_form", "needs an autonomous system (H without explicit time)")
    names = [s.name for s in system.state_symbols]
    if "at" not in table:
        raise f.error("normal_form.at", "missing; give the equilibrium as one number per state component ("
                                        + ", ".join(names) + ")")
    at = tuple(f.numbers(table["at"], "normal_form.at", length=len(names)))
    order = f.integer(table, "normal_form", "order", required=True, low=2, high=MAX_ORDER)
    resonances = ()
    if "resonances" in table:
        raw = table["resonances"]
        if not isinstance(raw, list) or not all(isinstance(r, list) for r in raw):
            raise f.error("normal_form.resonances", "must be a list of integer vectors, e.g. [[2, -1]]")
        if system.kind == "map" and raw:
            raise f.error("normal_form.resonances", "maps get Birkhoff's normal form only; leave resonances out")
        for i, r in enumerate(raw):
            if not all(isinstance(x, int) and not isinstance(x, bool) for x in r):
                raise f.error(f"normal_form.resonances[{i}]", f"must be whole numbers, got {r!r}")
        try:
            resonances = tuple(tuple(r) for r in check_resonances(raw, system.dof))
        except PhaselabError as exc:
            raise f.error("normal_form.resonances", str(exc)) from None
    arithmetic = f.string(table, "normal_form", "arithmetic", default="auto", max_length=10)
    if arithmetic not in ARITHMETICS:
        raise f.error("normal_form.arithmetic", f"must be one of {', '.join(ARITHMETICS)}, got {arithmetic!r}")
    if system.kind == "map" and arithmetic == "exact":
        raise f.error("normal_form.arithmetic", "maps are normalised in floating point; use \"auto\" or \"float\"")
    return NormalFormSpec(at, order, resonances, arithmetic)


def try_normal_form(f: Fields, spec: NormalFormSpec | None, system, params: dict) -> None:
    """What ``check`` tries (see the module docstring): the size budget and the equilibrium."""
    if spec is None:
        return
    try:
        check_size(system.dof, spec.order)
    except PhaselabError as exc:
        raise f.error("normal_form.order", str(exc)) from None
    z = np.array(spec.at, dtype=float)
    values = system.param_values(params)
    args = list(system.state_symbols) + list(system.param_symbols)
    try:
        if system.kind == "map":
            moved = np.asarray(numeric_function(args, list(system.update))(*z, *values), dtype=float) - z
            periods = [np.nan if m is None else float(m) for m in system.modulus]
            moved = np.array([(d + P / 2) % P - P / 2 if np.isfinite(P) else d for d, P in zip(moved, periods)])
            what = "a fixed point of the map"
        else:
            moved = np.asarray(numeric_function(args, list(system.vector_field()))(*z, *values), dtype=float)
            what = "an equilibrium (the vector field does not vanish there)"
    except (ArithmeticError, TypeError, ValueError) as exc:
        raise f.error("normal_form.at", f"the system cannot be evaluated there ({type(exc).__name__})") from None
    gap = float(np.max(np.abs(moved))) if moved.size else 0.0
    if not np.isfinite(gap) or gap > EQUILIBRIUM_TOLERANCE * (1 + float(np.max(np.abs(z)))):
        raise f.error("normal_form.at", f"is not {what}: it moves by {gap:.3g}")


def compute_normal_form(study):
    """The normal form of the study's ``[normal_form]`` table (StudyFileError on failure)."""
    from phaselab.structures.normal_forms.compute import normal_form

    spec = study.normal_form
    try:
        return normal_form(study.system, list(spec.at), spec.order, resonances=list(spec.resonances) or None,
                           params=study.params, arithmetic=spec.arithmetic)
    except StudyFileError:
        raise
    except PhaselabError as exc:
        raise StudyFileError(f"{study.source}: normal_form: {exc}") from None


def describe(spec: NormalFormSpec) -> str:
    """One line for ``phaselab check``."""
    kind = "Birkhoff" if not spec.resonances else "resonant " + ", ".join(str(list(r)) for r in spec.resonances)
    at = ", ".join(f"{v:g}" for v in spec.at)
    return f"computes the {kind} normal form of order {spec.order} at ({at}), {spec.arithmetic} arithmetic"
