"""Static figures of four-dimensional sections (matplotlib, no pyplot state).

A :class:`~phaselab.orbits.slices.SectionSlice` is drawn as

* a scatter in two shown coordinates, or on 3-D axes for three; points coloured by orbit
  (:data:`phaselab.export.figures.ORBIT_COLORS`), or, for a projection coloured by a hidden
  coordinate, by its value on the sequential scale with a colour bar;
* for a grid, a lower-triangular matrix of pairwise projections: panel (row i, column j)
  shows coordinate j across and coordinate i up; the diagonal names the coordinate.

The slab of a slice and the model-results reminder are printed under the plot.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from phaselab.base.atomic import atomic_path
from phaselab.engine.provenance import MODEL_NOTE
from phaselab.export import footers
from phaselab.export.describe import mathtext_label, unit_of
from phaselab.model.units import with_unit
from phaselab.engine.provenance import cf_dataset
from phaselab.errors import ParameterError
from phaselab.export.figures import (FIGURE_SUFFIXES, ORBIT_COLORS, REPORT_RC, check_size, check_texts, orbit_key,
                                     scalar_colormap)

#: marker area (points^2) below which rasterising the points pays off
RASTER_ABOVE = 20_000


def slice_figure(result, size=None, dpi=150, point_size=1.6, title=None, note=MODEL_NOTE,
                 elevation=22.0, azimuth=-58.0, *, footer=True):
    """The figure of a projection, slice or grid.

    Parameters
    ----------
    result : phaselab.orbits.slices.SectionSlice
    size : (float, float), optional
        Width and height in inches; default (6, 4.8), or 1.6 inches a panel for a grid.
    dpi : float
    point_size : float
        Marker diameter in points.
    title, note : str, optional
        A title; a line under the plot (default: the model-results reminder).
    elevation, azimuth : float
        Viewing angles in degrees of 3-D axes (the "rotation" of Froeschle's method, fixed
        for print).
    footer : bool
        The footer under the plot (system, parameters, method, version); the figure keeps
        its size and its axes make room for it.

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib

    k = len(result.axes)
    if size is None:
        size = (max(4.0, 1.6 * k), max(3.6, 1.6 * k + 0.4)) if result.kind == "grid" else (6.0, 4.8)
    width, height = check_size(size, dpi)
    if not (np.isfinite(point_size) and point_size > 0):
        raise ParameterError(f"point_size must be a positive number of points, got {point_size!r}")
    check_texts(title=title, note=note)
    with matplotlib.rc_context(REPORT_RC):
        from matplotlib.figure import Figure

        fig = Figure(figsize=(width, height), dpi=dpi, facecolor="white")
        if result.kind == "grid":
            _grid(fig, result, point_size)
        else:
            _scatter(fig, result, point_size, elevation, azimuth)
        lines = [_slab_text(result)] if result.slab else []
        for i, line in enumerate(reversed(lines)):
            fig.text(0.1 / width, (0.08 + 0.15 * i) / height, line, ha="left", va="bottom", fontsize=6.5,
                     color="#6a6a6a", style="italic", parse_math=False)
        if title:
            fig.text(0.5, 1 - 0.1 / height, str(title), ha="center", va="top", fontsize=11)
        footers.add_footer(fig, result, note=note, footer=footer)
    return fig


def _label(result, name) -> str:
    """A section coordinate typeset as on a section figure, with its unit."""
    return with_unit(mathtext_label(name), unit_of(getattr(result, "system", None), name))


def _n_orbits(result) -> int:
    """How many orbits the colours tell apart (orbit indices run from 0)."""
    orbit = np.asarray(result.orbit)
    return int(orbit.max()) + 1 if orbit.size else 0


def _colors(result):
    import matplotlib

    palette = np.array([matplotlib.colors.to_rgba(c) for c in ORBIT_COLORS])
    return palette[result.orbit % len(palette)]


def _scatter(fig, result, point_size, elevation, azimuth):
    three = len(result.axes) == 3
    rect = (0.12, 0.2, 0.68 if result.color else 0.8, 0.72)
    ax = fig.add_axes(rect, projection="3d") if three else fig.add_axes(rect)
    cols = [result.points[:, j] for j in range(len(result.axes))]
    style = dict(s=float(point_size) ** 2, linewidths=0, rasterized=result.n_points > RASTER_ABOVE)
    if result.color:
        values = result.color_values
        art = ax.scatter(*cols, c=values, cmap=scalar_colormap(), **style)
        cax = fig.add_axes((0.86, 0.2, 0.025, 0.72))
        bar = fig.colorbar(art, cax=cax)
        bar.set_label(_label(result, result.color), fontsize=9)
        bar.ax.tick_params(labelsize=7.5)
    else:
        ax.scatter(*cols, c=_colors(result), **style)
        orbit_key(ax, _n_orbits(result), style["s"])
    ax.set_xlabel(_label(result, result.axes[0]))
    ax.set_ylabel(_label(result, result.axes[1]))
    if three:
        ax.set_zlabel(_label(result, result.axes[2]))
        ax.view_init(elev=float(elevation), azim=float(azimuth))
    else:
        for spine in ("top", "right"):
            ax.spines[spine].set_visible(False)
    ax.tick_params(labelsize=7.5)


def _grid(fig, result, point_size):
    k = len(result.axes)
    colors = _colors(result)
    # the panels are small: markers at 0.6 of the size a single plot uses
    style = dict(s=(0.6 * float(point_size)) ** 2, linewidths=0, rasterized=result.n_points > RASTER_ABOVE)
    left, bottom, span_w, span_h = 0.1, 0.14, 0.86, 0.8
    w, h = span_w / k, span_h / k
    for i in range(k):
        for j in range(i + 1):
            ax = fig.add_axes((left + j * w, bottom + (k - 1 - i) * h, w * 0.92, h * 0.92))
            ax.tick_params(labelsize=6, length=2)
            if i == j:
                ax.text(0.5, 0.5, _label(result, result.axes[i]), ha="center", va="center", fontsize=10,
                        transform=ax.transAxes)
                ax.set_xticks([])
                ax.set_yticks([])
                continue
            ax.scatter(result.points[:, j], result.points[:, i], c=colors, **style)
            if i < k - 1:
                ax.set_xticklabels([])
            else:
                ax.set_xlabel(_label(result, result.axes[j]), fontsize=8)
            if j > 0:
                ax.set_yticklabels([])
            else:
                ax.set_ylabel(_label(result, result.axes[i]), fontsize=8)
    orbit_key(fig, _n_orbits(result), style["s"])     # in the empty upper right of the matrix


def _slab_text(result) -> str:
    s = result.slab
    name = mathtext_label(s["name"])  # as the axes write it
    return f"slice: |{name} - {s['center']:.6g}| < {s['half_width']:.3g} ({result.n_points} points)"


def save_slice(result, path, **kwargs) -> Path:
    """Write ``result`` to ``path``: ``.nc`` (labelled data with provenance) or a figure
    (``.svg``, ``.pdf``, ``.png``; ``kwargs`` go to :func:`slice_figure`). Written to a
    temporary file in the same folder and renamed into place when complete."""
    import matplotlib

    path = Path(path)
    suffix = path.suffix.lower()
    if suffix == ".nc":
        if kwargs:
            raise ParameterError(f".nc data files take no options, got {', '.join(sorted(kwargs))}")
        ds = cf_dataset(result.to_xarray())
        with atomic_path(path) as tmp:
            ds.to_netcdf(tmp)
        return path
    fmt = FIGURE_SUFFIXES.get(suffix)
    if fmt is None:
        raise ParameterError(f"cannot save a section slice as {suffix or 'a file without suffix'!r}; "
                             "use .nc, .svg, .pdf or .png")
    fig = slice_figure(result, **kwargs)
    with matplotlib.rc_context(REPORT_RC), atomic_path(path) as tmp:
        fig.savefig(tmp, format=fmt, dpi=fig.dpi, facecolor="white")
    return path
