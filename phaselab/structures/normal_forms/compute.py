"""phaselab.normal_form: Birkhoff's or a resonant normal form at an elliptic equilibrium (or a map's fixed point)."""

from __future__ import annotations


import numpy as np
import sympy as sp

from phaselab.engine import inputs
from phaselab.errors import ModelError, ParameterError
from phaselab.model.hamiltonian import Hamiltonian
from phaselab.structures.normal_forms.arguments import check_order, check_point, check_resonances
from phaselab.structures.normal_forms.expansion import check_size, taylor
from phaselab.structures.normal_forms.lie import ResonanceRule, normalise, transformations
from phaselab.structures.normal_forms.linear import diagonalise, hessian
from phaselab.structures.normal_forms.maps import map_normal_form
from phaselab.structures.normal_forms.polynomials import split_degrees, substitute_linear
from phaselab.structures.normal_forms.result import NormalForm
from phaselab.structures.normal_forms.terms import collect_terms

GRADIENT_TOLERANCE = 1e-8
"""Largest |grad H| at ``at``, relative to 1 + |Hess H|, for it to count as an equilibrium."""
ARITHMETICS = ("auto", "exact", "float")


def normal_form(system, at, order: int, *, resonances=None, params=None, arithmetic: str = "auto") -> NormalForm:
    """The normal form of an autonomous Hamiltonian flow near an elliptic equilibrium.

    The equilibrium is moved to the origin, H is expanded to degree ``order``, the
    quadratic part is brought to ``sum omega_k J_k`` (Williamson's normal form), and the
    terms of degree 3..order are removed one degree at a time by Lie series generators
    (the homological equation), except those with ``k . omega = 0`` for ``k`` in the
    span of ``resonances``. Without resonances this is Birkhoff's normal form (actions
    only); with them a resonant normal form (actions and the resonant angles).

    Parameters
    ----------
    system : Hamiltonian or AreaPreservingMap
        An autonomous Hamiltonian (no explicit time), or a map of the plane (one degree of
        freedom; Birkhoff's form only, in floating point, see
        :mod:`phaselab.structures.normal_forms.maps`: ``frequencies`` is then the rotation
        angle per iterate).
    at : Equilibrium or array_like, shape (2n,)
        The equilibrium (or fixed point), from :func:`phaselab.equilibria` or as a state
        ``(q, p)``; exact sympy numbers are kept exact.
    order : int
        Highest degree in the distance from the equilibrium (2..16); degree ``2m`` holds
        the terms of degree ``m`` in the actions.
    resonances : sequence of sequences of int, optional
        Resonance vectors ``k`` (length n, whole numbers) whose terms ``k . phi`` are kept,
        e.g. ``[(1, -2)]`` when ``omega_1 = 2 omega_2``.
    params : mapping, optional
        Parameter values by name (defaults otherwise).
    arithmetic : {"auto", "exact", "float"}
        ``"auto"`` computes with rationals when every Taylor coefficient is rational and
        the frequencies come out rational from an uncoupled quadratic part (parameters are
        read as the exact decimals they print as), floating point otherwise;
        ``"exact"`` insists on rationals (ParameterError when the input is not exact).

    Returns
    -------
    NormalForm

    Raises
    ------
    ParameterError
        A bad argument, or an order whose polynomials exceed the size budget.
    ModelError
        A time-dependent system or a map, a point that is not an equilibrium, an
        equilibrium that is not elliptic, or a resonance met that was not asked for.
    """
    if inputs.system(system).kind == "map":
        if resonances:
            raise ParameterError("resonant normal forms of maps are not available; leave resonances out")
        if arithmetic == "exact":
            raise ParameterError("maps are normalised in floating point; use arithmetic='auto' or 'float'")
        return map_normal_form(system, at, order, params=params)
    _check_system(system)
    n = system.dof
    order = check_order(order)
    if arithmetic not in ARITHMETICS:
        raise ParameterError(f"arithmetic must be one of {', '.join(ARITHMETICS)}, got {arithmetic!r}")
    rule_vectors = check_resonances(resonances, n)
    point = check_point(at, 2 * n)
    check_size(n, order)
    values = system.param_values(params)
    want_exact = arithmetic != "float"
    subs = {s: (sp.Rational(repr(float(v))) if want_exact else sp.Float(float(v), 17))
            for s, v in zip(system.param_symbols, values)}
    if not want_exact:
        point = [sp.Float(float(v), 17) for v in point]
    coeffs = taylor(system.expr.xreplace(subs), system.state_symbols, point, order)
    exact = want_exact and all(c.is_Rational for c in coeffs.values())
    note = "every Taylor coefficient and frequency is rational"
    if not exact:
        note = ("asked for floating point" if not want_exact else
                "the equilibrium or a Taylor coefficient is not an exact rational")
        coeffs = {k: sp.Float(c, 17) for k, c in coeffs.items()}
    _check_gradient(coeffs, 2 * n)
    diag = diagonalise(hessian(coeffs, 2 * n), exact)
    if exact and not diag.arithmetic.exact:
        note = "the quadratic part is coupled or its frequencies are irrational"
    if arithmetic == "exact" and not diag.arithmetic.exact:
        raise ParameterError(f"exact arithmetic is not possible here: {note}; use arithmetic='auto' or 'float'")
    ar = diag.arithmetic
    higher = {k: ar.number(c) for k, c in coeffs.items() if sum(k) >= 3}
    series = split_degrees(substitute_linear(higher, diag.to_real, ar.zero))
    series[2] = diag.quadratic()
    result = normalise(series, diag, order, ResonanceRule(rule_vectors, n))
    # the change of variables is only ever evaluated in floating point: build it so
    numeric = [(r, {k: complex(v) for k, v in chi.items()}) for r, chi in result.generators]
    forward, backward = transformations(numeric, diag.as_float(), max(order - 1, 1))
    energy0 = coeffs.get((0,) * (2 * n), sp.Integer(0))
    return NormalForm(
        order=order, dof=n, omega=diag.omega_float,
        omega_exact=tuple(sp.Rational(w.numerator, w.denominator) for w in diag.omega) if ar.exact else None,
        arithmetic=ar.name, arithmetic_note=note, resonances=tuple(tuple(r) for r in rule_vectors),
        equilibrium=np.array([float(v) for v in point]), energy0=energy0 if ar.exact else sp.Float(energy0, 15),
        terms=collect_terms(result.series, diag.scales, ar, n), small_divisors=result.small_divisors,
        names=tuple(s.name for s in system.state_symbols), system_name=system.name,
        params=dict(zip([p.name for p in system.parameters], map(float, values))),
        to_complex=diag.to_complex_array, to_real=diag.to_real_array, scales=diag.scales_float,
        old_of_new=forward, new_of_old=backward)


def _check_system(system) -> None:
    if not isinstance(system, Hamiltonian):
        raise ParameterError(f"system must be a phaselab Hamiltonian or AreaPreservingMap, got {type(system).__name__}")
    if not system.is_autonomous:
        raise ModelError("normal_form needs an autonomous Hamiltonian; this one depends on time explicitly")


def _check_gradient(coeffs: dict, m: int) -> None:
    grad = [float(abs(coeffs.get(tuple(1 if t == i else 0 for t in range(m)), 0))) for i in range(m)]
    hess = max([float(abs(c)) for k, c in coeffs.items() if sum(k) == 2] + [0.0])
    if max(grad) > GRADIENT_TOLERANCE * (1 + hess):
        raise ModelError(f"the point is not an equilibrium: |grad H| = {max(grad):.3g} there")
