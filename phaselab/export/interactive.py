"""Interactive bokeh views of a surface of section, and self-contained HTML pages of them.

bokeh is imported inside the functions only, so importing :mod:`phaselab.export` (or the
compute layer that returns sections) never pays for it.
"""

from __future__ import annotations

import html
from pathlib import Path

import numpy as np

from phaselab.errors import ParameterError
from phaselab.export.describe import axis_symbols, check_section, plain_label, unit_of
from phaselab.export.footers import footer_text
from phaselab.model.units import with_unit
from phaselab.export.figures import MISSING_COLOR, ORBIT_COLORS, SCALAR_STOPS
from phaselab.base.atomic import atomic_path


def _scalar_palette(n=256):
    """SCALAR_STOPS interpolated to ``n`` hex colours (the same map as static figures)."""
    from matplotlib.colors import LinearSegmentedColormap, to_hex

    cmap = LinearSegmentedColormap.from_list("phaselab_ink_to_brick", SCALAR_STOPS, N=n)
    return [to_hex(cmap(k / (n - 1))) for k in range(n)]


def bokeh_figure(section, width=640, height=480, point_size=3.0, color=None, color_label=None,
                 title=None, overlays=None, webgl=None):
    """A bokeh figure of the section points, coloured per orbit, with a hover readout.

    Parameters
    ----------
    section : phaselab.orbits.section_result.Section
    width, height : int
        Size in screen pixels.
    point_size : float
        Marker diameter in screen pixels.
    color : None or array_like, shape (n_orbits,)
        None colours orbits from the orbit palette; an array colours each orbit by a scalar
        (e.g. a chaos indicator), with a colour bar.
    color_label : str, optional
        Title of the colour bar (and of the value in the hover readout).
    title : str, optional
    overlays : list of (x, y) arrays, optional
        Curves drawn over the points.
    webgl : bool, optional
        Draw with WebGL; default only above 20 000 points.

    Returns
    -------
    bokeh.plotting.figure
        Hovering a point shows its orbit index, crossing number and coordinates.
    """
    from bokeh.models import ColorBar, ColumnDataSource, HoverTool, LinearColorMapper
    from bokeh.plotting import figure

    from phaselab.export.figures import check_overlays, per_orbit_scalar

    check_section(section)
    if not (int(width) >= 100 and int(height) >= 100):
        raise ParameterError(f"width and height must be at least 100 pixels, got {width} x {height}")
    curves = check_overlays(overlays)
    x, y = section.xy()
    orbit = section.orbit_index()
    i, j = section.axes
    pts = np.asarray(section.points)
    keep = np.isfinite(pts[..., i]) & np.isfinite(pts[..., j])
    crossing = np.broadcast_to(np.arange(pts.shape[1])[None, :], keep.shape)[keep]
    hsym, vsym = axis_symbols(section)
    system = getattr(section, "system", None)
    xlabel, ylabel = (with_unit(plain_label(s), unit_of(system, s)) for s in (hsym, vsym))
    if webgl is None:
        webgl = x.size > 20_000

    fig = figure(width=int(width), height=int(height), title=title,
                 x_axis_label=xlabel, y_axis_label=ylabel,
                 tools="pan,wheel_zoom,box_zoom,reset,save",
                 active_scroll="wheel_zoom", output_backend="webgl" if webgl else "canvas")
    data = {"x": x, "y": y, "orbit": orbit, "crossing": crossing}
    tooltips = [("orbit", "@orbit"), ("crossing", "@crossing"),
                (xlabel, "@x{0.00000}"), (ylabel, "@y{0.00000}")]
    if color is None:
        palette = np.array(ORBIT_COLORS)
        data["color"] = palette[orbit % len(palette)]
        source = ColumnDataSource(data)
        fig.scatter("x", "y", source=source, size=point_size, color="color",
                    line_color=None, alpha=0.9)
    else:
        scalar = per_orbit_scalar(color, section.n_orbits)
        data["value"] = scalar[orbit]
        finite = scalar[np.isfinite(scalar)]
        low, high = (float(finite.min()), float(finite.max())) if finite.size else (0.0, 1.0)
        if low == high:
            low, high = low - 0.5, high + 0.5
        mapper = LinearColorMapper(palette=_scalar_palette(), low=low, high=high,
                                   nan_color=MISSING_COLOR)
        source = ColumnDataSource(data)
        fig.scatter("x", "y", source=source, size=point_size,
                    color={"field": "value", "transform": mapper}, line_color=None, alpha=0.9)
        fig.add_layout(ColorBar(color_mapper=mapper, title=color_label, width=12), "right")
        tooltips.append((color_label or "value", "@value{0.0000}"))
    for cx, cy in curves:
        fig.line(cx, cy, line_color="#26313b", line_width=1.2, line_alpha=0.85)
    fig.add_tools(HoverTool(tooltips=tooltips, renderers=[fig.renderers[0]]))
    fig.toolbar.logo = None
    fig.grid.grid_line_alpha = 0.35
    fig.axis.axis_label_text_font_style = "normal"
    fig.axis.axis_label_text_font_size = "13px"
    return fig


def save_html(section, path, title=None, **kwargs):
    """Write a self-contained interactive page of ``section`` (works offline).

    The bokeh library is inlined into the page (no external scripts); a line under the
    plot names the system, energy, parameters and method.

    Parameters
    ----------
    section : phaselab.orbits.section_result.Section
    path : str or pathlib.Path
    title : str, optional
        Plot and page title.
    **kwargs
        Passed to :func:`bokeh_figure`.

    Returns
    -------
    pathlib.Path
    """
    from bokeh.embed import file_html
    from bokeh.layouts import column
    from bokeh.models import Div
    from bokeh.resources import INLINE

    path = Path(path)
    fig = bokeh_figure(section, title=title, **kwargs)
    footer = Div(text=f'<span style="font: 12px sans-serif; color: #555">'
                      f'{html.escape(footer_text(section))}</span>', width=fig.width)
    page = file_html(column(fig, footer), resources=INLINE, title=title or "phaselab section")
    with atomic_path(path) as tmp:
        tmp.write_text(page, encoding="utf-8")
    return path
