"""The explorer's bokeh figures: the main plot and the companion views of one orbit.

Built once per explorer; afterwards only their data sources change (a tap streams the new
orbit's points, a slider move replaces them), which is what jupyter_bokeh sends to the page.
"""

from __future__ import annotations

import numpy as np

from phaselab.widgets import theme


def _style(fig, xlabel, ylabel):
    fig.background_fill_color = theme.GROUND
    fig.border_fill_color = "#ffffff"
    fig.outline_line_color = theme.RULE
    fig.min_border_left = 48
    fig.min_border_bottom = 40
    fig.toolbar.logo = None
    fig.toolbar.autohide = True
    for axis in (fig.xaxis, fig.yaxis):
        axis.axis_line_color = theme.MUTED
        axis.major_tick_line_color = theme.MUTED
        axis.minor_tick_line_color = None
        axis.major_label_text_color = theme.MUTED
        axis.major_label_text_font_size = "10px"
        axis.axis_label_text_color = theme.INK
        axis.axis_label_text_font_size = "12px"
        axis.axis_label_text_font_style = "normal"
    for grid in (fig.xgrid, fig.ygrid):
        grid.grid_line_color = theme.RULE
        grid.grid_line_width = 0.8
    fig.xaxis.axis_label = xlabel
    fig.yaxis.axis_label = ylabel
    if fig.title is not None:
        fig.title.text_color = theme.INK
        fig.title.text_font_size = "12px"
        fig.title.text_font_style = "normal"


class Figures:
    """The bokeh models of one explorer.

    Attributes
    ----------
    main : bokeh figure
        Points, seeds, the allowed region's edge (or level curves).
    points, seeds, latest, forbidden, lines, accents : ColumnDataSource
    trace, error : bokeh figure
        Companion views of the selected orbit.
    trace_source, error_source : ColumnDataSource
    layout : bokeh layout holding all figures (one jupyter_bokeh model)
    """

    def __init__(self, labels, ranges, trace_labels, scalar_label=None, width=520, height=470):
        from bokeh.layouts import column, row
        from bokeh.models import (BoxZoomTool, ColorBar, ColumnDataSource, LinearColorMapper,
                                  PointDrawTool, ResetTool, SaveTool, WheelZoomTool, PanTool)
        from bokeh.plotting import figure

        (x0, x1), (y0, y1) = ranges
        main = figure(width=width, height=height, x_range=(x0, x1), y_range=(y0, y1),
                      tools=[], match_aspect=False, output_backend="canvas", name="phaselab-main")
        _style(main, *labels)

        self.forbidden = ColumnDataSource(dict(image=[np.zeros((2, 2))], x=[x0], y=[y0], dw=[x1 - x0],
                                               dh=[y1 - y0]))
        mapper = LinearColorMapper(palette=["rgba(0,0,0,0)", theme.FORBIDDEN], low=0.0, high=1.0)
        main.image(image="image", x="x", y="y", dw="dw", dh="dh", source=self.forbidden,
                   color_mapper=mapper, level="underlay")
        self.lines = ColumnDataSource(dict(xs=[], ys=[]))
        main.multi_line("xs", "ys", source=self.lines, line_color=theme.MUTED, line_width=0.8,
                        line_alpha=0.55)
        self.accents = ColumnDataSource(dict(xs=[], ys=[]))
        main.multi_line("xs", "ys", source=self.accents, line_color=theme.BOUNDARY, line_width=1.4)

        self.points = ColumnDataSource(dict(x=[], y=[], shade=[], orbit=[], value=[]),
                                       name="phaselab-points")
        # orbit colours by a small integer column (binary on the wire, unlike strings)
        n = len(theme.ORBIT_COLORS)
        self.orbit_mapper = LinearColorMapper(palette=list(theme.ORBIT_COLORS), low=-0.5, high=n - 0.5)
        self.scalar_mapper = None
        if scalar_label is not None:
            self.scalar_mapper = LinearColorMapper(palette=theme.scalar_palette(), low=0.0, high=1.0,
                                                   nan_color=theme.MISSING_COLOR)
            fill = {"field": "value", "transform": self.scalar_mapper}
        else:
            fill = {"field": "shade", "transform": self.orbit_mapper}
        main.scatter("x", "y", source=self.points, size=2.6, fill_color=fill, line_color=None,
                     fill_alpha=0.9)
        if self.scalar_mapper is not None:
            bar = ColorBar(color_mapper=self.scalar_mapper, title=scalar_label, width=8,
                           title_text_font_size="11px", major_label_text_font_size="10px",
                           title_text_font_style="normal", background_fill_alpha=0.0)
            main.add_layout(bar, "right")

        self.seeds = ColumnDataSource(dict(x=[], y=[], color=[]), name="phaselab-seeds")
        main.scatter("x", "y", source=self.seeds, size=7, marker="circle", fill_color="#ffffff",
                     line_color="color", line_width=1.6)
        self.latest = ColumnDataSource(dict(x=[], y=[]), name="phaselab-latest")
        latest = main.scatter("x", "y", source=self.latest, size=13, marker="circle",
                              fill_color=None, line_color=theme.INK, line_width=1.5)
        drag = PointDrawTool(renderers=[latest], add=False, drag=True,
                             description="Drag the newest seed")
        wheel = WheelZoomTool()
        main.add_tools(drag, PanTool(), wheel, BoxZoomTool(), ResetTool(), SaveTool())
        main.toolbar.active_drag = drag
        main.toolbar.active_scroll = wheel
        self.main = main
        self.drag_tool = drag

        tw = 290
        trace = figure(width=tw, height=240, tools="pan,wheel_zoom,reset", title="Orbit in configuration space",
                       name="phaselab-trace")
        _style(trace, *trace_labels)
        self.trace_source = ColumnDataSource(dict(x=[], y=[]))
        self.trace_line = trace.line("x", "y", source=self.trace_source, line_width=1.0,
                                     line_color=theme.ORBIT_COLORS[0], line_alpha=0.85)
        error = figure(width=tw, height=206, tools="pan,wheel_zoom,reset", title="Energy error along the orbit",
                       name="phaselab-error")
        _style(error, "t", "relative error")
        from bokeh.models import BasicTickFormatter

        error.yaxis.formatter = BasicTickFormatter(use_scientific=True, precision=1, power_limit_low=-2)
        self.error_source = ColumnDataSource(dict(x=[], y=[]))
        self.error_line = error.line("x", "y", source=self.error_source, line_width=1.0,
                                     line_color=theme.ORBIT_COLORS[0])
        self.trace = trace
        self.error = error
        self.layout = row(main, column(trace, error, spacing=12), spacing=18)

    def set_ranges(self, ranges):
        (x0, x1), (y0, y1) = ranges
        self.main.x_range.start, self.main.x_range.end = x0, x1
        self.main.y_range.start, self.main.y_range.end = y0, y1
