"""Multiplier pairs of a monodromy and Broucke's stability indices, in any dimension.

The monodromy M (d x d, d = 2m) of a periodic orbit of a Hamiltonian system, taken on its
section, is symplectic up to a change of coordinates, so its multipliers come in m pairs
(lambda, 1/lambda). Broucke gives each pair its stability index b = lambda + 1/lambda
(R. Broucke, "Stability of periodic orbits in the elliptic, restricted three-body problem",
AIAA J. 7, 1003 (1969); reference recalled from memory):

- b real, -2 < b < 2: the pair lies on the unit circle, exp(+-i theta) with b = 2 cos theta
  (elliptic in that pair);
- b real, b > 2 (b < -2): a real pair of positive (negative) multipliers off the circle
  (hyperbolic, inverse hyperbolic);
- b complex: two pairs make a quartet off the unit circle and off the real axis, with
  complex conjugate indices (complex instability).

Along a family a pair passes through +1 where its b crosses 2 (a fold, a pitchfork, or the
birth of a family out of the plane such as the vertical bifurcation of planar Lyapunov
orbits), through -1 where it crosses -2 (period doubling), through exp(+-2 pi i p/q) where
it crosses 2 cos(2 pi p / q), and two pairs collide and leave the unit circle (a Krein
collision) where their real indices meet inside (-2, 2) and turn into a complex conjugate
couple. The sum of the indices is tr M. For d = 2, b = tr M = 2 - 4 R with R Greene's
residue.
"""

from __future__ import annotations

from dataclasses import dataclass
from itertools import permutations

import numpy as np

REAL_TOL = 1e-9
"""An index whose imaginary part is below this times (1 + |b|) counts as real."""


@dataclass
class Pairs:
    """The multiplier pairs of one monodromy.

    Attributes
    ----------
    indices : ndarray of complex, shape (m,)
        Broucke's stability index b = lambda + 1/lambda of each pair (imaginary part set to 0
        where it is real to :data:`REAL_TOL`).
    multipliers : ndarray of complex, shape (m, 2)
        The two multipliers of each pair, the larger in size first.
    weights : ndarray, shape (m, d)
        How much of each pair's invariant plane lies in each reduced coordinate (rows sum
        to 1).
    """

    indices: np.ndarray
    multipliers: np.ndarray
    weights: np.ndarray

    def take(self, order) -> "Pairs":
        """The pairs in another order (``order`` an index array of shape (m,))."""
        order = np.asarray(order, dtype=np.int64)
        return Pairs(self.indices[order], self.multipliers[order], self.weights[order])


def multiplier_pairs(M) -> Pairs:
    """Group the multipliers of a monodromy into reciprocal pairs and index them.

    Parameters
    ----------
    M : array_like, shape (d, d), d even

    Returns
    -------
    Pairs
        Empty (m = 0) for d = 0; NaN indices where M is not finite or d is odd.

    Notes
    -----
    Pairs are formed greedily by the smallest |log lambda_i + log lambda_j| (imaginary
    part taken modulo 2 pi). For d = 2 the index is tr M itself; otherwise it is
    lambda + 1/lambda of the larger multiplier of the pair, which stays accurate when the
    smaller one is lost to rounding (strongly unstable orbits).
    """
    M = np.asarray(M, dtype=float)
    d = M.shape[0] if M.ndim == 2 else 0
    m = d // 2
    if d == 0:
        return Pairs(np.zeros(0, complex), np.zeros((0, 2), complex), np.zeros((0, 0)))
    nan = Pairs(np.full(m, np.nan + 0j), np.full((m, 2), np.nan + 0j), np.full((m, d), np.nan))
    if d % 2 or not np.all(np.isfinite(M)):
        return nan
    lam = np.linalg.eigvals(M)
    if np.any(lam == 0):
        return nan
    groups = _pair_up(lam)
    indices = np.zeros(m, complex)
    mult = np.zeros((m, 2), complex)
    weights = np.zeros((m, d))
    for k, (i, j) in enumerate(groups):
        if abs(lam[j]) > abs(lam[i]):
            i, j = j, i
        mult[k] = lam[i], lam[j]
        indices[k] = np.trace(M) if d == 2 else lam[i] + 1.0 / lam[i]
        weights[k] = _subspace_weights(M, np.delete(lam, [i, j]))
    real = np.abs(indices.imag) <= REAL_TOL * (1.0 + np.abs(indices))
    indices[real] = indices[real].real
    return Pairs(indices, mult, weights)


def _subspace_weights(M: np.ndarray, others: np.ndarray) -> np.ndarray:
    """Share of each coordinate in the invariant plane of one pair: the range of
    prod (M - mu I) over the other multipliers mu (the pair's generalised eigenspace, well
    defined also where the pair is nearly a Jordan block), from its two leading singular
    vectors."""
    d = M.shape[0]
    P = np.eye(d, dtype=complex)
    for mu in others:
        F = M - mu * np.eye(d)
        P = F @ P
        P /= max(np.linalg.norm(P), 1e-300)
    u = np.linalg.svd(P)[0][:, :2]
    w = np.sum(np.abs(u) ** 2, axis=1)
    return w / w.sum()


def _pair_up(lam: np.ndarray) -> list:
    """Index pairs (i, j) of multipliers with lambda_i lambda_j closest to 1."""
    logs = np.log(lam.astype(complex))
    s = logs[:, None] + logs[None, :]
    cost = np.abs(s.real) + np.abs((s.imag + np.pi) % (2 * np.pi) - np.pi)
    np.fill_diagonal(cost, np.inf)
    free = set(range(len(lam)))
    out = []
    for flat in np.argsort(cost, axis=None, kind="stable"):
        i, j = divmod(int(flat), len(lam))
        if i < j and i in free and j in free:
            out.append((i, j))
            free -= {i, j}
            if not free:
                break
    return out


def track(previous: np.ndarray, current: np.ndarray) -> np.ndarray:
    """The order of ``current``'s pairs that follows ``previous`` (indices of shape (m,)):
    the assignment with the least total distance between old and new indices (every
    permutation for m <= 6, nearest first beyond), so a pair keeps its column along a
    family."""
    m = len(previous)
    if m == 0:
        return np.zeros(0, dtype=np.int64)
    cost = np.abs(np.asarray(previous)[:, None] - np.asarray(current)[None, :])
    cost = np.where(np.isfinite(cost), cost, 1e300)
    if m <= 6:
        rows = np.arange(m)
        best = min(permutations(range(m)), key=lambda perm: cost[rows, list(perm)].sum())
        return np.array(best, dtype=np.int64)
    order = np.full(m, -1, dtype=np.int64)
    used = np.zeros(m, dtype=bool)
    for flat in np.argsort(cost, axis=None, kind="stable"):
        i, j = divmod(int(flat), m)
        if order[i] < 0 and not used[j]:
            order[i], used[j] = j, True
    return order


def is_real(b) -> np.ndarray:
    """True where a stability index is real (to :data:`REAL_TOL`)."""
    b = np.asarray(b, dtype=complex)
    return np.isfinite(b) & (np.abs(b.imag) <= REAL_TOL * (1.0 + np.abs(b)))


def resonance_levels(q_max: int) -> list:
    """``(p, q, 2 cos(2 pi p / q))`` for 3 <= q <= q_max and 0 < p < q/2 coprime to q: the
    index where a pair sits at exp(+-2 pi i p / q)."""
    out = []
    for q in range(3, int(q_max) + 1):
        for p in range(1, (q + 1) // 2):
            if np.gcd(p, q) == 1:
                out.append((p, q, 2.0 * np.cos(2.0 * np.pi * p / q)))
    return out


def crossings(values, indices, names, resonances: int = 0) -> list:
    """Where the tracked pairs of a family change: through +1, through -1, at a resonance
    exp(+-2 pi i p/q) (q <= ``resonances``), and where two pairs collide and leave (or
    return to) the unit circle or the real axis.

    Parameters
    ----------
    values : ndarray, shape (n,)
        The family's parameter at each member.
    indices : ndarray of complex, shape (n, m)
        Tracked stability indices (a pair keeps its column).
    names : sequence of tuple of str, length n
        Per member, the coordinates each pair mostly lies in (for the report), shape (m,).
    resonances : int
        Largest q of the resonances to flag (0: none).

    Returns
    -------
    list of dict
        ``{"kind", "parameter", "between": (i, i + 1), "pair": k, "index": (b_i, b_i+1),
        "coordinates": names}``; a collision names both pairs, ``"pairs": (k, l)``. The
        parameter is interpolated linearly (in b, or in the squared difference of the two
        indices for a collision).
    """
    values = np.asarray(values, dtype=float)
    B = np.asarray(indices, dtype=complex)
    n = len(values)
    m = B.shape[1] if B.ndim == 2 else 0
    levels = [(2.0, "tangent (multiplier +1)"), (-2.0, "period doubling (multiplier -1)")]
    levels += [(b, f"resonance {p}/{q} (multipliers exp(+-2 pi i {p}/{q}))")
               for p, q, b in resonance_levels(resonances)]
    out = []
    for i in range(n - 1):
        real_a, real_b = is_real(B[i]), is_real(B[i + 1])
        for k in range(m):
            if not (real_a[k] and real_b[k]):
                continue
            for level, kind in levels:
                a, b = B[i, k].real - level, B[i + 1, k].real - level
                if a * b < 0:
                    out.append(_record(kind, values, i, a / (a - b), k, B, names))
        out += _collisions(values, B, i, names)
    return out


def _record(kind, values, i, frac, k, B, names) -> dict:
    where = values[i] + (values[i + 1] - values[i]) * frac
    return {"kind": kind, "parameter": float(where), "between": (i, i + 1), "pair": int(k),
            "index": (plain_index(B[i, k]), plain_index(B[i + 1, k])), "coordinates": list(names[i + 1][k])}


def _collisions(values, B, i, names) -> list:
    """Pairs that turn complex (or real again) between members i and i + 1."""
    out = []
    before, after = is_real(B[i]), is_real(B[i + 1])
    for leaving, cols in ((True, np.flatnonzero(before & ~after)), (False, np.flatnonzero(~before & after))):
        if len(cols) < 2:
            continue
        cols = list(cols)
        while len(cols) >= 2:
            k = cols.pop(0)
            ref = B[i + 1, k] if leaving else B[i, k]
            other = min(cols, key=lambda c: abs((B[i + 1, c] if leaving else B[i, c]) - np.conj(ref)))
            cols.remove(other)
            # (b_k - b_l)^2 is positive for two real indices and negative for a conjugate couple
            da, db = (B[i, k] - B[i, other]) ** 2, (B[i + 1, k] - B[i + 1, other]) ** 2
            frac = da.real / (da.real - db.real) if da.real != db.real else 0.5
            meet = 0.5 * ((B[i, k] + B[i, other]) if leaving else (B[i + 1, k] + B[i + 1, other])).real
            on_circle = abs(meet) < 2.0
            if leaving:
                kind = ("Krein collision (two pairs leave the unit circle)" if on_circle
                        else "collision off the unit circle (two real pairs become a complex quartet)")
            else:
                kind = ("two pairs return to the unit circle" if on_circle
                        else "a complex quartet returns to the real axis")
            rec = _record(kind, values, i, frac, k, B, names)
            rec["pairs"] = (int(k), int(other))
            rec["coordinates"] = sorted(set(names[i + 1][k]) | set(names[i + 1][other]))
            out.append(rec)
    return out


def dominant(weights, names, share: float = 0.01) -> list:
    """Per pair, the coordinate names holding at least ``share`` of its eigenvectors,
    largest first; ``weights`` (m, d), ``names`` length d."""
    out = []
    for w in np.atleast_2d(weights):
        if not np.all(np.isfinite(w)):
            out.append(())
            continue
        order = np.argsort(-w, kind="stable")
        out.append(tuple(names[j] for j in order if w[j] >= share))
    return out


def plain_index(b) -> float | list | None:
    """A real index as a float, a complex one as [real, imaginary], None where not finite
    (for JSON and file attributes)."""
    b = complex(b)
    if not np.isfinite(b):
        return None
    return b.real if is_real(b) else [b.real, b.imag]
