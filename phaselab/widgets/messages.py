"""The words of the explorer's status line: orbits computed, why orbits stopped, settings.

Plain functions of numbers and records (no widgets), so the wording is in one place and
tested without a display.
"""

from __future__ import annotations

import math

import numpy as np

#: Said when a page without phaselab's JupyterLab plugin builds its view of an explorer already
#: shown (a reload, another tab): updates of the saved picture cannot reach that page's copy
#: of it (see widgets/page.py).
PAGE_REBUILT = ("A page opened this explorer again (a reload or another tab) without phaselab's JupyterLab "
                "plugin: in that page's notebook, the picture saved for readers without a kernel stays as it "
                "was until this cell runs again (the plugin comes with phaselab installed where JupyterLab "
                "runs; `jupyter labextension list` names it phaselab-notebook).")


def number(v, span=1.0) -> str:
    """A coordinate for the status line: 4 significant digits, rounding noise far below the
    window's size (``span``) shown as 0."""
    v = float(v)
    if not math.isfinite(v):
        return str(v)
    if abs(v) < 1e-9 * max(abs(span), 1e-300):
        return "0"
    return f"{v:.4g}"


def point(xy, ranges) -> str:
    """``(x, y)`` with :func:`number` on each axis of the window ``ranges``."""
    (x0, x1), (y0, y1) = ranges
    return f"({number(xy[0], x1 - x0)}, {number(xy[1], y1 - y0)})"


def setting(energy, params, uses_energy=True) -> str:
    parts = [f"E = {energy:.4g}"] if energy is not None and uses_energy else []
    parts += [f"{k} = {v:.4g}" for k, v in params.items()]
    return ", ".join(parts) or "these settings"


def stopped(records) -> str:
    """Which orbits stopped early and why (empty when none)."""
    if not records:
        return ""
    parts = [f"orbit {r.id} after {len(r.points)}: {r.note}" for r in records[:4]]
    more = f" and {len(records) - 4} more" if len(records) > 4 else ""
    return " Stopped early (crosses on the plot): " + "; ".join(parts) + more + "."


def orbits(records, seconds, noun, ranges, scale=None) -> str:
    """What a click, a drag or a recomputation brought."""
    if len(records) == 1:
        rec = records[0]
        extra = ""
        if rec.note:
            where = f" at {point(rec.stop, ranges)}" if rec.stop else ""
            extra = f"; stopped{where} after {len(rec.points)}: {rec.note} (marked with a cross)"
        value = ""
        if scale is not None and np.isfinite(rec.scalar):
            value = f", {scale.label.split(' (')[0]} {rec.scalar:.4g}"
        return (f"Orbit {rec.id}: {len(rec.points)} {noun} from {point(rec.seed, ranges)} in "
                f"{seconds * 1000:.0f} ms{value}{extra}.")
    n = int(sum(len(r.points) for r in records))
    return f"{len(records)} orbits, {n} {noun}." + stopped([r for r in records if r.note])


def periodic(found, kind, ranges) -> str:
    """A periodic orbit found: period, stability, residue and where it is."""
    po = found.orbit
    k = po.crossings
    residue = "" if po.residue is None else f", residue {po.residue:.4g}"
    T = "" if kind == "map" else f", period T = {po.period:.5g}"
    where = ", ".join(point(p, ranges) for p in found.points[:4])
    more = " ..." if len(found.points) > 4 else ""
    note = f" Manifolds: {found.manifold_note}." if found.manifold_note else ""
    return f"Periodic orbit of period {k}{T}: {po.stability}{residue}; at {where}{more}.{note}"
