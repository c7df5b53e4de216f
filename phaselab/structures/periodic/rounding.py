"""What Newton's method on a return map can say about its own answer.

- :func:`rounding_level` measures the rounding noise of the shooting residual at a point: the
  residual cannot be brought below it, so a search that stalls there has converged as far as
  floating point allows (it is reported with the residual reached, not as a failure).
- :func:`guess_report` measures how far a solved orbit lies from the guess it started from,
  in state and in period, and :func:`warn_if_far` says so when that is far compared with the
  orbit's size (Newton's method may have gone to another orbit).
"""

from __future__ import annotations

import warnings

import numpy as np

from phaselab.errors import PhaselabWarning

PROBES = 4
"""Nearby points at which the residual is re-evaluated to measure its rounding noise."""
PROBE_SIZE = 1e-10
"""Their distance from the point, relative to the scale 1 + max |u| of the orbit."""
PROBE_BELOW = 1e-6
"""The noise is measured only where the residual is below this (relative to the scale): a
residual above it is not rounding for any orbit worth computing."""
STALL_FACTOR = 10.0
"""A residual within this factor of the measured rounding noise counts as converged."""
FAR_STATE = 0.2
"""Warn when the solved orbit is farther than this fraction of its size from the guess."""
FAR_PERIOD = 0.2
"""... or when its period differs by more than this fraction from the guess's return time."""


def rounding_level(evaluate, U, A, scale) -> float:
    """The rounding noise of the shooting residual at ``U`` (max norm).

    The residual is evaluated at ``PROBES`` pairs of points ``U +- h`` with
    ``|h| = PROBE_SIZE * scale``. With the linear change taken off, what is left of the
    central difference ``(F(U + h) - F(U - h)) / 2 - A h`` is rounding (``A`` is the exact
    derivative of the computed map; the quadratic term cancels and the cubic one is ~1e-30
    of the scale). The largest of those is the level below which no residual can be told from
    zero (a difference estimate of noise, common practice).

    Parameters
    ----------
    evaluate : callable
        ``evaluate(U_batch (P, k, d)) -> (F (P, k, d), ok (P,))``.
    U : ndarray, shape (k, d)
    A : ndarray, shape (k d, k d)
        Its Jacobian.
    scale : float

    Returns
    -------
    float
        The noise level (inf when a probe failed).
    """
    rng = np.random.default_rng(7)
    H = rng.choice([-1.0, 1.0], size=(PROBES,) + U.shape) * (PROBE_SIZE * scale)
    Fp, ok = evaluate(np.concatenate([U[None] + H, U[None] - H]))
    if not np.all(ok):
        return float("inf")
    lin = (H.reshape(PROBES, -1) @ A.T).reshape(H.shape)
    return float(np.max(np.abs(0.5 * (Fp[:PROBES] - Fp[PROBES:]) - lin)))


def orbit_size(orbit) -> float:
    """The extent of an orbit in state space: the largest range of a state component over
    its trajectory (flows) or its points (maps); for a single fixed point of a map, the scale
    1 + max |z| of the point."""
    traj = getattr(orbit, "orbit", None)
    pts = traj.states[0] if traj is not None and getattr(traj, "states", None) is not None else orbit.points
    pts = np.asarray(pts, dtype=float).reshape(-1, orbit.points.shape[1])
    pts = pts[np.all(np.isfinite(pts), axis=1)]
    extent = float(np.max(np.ptp(pts, axis=0))) if len(pts) else 0.0
    if extent <= 0.0:
        extent = 1.0 + float(np.max(np.abs(orbit.points[0])))
    return extent


def guess_report(orbit, start, start_period, wrap=None) -> tuple[float, float]:
    """How far the orbit is from where Newton's method started.

    Parameters
    ----------
    orbit : PeriodicOrbit
    start : ndarray, shape (2n,)
        The guess as placed on the section (the first point of the search).
    start_period : float
        The return time of the guess (sum over its returns; ``k`` for maps).
    wrap : callable, optional
        Brings a difference of states into the map's intervals.

    Returns
    -------
    distance : float
        max |z - guess| over the state components, first point against the guess.
    period_change : float
        period - return time of the guess.
    """
    diff = np.asarray(orbit.points[0], dtype=float) - np.asarray(start, dtype=float)
    if wrap is not None:
        diff = wrap(diff)
    return float(np.max(np.abs(diff))), float(orbit.period - start_period)


def warn_if_far(orbit) -> None:
    """A :class:`~phaselab.errors.PhaselabWarning` when the orbit lies far from its guess
    (``distance_from_guess`` above ``FAR_STATE`` of the orbit's size, or ``period_change``
    above ``FAR_PERIOD`` of the period)."""
    size = orbit_size(orbit)
    dist, dper = orbit.distance_from_guess, orbit.period_change
    far_state = np.isfinite(dist) and dist > FAR_STATE * size
    far_period = np.isfinite(dper) and abs(dper) > FAR_PERIOD * abs(orbit.period)
    if far_state or far_period:
        parts = []
        if far_state:
            parts.append(f"{dist:.3g} away in state (the orbit's size is {size:.3g})")
        if far_period:
            parts.append(f"its period {orbit.period:.6g} differs by {dper:+.3g} from the guess's return time")
        warnings.warn(
            f"the periodic orbit found lies far from the guess: {' and '.join(parts)}; Newton's method may "
            "have gone to another orbit. Check it, or start closer (e.g. from a nearby member at a smaller "
            "energy or parameter step)", PhaselabWarning, stacklevel=3)
