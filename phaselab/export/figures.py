"""Static figures of a surface of section for reports: SVG, PDF and PNG through matplotlib.

Figures are built on :class:`matplotlib.figure.Figure` directly and drawn by the
non-interactive Agg / SVG / PDF canvases: no display, no browser, and nothing is left in
pyplot's list of open figures. matplotlib is imported on first use.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from phaselab.errors import ParameterError
from phaselab.export.describe import angle_limits, axis_label, axis_symbols, check_section, text_problem
from phaselab.export import footers
from phaselab.base.atomic import atomic_path

#: Orbit colours, cycled by orbit index: muted, well separated hues that stay apart on
#: white paper and in greyscale print (dark and light entries alternate).
ORBIT_COLORS = (
    "#2b5d7d",  # harbour blue
    "#d2824b",  # terracotta
    "#5c8f4e",  # fern
    "#9e4a6e",  # mulberry
    "#e0b64a",  # mustard
    "#3f9a96",  # sea green
    "#7a5c9e",  # heather
    "#a5673f",  # walnut
    "#82a9c9",  # sky
    "#5b5b5b",  # graphite
)

#: Stops of the sequential map used when colouring by a per-orbit scalar: deep ink blue
#: through teal and sand to brick, light enough in the middle to keep points visible.
SCALAR_STOPS = ("#1d2f4a", "#2b5d7d", "#3f9a96", "#b8c98a", "#e0b64a", "#d2824b", "#8e3b2e")

#: The colour of points whose scalar is NaN (an indicator that could not be computed).
MISSING_COLOR = "#b9b9b9"

FIGURE_SUFFIXES = {".svg": "svg", ".pdf": "pdf", ".png": "png"}

# Text as text in vector files (searchable, selectable); TrueType in PDF so readers extract it.
REPORT_RC = {"svg.fonttype": "none", "pdf.fonttype": 42, "font.size": 9.0, "axes.linewidth": 0.7,
       "xtick.major.width": 0.6, "ytick.major.width": 0.6, "xtick.major.size": 3.0,
       "ytick.major.size": 3.0, "xtick.direction": "out", "ytick.direction": "out"}


def scalar_colormap():
    """The sequential colour map for per-orbit scalars (a matplotlib ``Colormap``)."""
    from matplotlib.colors import LinearSegmentedColormap

    cmap = LinearSegmentedColormap.from_list("phaselab_ink_to_brick", SCALAR_STOPS, N=256)
    return cmap.with_extremes(bad=MISSING_COLOR)


DPI_RANGE = (10, 2400)
"""Dots per inch a saved figure may have (the API's ``dpi=`` and a study file's ``dpi``)."""
MIN_FIGURE_SIZE = (2.0, 1.5)
"""Smallest (width, height) of a figure, in inches."""


def check_size(size, dpi):
    try:
        width, height = (float(v) for v in size)
    except (TypeError, ValueError):
        raise ParameterError(f"size must be (width, height) in inches, got {size!r}") from None
    if not (np.isfinite(width) and np.isfinite(height) and width >= MIN_FIGURE_SIZE[0]
            and height >= MIN_FIGURE_SIZE[1]):
        raise ParameterError(f"size must be at least {MIN_FIGURE_SIZE[0]:g} x {MIN_FIGURE_SIZE[1]:g} inches, "
                             f"got {size!r}")
    if not (np.isfinite(dpi) and DPI_RANGE[0] <= dpi <= DPI_RANGE[1]):
        raise ParameterError(f"dpi must be between {DPI_RANGE[0]} and {DPI_RANGE[1]}, got {dpi!r}")
    return width, height


def check_overlays(overlays):
    """Turn overlays into a list of (x, y) float arrays; None -> []."""
    if overlays is None:
        return []
    if isinstance(overlays, np.ndarray) and overlays.ndim == 2:
        overlays = [overlays]
    if isinstance(overlays, tuple) and len(overlays) == 2 and np.ndim(overlays[0]) == 1:
        overlays = [overlays]  # a single (x, y) pair
    out = []
    for k, curve in enumerate(overlays):
        arr = curve if not isinstance(curve, np.ndarray) else curve
        if isinstance(arr, np.ndarray) and arr.ndim == 2 and arr.shape[1] == 2:
            x, y = arr[:, 0], arr[:, 1]
        else:
            try:
                x, y = curve
            except (TypeError, ValueError):
                raise ParameterError(
                    f"overlay {k} must be an (x, y) pair of arrays or an (n, 2) array") from None
        x = np.asarray(x, dtype=float).ravel()
        y = np.asarray(y, dtype=float).ravel()
        if x.shape != y.shape:
            raise ParameterError(f"overlay {k}: x has {x.size} values but y has {y.size}")
        out.append((x, y))
    return out


def check_texts(**texts) -> None:
    """Refuse a title or note matplotlib could not draw (see
    :func:`phaselab.export.describe.text_problem`), naming the option."""
    for name, text in texts.items():
        if text is None:
            continue
        problem = text_problem(str(text))
        if problem:
            raise ParameterError(f"{name}: {problem}")


def per_orbit_scalar(color, n_orbits):
    values = np.asarray(color, dtype=float).ravel()
    if values.shape != (n_orbits,):
        raise ParameterError(
            f"color must hold one value per orbit ({n_orbits}), got {np.shape(color)}")
    return values


def section_figure(section, size=(6.0, 4.5), dpi=150, point_size=1.6, color=None,
                   color_label=None, title=None, overlays=None, footer=True, xlim=None,
                   ylim=None, rasterize=None, note=None):
    """A static matplotlib figure of a surface of section.

    Parameters
    ----------
    section : phaselab.orbits.section_result.Section
    size : (float, float)
        Figure width and height in inches.
    dpi : float
        Dots per inch for raster output (PNG is ``width*dpi`` by ``height*dpi`` pixels).
    point_size : float
        Marker diameter in points (1/72 inch).
    color : None or array_like, shape (n_orbits,)
        None colours orbits from :data:`ORBIT_COLORS` (cycled); an array colours each orbit
        by a scalar (e.g. a chaos indicator) with a colour bar. NaN values show grey.
    color_label : str, optional
        Label of the colour bar.
    title : str, optional
    overlays : list of (x, y) arrays, optional
        Curves drawn over the points (e.g. the boundary of the energetically allowed region).
    footer : bool
        Print the system name, energy, parameters and method under the plot.
    xlim, ylim : (float, float), optional
        Axis limits; default the data range with a small margin.
    rasterize : bool, optional
        Draw the points as an embedded image in SVG/PDF. Default: only above 20 000 points,
        so large sections stay small files while axes and text stay vector.
    note : str, optional
        An extra footer line (for instance that results are model results to be confirmed).

    Returns
    -------
    matplotlib.figure.Figure
        Not registered with pyplot; save it with ``fig.savefig`` or :func:`save_figure`.
    """
    import matplotlib

    check_section(section)
    width, height = check_size(size, dpi)
    if not (np.isfinite(point_size) and point_size > 0):
        raise ParameterError(f"point_size must be a positive number of points, got {point_size!r}")
    curves = check_overlays(overlays)
    check_texts(title=title, note=note, color_label=color_label)
    x, y = section.xy()
    orbit = section.orbit_index()
    scalar = None if color is None else per_orbit_scalar(color, section.n_orbits)
    footer_lines = footers.footer_lines(footers.footer_text(section), width) if footer else []
    if rasterize is None:
        rasterize = x.size > 20_000

    with matplotlib.rc_context(REPORT_RC):
        from matplotlib.figure import Figure

        fig = Figure(figsize=(width, height), dpi=dpi, facecolor="white")
        # Margins in inches, so every size gets the same breathing room around the axes.
        left, right = 0.72, (1.05 if scalar is not None else 0.22)
        bottom = 0.55 + footers.margin(footer_lines, note, width)
        top = 0.42 if title else 0.18
        ax_w, ax_h = width - left - right, height - bottom - top
        if ax_w < 0.8 or ax_h < 0.6:
            raise ParameterError(f"size {size!r} leaves no room for the plot; make it larger")
        ax = fig.add_axes((left / width, bottom / height, ax_w / width, ax_h / height))

        marker_area = float(point_size) ** 2
        if scalar is None:
            palette = np.array([matplotlib.colors.to_rgba(c) for c in ORBIT_COLORS])
            colors = palette[orbit % len(palette)]
            ax.scatter(x, y, s=marker_area, c=colors, linewidths=0, marker="o",
                       rasterized=rasterize, zorder=2)
        else:
            finite = scalar[np.isfinite(scalar)]
            vmin, vmax = (finite.min(), finite.max()) if finite.size else (0.0, 1.0)
            if vmin == vmax:
                vmin, vmax = vmin - 0.5, vmax + 0.5
            art = ax.scatter(x, y, s=marker_area, c=scalar[orbit], cmap=scalar_colormap(),
                             vmin=vmin, vmax=vmax, linewidths=0, marker="o",
                             plotnonfinite=True, rasterized=rasterize, zorder=2)
            cax = fig.add_axes(((left + ax_w + 0.18) / width, bottom / height,
                                0.14 / width, ax_h / height))
            bar = fig.colorbar(art, cax=cax)
            bar.outline.set_linewidth(0.6)
            bar.ax.tick_params(labelsize=7.5)
            bar.set_label(color_label or "value per orbit (as given)", fontsize=9)

        for k, (cx, cy) in enumerate(curves):
            ax.plot(cx, cy, color="#26313b", linewidth=0.9, alpha=0.85, zorder=3,
                    label="overlay curve" if k == 0 else None)
        orbit_key(ax, section.n_orbits if scalar is None else 0, marker_area, bool(curves))

        hsym, vsym = axis_symbols(section)
        system = getattr(section, "system", None)
        ax.set_xlabel(axis_label(system, hsym), fontsize=11, labelpad=3)
        ax.set_ylabel(axis_label(system, vsym), fontsize=11, labelpad=4)
        ax.tick_params(labelsize=8, color="#444444", labelcolor="#333333")
        for spine in ("top", "right"):
            ax.spines[spine].set_visible(False)
        for spine in ("left", "bottom"):
            ax.spines[spine].set_color("#444444")
        ax.margins(0.03)
        xlim = xlim if xlim is not None else angle_limits(system, hsym)   # an angle spans its interval
        ylim = ylim if ylim is not None else angle_limits(system, vsym)
        if xlim is not None:
            ax.set_xlim(*xlim)
        if ylim is not None:
            ax.set_ylim(*ylim)
        if title:
            fig.text(left / width, 1 - 0.12 / height, str(title), ha="left", va="top",
                     fontsize=11, color="#1e1e1e")
        footers.draw(fig, footer_lines, note)
    return fig


def orbit_key(ax, n_orbits, marker_area, curves=False):
    """A small key in the upper right of ``ax`` (an axes or a figure): the colour of each
    orbit (up to five; more orbits are one entry saying the colours follow the orbit
    number) and, with ``curves``, the overlay curves drawn. Nothing when there is nothing to
    tell apart."""
    from matplotlib.lines import Line2D

    size = max(float(np.sqrt(marker_area)), 3.0)
    handles = []
    if 1 < n_orbits <= 5:
        handles = [Line2D([], [], ls="", marker="o", ms=size, mew=0, color=ORBIT_COLORS[k],
                          label=f"orbit {k + 1}") for k in range(n_orbits)]
    elif n_orbits > 5:
        handles = [Line2D([], [], ls="", marker="o", ms=size, mew=0, color=ORBIT_COLORS[0],
                          label=f"{n_orbits} orbits, colour by orbit number")]
    if curves:
        handles += [h for h in ax.get_lines() if h.get_label() == "overlay curve"]
    if handles:
        ax.legend(handles=handles, loc="upper right", fontsize=6.5, frameon=True, framealpha=0.85,
                  edgecolor="none", handletextpad=0.3, borderaxespad=0.2, labelspacing=0.25)


def save_figure(section, path, **kwargs):
    """Write a static figure of ``section`` to ``path`` (.svg, .pdf or .png).

    Parameters
    ----------
    section : phaselab.orbits.section_result.Section
    path : str or pathlib.Path
        The suffix picks the format.
    **kwargs
        Passed to :func:`section_figure` (size, dpi, point_size, color, title, overlays, ...).

    Returns
    -------
    pathlib.Path
        The file written.
    """
    import matplotlib

    path = Path(path)
    fmt = FIGURE_SUFFIXES.get(path.suffix.lower())
    if fmt is None:
        raise ParameterError(
            f"a static figure is written as .svg, .pdf or .png, not {path.suffix or 'no suffix'!r}")
    fig = section_figure(section, **kwargs)
    metadata = {"Creator": "phaselab"} if fmt in ("pdf", "svg") else {"Software": "phaselab"}
    with matplotlib.rc_context(REPORT_RC), atomic_path(path) as tmp:
        # No bbox cropping: the pixel size stays exactly size * dpi.
        fig.savefig(tmp, format=fmt, dpi=fig.dpi, facecolor="white", metadata=metadata)
    return path
