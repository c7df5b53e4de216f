"""The island of an isolated resonance from a resonant normal form (the pendulum model).

Near a torus ``J*`` where the resonance ``k`` is met (``k . dH0/dJ = 0``, ``H0`` the terms of
the actions alone), write ``J = J* + I k`` and ``psi = k . phi``. To lowest order the normal
form is the pendulum ``H = G I^2 / 2 + A cos(psi - psi0)`` with ``G = k . (d2H0/dJ2) k`` and
``A cos(psi - psi0)`` the harmonic ``k`` of the normal form at ``J*`` (Chirikov's resonance
overlap analysis uses the same reduction). Its separatrix encloses ``|I| <= 2 sqrt(|A / G|)``:
the island's full width is ``4 sqrt(|A / G|)`` in ``I``, ``|k_j|`` times that in ``J_j``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from phaselab.errors import ModelError, ParameterError


@dataclass(frozen=True)
class ResonanceWidth:
    """The pendulum model of one resonance at a torus.

    Attributes
    ----------
    resonance : tuple of int
        ``k`` (primitive, first nonzero entry positive).
    detuning : float
        ``k . dH0/dJ`` at the given actions (rad per unit time); near zero on the resonance.
    amplitude : float
        ``A`` (units of H).
    curvature : float
        ``G = k . (d2H0/dJ2) k``.
    width : float
        Full width ``4 sqrt(|A/G|)`` in the action ``I`` along ``k``.
    action_widths : ndarray, shape (n,)
        Full width in each action ``J_j`` (``|k_j| width``).
    center_angle : float
        The resonant angle ``psi = k . phi`` of the island centres (rad, in (-pi, pi]).
    """

    resonance: tuple
    detuning: float
    amplitude: float
    curvature: float
    width: float
    action_widths: np.ndarray
    center_angle: float


def primitive(k) -> tuple:
    """``k`` divided by the gcd of its entries, with its first nonzero entry positive."""
    g = 0
    for x in k:
        g = math.gcd(g, int(x))
    k = tuple(int(x) // g for x in k)
    first = next(x for x in k if x)
    return k if first > 0 else tuple(-x for x in k)


def resonance_width(arrays: dict, resonances: tuple, J, resonance=None) -> ResonanceWidth:
    """The pendulum model of ``resonance`` at actions ``J`` (see the module docstring).

    Parameters
    ----------
    arrays : dict
        The normal form's terms (:func:`~.terms.term_arrays`).
    resonances : tuple
        The resonances the normal form kept.
    J : array_like, shape (n,)
        Actions on (or near) the resonance, > 0 for the modes in ``k``.
    resonance : sequence of int, optional
        Which resonance (default: the only one kept).
    """
    if not resonances:
        raise ModelError("a Birkhoff normal form has no resonance; compute one with resonances=[k]")
    if resonance is None:
        if len(resonances) != 1:
            raise ParameterError("this normal form kept several resonances; say which with resonance=k")
        resonance = resonances[0]
    n = arrays["powers"].shape[1]
    k = np.array(primitive(resonance))
    if len(k) != n:
        raise ParameterError(f"resonance must have {n} entries, got {tuple(resonance)}")
    J = np.asarray(J, dtype=float)
    if J.shape != (n,) or not np.all(np.isfinite(J)) or np.any(J < 0):
        raise ParameterError(f"J must be {n} finite actions >= 0, got {J}")
    powers, harmonic = arrays["powers"], arrays["harmonic"]
    match = np.all(harmonic == k, axis=1)
    if not np.any(match):
        raise ModelError(f"the normal form has no term of the harmonic {tuple(k)}: no island to its order")
    with np.errstate(divide="ignore", invalid="ignore"):
        monomials = np.prod(J ** powers, axis=1)
    C = float(np.sum(arrays["cos"][match] * monomials[match]))
    S = float(np.sum(arrays["sin"][match] * monomials[match]))
    free = np.all(harmonic == 0, axis=1)
    grad = np.array([_derivative(powers[free], arrays["cos"][free], J, (i,)) for i in range(n)])
    hess = np.array([[_derivative(powers[free], arrays["cos"][free], J, (i, j)) for j in range(n)]
                     for i in range(n)])
    G = float(k @ hess @ k)
    A = math.hypot(C, S)
    if G == 0:
        raise ModelError("the normal form has no twist along the resonance (G = 0) to its order: "
                         "compute it to a higher order")
    psi0 = math.atan2(S, C)
    centre = psi0 + math.pi if G > 0 else psi0  # the minimum of A cos(psi - psi0) when G > 0
    width = 4 * math.sqrt(A / abs(G))
    return ResonanceWidth(tuple(int(x) for x in k), float(k @ grad), A, G, width, np.abs(k) * width,
                          float(np.angle(np.exp(1j * centre))))


def _derivative(powers: np.ndarray, coefs: np.ndarray, J: np.ndarray, which: tuple) -> float:
    """A partial derivative of ``sum coefs J**powers`` at ``J``."""
    pw = powers.copy()
    factor = np.ones(len(coefs))
    for i in which:
        factor *= pw[:, i]
        pw[:, i] -= 1
    keep = factor != 0
    if not np.any(keep):
        return 0.0
    return float(np.sum(coefs[keep] * factor[keep] * np.prod(J ** pw[keep], axis=1)))
