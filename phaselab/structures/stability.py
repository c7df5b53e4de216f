"""Linear stability of equilibria and fixed points: eigenvalues and the name of their type.

A Hamiltonian linearisation A = J Hess H has eigenvalues in pairs +-l: a real pair is a
saddle direction, an imaginary pair a centre, a complex quartet a focus-focus. An
equilibrium whose pairs are all centres is "elliptic", one with no centre "hyperbolic", and
a mixture is named by its pairs, saddles first: "saddle-centre" (the collinear Lagrange
points of the restricted three-body problem), "saddle-centre-centre", "focus-focus-centre".
For a map's Jacobian the same is read on the unit circle: a pair on it is a centre, a real
pair off it a saddle.

Tolerances (``scale`` = largest singular value of A): ``|Re l| < 1e-9 * scale`` is a zero
real part, ``|l| < 1e-6 * scale`` a zero eigenvalue, eigenvalues closer than
``1e-6 * scale`` are repeated, and a repeated eigenvalue whose eigenspace is smaller than its
multiplicity (a Jordan block) makes the point "degenerate". For maps the same tests are made
on ``|l| - 1`` (unit circle) and ``l - 1``.
"""

from __future__ import annotations

import numpy as np

ZERO_REAL = 1e-9
"""|Re(lambda)| below this times the scale of A counts as zero."""
ZERO_EIGENVALUE = 1e-6
"""|lambda| below this times the scale of A is a zero eigenvalue."""
REPEATED = 1e-6
"""Eigenvalues closer than this times the scale of A are repeated."""
STABILITIES = ("elliptic", "hyperbolic", "degenerate")
"""The pure types; mixed types are named from their pairs (see the module docstring)."""


def _mixed_name(centre: np.ndarray, lam: np.ndarray, real_axis: np.ndarray) -> str:
    """'saddle-centre'-style name: one word per pair (centres counted by ``centre``, complex
    quartets off the real axis as focus-focus)."""
    n_centre = int(centre.sum()) // 2
    other = ~centre
    n_real = int((other & real_axis).sum()) // 2
    n_focus = int((other & ~real_axis).sum()) // 4
    words = ["saddle"] * n_real + ["focus-focus"] * n_focus + ["centre"] * n_centre
    return "-".join(words)


def classify_flow(A: np.ndarray) -> tuple[np.ndarray, str]:
    """Eigenvalues of a linearised Hamiltonian vector field and the stability they imply.

    Parameters
    ----------
    A : ndarray, shape (2n, 2n)

    Returns
    -------
    eigenvalues : ndarray of complex, shape (2n,), sorted by (real, imag); NaN when ``A`` is
        not finite (a singular point of the model), which is then "degenerate"
    stability : str
        One of :data:`STABILITIES`, or the name of a mixed type such as ``"saddle-centre"``.
    """
    A = np.asarray(A, dtype=float)
    if not np.all(np.isfinite(A)):
        return np.full(len(A), np.nan + 0j), "degenerate"
    lam = _sorted(np.linalg.eigvals(A))
    scale = float(np.linalg.norm(A, 2))
    if scale == 0.0 or np.any(np.abs(lam) < ZERO_EIGENVALUE * scale) or _defective(A, lam, scale):
        return lam, "degenerate"
    zero_re = np.abs(lam.real) < ZERO_REAL * scale
    if zero_re.all():
        return lam, "elliptic"
    if not zero_re.any():
        return lam, "hyperbolic"
    return lam, _mixed_name(zero_re, lam, np.abs(lam.imag) < ZERO_REAL * scale)


def classify_map(M: np.ndarray) -> tuple[np.ndarray, str]:
    """Eigenvalues of the Jacobian of a map at a fixed point and the stability they imply.

    On the unit circle (``||l| - 1| < 1e-9``) counts as elliptic, off it as hyperbolic; an
    eigenvalue 1 or a Jordan block makes the fixed point degenerate.
    """
    M = np.asarray(M, dtype=float)
    if not np.all(np.isfinite(M)):
        return np.full(len(M), np.nan + 0j), "degenerate"
    lam = _sorted(np.linalg.eigvals(M))
    scale = max(1.0, float(np.linalg.norm(M, 2)))
    if np.any(np.abs(lam - 1.0) < ZERO_EIGENVALUE) or _defective(M, lam, scale):
        return lam, "degenerate"
    on_circle = np.abs(np.abs(lam) - 1.0) < ZERO_REAL * scale
    if on_circle.all():
        return lam, "elliptic"
    if not on_circle.any():
        return lam, "hyperbolic"
    return lam, _mixed_name(on_circle, lam, np.abs(lam.imag) < ZERO_REAL * scale)


def _sorted(lam: np.ndarray) -> np.ndarray:
    lam = np.asarray(lam, dtype=complex)
    return lam[np.lexsort((lam.imag, np.round(lam.real, 12)))]


def _defective(A: np.ndarray, lam: np.ndarray, scale: float) -> bool:
    """True when a repeated eigenvalue has fewer independent eigenvectors than its multiplicity."""
    n = len(lam)
    seen = np.zeros(n, dtype=bool)
    for i in range(n):
        if seen[i]:
            continue
        close = np.abs(lam - lam[i]) < REPEATED * scale
        seen |= close
        m = int(close.sum())
        if m < 2:
            continue
        centre = lam[close].mean()
        sv = np.linalg.svd(A - centre * np.eye(n), compute_uv=False)
        if int(np.sum(sv < REPEATED * scale)) < m:
            return True
    return False
