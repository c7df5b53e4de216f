"""The stability diagram of a family of periodic orbits (matplotlib, no pyplot state).

The parameter runs along the horizontal axis, the residue (or the period, or the stability
index of each multiplier pair) up the vertical. Stable members (residue between 0 and 1) are
joined by a solid line with filled circles, unstable ones by a dashed line with crosses, so
the two read apart in grey print too; the band 0 < R < 1 (or -2 < b < 2) is shaded lightly
and bifurcations are marked and labelled. Indices are drawn on a scale that is linear within
|b| < 2 and logarithmic beyond, one line per pair.
"""

from __future__ import annotations

import numpy as np

from phaselab.errors import ParameterError
from phaselab.engine.provenance import MODEL_NOTE
from phaselab.export import footers
from phaselab.export.marks import MARKERS
from phaselab.export.describe import unit_of
from phaselab.model.units import with_unit


def family_figure(family, y=None, size=(6.0, 4.2), dpi=150, title=None, note=MODEL_NOTE, *, footer=True):
    """Parameter against residue (``y="residue"``), period (``y="period"``) or the
    stability index of each multiplier pair (``y="index"``, the real part; a complex index
    is drawn hollow). By default the residue for a 2-D section map, the indices otherwise.

    ``footer=False`` leaves out the footer (system, parameters, method, version).

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib

    from phaselab.export.figures import REPORT_RC, check_size

    if y is None:
        y = "residue" if np.isfinite(np.asarray(family.residue, dtype=float)).any() else "index"
    if y not in ("residue", "period", "index"):
        raise ParameterError(f"y must be 'residue', 'period' or 'index', got {y!r}")
    width, height = check_size(size, dpi)
    x = np.asarray(family.values, dtype=float)
    with matplotlib.rc_context(REPORT_RC):
        from matplotlib.figure import Figure

        fig = Figure(figsize=(width, height), dpi=dpi, facecolor="white")
        lines = footers.footer_lines(footers.footer_text(family), width) if footer else []
        bottom = 0.55 + footers.margin(lines, note, width)
        top = 0.42 if title else 0.18
        ax = fig.add_axes((0.8 / width, bottom / height, (width - 1.0) / width, (height - bottom - top) / height))
        if y == "index":
            _indices(ax, x, np.asarray(family.stability_indices, dtype=complex).reshape(len(x), -1))
        else:
            _words(ax, x, np.asarray(getattr(family, y), dtype=float), np.array(family.stability), y)
        for b in family.bifurcations:
            ax.axvline(b["parameter"], color="#444444", linewidth=0.6, linestyle=":", zorder=1)
            ax.annotate(b["kind"].split(" (")[0], (b["parameter"], 1.0), xycoords=("data", "axes fraction"),
                        rotation=90, fontsize=6.5, color="#444444", ha="right", va="top")
        ax.set_xlabel(with_unit(family.parameter, unit_of(family.system, family.parameter)), fontsize=10)
        ax.set_ylabel({"residue": "residue R = (2 - tr M)/4", "period": "period",
                       "index": "stability index b = lambda + 1/lambda"}[y], fontsize=10)
        for spine in ("top", "right"):
            ax.spines[spine].set_visible(False)
        ax.legend(loc="best", fontsize=7.5, frameon=False)
        if title:
            fig.text(0.8 / width, 1 - 0.12 / height, str(title), ha="left", va="top", fontsize=11)
        footers.draw(fig, lines, note)
    return fig


def _words(ax, x, v, words, y):
    """Residue or period, one line style and marker per stability word."""
    if y == "residue":
        ax.axhspan(0.0, 1.0, color="#e9f0f4", zorder=0, linewidth=0)
        ax.axhline(0.0, color="#8a8a8a", linewidth=0.6, zorder=1)
        ax.axhline(1.0, color="#8a8a8a", linewidth=0.6, zorder=1)
    for word in ("stable", "unstable", "inverse-unstable", "parabolic"):
        mask = words == word
        if not mask.any():
            continue
        marker, colour = MARKERS[word]
        line = np.where(mask, v, np.nan)
        ax.plot(x, line, color=colour, linestyle="-" if word == "stable" else "--", linewidth=1.0, zorder=2)
        ax.scatter(x[mask], v[mask], s=14, marker=marker, c=colour, linewidths=0.4, edgecolors="white",
                   zorder=3, label=word)


def _indices(ax, x, B):
    """The real part of each pair's index, a line per pair, markers by where the pair lies:
    on the unit circle (|b| < 2), on the real axis (|b| > 2), or in a quartet (hollow)."""
    ax.axhspan(-2.0, 2.0, color="#e9f0f4", zorder=0, linewidth=0)
    for level in (-2.0, 2.0):
        ax.axhline(level, color="#8a8a8a", linewidth=0.6, zorder=1)
    from matplotlib.ticker import FuncFormatter

    ax.set_yscale("symlog", linthresh=2.0, linscale=2.0)
    ax.yaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:g}"))
    greys = ("#222222", "#6a6a6a", "#9a9a9a")
    labelled = set()
    for k in range(B.shape[1]):
        b = B[:, k]
        real = np.abs(b.imag) <= 1e-9 * (1.0 + np.abs(b))
        ax.plot(x, b.real, color=greys[k % len(greys)], linewidth=0.8, zorder=2,
                linestyle=("-", "--", ":")[k % 3], label=f"pair {k}")
        for word, mask in (("stable", real & (np.abs(b.real) < 2.0)), ("unstable", real & (np.abs(b.real) >= 2.0))):
            if mask.any():
                marker, colour = MARKERS[word]
                ax.scatter(x[mask], b.real[mask], s=14, marker=marker, c=colour, linewidths=0.4, edgecolors="white",
                           zorder=3, label=None if word in labelled else word)
                labelled.add(word)
        if (~real).any():
            ax.scatter(x[~real], b.real[~real], s=16, marker="o", facecolors="none", edgecolors="#7a5c9e",
                       linewidths=0.8, zorder=3, label=None if "quartet" in labelled else "complex quartet")
            labelled.add("quartet")
