"""The integrators phaselab offers, their coefficients, and the choice by structure.

The compiled steppers live in ``engine/loops/steppers.py``; this module holds the method
table (what each name means, its order, whether it is symplectic and explicit), the
automatic choice, and the default step.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from phaselab.engine.status import COMPOSITION, GAUSS, RK4
from phaselab.errors import ModelError, ParameterError


@dataclass(frozen=True)
class Method:
    """A fixed-step integrator.

    Attributes
    ----------
    name : str
        The name used in ``method=...``.
    kind : int
        Stepper family (composition, Gauss-Legendre, Runge-Kutta).
    order : int
        Nominal order of accuracy.
    symplectic : bool
    explicit : bool
    separable_only : bool
        True for splitting methods, which need H = T(p) + V(q).
    weights : ndarray, shape (s,)
        Leapfrog weights of a composition.
    A, b : ndarray
        Gauss-Legendre tableau (shapes (s, s) and (s,)).
    """

    name: str
    kind: int
    order: int
    symplectic: bool
    explicit: bool
    separable_only: bool
    weights: np.ndarray
    A: np.ndarray
    b: np.ndarray

    @property
    def stages(self) -> int:
        """Force evaluations per step (composition) or implicit stages (Gauss)."""
        return len(self.weights) if self.kind == COMPOSITION else len(self.b)


def triple_jump(weights: np.ndarray, order: int) -> np.ndarray:
    """Raise a symmetric composition of order ``order`` to ``order + 2``.

    S(h) -> S(x1 h) S(x0 h) S(x1 h) with x1 = 1 / (2 - 2^(1/(order+1))) and
    x0 = 1 - 2 x1 (Yoshida 1990, Phys. Lett. A 150, 262).
    """
    root = 2.0 ** (1.0 / (order + 1))
    x1 = 1.0 / (2.0 - root)
    x0 = -root * x1
    return np.concatenate([x1 * weights, x0 * weights, x1 * weights])


# Yoshida 1990 (Phys. Lett. A 150, 262), table 1: sixth order "solution A" (7 leapfrogs) and
# eighth order "solution D" (15 leapfrogs); values recalled from memory, verified by the
# observed-order tests in tests/engine/test_integrators.py.
_Y6 = np.array([0.784513610477560, 0.235573213359357, -1.17767998417887])
_Y8 = np.array([0.914844246229740, 0.253693336566229, -1.44485223686048, -0.158240635368243,
                1.93813913762276, -1.96061023297549, 0.102799849391985])


def _symmetric(outer: np.ndarray) -> np.ndarray:
    """w_m .. w_1, w_0, w_1 .. w_m with w_0 = 1 - 2 sum(w_i), from ``outer = [w_m .. w_1]``."""
    outer = np.asarray(outer, dtype=float)
    w0 = 1.0 - 2.0 * outer.sum()
    return np.concatenate([outer, [w0], outer[::-1]])


def gauss_legendre_tableau(stages: int) -> tuple[np.ndarray, np.ndarray]:
    """Butcher tableau of the ``stages``-stage Gauss-Legendre collocation method.

    Nodes are the Gauss-Legendre points on [0, 1] (``numpy.polynomial.legendre.leggauss``);
    ``A[i, j]`` is the integral from 0 to ``c[i]`` of the j-th Lagrange basis polynomial and
    ``b[j]`` its integral over [0, 1] (the collocation definition, Hairer, Lubich & Wanner,
    Geometric Numerical Integration, sec. II.1.3).
    """
    x, _ = np.polynomial.legendre.leggauss(stages)
    c = 0.5 * (x + 1.0)
    A = np.zeros((stages, stages))
    b = np.zeros(stages)
    for j in range(stages):
        others = np.delete(c, j)
        basis = np.poly1d(np.poly(others)) / np.prod(c[j] - others)
        integral = np.polyint(basis)
        b[j] = integral(1.0) - integral(0.0)
        for i in range(stages):
            A[i, j] = integral(c[i]) - integral(0.0)
    return A, b


def _composition(name, weights, order):
    w = np.asarray(weights, dtype=float)
    return Method(name, COMPOSITION, order, True, True, True, w, np.zeros((1, 1)), np.zeros(1))


def _gauss(name, stages):
    A, b = gauss_legendre_tableau(stages)
    return Method(name, GAUSS, 2 * stages, True, False, False, np.ones(1), A, b)


METHODS: dict[str, Method] = {
    "leapfrog": _composition("leapfrog", [1.0], 2),
    "yoshida4": _composition("yoshida4", triple_jump(np.array([1.0]), 2), 4),
    "yoshida6": _composition("yoshida6", _symmetric(_Y6), 6),
    "yoshida8": _composition("yoshida8", _symmetric(_Y8), 8),
    "implicit_midpoint": _gauss("implicit_midpoint", 1),
    "gauss4": _gauss("gauss4", 2),
    "gauss6": _gauss("gauss6", 3),
    "rk4": Method("rk4", RK4, 4, False, True, False, np.ones(1), np.zeros((1, 1)), np.zeros(1)),
}
"""Fixed-step methods by name. ``"dop853"`` (adaptive, scipy) is handled separately."""

ALIASES = {"stormer_verlet": "leapfrog", "verlet": "leapfrog", "gauss2": "gauss4",
           "gauss3": "gauss6", "gauss_legendre": "gauss6", "midpoint": "implicit_midpoint"}

ADAPTIVE = ("dop853",)


def get_method(name: str, system=None) -> Method:
    """Look up a fixed-step method, refusing one the system's structure does not allow.

    Raises
    ------
    ParameterError
        For an unknown name.
    ModelError
        A splitting method asked for a non-separable H.
    """
    key = ALIASES.get(str(name).lower(), str(name).lower())
    if key not in METHODS:
        raise ParameterError(
            f"unknown method {name!r}; choose one of {', '.join([*METHODS, *ADAPTIVE])} or 'auto'")
    method = METHODS[key]
    if system is not None and method.separable_only and not system.is_separable:
        raise ModelError(
            f"method {method.name!r} is an explicit splitting method and needs H = T(p) + V(q), "
            f"but this H mixes coordinates and momenta ({_short(system.expr)}); use 'gauss6', "
            "'gauss4' or 'implicit_midpoint' (or method='auto')")
    return method


def _short(expr, limit: int = 120) -> str:
    text = str(expr)
    return text if len(text) <= limit else text[:limit - 3] + "..."


def choose_method(system) -> Method:
    """The method ``method="auto"`` picks: Yoshida 4 for a separable H, else 3-stage Gauss-
    Legendre (both symplectic, sixth and fourth order balance cost and accuracy)."""
    return METHODS["yoshida4"] if system.is_separable else METHODS["gauss6"]


STEPS_PER_PERIOD = {2: 200, 4: 100, 6: 60, 8: 40}
"""Steps per shortest linearised period used by :func:`default_step`, by method order."""


def linear_time_scale(cs, states: np.ndarray, prm: np.ndarray) -> float:
    """The shortest linearised time scale over the given states, in model time units.

    For each state the Jacobian of the vector field (the compiled ``jacobian`` kernel, through
    ``cs.evaluate``) is evaluated and the largest eigenvalue modulus ``lam`` taken; elliptic directions give
    ``lam = omega`` (rad per unit time), hyperbolic ones the growth rate. Returns
    ``2 pi / max(lam)`` over the states, or ``inf`` where every eigenvalue vanishes (a free
    particle) or no state is finite.
    """
    Z = np.atleast_2d(np.asarray(states, dtype=float))
    Z = Z[np.all(np.isfinite(Z), axis=1)]
    if len(Z) == 0:
        return np.inf
    if len(Z) > 2000:  # a spread sample is enough for a time scale
        Z = Z[np.linspace(0, len(Z) - 1, 2000).astype(int)]
    jac = cs.evaluate("jacobian", Z, prm)
    jac = jac[np.all(np.isfinite(jac), axis=(1, 2))]
    if len(jac) == 0:
        return np.inf
    lam = np.abs(np.linalg.eigvals(jac)).max()
    return 2.0 * np.pi / lam if lam > 0 else np.inf


def default_step(cs, method: Method, states: np.ndarray, prm: np.ndarray, span: float,
                 period: float | None = None) -> float:
    """The step used when the caller gives none.

    ``T / STEPS_PER_PERIOD[order]`` where ``T`` is the shortest of: the linearised period
    at the seeds (:func:`linear_time_scale`), the driving period of a time-periodic H, and
    the integration span itself (so a free particle, whose linearisation has no time
    scale, still gets 40 to 200 steps over the span). This is a starting point:
    nonlinear orbits may need smaller steps (the energy error of the result tells), and
    the linearisation at a seed does not see a close encounter later on the orbit. The
    result is rounded down to a power of 2^(1/4); pass ``dt`` explicitly for results that
    cannot depend on which other seeds share the call.

    Parameters
    ----------
    cs : LoopSet
        The compiled autonomous system (see :func:`phaselab.engine.compiled.loops`).
    method : Method
    states : ndarray, shape (n_orbits, 2n)
    prm : ndarray, shape (n_params,)
    span : float
        Length of the integration interval, > 0.
    period : float, optional
        Driving period of a time-periodic H.
    """
    scale = min(linear_time_scale(cs, states, prm), abs(span))
    if period is not None and np.isfinite(period) and period > 0:
        scale = min(scale, period)
    per = STEPS_PER_PERIOD.get(method.order, 100 if method.order > 2 else 200)
    h = scale / per
    if not (np.isfinite(h) and h > 0):
        return h
    # round down onto the ladder 2^(k/4): seeds with nearby time scales then share one step,
    # so adding a seed to a batch rarely changes the other orbits' step
    return float(2.0 ** (np.floor(4.0 * np.log2(h)) / 4.0))
