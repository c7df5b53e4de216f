"""The stability diagram of a family of periodic orbits (matplotlib, no pyplot state).

The parameter runs along the horizontal axis, the residue (or the period) up the vertical.
Stable members (residue between 0 and 1) are joined by a solid line with filled circles,
unstable ones by a dashed line with crosses, so the two read apart in grey print too; the
band 0 < R < 1 is shaded lightly and bifurcations are marked and labelled.
"""

from __future__ import annotations

import numpy as np

from phaselab.errors import PhaselabError
from phaselab.engine.provenance import MODEL_NOTE
from phaselab.export.marks import MARKERS


def family_figure(family, y="residue", size=(6.0, 4.2), dpi=150, title=None, note=MODEL_NOTE):
    """Parameter against residue (``y="residue"``) or period (``y="period"``).

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib

    from phaselab.export.figures import REPORT_RC, check_size

    if y not in ("residue", "period"):
        raise PhaselabError(f"y must be 'residue' or 'period', got {y!r}")
    width, height = check_size(size, dpi)
    x = np.asarray(family.values, dtype=float)
    v = np.asarray(getattr(family, y), dtype=float)
    with matplotlib.rc_context(REPORT_RC):
        from matplotlib.figure import Figure

        fig = Figure(figsize=(width, height), dpi=dpi, facecolor="white")
        bottom = 0.55 + (0.2 if note else 0.0)
        top = 0.42 if title else 0.18
        ax = fig.add_axes((0.8 / width, bottom / height, (width - 1.0) / width, (height - bottom - top) / height))
        if y == "residue":
            ax.axhspan(0.0, 1.0, color="#e9f0f4", zorder=0, linewidth=0)
            ax.axhline(0.0, color="#8a8a8a", linewidth=0.6, zorder=1)
            ax.axhline(1.0, color="#8a8a8a", linewidth=0.6, zorder=1)
        words = np.array(family.stability)
        for word in ("stable", "unstable", "inverse-unstable", "parabolic"):
            mask = words == word
            if not mask.any():
                continue
            marker, colour = MARKERS[word]
            line = np.where(mask, v, np.nan)
            ax.plot(x, line, color=colour, linestyle="-" if word == "stable" else "--", linewidth=1.0, zorder=2)
            ax.scatter(x[mask], v[mask], s=14, marker=marker, c=colour, linewidths=0.4, edgecolors="white",
                       zorder=3, label=word)
        for b in family.bifurcations:
            ax.axvline(b["parameter"], color="#444444", linewidth=0.6, linestyle=":", zorder=1)
            ax.annotate(b["kind"].split(" (")[0], (b["parameter"], 1.0), xycoords=("data", "axes fraction"),
                        rotation=90, fontsize=6.5, color="#444444", ha="right", va="top")
        ax.set_xlabel(family.parameter, fontsize=10)
        ax.set_ylabel("residue R = (2 - tr M)/4" if y == "residue" else "period", fontsize=10)
        for spine in ("top", "right"):
            ax.spines[spine].set_visible(False)
        ax.legend(loc="best", fontsize=7.5, frameon=False)
        if title:
            fig.text(0.8 / width, 1 - 0.12 / height, str(title), ha="left", va="top", fontsize=11)
        if note:
            fig.text(0.1 / width, 0.1 / height, note, ha="left", va="bottom", fontsize=6.5, color="#6a6a6a",
                     style="italic")
    return fig
