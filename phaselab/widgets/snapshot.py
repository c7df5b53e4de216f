"""A static picture of exactly what the explorer shows: the zoomed window, the shading and
boundary, every orbit in its colour (or on the colour scale), seeds, stop marks, periodic
orbits, manifolds, the title and a footer. Used by Export (PNG, SVG, PDF) and for the
picture a saved notebook shows without a kernel.

:class:`Snapshot` holds plain numbers copied from the explorer on its thread; drawing
happens in the worker (matplotlib, no display).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from phaselab.base.atomic import atomic_path
from phaselab.widgets import theme
from phaselab.widgets.shading import polygon_path


@dataclass
class Snapshot:
    title: str
    subtitle: str
    labels: tuple
    ranges: tuple
    lines: list = field(default_factory=list)
    accents: list = field(default_factory=list)
    forbidden: list | None = None           # polygons, each [outer ring, holes...] of (m, 2)
    orbits: list = field(default_factory=list)   # (points (m, 2), colour, value)
    seeds: list = field(default_factory=list)    # (x, y, colour)
    stops: list = field(default_factory=list)    # (x, y)
    periodic: list = field(default_factory=list)  # (x, y, stability)
    manifolds: dict = field(default_factory=dict)  # branch -> list of (m, 2)
    scale: object = None
    footer: str = ""
    equal_aspect: bool = False


def view_figure(snap: Snapshot, size=(7.2, 5.4), dpi=150):
    """A matplotlib Figure of ``snap`` (not registered with pyplot)."""
    import matplotlib
    from matplotlib.colors import LinearSegmentedColormap
    from matplotlib.figure import Figure

    from phaselab.export.figures import REPORT_RC
    from phaselab.export.marks import BRANCH_STYLE, BRANCH_WORDS, KEY_WORDS, MARKERS

    width, height = size
    with matplotlib.rc_context(REPORT_RC):
        fig = Figure(figsize=(width, height), dpi=dpi, facecolor="white")
        right = 1.15 if snap.scale is not None else 0.25
        left, bottom, top = 0.8, 0.75 if snap.footer else 0.55, 0.78 if snap.subtitle else 0.42
        ax = fig.add_axes((left / width, bottom / height, (width - left - right) / width,
                           (height - bottom - top) / height))
        ax.set_facecolor(theme.GROUND)
        (x0, x1), (y0, y1) = snap.ranges
        path = polygon_path(snap.forbidden) if snap.forbidden else None
        if path is not None:
            from matplotlib.patches import PathPatch

            ax.add_patch(PathPatch(path, facecolor=theme.FORBIDDEN, edgecolor="none", zorder=0))
        for c in snap.lines:
            ax.plot(c[:, 0], c[:, 1], color=theme.MUTED, linewidth=0.6, alpha=0.55, zorder=1)
        for c in snap.accents:
            ax.plot(c[:, 0], c[:, 1], color=theme.BOUNDARY, linewidth=1.0, zorder=1.5)
        art = None
        if snap.scale is not None:
            cmap = LinearSegmentedColormap.from_list("explorer", snap.scale.palette(), N=256).with_extremes(
                bad=theme.MISSING_COLOR)
        for pts, colour, value in snap.orbits:
            if not len(pts):
                continue
            if snap.scale is None:
                ax.scatter(pts[:, 0], pts[:, 1], s=2.2, c=colour, linewidths=0, zorder=2)
            else:
                art = ax.scatter(pts[:, 0], pts[:, 1], s=2.2, c=np.full(len(pts), value), cmap=cmap,
                                 vmin=snap.scale.low, vmax=snap.scale.high, linewidths=0, zorder=2,
                                 plotnonfinite=True)
        branches, keyed = set(), set()
        for branch, lines in snap.manifolds.items():
            colour, style = BRANCH_STYLE.get(branch, ("#333333", "-"))
            for c in lines:
                label = BRANCH_WORDS.get(branch, branch) if branch not in branches else None
                branches.add(branch)
                ax.plot(c[:, 0], c[:, 1], color=colour, linestyle=style, linewidth=0.9, zorder=3, label=label)
        if snap.stops:
            s = np.array(snap.stops)
            ax.scatter(s[:, 0], s[:, 1], marker="x", s=40, c=theme.REFUSED, linewidths=1.6, zorder=4)
        for x, y, colour in snap.seeds:
            ax.scatter([x], [y], s=36, facecolors="white", edgecolors=colour, linewidths=1.6, zorder=5)
        for x, y, stability in snap.periodic:  # above the seed rings
            marker, colour = MARKERS.get(stability, ("D", "#333333"))
            label = KEY_WORDS.get(stability, stability) if stability not in keyed else None
            keyed.add(stability)
            ax.scatter([x], [y], marker=marker, s=60, c=colour, edgecolors="white", linewidths=0.6, zorder=6,
                       label=label)
        if keyed or branches:
            ax.legend(loc="upper right", fontsize=7.5, frameon=True, framealpha=0.85, handletextpad=0.3,
                      borderaxespad=0.3)
        ax.set_xlim(x0, x1)
        ax.set_ylim(y0, y1)
        if snap.equal_aspect:
            ax.set_aspect("equal", adjustable="box")
        ax.set_xlabel(snap.labels[0], fontsize=11)
        ax.set_ylabel(snap.labels[1], fontsize=11)
        for spine in ("top", "right"):
            ax.spines[spine].set_visible(False)
        if snap.scale is not None:
            import matplotlib.cm as cm
            from matplotlib.colors import Normalize

            mappable = art or cm.ScalarMappable(norm=Normalize(snap.scale.low, snap.scale.high), cmap=cmap)
            cax = fig.add_axes(((width - right + 0.25) / width, bottom / height, 0.14 / width,
                                (height - bottom - top) / height))
            bar = fig.colorbar(mappable, cax=cax)
            bar.set_label(snap.scale.title, fontsize=8.5)
            bar.ax.tick_params(labelsize=7.5)
            if snap.scale.anchor is not None:
                bar.ax.axhline(snap.scale.anchor, color="black", linewidth=0.8)
        fig.text(left / width, 1 - 0.12 / height, snap.title, ha="left", va="top", fontsize=12, color=theme.INK)
        if snap.subtitle:
            import textwrap

            # about 0.55 em per character of a sans-serif font (common practice for estimates)
            chars = max(30, int((width - left - 0.2) * 72 / (0.55 * 8.5)))
            lines = textwrap.wrap(snap.subtitle, chars)[:2]
            fig.text(left / width, 1 - 0.34 / height, "\n".join(lines), ha="left", va="top", fontsize=8.5,
                     color=theme.MUTED, linespacing=1.2)
        if snap.footer:
            fig.text(0.1 / width, 0.08 / height, snap.footer, ha="left", va="bottom", fontsize=6.5,
                     color="#555555")
    return fig


def write_figure(snap: Snapshot, path, dpi=150):
    """Write the picture of ``snap`` to ``path`` (.png, .svg or .pdf), atomically."""
    from pathlib import Path

    import matplotlib

    from phaselab.errors import ParameterError

    path = Path(path)
    fmt = path.suffix.lower().lstrip(".")
    if fmt not in ("png", "svg", "pdf"):
        raise ParameterError(f"a figure is written as .png, .svg or .pdf, not {path.suffix!r}")
    if not path.parent.exists():
        raise ParameterError(f"cannot save to {path}: folder {path.parent} does not exist")
    fig = view_figure(snap, dpi=dpi)
    with atomic_path(path) as tmp, matplotlib.rc_context({"svg.fonttype": "none", "pdf.fonttype": 42}):
        fig.savefig(tmp, format=fmt, dpi=dpi, facecolor="white")
    return path
