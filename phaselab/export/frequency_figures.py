"""Static pictures of frequency analysis: frequency maps with resonance lines, diffusion
maps over a grid, and frequency (rotation number) profiles along a line of seeds.

Each function returns a :class:`matplotlib.figure.Figure` built without pyplot (nothing is
left in pyplot's list of open figures); :func:`save_figure` writes one as SVG, PDF or PNG
through a temporary file in the same folder. matplotlib is imported on first use.

The pictures take a :class:`phaselab.frequency.frequencies.Frequencies` or a
:class:`phaselab.scan.frequency_map.FrequencyMap` (both have ``nu``, ``diffusion``,
``valid``, ``names``, ``unit`` and ``base_frequency``).
"""

from __future__ import annotations

import math
from fractions import Fraction
from pathlib import Path

import numpy as np

from phaselab.export import footers
from phaselab.errors import ParameterError
from phaselab.export.figures import DPI_RANGE, FIGURE_SUFFIXES, REPORT_RC
from phaselab.frequency.resonances import Resonance, resonances

__all__ = ["Resonance", "resonances", "frequency_map_figure", "diffusion_map_figure",
           "frequency_profile_figure", "save_figure", "save_result"]


#: Resonance lines by order: the lowest orders dark and thick, higher ones paler and finer.
LINE_SHADES = ("#22303c", "#3d5568", "#627d90", "#8ea3b2", "#b4c3cd", "#cfd8de")
LINE_WIDTHS = (1.3, 1.05, 0.85, 0.7, 0.55, 0.45)
#: Marker edge of profile points and the thin line joining them.
PROFILE_LINE = "#7d8a94"
#: Reference lines at rational values in profiles.
RATIONAL_SHADE = "#c9a26b"



# ----------------------------------------------------------------------------- labels
def _tex_name(name) -> str | None:
    """The LaTeX of a state name (``theta`` -> ``\\theta``), or None if mathtext cannot."""
    try:
        import sympy as sp
        from matplotlib.mathtext import MathTextParser

        tex = sp.latex(sp.Symbol(str(name)))
        MathTextParser("path").parse(f"$\\nu_{{{tex}}}$")
        return tex
    except Exception:  # names mathtext cannot typeset fall back to plain text
        return None


def _nu_label(name, kind="frequency") -> str:
    letter = "\\nu" if kind == "frequency" else "\\rho"
    tex = _tex_name(name)
    if tex is None:
        return f"{'ν' if kind == 'frequency' else 'ρ'}({name})"
    return f"${letter}_{{{tex}}}$"


def _line_label(r: Resonance, names) -> str:
    a, b = (_tex_name(x) or str(x) for x in names)

    def term(c, t, first):
        if c == 0:
            return ""
        sign = "-" if c < 0 else ("" if first else "+")
        mag = "" if abs(c) == 1 else str(abs(c))
        return f"{sign}{mag}\\nu_{{{t}}}"

    left = term(r.m, a, True)
    left += term(r.n, b, left == "")
    return f"${left}={r.p}$"


def _axis_label(symbol_name) -> str:
    from phaselab.export.describe import mathtext_label

    return mathtext_label(symbol_name)


def _meta(result) -> dict:
    if hasattr(result, "metadata"):
        return result.metadata()
    return dict(getattr(result, "meta", {}) or {})


def _footer(result, width) -> list[str]:
    """The footer lines of a frequency figure (see :mod:`phaselab.export.footers`)."""
    return footers.footer_lines(footers.footer_text(result), width)


# ----------------------------------------------------------------------------- checks, layout
def _check_result(result):
    for name in ("nu", "diffusion", "valid", "names", "unit"):
        if not hasattr(result, name):
            raise ParameterError(f"expected a Frequencies or FrequencyMap result, got "
                                f"{type(result).__name__} without .{name}")
    if not np.any(result.valid):
        raise ParameterError("no orbit was analysed in full: nothing to draw")


def _check_frame_size(size, dpi):
    try:
        width, height = (float(v) for v in size)
    except (TypeError, ValueError):
        raise ParameterError(f"size must be (width, height) in inches, got {size!r}") from None
    if not (math.isfinite(width) and math.isfinite(height) and width >= 2.5 and height >= 2.0):
        raise ParameterError(f"size must be at least 2.5 x 2 inches, got {size!r}")
    try:
        dpi = float(dpi)
    except (TypeError, ValueError):
        raise ParameterError(f"dpi must be a number, got {dpi!r}") from None
    if not (math.isfinite(dpi) and DPI_RANGE[0] <= dpi <= DPI_RANGE[1]):
        raise ParameterError(f"dpi must be between {DPI_RANGE[0]} and {DPI_RANGE[1]}, got {dpi!r}")
    return width, height, dpi


def _frame(width, height, dpi, title, footer_lines, colorbar):
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width, height), dpi=dpi, facecolor="white")
    left, right = 0.8, (1.1 if colorbar else 0.25)
    bottom = 0.6 + footers.margin(footer_lines)
    top = 0.45 if title else 0.2
    ax_w, ax_h = width - left - right, height - bottom - top
    if ax_w < 1.0 or ax_h < 0.8:
        raise ParameterError(f"size ({width}, {height}) leaves no room for the plot; make it larger")
    ax = fig.add_axes((left / width, bottom / height, ax_w / width, ax_h / height))
    cax = None
    if colorbar:
        cax = fig.add_axes(((left + ax_w + 0.2) / width, bottom / height, 0.14 / width, ax_h / height))
    if title:
        fig.text(left / width, 1 - 0.14 / height, str(title), ha="left", va="top", fontsize=11,
                 color="#1c1c1c")
    footers.draw(fig, footer_lines)
    for spine in ("top", "right"):
        ax.spines[spine].set_visible(False)
    ax.tick_params(labelsize=8, color="#444444", labelcolor="#333333")
    return fig, ax, cax


def _color_limits(values, vmin, vmax):
    finite = values[np.isfinite(values)]
    if vmin is None:
        vmin = float(np.percentile(finite, 2)) if finite.size else 0.0
    if vmax is None:
        vmax = float(np.percentile(finite, 98)) if finite.size else 1.0
    if not vmin < vmax:
        vmin, vmax = vmin - 0.5, vmax + 0.5
    return vmin, vmax


def _colorbar(fig, art, cax, label):
    bar = fig.colorbar(art, cax=cax)
    bar.outline.set_linewidth(0.6)
    bar.ax.tick_params(labelsize=7.5)
    bar.set_label(label, fontsize=8.5)


def _diffusion_label(unit):
    return f"log10 |Δν|  ({unit})"


# ----------------------------------------------------------------------------- frequency map
def frequency_map_figure(result, columns=(0, 1), order=4, label_order=None, size=(6.0, 5.0),
                         dpi=150, point_size=2.5, vmin=None, vmax=None, xlim=None, ylim=None,
                         title=None, footer=True, note=None):
    """nu_1 against nu_2 for every orbit, coloured by diffusion, with resonance lines.

    Parameters
    ----------
    result : Frequencies or FrequencyMap
        Needs at least two columns of frequencies.
    columns : (int, int)
        Which two columns of ``nu`` to draw (horizontal, vertical).
    order : int
        Resonance lines ``m nu_1 + n nu_2 = p`` (times the sampling clock's frequency, see
        :attr:`~phaselab.frequency.frequencies.Frequencies.base_frequency`) are drawn up to
        ``|m| + |n| = order``; 0 draws none.
    label_order : int, optional
        Lines up to this order get a label (default: ``order``).
    size, dpi : figure size in inches and resolution for PNG.
    point_size : float
        Marker diameter in points.
    vmin, vmax : float, optional
        Colour range of the diffusion (default: 2nd and 98th percentiles).
    xlim, ylim : (float, float), optional
        View (default: the valid points with a 5 % margin).
    title, note : str, optional
    footer : bool
        Print the system, parameters and method under the plot.

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib

    from phaselab.export.figures import scalar_colormap

    _check_result(result)
    nu = np.asarray(result.nu, dtype=float)
    try:
        i, j = (int(c) for c in columns)
    except (TypeError, ValueError):
        raise ParameterError(f"columns must be two column indices, got {columns!r}") from None
    if nu.shape[1] < 2:
        raise ParameterError(f"a frequency map needs two frequencies per orbit; this result has "
                            f"one ({', '.join(result.names)}): draw frequency_profile_figure instead")
    if not (0 <= i < nu.shape[1] and 0 <= j < nu.shape[1] and i != j):
        raise ParameterError(f"columns must be two different indices below {nu.shape[1]}, got {columns!r}")
    if isinstance(order, bool) or not isinstance(order, (int, np.integer)) or not 0 <= order <= 30:
        raise ParameterError(f"order must be an integer from 0 to 30, got {order!r}")
    width, height, dpi = _check_frame_size(size, dpi)
    ok = np.asarray(result.valid)
    x, y, d = nu[ok, i], nu[ok, j], np.asarray(result.diffusion, dtype=float)[ok]
    xlim = xlim or _span(x)
    ylim = ylim or _span(y)
    names = (result.names[i], result.names[j])
    kind = getattr(result, "kind", "frequency")
    with matplotlib.rc_context(REPORT_RC):
        fig, ax, cax = _frame(width, height, dpi, title, _footer(result, width) if footer else [], True)
        if order:
            lines = resonances(int(order), xlim, ylim, getattr(result, "base_frequency", 1.0))
            top = order if label_order is None else int(label_order)
            for r in sorted(lines, key=lambda r: -r.order):
                k = min(r.order, len(LINE_SHADES)) - 1
                ax.plot([r.start[0], r.end[0]], [r.start[1], r.end[1]], color=LINE_SHADES[k],
                        linewidth=LINE_WIDTHS[k], zorder=1, solid_capstyle="butt")
                if r.order <= top:
                    fx = r.start[0] + 0.82 * (r.end[0] - r.start[0])
                    fy = r.start[1] + 0.82 * (r.end[1] - r.start[1])
                    ax.text(fx, fy, _line_label(r, names), fontsize=6.5, color=LINE_SHADES[k],
                            ha="center", va="center", zorder=4, clip_on=True,
                            bbox=dict(boxstyle="round,pad=0.15", facecolor="white",
                                      edgecolor="none", alpha=0.8))
        lo, hi = _color_limits(d, vmin, vmax)
        order_pts = np.argsort(-np.nan_to_num(d, nan=np.inf))   # quiet orbits drawn last
        art = ax.scatter(x[order_pts], y[order_pts], c=d[order_pts], s=float(point_size) ** 2,
                         cmap=scalar_colormap(), vmin=lo, vmax=hi, linewidths=0, marker="o",
                         plotnonfinite=True, zorder=2, rasterized=x.size > 20_000)
        _colorbar(fig, art, cax, _diffusion_label(result.unit))
        ax.set_xlim(*xlim)
        ax.set_ylim(*ylim)
        ax.set_xlabel(f"{_nu_label(names[0], kind)}  ({result.unit})", fontsize=10)
        ax.set_ylabel(f"{_nu_label(names[1], kind)}  ({result.unit})", fontsize=10)
        if note:
            fig.text(0.98, 0.1 / height, str(note), ha="right", va="bottom", fontsize=6.5,
                     color="#6a6a6a", style="italic")
    return fig


def _span(v):
    v = v[np.isfinite(v)]
    lo, hi = float(v.min()), float(v.max())
    pad = 0.05 * (hi - lo) if hi > lo else max(1e-6, 0.05 * abs(lo) or 1e-3)
    return lo - pad, hi + pad


# ----------------------------------------------------------------------------- diffusion map
def diffusion_map_figure(fmap, size=(6.0, 5.0), dpi=150, vmin=None, vmax=None, title=None,
                         footer=True, note=None):
    """The diffusion of every grid seed as a picture over the grid.

    Parameters
    ----------
    fmap : FrequencyMap
        Computed over a :class:`~phaselab.scan.grids.StateGrid`.
    size, dpi, vmin, vmax, title, footer, note
        As in :func:`frequency_map_figure`.

    Returns
    -------
    matplotlib.figure.Figure
        Cells without a result (outside the energy shell, escaped orbits) are blank grey.
    """
    import matplotlib

    from phaselab.export.figures import scalar_colormap

    _check_result(fmap)
    grid = getattr(fmap, "grid", None)
    if grid is None:
        raise ParameterError("a diffusion map needs a result computed over a grid "
                            "(frequency_map(system, state_grid(...)))")
    width, height, dpi = _check_frame_size(size, dpi)
    img = fmap.image("diffusion")
    lo, hi = _color_limits(img, vmin, vmax)
    x, y = np.asarray(grid.x, dtype=float), np.asarray(grid.y, dtype=float)
    with matplotlib.rc_context(REPORT_RC):
        fig, ax, cax = _frame(width, height, dpi, title, _footer(fmap, width) if footer else [], True)
        art = ax.pcolormesh(_edges(x), _edges(y), np.ma.masked_invalid(img), cmap=scalar_colormap(),
                            vmin=lo, vmax=hi, shading="flat", rasterized=True)
        ax.set_facecolor("#e3e3e3")
        _colorbar(fig, art, cax, _diffusion_label(fmap.unit))
        xn, yn = grid.axis_names
        ax.set_xlabel(_axis_label(xn), fontsize=10)
        ax.set_ylabel(_axis_label(yn), fontsize=10)
        if note:
            fig.text(0.98, 0.1 / height, str(note), ha="right", va="bottom", fontsize=6.5,
                     color="#6a6a6a", style="italic")
    return fig


def _edges(c):
    if len(c) == 1:
        return np.array([c[0] - 0.5, c[0] + 0.5])
    mid = 0.5 * (c[1:] + c[:-1])
    return np.concatenate([[c[0] - (mid[0] - c[0])], mid, [c[-1] + (c[-1] - mid[-1])]])


# ----------------------------------------------------------------------------- profile
def frequency_profile_figure(result, along=None, column=0, rationals=None, size=(6.0, 4.2),
                             dpi=150, point_size=4.0, color_by_diffusion=True, title=None,
                             footer=True, note=None, ylim=None):
    """A frequency (or rotation number) against the seeds' position along a line: tunes
    against amplitude, rotational transform against the flux coordinate.

    Parameters
    ----------
    result : Frequencies or FrequencyMap
    along : str or array_like, optional
        The horizontal axis: a state component's name (read from the seeds), or one value
        per orbit. Default: the seed component that varies most.
    column : int
        Which column of ``nu`` to draw.
    rationals : int, optional
        Draw reference lines at the rationals ``p/q`` with ``q <= rationals`` (in units of
        the sampling clock, e.g. tunes per iterate). Default 5 when the result is per
        iterate, crossing or period, none otherwise; 0 draws none.
    size, dpi, title, footer, note, ylim
        As in :func:`frequency_map_figure`.
    point_size : float
    color_by_diffusion : bool
        Colour the points by their diffusion (with a colour bar).

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib

    from phaselab.export.figures import scalar_colormap

    _check_result(result)
    nu = np.asarray(result.nu, dtype=float)
    if isinstance(column, bool) or not isinstance(column, (int, np.integer)) or not 0 <= column < nu.shape[1]:
        raise ParameterError(f"column must be an index below {nu.shape[1]}, got {column!r}")
    width, height, dpi = _check_frame_size(size, dpi)
    xs, xlabel = _along(result, along)
    ok = np.asarray(result.valid) & np.isfinite(xs)
    if not ok.any():
        raise ParameterError("no analysed orbit has a finite position along the profile")
    x, yv, d = xs[ok], nu[ok, column], np.asarray(result.diffusion, dtype=float)[ok]
    idx = np.argsort(x)
    x, yv, d = x[idx], yv[idx], d[idx]
    base = getattr(result, "base_frequency", None)
    if rationals is None:
        rationals = 5 if base == 1.0 else 0
    if isinstance(rationals, bool) or not isinstance(rationals, (int, np.integer)) or not 0 <= rationals <= 50:
        raise ParameterError(f"rationals must be an integer from 0 to 50, got {rationals!r}")
    kind = getattr(result, "kind", "frequency")
    with matplotlib.rc_context(REPORT_RC):
        fig, ax, cax = _frame(width, height, dpi, title, _footer(result, width) if footer else [],
                              bool(color_by_diffusion))
        ax.plot(x, yv, color=PROFILE_LINE, linewidth=0.7, zorder=2)
        if color_by_diffusion:
            lo, hi = _color_limits(d, None, None)
            art = ax.scatter(x, yv, c=d, s=float(point_size) ** 2, cmap=scalar_colormap(), vmin=lo,
                             vmax=hi, linewidths=0.4, edgecolors=PROFILE_LINE, zorder=3,
                             plotnonfinite=True)
            _colorbar(fig, art, cax, _diffusion_label(result.unit))
        else:
            ax.scatter(x, yv, s=float(point_size) ** 2, color="#2b5d7d", linewidths=0, zorder=3)
        ylim = ylim or _span(yv)
        ax.set_ylim(*ylim)
        if rationals and base:
            for value in _rationals(ylim, int(rationals)):
                ax.axhline(value * base, color=RATIONAL_SHADE, linewidth=0.6, linestyle=(0, (3, 2)),
                           zorder=1)
                ax.text(1.005, value * base, f"{value.numerator}/{value.denominator}",
                        transform=ax.get_yaxis_transform(), fontsize=6.5, color="#8c6a3c",
                        ha="left", va="center", clip_on=False)
        ax.set_xlabel(xlabel, fontsize=10)
        ax.set_ylabel(f"{_nu_label(result.names[column], kind)}  ({result.unit})", fontsize=10)
        if note:
            fig.text(0.98, 0.1 / height, str(note), ha="right", va="bottom", fontsize=6.5,
                     color="#6a6a6a", style="italic")
    return fig


def _rationals(ylim, q_max):
    lo, hi = sorted(ylim)
    seen = set()
    for q in range(1, q_max + 1):
        for p in range(math.ceil(lo * q), math.floor(hi * q) + 1):
            f = Fraction(p, q)
            if f not in seen:
                seen.add(f)
                yield f


def _along(result, along):
    seeds = np.asarray(result.seeds, dtype=float)
    state = list(_meta(result).get("state") or [])
    n = len(seeds)
    if along is None:
        spread = np.ptp(seeds, axis=0)
        k = int(np.argmax(spread))
        return seeds[:, k], _axis_label(state[k] if k < len(state) else f"z{k}")
    if isinstance(along, str):
        if along not in state:
            raise ParameterError(f"along names unknown state component {along!r}; the state is "
                                f"({', '.join(state)})")
        return seeds[:, state.index(along)], _axis_label(along)
    try:
        values = np.asarray(along, dtype=float).ravel()
    except (TypeError, ValueError):
        raise ParameterError("along must be a state name or one number per orbit") from None
    if values.shape != (n,):
        raise ParameterError(f"along must hold one value per orbit ({n}), got {np.shape(along)}")
    return values, ""


# ----------------------------------------------------------------------------- files
def save_figure(fig, path) -> Path:
    """Write ``fig`` to ``path`` (.svg, .pdf or .png) through a temporary file in the same
    folder, renamed into place when complete."""
    import matplotlib

    from phaselab.scan.datasets import atomic_write

    path = Path(path)
    fmt = FIGURE_SUFFIXES.get(path.suffix.lower())
    if fmt is None:
        raise ParameterError(f"a figure is written as .svg, .pdf or .png, not "
                            f"{path.suffix or 'no suffix'!r}")
    metadata = {"Creator": "phaselab"} if fmt in ("pdf", "svg") else {"Software": "phaselab"}

    def write(tmp):
        with matplotlib.rc_context(REPORT_RC):
            fig.savefig(tmp, format=fmt, dpi=fig.dpi, facecolor="white", metadata=metadata)

    return atomic_write(path, write)


def save_result(result, path, **kwargs) -> Path:
    """Save a Frequencies or FrequencyMap: ``.nc`` data, or a figure by suffix (a diffusion
    map for a grid, a frequency map for two or more frequencies, else a profile)."""
    from phaselab.scan.datasets import save_netcdf

    path = Path(path)
    suffix = path.suffix.lower()
    if suffix == ".nc":
        if kwargs:
            raise ParameterError(f".nc data files take no options, got {', '.join(sorted(kwargs))}")
        return save_netcdf(result.to_xarray(), path)
    if suffix not in FIGURE_SUFFIXES:
        raise ParameterError(f"cannot save as {suffix or 'a file without suffix'!r}; use .nc, .svg, "
                            ".pdf or .png")
    return save_figure(result_figure(result, **kwargs), path)


def result_figure(result, **kwargs):
    """The figure of a Frequencies or FrequencyMap: a diffusion map for a grid, a frequency
    map for two or more frequencies, else a profile."""
    if getattr(result, "grid", None) is not None:
        return diffusion_map_figure(result, **kwargs)
    if np.asarray(result.nu).shape[1] >= 2:
        return frequency_map_figure(result, **kwargs)
    return frequency_profile_figure(result, **kwargs)
