"""The quadratic part of H brought to ``sum_k omega_k I_k`` by a linear symplectic change.

Complex coordinates ``xi_k``, ``eta_k`` (the conjugate of ``xi_k`` on real states) are linear
in the shifted state ``x``: ``u = (xi, eta) = T x`` and ``x = M u``. They satisfy
``{xi_k, eta_k} = -i s_k``, ``{xi_k, H2} = -i omega_k xi_k``, so ``H2 = sum omega_k xi_k eta_k / s_k``
and the action is ``I_k = xi_k eta_k / s_k``.

* Exact route (Williamson's normal form in closed form): when the Hessian has no ``q``-``p``
  coupling, diagonal ``q``-``q`` and ``p``-``p`` blocks (``H2 = sum (b_k q_k^2 + a_k p_k^2) / 2``)
  with rational entries and each ``sqrt(a_k b_k)`` rational, take ``xi_k = b_k q_k + i omega_k p_k``
  with ``omega_k = sign(b_k) sqrt(a_k b_k)`` and ``s_k = 2 b_k omega_k``: every coefficient
  stays a Gaussian rational.
* Floating route (any elliptic quadratic part): the rows of ``T`` are left eigenvectors of
  ``A = J Hess H`` for the eigenvalues ``-i mu`` (``mu > 0``), orthogonalised within a repeated
  eigenvalue with the Hermitian form ``i c^T J conj(d)`` and scaled to ``s_k = 2``. A negative
  form (Krein signature) makes ``omega_k = -mu``: H2 is then not positive definite.
"""

from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction

import numpy as np
import sympy as sp

from phaselab.errors import ModelError
from phaselab.structures.normal_forms.numbers import EXACT, FLOAT, Arithmetic

CLUSTER = 1e-8
"""Eigenvalues closer than this (relative) are one repeated eigenvalue."""


@dataclass
class Diagonal:
    """The result of the linear step.

    Attributes
    ----------
    arithmetic : Arithmetic
    omega : list
        Frequencies as coefficients (Fractions when exact), length n.
    scales : list
        ``s_k`` as coefficients, length n.
    to_complex, to_real : list of lists
        ``T`` and ``M`` (2n x 2n) as coefficients.
    """

    arithmetic: Arithmetic
    omega: list
    scales: list
    to_complex: list
    to_real: list

    @property
    def omega_float(self) -> np.ndarray:
        return np.array([float(w) for w in self.omega])

    @property
    def scales_float(self) -> np.ndarray:
        return np.array([float(s) for s in self.scales])

    @property
    def to_complex_array(self) -> np.ndarray:
        return np.array([[complex(c) for c in row] for row in self.to_complex])

    @property
    def to_real_array(self) -> np.ndarray:
        return np.array([[complex(c) for c in row] for row in self.to_real])

    def as_float(self) -> "Diagonal":
        """The same change of coordinates in floating arithmetic."""
        return Diagonal(FLOAT, [float(w) for w in self.omega], [float(s) for s in self.scales],
                        [[complex(c) for c in row] for row in self.to_complex],
                        [[complex(c) for c in row] for row in self.to_real])

    def quadratic(self) -> dict:
        """``H2 = sum omega_k xi_k eta_k / s_k`` as a polynomial in ``u``."""
        n = len(self.omega)
        out = {}
        for k in range(n):
            key = tuple(1 if t in (k, n + k) else 0 for t in range(2 * n))
            out[key] = self.arithmetic.number(self.omega[k] / self.scales[k])
        return out


def hessian(coefficients: dict, m: int) -> sp.Matrix:
    """The Hessian at the expansion point from the degree-2 Taylor coefficients."""
    S = sp.zeros(m, m)
    for key, c in coefficients.items():
        if sum(key) != 2:
            continue
        idx = [i for i, e in enumerate(key) for _ in range(e)]
        i, j = idx
        if i == j:
            S[i, i] = 2 * c
        else:
            S[i, j] = S[j, i] = c
    return S


def diagonalise(S: sp.Matrix, exact: bool) -> Diagonal:
    """Bring the quadratic part with Hessian ``S`` (2n x 2n) to normal form.

    Raises
    ------
    ModelError
        When the equilibrium is not elliptic (an eigenvalue of ``J S`` off the imaginary
        axis, or zero) or the linearisation is degenerate (a Jordan block).
    """
    if exact:
        found = _exact(S)
        if found is not None:
            return found
    return _floating(np.array(S.evalf(), dtype=float))


def _exact(S: sp.Matrix):
    n = S.rows // 2
    if not all(e.is_Rational for e in S):
        return None
    off = [S[i, j] for i in range(2 * n) for j in range(2 * n) if i != j]
    if any(e != 0 for e in off):
        return None
    omega, scales = [], []
    T = [[EXACT.number(0) for _ in range(2 * n)] for _ in range(2 * n)]
    M = [[EXACT.number(0) for _ in range(2 * n)] for _ in range(2 * n)]
    for k in range(n):
        b, a = S[k, k], S[n + k, n + k]
        if a * b <= 0:
            return None  # let the floating route name the problem
        root = sp.sqrt(a * b)
        if not root.is_Rational:
            return None
        w = Fraction(int(root.p), int(root.q)) * (1 if b > 0 else -1)
        bf = Fraction(int(b.p), int(b.q))
        omega.append(w)
        scales.append(2 * bf * w)
        T[k][k] = EXACT.number(bf)
        T[k][n + k] = EXACT.unit * w
        T[n + k][k] = EXACT.number(bf)
        T[n + k][n + k] = -(EXACT.unit * w)
        M[k][k] = M[k][n + k] = EXACT.number(1 / (2 * bf))
        M[n + k][k] = -(EXACT.unit * (1 / (2 * w)))
        M[n + k][n + k] = EXACT.unit * (1 / (2 * w))
    return Diagonal(EXACT, omega, scales, T, M)


def _floating(S: np.ndarray) -> Diagonal:
    m = S.shape[0]
    n = m // 2
    Jm = np.block([[np.zeros((n, n)), np.eye(n)], [-np.eye(n), np.zeros((n, n))]])
    A = Jm @ S
    scale = max(np.linalg.norm(A, 2), 1e-300)
    vals, vecs = np.linalg.eig(A.T)
    if np.any(np.abs(vals.real) > 1e-9 * scale) or np.any(np.abs(vals) < 1e-9 * scale):
        listed = ", ".join(f"{v:.6g}" for v in vals)
        raise ModelError(f"the equilibrium is not elliptic: the linearisation has eigenvalues {listed}; "
                         "a normal form of this kind needs every eigenvalue on the imaginary axis and nonzero")
    neg = [i for i in np.argsort(-vals.imag) if vals[i].imag < 0]
    rows, omega = [], []
    used = set()
    for i in neg:
        if i in used:
            continue
        mu = -vals[i].imag
        group = [j for j in neg if j not in used and abs(-vals[j].imag - mu) <= CLUSTER * scale]
        used.update(group)
        C = vecs[:, group]
        B = 1j * C.T @ Jm @ C.conj()
        d, U = np.linalg.eigh(0.5 * (B + B.conj().T))
        C = C @ U.conj()
        for col, dj in zip(C.T, d):
            if abs(dj) < 1e-10 * np.linalg.norm(col) ** 2:
                raise ModelError("the linearisation is degenerate (a repeated eigenvalue with a Jordan block); "
                                 "it has no elliptic normal form")
            c = col / np.sqrt(abs(dj) / 2)
            rows.append(c if dj > 0 else c.conj())
            omega.append(mu if dj > 0 else -mu)
    if len(rows) != n:
        raise ModelError("the linearisation is degenerate; it has no elliptic normal form")
    T = np.array(rows + [r.conj() for r in rows])
    M = np.linalg.inv(T)
    H2 = 0.5 * M.T @ S @ M
    want = np.zeros((m, m), dtype=complex)
    for k in range(n):
        want[k, n + k] = want[n + k, k] = omega[k] / 4
    if np.abs(H2 - want).max() > 1e-8 * max(1.0, np.abs(want).max()):
        raise ModelError("the linearisation could not be diagonalised symplectically (degenerate or "
                         "ill-conditioned); it has no elliptic normal form here")
    return Diagonal(FLOAT, [float(w) for w in omega], [2.0] * n,
                    [[complex(c) for c in row] for row in T], [[complex(c) for c in row] for row in M])
