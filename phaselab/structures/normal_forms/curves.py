"""A normal form's invariant curves on a surface of section, before integrating anything.

For a flow of two degrees of freedom, the torus of actions ``J`` (angles ``phi`` free) is the
image of ``(J, phi)`` under :meth:`~.result.NormalForm.from_normal`. Its trace on the plane
``q_j = value`` (crossed in ``direction``) is found along the other angle: for each value of
it, the angle ``phi_j`` where the coordinate crosses the plane is bracketed on a grid of
``phi_j`` and refined by regula falsi (the crossing's direction read from the sign
change along ``phi_j``, which advances with time for a mode of positive frequency). A
resonant form's separatrix at ``J* + I(psi) k`` is traced the same way.

The curves are accurate to the order of the transformation; they are predictions to draw
over a computed section, not section points.
"""

from __future__ import annotations

import numpy as np

from phaselab.errors import ModelError, ParameterError

#: points along phi_j where the crossing is bracketed
BRACKET_POINTS = 181
#: regula falsi steps after the bracket (each one evaluation of from_normal per point)
REFINE_STEPS = 10


def plane_index(nf, plane) -> tuple[int, float]:
    """The coordinate index and value of ``plane`` (a mapping ``{coordinate name: value}``)."""
    if not isinstance(plane, dict) or len(plane) != 1:
        raise ParameterError(f"plane must be one coordinate and its value, e.g. {{{nf.names[0]!r}: 0.0}}, "
                             f"got {plane!r}")
    (name, value), = plane.items()
    coords = list(nf.names[:nf.dof])
    if name not in coords:
        raise ParameterError(f"plane must name a coordinate ({', '.join(coords)}), got {name!r}")
    return coords.index(name), float(value)


def crossings(nf, J, other, j: int, value: float, direction: int = +1) -> np.ndarray:
    """States where tori cross the plane ``q_j = value``.

    Parameters
    ----------
    nf : NormalForm
        Of two degrees of freedom.
    J : ndarray, shape (m, 2)
        Actions of each point's torus.
    other : ndarray, shape (m,)
        The angle of the mode that is not ``j``, one per point (rad).
    j : int
        The mode whose coordinate makes the plane (0 or 1).
    value : float
    direction : {+1, -1}
        +1: the coordinate increasing through the plane.

    Returns
    -------
    ndarray, shape (m, 4)
        NaN rows where the torus does not reach the plane.
    """
    grid = np.linspace(-np.pi, np.pi, BRACKET_POINTS)
    phi = np.empty((len(other), BRACKET_POINTS, 2))
    phi[..., j] = grid[None, :]
    phi[..., 1 - j] = np.asarray(other, dtype=float)[:, None]
    return _cross(nf, J, phi, j, value, direction)


def _cross(nf, J, phi, j, value, direction) -> np.ndarray:
    """For each row: the first sign change of ``q_j - value`` along the bracketing angles
    ``phi`` (shape (m, B, 2)), refined by the Illinois variant of regula falsi; NaN where
    there is none."""
    if nf.kind != "flow" or nf.dof != 2:
        raise ModelError("invariant curves on a section are drawn for flows of two degrees of freedom")
    m, count = phi.shape[:2]
    J = np.asarray(J, dtype=float)
    actions = np.repeat(J[:, None, :], count, axis=1)
    z = nf.from_normal(actions.reshape(-1, 2), phi.reshape(-1, 2)).reshape(m, count, 4)
    sign = np.sign(nf.omega[j]) * direction
    s = (z[..., j] - value) * sign
    up = (s[:, :-1] < 0) & (s[:, 1:] >= 0)
    out = np.full((m, 4), np.nan)
    rows = np.nonzero(up.any(axis=1))[0]
    if not rows.size:
        return out
    i = np.argmax(up, axis=1)[rows]
    lo, hi = phi[rows, i], phi[rows, i + 1]
    f_lo, f_hi = s[rows, i], s[rows, i + 1]
    best = z[rows, i + 1]
    for _ in range(REFINE_STEPS):
        w = (f_lo / (f_lo - f_hi))[:, None]
        mid = lo + w * (hi - lo)
        best = nf.from_normal(J[rows], mid)
        f_mid = (best[:, j] - value) * sign
        left = f_mid < 0
        lo = np.where(left[:, None], mid, lo)
        hi = np.where(left[:, None], hi, mid)
        f_hi = np.where(left, f_hi * 0.5, f_mid)   # Illinois: halve the end that stays
        f_lo = np.where(left, f_mid, f_lo * 0.5)
    best[:, j] = value            # on the plane by definition (the rest to the refinement's accuracy)
    out[rows] = best
    return out


def torus_curve(nf, J, plane, direction: int = +1, points: int = 200) -> np.ndarray:
    """The trace of the torus ``J`` (shape (2,)) on ``plane``: shape (points + 1, 4), closed."""
    j, value = plane_index(nf, plane)
    J = np.asarray(J, dtype=float)
    if J.shape != (2,) or not np.all(np.isfinite(J)) or np.any(J < 0):
        raise ParameterError(f"J must be two finite actions >= 0, got {J}")
    other = np.linspace(-np.pi, np.pi, int(points) + 1)
    return crossings(nf, np.tile(J, (len(other), 1)), other, j, value, direction)


def separatrix_curves(nf, island, plane, direction: int = +1, points: int = 160) -> list:
    """The predicted separatrix of an island (an :class:`~phaselab.scan.island_check.IslandCheck`
    or anything with ``resonance``, ``center_actions`` and ``separatrix(psi)``) on ``plane``:
    one polyline (shape (points, 4), NaN where a branch misses the plane) per branch (upper and
    lower) and per solution ``phi_other`` of ``k . phi = psi``."""
    j, value = plane_index(nf, plane)
    k = np.array(island.resonance, dtype=float)
    if k[1 - j] == 0:
        raise ModelError(f"the resonance {tuple(island.resonance)} does not involve the angle along the plane")
    psi = np.linspace(-np.pi, np.pi, int(points))
    curves = []
    for sign in (+1, -1):
        J = np.clip(island.center_actions + sign * island.separatrix(psi)[:, None] * k, 0.0, None)
        for turn in range(int(abs(k[1 - j]))):
            curves.append(_branch(nf, J, psi, k, j, value, direction, turn))
    return curves


def _branch(nf, J, psi, k, j, value, direction, turn) -> np.ndarray:
    """Points of one branch: for each psi, phi_j is bracketed and the other angle follows
    from k . phi = psi (its ``turn``-th solution)."""
    o = 1 - j
    grid = np.linspace(-np.pi, np.pi, BRACKET_POINTS)
    phi = np.empty((len(psi), BRACKET_POINTS, 2))
    phi[..., j] = grid[None, :]
    phi[..., o] = (psi[:, None] - k[j] * grid[None, :] + 2 * np.pi * turn) / k[o]
    return _cross(nf, J, phi, j, value, direction)
