"""Birkhoff's normal form of an area-preserving map of the plane at an elliptic fixed point.

The map is expanded about the fixed point (:mod:`.expansion`), its linear part (a rotation
by ``theta`` up to a symplectic change) diagonalised with the left eigenvectors of the
Jacobian, normalised like a flow's (``{xi, eta} = -2 i``), so ``xi' = exp(-i theta) xi`` to
first order. Then, degree by degree, the near-identity polynomial change
``xi = w + h_r(w, conj w)`` removes each term ``w^a conj(w)^b`` of the map with
``lambda^a conj(lambda)^b != lambda`` (``lambda = exp(-i theta)``; Birkhoff's normal form of a
map, by polynomial conjugacy): ``h_r = f / (lambda^a conj(lambda)^b - lambda)``. What stays is
``w' = w (lambda + sum_k g_k |w|^(2k))``, a rotation whose angle depends on the action
``J = |w|^2 / 2``: ``nu(J) = theta - Im log(1 + sum_k g_k (2 J)^k / lambda)`` per iterate (the
real part of that logarithm vanishes for an area-preserving map; what is left of it is
reported as ``area_defect``). The result is a :class:`~.result.NormalForm` whose
"Hamiltonian" is ``K(J) = integral of nu``: the map is the time-one map of ``K`` to the
order computed, and ``frequencies(J) = nu(J)`` in radians per iterate.

Computed in floating point (the rotation angle of an exact map is rarely a rational
multiple of pi). Resonant normal forms of maps are not offered: a resonance
``(a - b - 1) theta = 0 mod 2 pi`` met below the order is an error naming it.
"""

from __future__ import annotations

import cmath
import math

import numpy as np
import sympy as sp

from phaselab.errors import ModelError
from phaselab.structures.normal_forms.arguments import check_order, check_point
from phaselab.structures.normal_forms.expansion import check_size, taylor
from phaselab.structures.normal_forms.polynomials import compose, prune, substitute_linear
from phaselab.structures.normal_forms.result import NormalForm
from phaselab.structures.normal_forms.terms import Term

RESONANT = 1e-9
"""A divisor ``|lambda^a conj(lambda)^b - lambda|`` below this is an exact resonance."""
FIXED_POINT_TOLERANCE = 1e-8


def map_normal_form(system, at, order: int, params=None) -> NormalForm:
    """Birkhoff's normal form of a one-degree-of-freedom area-preserving map (see the module
    docstring); called by :func:`phaselab.normal_form` for maps."""
    if system.dof != 1:
        raise ModelError("normal forms of maps are available for maps of the plane (one degree of "
                         f"freedom); this map has {system.dof}")
    order = check_order(order)
    point = [sp.Float(float(v), 17) for v in check_point(at, 2)]
    check_size(1, order)
    values = system.param_values(params)
    subs = {s: sp.Float(float(v), 17) for s, v in zip(system.param_symbols, values)}
    z0 = np.array([float(v) for v in point])
    components = [taylor(e.xreplace(subs), system.state_symbols, point, order) for e in system.update]
    _check_fixed(system, components, z0)
    L = np.array([[float(c.get((1, 0), 0)), float(c.get((0, 1), 0))] for c in components])
    T, M, lam = _diagonalise(L)
    theta = -cmath.phase(lam)
    higher = [{k: complex(v) for k, v in c.items() if sum(k) >= 1} for c in components]
    rows = [[complex(x) for x in row] for row in M]
    F = {}
    for ci, poly in zip(T[0], higher):
        for key, v in substitute_linear(poly, rows, 0j).items():
            F[key] = F.get(key, 0j) + ci * v
    F = prune({k: v for k, v in F.items() if abs(v) > 0})
    F, forward, divisors = _normalise(F, lam, order)
    backward = _invert(forward, order)
    kernel = [F.get((k + 1, k), 0j) for k in range((order - 1) // 2 + 1)]
    rotation, defect = _rotation_series(kernel, lam, theta)
    terms = [Term((sp.Integer(k + 1),), (0,), sp.Float(c / (k + 1), 15), sp.Integer(0), 2 * (k + 1))
             for k, c in enumerate(rotation) if c != 0]
    nf = NormalForm(
        order=order, dof=1, omega=np.array([theta]), omega_exact=None, arithmetic="float",
        arithmetic_note=f"maps are normalised in floating point; area defect {defect:.2g}",
        resonances=(), equilibrium=z0, energy0=sp.Integer(0), terms=terms, small_divisors=divisors,
        names=tuple(s.name for s in system.state_symbols), system_name=system.name,
        params=dict(zip([p.name for p in system.parameters], map(float, values))),
        to_complex=T, to_real=M, scales=np.array([2.0]),
        old_of_new=[forward, _conjugate(forward)], new_of_old=[backward, _conjugate(backward)],
        kind="map", periods=np.array([np.nan if p is None else float(p) for p in system.modulus]),
        area_defect=defect)
    return nf


def _check_fixed(system, components, z0) -> None:
    for i, (c, z) in enumerate(zip(components, z0)):
        gap = float(c.get((0, 0), 0)) - z
        period = system.modulus[i]
        if period is not None:
            gap = (gap + period / 2) % period - period / 2
        if abs(gap) > FIXED_POINT_TOLERANCE * (1 + abs(z)):
            raise ModelError(f"the point is not a fixed point of the map: component {system.state_symbols[i].name} "
                             f"moves by {gap:.3g}")


def _diagonalise(L: np.ndarray):
    vals, vecs = np.linalg.eig(L.T)
    if np.any(np.abs(np.abs(vals) - 1) > 1e-9) or np.any(np.abs(vals.imag) < 1e-9):
        listed = ", ".join(f"{v:.6g}" for v in vals)
        raise ModelError(f"the fixed point is not elliptic: the Jacobian has eigenvalues {listed}; a normal form "
                         "of this kind needs a pair on the unit circle other than 1 and -1")
    i = int(np.argmin(vals.imag))
    c, lam = vecs[:, i], vals[i]
    Jm = np.array([[0.0, 1.0], [-1.0, 0.0]])
    form = float((1j * c @ Jm @ c.conj()).real)
    if form < 0:
        c, lam = c.conj(), lam.conjugate()
    c = c / math.sqrt(abs(form) / 2)
    T = np.array([c, c.conj()])
    return T, np.linalg.inv(T), complex(lam)


def _conjugate(poly: dict) -> dict:
    """The eta component from the xi one (conjugate coefficients, exponents swapped)."""
    return {(b, a): v.conjugate() for (a, b), v in poly.items()}


def _normalise(F: dict, lam: complex, order: int):
    """Remove the non-resonant terms of ``xi' = F(xi, eta)`` degree by degree.

    Returns the normal form (xi component), the change ``xi = P(w, conj w)`` and the
    smallest divisor met at each degree.
    """
    forward = {(1, 0): 1 + 0j}
    divisors = {}
    for r in range(2, order + 1):
        h, low = {}, math.inf
        for (a, b), f in F.items():
            if a + b != r or a - b == 1:
                continue
            d = lam**a * lam.conjugate()**b - lam
            if abs(d) < RESONANT:
                raise ModelError(
                    f"the rotation angle {-cmath.phase(lam):.12g} rad per iterate is resonant: "
                    f"{a - b - 1} times it is a multiple of 2 pi, so the term of degree {r} cannot be "
                    "removed; resonant normal forms of maps are not available")
            low = min(low, abs(d))
            h[(a, b)] = f / d
        divisors[r] = low
        if not h:
            continue
        phi = [_plus_identity(h, (1, 0)), _plus_identity(_conjugate(h), (0, 1))]
        composed = compose(F, phi, order, 1 + 0j)
        N = dict(composed)
        for _ in range(order):  # N + h(N, conj N) = F(Phi): one more degree right per pass
            hn = compose(h, [N, _conjugate(N)], order, 1 + 0j)
            N = prune({k: composed.get(k, 0j) - hn.get(k, 0j) for k in set(composed) | set(hn)})
        F = {k: v for k, v in N.items() if not (sum(k) == r and k[0] - k[1] != 1)}
        forward = compose(forward, phi, order, 1 + 0j)
    return F, forward, divisors


def _plus_identity(h: dict, unit: tuple) -> dict:
    out = dict(h)
    out[unit] = out.get(unit, 0j) + 1
    return out


def _invert(forward: dict, order: int) -> dict:
    """The inverse of ``xi = P(w, conj w)`` (near the identity) to degree ``order``:
    ``w = xi - (P - id)(w)``, iterated."""
    rest = {k: v for k, v in forward.items() if k != (1, 0)}
    rest[(1, 0)] = forward.get((1, 0), 1 + 0j) - 1
    rest = prune(rest)
    w = {(1, 0): 1 + 0j}
    for _ in range(order):
        r = compose(rest, [w, _conjugate(w)], order, 1 + 0j)
        w = prune({k: (1 + 0j if k == (1, 0) else 0j) - r.get(k, 0j) for k in set(r) | {(1, 0)}})
    return w


def _rotation_series(kernel: list, lam: complex, theta: float):
    """Coefficients ``nu_k`` of ``nu(J) = sum nu_k J^k`` (``nu_0 = theta``) and the largest
    real part of the logarithm (zero for an area-preserving map)."""
    K = len(kernel) - 1
    y = np.zeros(K + 1, dtype=complex)  # y(x) = sum g_k x^k / lambda, x = 2 J
    for k in range(1, K + 1):
        y[k] = kernel[k] / lam
    log = np.zeros(K + 1, dtype=complex)
    power = np.zeros(K + 1, dtype=complex)
    power[0] = 1
    for m in range(1, K + 1):
        power = np.convolve(power, y)[:K + 1]
        log += (-1) ** (m + 1) * power / m
    scale = 2.0 ** np.arange(K + 1)
    nu = -(log.imag) * scale
    nu[0] = theta
    defect = float(np.max(np.abs(log.real * scale))) if K else 0.0
    return [float(v) for v in nu], defect
