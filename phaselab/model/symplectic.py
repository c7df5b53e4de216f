"""Is a map symplectic: ``M^T J M = J`` for its Jacobian ``M`` at sample points.

For one degree of freedom this is the same as a unit Jacobian determinant (area
preservation). From two degrees of freedom on it is stronger: a unit determinant only says
the map preserves volume, and a volume-preserving map need not preserve the symplectic form
(``(q1, q2, p1, p2) -> (2 q1, q2 / 2, p1, p2)`` has determinant 1 but stretches the pair
(q1, p1) by 2); such a map is no Hamiltonian one-turn map, and the tools that rely on the
structure (multiplier pairs ``lambda, 1/lambda``, Greene's residue, symplectic indices)
would mislead on it.

The check evaluates the symbolic Jacobian (already bounded in size by the map) in double
precision at sample states and parameters; the work is one small matrix product per sample.
"""

from __future__ import annotations

import numpy as np
import sympy as sp

from phaselab.errors import ModelError
from phaselab.model.numeric import numeric_function
from phaselab.model.zero import value_at

#: a sample fails when max |M^T J M - J| exceeds this times 2n max(1, max|M|^2) (the
#: rounding of the 2n products summed in each entry, with room to spare)
SYMPLECTIC_TOL = 1e-10
#: sample points that must pass
N_SYMPLECTIC_SAMPLES = 20


def symplectic_form(n: int) -> np.ndarray:
    """The matrix ``J = [[0, I], [-I, 0]]`` of the state order ``(q1..qn, p1..pn)``, shape (2n, 2n)."""
    J = np.zeros((2 * n, 2 * n))
    J[:n, n:] = np.eye(n)
    J[n:, :n] = -np.eye(n)
    return J


def symplectic_defect(M) -> float:
    """``max |M^T J M - J|`` of a numeric matrix ``M``, shape (2n, 2n), relative to
    ``max(1, max|M|^2)`` (so composed maps with large entries are judged fairly)."""
    M = np.asarray(M, dtype=float)
    J = symplectic_form(M.shape[0] // 2)
    scale = max(1.0, float(np.max(np.abs(M))) ** 2)
    return float(np.max(np.abs(M.T @ J @ M - J))) / scale


def check_symplectic(jacobian, args, states, params, name: str) -> float:
    """Check ``M^T J M = J`` at sample points; the worst relative defect found.

    Parameters
    ----------
    jacobian : sympy.Matrix, shape (2n, 2n)
        The map's Jacobian in the state symbols and parameter symbols ``args``.
    args : sequence of sympy.Symbol
        State symbols, then parameter symbols.
    states : ndarray, shape (n_samples, 2n)
    params : ndarray, shape (n_samples, n_params)
    name : str
        The map's name, for messages.

    Raises
    ------
    ModelError
        At the first sample where the defect is too large (the message gives the point,
        the defect and the determinant there, and says when the map only preserves
        volume), or when the Jacobian is undefined at every sample.
    """
    size = jacobian.shape[0]
    # lambdify prints sympy's own expression tree (never user text) into numpy code
    fn = sp.lambdify(list(args), jacobian, modules="numpy")
    tol = SYMPLECTIC_TOL * size
    worst, good = 0.0, 0
    with np.errstate(all="ignore"):
        for z, k in zip(states, params):
            try:
                M = np.asarray(fn(*z, *k), dtype=float)
            except (ZeroDivisionError, ValueError, OverflowError, TypeError):
                continue
            if M.shape != (size, size) or not np.all(np.isfinite(M)):
                continue
            defect = symplectic_defect(M)
            if defect > tol:
                raise ModelError(_refusal(name, M, defect, args, list(z) + list(k)))
            worst = max(worst, defect)
            good += 1
            if good >= N_SYMPLECTIC_SAMPLES:
                break
    if good == 0:
        raise ModelError(f"cannot check that map {name!r} is symplectic: its Jacobian is undefined at every "
                         "sample point")
    return worst


def _refusal(name, M, defect, args, values) -> str:
    point = ", ".join(f"{s.name}={v:.4g}" for s, v in zip(args, values))
    det = float(np.linalg.det(M))
    size = M.shape[0]
    if abs(det - 1.0) <= 1e-9 * max(1.0, abs(det)):
        why = (f"its Jacobian determinant is 1 there, so it preserves volume, but a map of {size} "
               "dimensions must preserve the symplectic form M^T J M = J (pairs q_i, p_i), "
               "which this one does not")
    else:
        why = f"it does not even preserve volume (Jacobian determinant {det:.6g} there)"
    return (f"map {name!r} is not symplectic: M^T J M differs from J by {defect:.3g} (relative) at "
            f"{point}; {why}")


def check_determinant(name: str, jacobian, det, args, states, params, shown: str, n_samples: int,
                      tol: float) -> None:
    """Check det = 1 at sample states and parameters.

    With the determinant expression ``det``, each sample is evaluated with mpmath at 30
    digits (:func:`phaselab.model.zero.value_at`), so the cancellation between large
    products of a composed map cannot pass for a failure; with ``None``, the Jacobian
    matrix is evaluated in double precision and its determinant taken with numpy. ``shown`` is
    how the determinant is named in a refusal; ``n_samples`` good samples settle it, each
    within ``tol`` of 1 (relative).

    Raises
    ------
    ModelError
        At the first sample where the determinant is not 1, or when it is undefined at every
        sample."""
    if det is not None:
        residual = det - 1

        def fn(*values):
            value, scale = value_at(residual, dict(zip(args, map(float, values))))
            if value is None:
                raise ValueError("undefined")
            # cancellation in 30-digit arithmetic leaves at most ~1e-28 of the terms
            return 1.0 if abs(value) <= 1e-20 * scale else complex(value) + 1.0
    else:
        jac = numeric_function(args, jacobian)

        def fn(*values):
            return np.linalg.det(np.asarray(jac(*values), dtype=float))

    good = 0
    with np.errstate(all="ignore"):
        for zi, ki in zip(states, params):
            try:
                value = complex(fn(*zi, *ki))
            except (ZeroDivisionError, ValueError, OverflowError, TypeError, np.linalg.LinAlgError):
                continue
            if not (np.isfinite(value.real) and np.isfinite(value.imag)):
                continue
            if abs(value - 1.0) > tol * max(1.0, abs(value)):
                point = ", ".join(f"{s.name}={v:.4g}" for s, v in zip(args, list(zi) + list(ki)))
                raise ModelError(
                    f"map {name!r} is not area-preserving: its Jacobian determinant is "
                    f"{shown}, which is {value.real:.6g} at {point}")
            good += 1
            if good >= n_samples:
                return
    if good == 0:
        raise ModelError(
            f"cannot check that map {name!r} is area-preserving: its Jacobian determinant "
            f"{shown} is undefined at every sample point")
