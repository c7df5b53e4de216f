"""Continuous symmetries of an autonomous flow and what they do to Newton's method on a section.

A conserved momentum (total linear momentum, angular momentum, the momentum of a cyclic
coordinate) generates a continuous family of periodic orbits: translating or rotating a
periodic orbit gives another one through a nearby point of the section. On the section map P
this shows as neutral directions: ``(DP - I) g = 0`` for each generator ``g`` (the right null
vectors) and ``dC (DP - I) = 0`` for each conserved quantity ``C`` (the left null vectors), so
P - I is singular *at* the orbit and an ordinary Newton step is undefined there.

The symmetries are found numerically, with no knowledge of the coordinates: a quantity

    C(z) = a . z + q^T B p          (a of shape (2n,), B of shape (n, n))

is conserved when its Lie derivative ``dC . f`` along the vector field f vanishes for every
state. That is a linear condition on ``(a, B)``; sampled at many states near the orbit, its
null space is the set of conserved quantities of this form. It holds every momentum that comes
from a point transformation with an affine generator (translations, rotations, the momentum
of a cyclic coordinate).

Newton's method then takes minimum-norm least-squares steps orthogonal to the generators
(phase conditions that pick one member of the family), see :func:`newton_steps`, and the
linear stability is read from the monodromy on the quotient that removes the 2m trivial
multipliers at +1 (:func:`reduced_monodromy`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

SAMPLES = 3
"""Sample states per unknown coefficient of the conserved quantities."""
NULL_TOL = 1e-9
"""Singular values below this (relative to the largest) mark a conserved quantity."""
MAX_DOF = 12
"""Up to this many degrees of freedom the bilinear part q^T B p is searched as well."""
PARALLEL_TOL = 1e-6
"""A generator whose part across the flow is below this (relative) is the flow itself."""
NEARLY_SINGULAR = 1e-4
"""A smallest singular value of P - I (on the complement of the symmetries) below this marks
an orbit close to parabolic or to a family."""
SEED = 20170
"""Fixed seed of the sample states, so that a search is repeatable."""

DEGENERATE = (
    "P - I is singular at this orbit: it belongs to a continuous family of periodic orbits (a "
    "conserved quantity or symmetry beyond the energy that was not recognised, an integrable system, "
    "or a parabolic orbit), so Newton's method has no unique answer and a closer guess will not help; "
    "remove the symmetry (fix the conserved momentum, use coordinates in which it is a cyclic "
    "coordinate's momentum) or choose another section")
NEARLY_DEGENERATE = (
    "the line search found no decrease where P - I is nearly singular (a multiplier within about 1e-4 "
    "of +1 besides those of recognised symmetries): the orbit is close to parabolic or to a continuous "
    "family of periodic orbits (an integrable or degenerate system), where Newton's method has no "
    "well-defined answer; a closer guess will likely not help")


@dataclass
class Symmetries:
    """Conserved quantities C(z) = a . z + q^T B p of an autonomous flow.

    Attributes
    ----------
    linear : ndarray, shape (m, 2n)
        The coefficients ``a``.
    bilinear : ndarray, shape (m, n, n)
        The coefficients ``B``.
    """

    linear: np.ndarray
    bilinear: np.ndarray

    @property
    def count(self) -> int:
        return self.linear.shape[0]

    def values(self, z) -> np.ndarray:
        """C at states ``z`` (N, 2n): shape (N, m)."""
        z = np.atleast_2d(z)
        n = z.shape[1] // 2
        return z @ self.linear.T + np.einsum("ni,mij,nj->nm", z[:, :n], self.bilinear, z[:, n:])

    def gradients(self, z) -> np.ndarray:
        """dC/dz at states ``z`` (N, 2n): shape (N, m, 2n)."""
        z = np.atleast_2d(z)
        n = z.shape[1] // 2
        dq = np.einsum("mij,nj->nmi", self.bilinear, z[:, n:])
        dp = np.einsum("mij,ni->nmj", self.bilinear, z[:, :n])
        return self.linear[None] + np.concatenate([dq, dp], axis=2)

    def generators(self, z) -> np.ndarray:
        """The Hamiltonian vector fields of the C (q' = dC/dp, p' = -dC/dq) at ``z``:
        shape (N, m, 2n)."""
        g = self.gradients(z)
        n = g.shape[2] // 2
        return np.concatenate([g[:, :, n:], -g[:, :, :n]], axis=2)


def _features(z, f, bilinear: bool) -> np.ndarray:
    """Rows dC . f for the basis quantities z_k and q_i p_j: shape (N, 2n [+ n*n])."""
    n = z.shape[1] // 2
    rows = [f]
    if bilinear:
        q, p, fq, fp = z[:, :n], z[:, n:], f[:, :n], f[:, n:]
        rows.append((fq[:, :, None] * p[:, None, :] + q[:, :, None] * fp[:, None, :]).reshape(len(z), n * n))
    return np.concatenate(rows, axis=1)


def point_symmetries(field, z_ref) -> Symmetries:
    """The conserved quantities a . z + q^T B p of a flow, found from its vector field.

    Parameters
    ----------
    field : callable
        ``field(Z)`` -> the vector field at the states ``Z`` (N, 2n), shape (N, 2n).
    z_ref : ndarray, shape (2n,)
        A state near where the symmetries are used (the samples are spread around it).

    Returns
    -------
    Symmetries
        An orthonormal basis of the coefficients (``count`` may be 0). The energy itself is
        among them only when it has this form (its generator is the flow, which the section
        removes anyway).
    """
    z_ref = np.asarray(z_ref, dtype=float)
    m = z_ref.size
    n = m // 2
    bilinear = n <= MAX_DOF
    unknowns = m + (n * n if bilinear else 0)
    rng = np.random.default_rng(SEED)
    spread = 0.25 * (1.0 + np.max(np.abs(z_ref)))
    Z = z_ref[None, :] + spread * rng.standard_normal((SAMPLES * unknowns + 8, m))
    with np.errstate(all="ignore"):
        f = np.asarray(field(Z), dtype=float)
        rows = _features(Z, f, bilinear)
    rows = rows[np.all(np.isfinite(rows), axis=1)]
    empty = Symmetries(np.zeros((0, m)), np.zeros((0, n, n)))
    if len(rows) < 2 * unknowns:
        return empty
    size = np.linalg.norm(rows, axis=1)
    rows = rows[size > 0] / size[size > 0, None]
    cols = np.linalg.norm(rows, axis=0)
    cols[cols == 0] = 1.0
    _, s, vt = np.linalg.svd(rows / cols, full_matrices=True)
    s = np.concatenate([s, np.zeros(unknowns - len(s))])
    null = vt[s <= NULL_TOL * s[0]] / cols[None, :]
    if not len(null):
        return empty
    null = np.linalg.qr(null.T)[0].T       # orthonormal basis of the coefficients
    B = null[:, m:].reshape(len(null), n, n) if bilinear else np.zeros((len(null), n, n))
    return Symmetries(linear=null[:, :m], bilinear=B)


# ----------------------------------------------------------------------------- on a section
def section_directions(sym: Symmetries, z, dz, field_at_z, plane_index: int, index) -> tuple[np.ndarray, np.ndarray]:
    """Neutral directions and conserved gradients of a plane section at the state ``z``.

    Parameters
    ----------
    sym : Symmetries
    z : ndarray, shape (2n,)
        A state on the section.
    dz : ndarray, shape (2n, d)
        d(state)/d(reduced coordinates) there (from the section's ``lift``).
    field_at_z : ndarray, shape (2n,)
        The vector field at ``z``.
    plane_index : int
        The state component the plane fixes.
    index : ndarray of int, shape (d,)
        The components that are the reduced coordinates.

    Returns
    -------
    G : ndarray, shape (r, d)
        Orthonormal neutral directions in reduced coordinates: each generator, moved along the
        flow back onto the plane (it keeps the energy, so it stays on the shell); generators
        along the flow are left out.
    C : ndarray, shape (m, d)
        Gradients of the conserved quantities in reduced coordinates.
    """
    g = sym.generators(z[None, :])[0]                       # (m, 2n)
    f = field_at_z
    moved = g - np.outer(g[:, plane_index] / f[plane_index], f)
    red = moved[:, index]
    size = np.linalg.norm(g, axis=1)
    keep = np.linalg.norm(red, axis=1) > PARALLEL_TOL * np.maximum(size, 1e-300)
    G = np.zeros((0, len(index)))
    if keep.any():
        red = red[keep] / np.linalg.norm(red[keep], axis=1)[:, None]
        u, s, vt = np.linalg.svd(red, full_matrices=False)
        G = vt[s > PARALLEL_TOL * s[0]]
    C = sym.gradients(z[None, :])[0] @ dz
    return G, C


def newton_steps(A, F, G=None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Newton steps ``A x = -F`` for a batch, orthogonal to neutral directions if any.

    Parameters
    ----------
    A : ndarray, shape (N, D, D)
        Jacobians of the shooting equations.
    F : ndarray, shape (N, D)
        Residuals.
    G : list of ndarray, shape (r_i, D), optional
        Neutral directions (phase conditions) per orbit, orthonormal rows. Without them the
        step is the ordinary solution of the square system.

    Returns
    -------
    steps : ndarray, shape (N, D)
        Minimum-norm least-squares solutions on the complement of the neutral directions.
    singular : ndarray of bool, shape (N,)
        Where ``A`` is singular (condition number above 1e14) on that complement: a family or
        a parabolic orbit beyond the symmetries. Their steps are zero.
    smallest : ndarray, shape (N,)
        The smallest singular value of ``A`` on the complement: how close the orbit is to
        having a multiplier at +1 besides the symmetries' (A = M - I for one leg; a strongly
        unstable orbit has large singular values but its smallest stays near 1).
    """
    N, D, _ = A.shape
    steps = np.zeros((N, D))
    smallest = np.full(N, np.nan)
    if G is None:
        with np.errstate(all="ignore"):
            s = np.linalg.svd(A, compute_uv=False)
            cond = s[:, 0] / s[:, -1]
        singular = ~np.isfinite(cond) | (cond > 1e14)
        smallest = s[:, -1]
        if (~singular).any():
            steps[~singular] = np.linalg.solve(A[~singular], -F[~singular][..., None])[..., 0]
        return steps, singular, smallest
    singular = np.zeros(N, dtype=bool)
    for i in range(N):
        Gi = np.asarray(G[i]).reshape(-1, D)
        if len(Gi):
            _, _, vt = np.linalg.svd(Gi, full_matrices=True)
            Q = vt[len(Gi):].T                               # (D, D - r): the complement
        else:
            Q = np.eye(D)
        AQ = A[i] @ Q
        with np.errstate(all="ignore"):
            s = np.linalg.svd(AQ, compute_uv=False)
        if not (np.all(np.isfinite(s)) and s[-1] > 1e-14 * s[0]):
            singular[i] = True
            continue
        smallest[i] = s[-1]
        steps[i] = Q @ np.linalg.lstsq(AQ, -F[i], rcond=None)[0]
    return steps, singular, smallest


def reduced_monodromy(M, G, C) -> np.ndarray | None:
    """The monodromy on the quotient of the level set of the conserved quantities by the
    symmetry directions: ``Q^T M Q`` with ``Q`` an orthonormal basis of the vectors orthogonal
    to both ``G`` and ``C``.

    M maps the tangent space W of the level set (vectors with ``C w = 0``) into itself and
    fixes each neutral direction at the orbit, so on W = span(Q) + span(G) (orthogonal when the
    generators are tangent to the level set) the map induced on W / span(G) is Q^T M Q. Its
    eigenvalues are the multipliers without the 2 r trivial ones at +1.

    Returns None when the construction does not apply (generators not tangent to the level
    set, or the dimensions do not add up), and the full M should be used.
    """
    G = np.asarray(G).reshape(-1, M.shape[0])
    C = np.asarray(C).reshape(-1, M.shape[0])
    if not len(G):
        return None
    if not len(C):
        return None
    _, sc, vc = np.linalg.svd(C, full_matrices=False)
    Cn = vc[sc > 1e-8 * sc[0]]              # independent conserved gradients (C may hold products)
    if len(Cn) != len(G) or np.max(np.abs(Cn @ G.T)) > 1e-6:
        return None
    stack = np.vstack([G, Cn])
    _, s, vt = np.linalg.svd(stack, full_matrices=True)
    rank = int(np.sum(s > 1e-8 * s[0]))
    if rank != 2 * len(G):
        return None
    Q = vt[rank:].T
    return Q.T @ M @ Q


class SectionSymmetry:
    """The point symmetries of an autonomous flow as seen on one plane section.

    Parameters
    ----------
    ret : PlaneReturn
        The section's return map.
    z_ref : ndarray, shape (2n,)
        A state near the orbits sought (where the symmetries are sampled).
    """

    def __init__(self, ret, z_ref):
        self.ret = ret
        self.sym = point_symmetries(lambda Z: ret.loops.evaluate("vector_field", Z, ret.prm), z_ref)

    @property
    def count(self) -> int:
        return self.sym.count

    def directions(self, u) -> list:
        """``(G, C)`` of :func:`section_directions` at each reduced point ``u`` (N, d); an
        empty pair where the point has no state on the section."""
        z, dz, valid = self.ret.lift(u)
        d = self.ret.dim
        out = []
        f = np.full(z.shape, np.nan)
        if valid.any():
            f[valid] = self.ret.loops.evaluate("vector_field", z[valid], self.ret.prm)
        for i in range(len(z)):
            if not valid[i] or self.count == 0:
                out.append((np.zeros((0, d)), np.zeros((0, d))))
                continue
            out.append(section_directions(self.sym, z[i], dz[i], f[i], self.ret.plane_index, self.ret.index))
        return out


def phase_conditions(symmetry: SectionSymmetry, u0, k: int) -> list:
    """Phase conditions of multiple shooting with ``k`` legs: the neutral directions at each
    orbit's first point ``u0`` (N, d), as rows over all k d unknowns (zero on the other legs;
    the other legs follow the first one along the family)."""
    out = []
    for G, _ in symmetry.directions(u0):
        rows = np.zeros((len(G), k * G.shape[1]))
        rows[:, :G.shape[1]] = G
        out.append(rows)
    return out
