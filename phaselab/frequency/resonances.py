"""Resonance lines of a frequency plane: every line ``m nu_1 + n nu_2 = p`` of bounded order
that crosses a view, as a segment (the geometry that frequency-map figures draw).

A resonance of order ``|m| + |n|`` is listed once, with ``(m, n, p)`` free of common factors
and the first non-zero of ``m, n`` positive (common practice in frequency-map analysis,
Laskar 1993).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from phaselab.errors import ParameterError


@dataclass(frozen=True)
class Resonance:
    """The line ``m nu_1 + n nu_2 = p * base`` inside a view, as a segment.

    Attributes
    ----------
    m, n, p : int
    order : int
        ``|m| + |n|``.
    start, end : (float, float)
        Where the line enters and leaves the view.
    """

    m: int
    n: int
    p: int
    order: int
    start: tuple
    end: tuple


def _clip(m, n, c, xlim, ylim):
    x0, x1 = xlim
    y0, y1 = ylim
    pts = []
    tol = 1e-12 * max(1.0, abs(x1 - x0), abs(y1 - y0))
    if n != 0:
        for x in (x0, x1):
            y = (c - m * x) / n
            if y0 - tol <= y <= y1 + tol:
                pts.append((x, min(max(y, y0), y1)))
    if m != 0:
        for y in (y0, y1):
            x = (c - n * y) / m
            if x0 - tol <= x <= x1 + tol:
                pts.append((min(max(x, x0), x1), y))
    unique = []
    for p in pts:
        if all(abs(p[0] - q[0]) > tol or abs(p[1] - q[1]) > tol for q in unique):
            unique.append(p)
    if len(unique) < 2:
        return None
    unique.sort()
    return unique[0], unique[-1]


def resonances(order, xlim, ylim, base=1.0) -> list[Resonance]:
    """Every resonance line ``m nu_1 + n nu_2 = p * base`` of order ``|m| + |n| <= order``
    that crosses the view ``xlim x ylim``.

    Lines are listed once: ``(m, n, p)`` with no common factor and the first non-zero of
    ``m, n`` positive. ``base=None`` (an autonomous flow sampled in time) keeps ``p = 0``.
    """
    if isinstance(order, bool) or not isinstance(order, (int, np.integer)) or not 1 <= order <= 30:
        raise ParameterError(f"order must be an integer from 1 to 30, got {order!r}")
    (x0, x1), (y0, y1) = (sorted(map(float, xlim)), sorted(map(float, ylim)))
    if not all(math.isfinite(v) for v in (x0, x1, y0, y1)) or x0 == x1 or y0 == y1:
        raise ParameterError(f"the view must be finite and not empty, got {xlim!r} x {ylim!r}")
    out = []
    for k in range(1, int(order) + 1):
        pairs = sorted({(m, n) for m in range(0, k + 1) for n in (k - m, m - k)
                        if m > 0 or n > 0})
        for m, n in pairs:
            corners = [m * x + n * y for x in (x0, x1) for y in (y0, y1)]
            if base is None:
                ps = [0] if min(corners) <= 0 <= max(corners) else []
            else:
                lo = math.ceil(min(corners) / base - 1e-12)
                hi = math.floor(max(corners) / base + 1e-12)
                ps = range(lo, hi + 1) if hi - lo < 10_000 else []
            for p in ps:
                if math.gcd(math.gcd(m, abs(n)), abs(p)) != 1:
                    continue
                seg = _clip(m, n, 0.0 if base is None else p * base, (x0, x1), (y0, y1))
                if seg is not None:
                    out.append(Resonance(m, n, int(p), k, seg[0], seg[1]))
    return out
