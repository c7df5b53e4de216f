"""The bokeh figures of the linked explorer: a seeding projection and a grid of every
pairwise projection of the section coordinates, all drawn from one data source.

Every renderer of section points uses the same :class:`~bokeh.models.ColumnDataSource`,
so a box or lasso selection in any projection selects the same rows in all of them
(bokeh's linked selection, done in the page). The slab of a slice is one
:class:`~bokeh.models.IndexFilter` shared by every renderer's view: a slab change sends
the kept row numbers once, not the points.

Colour: the orbit's own colour (``shade``), a section coordinate (Froeschle's colouring by
a hidden coordinate: the mapper's field changes, no data is sent) or a per-orbit value such
as MEGNO (``value``).
"""

from __future__ import annotations

import numpy as np

from phaselab.widgets import theme
from phaselab.widgets.linked_points import column_name, empty_columns

#: Frame of the seeding projection (px).
SEED_FRAME = 400
#: Width and height of the frames of the projection grid together (px).
GRID_FRAME = 460
POINT_SIZE = 2.2
#: How the page draws the points ("webgl" draws 100,000 points faster where the browser has
#: a graphics processor; "canvas" where it has none).
BACKEND = "webgl"


def _style(fig, xlabel, ylabel):
    fig.background_fill_color = theme.GROUND
    fig.border_fill_color = "#ffffff"
    fig.outline_line_color = theme.RULE
    fig.xaxis.axis_label, fig.yaxis.axis_label = xlabel, ylabel
    for ax in (fig.xaxis, fig.yaxis):
        ax.axis_label_text_font_style = "normal"
        ax.axis_label_text_color = theme.INK
        ax.axis_line_color = theme.MUTED
        ax.major_label_text_color = theme.MUTED
        ax.major_tick_line_color = theme.MUTED
        ax.minor_tick_line_color = None
    fig.grid.visible = False
    fig.toolbar.logo = None


class LinkedFigures:
    """The bokeh models of one linked explorer.

    Parameters
    ----------
    labels : sequence of str
        Axis labels of the section coordinates (with units), in column order.
    windows : sequence of (float, float)
        The window of each section coordinate.
    pair : (int, int)
        Columns of the clicked pair (the seeding projection).

    Attributes
    ----------
    points : ColumnDataSource
        The one source of section points (columns of :func:`~phaselab.widgets.linked_points.point_columns`).
    slab_filter : IndexFilter
        Rows inside the slab (shared by every view while the slab is on).
    main : figure
        The seeding projection (clicks start orbits).
    grid : list of figure
        The pairwise projections, lower triangle, row by row.
    point_renderers : list of GlyphRenderer
        Every renderer of ``points`` (one per figure).
    """

    def __init__(self, labels, windows, pair):
        from bokeh.layouts import gridplot, row
        from bokeh.models import (AllIndices, BoxSelectTool, CDSView, ColorBar, ColumnDataSource, IndexFilter,
                                  LassoSelectTool, LinearColorMapper, PanTool, ResetTool, WheelZoomTool)
        from bokeh.plotting import figure

        k = len(labels)
        self.labels = tuple(labels)
        self.points = ColumnDataSource(empty_columns(k), name="phaselab-linked-points")
        self.slab_filter = IndexFilter(indices=[], name="phaselab-slab")
        self.all_rows = AllIndices()
        n = len(theme.ORBIT_COLORS)
        self.orbit_mapper = LinearColorMapper(palette=list(theme.ORBIT_COLORS), low=-0.5, high=n - 0.5)
        self.scalar_mapper = LinearColorMapper(palette=theme.scalar_palette(), low=0.0, high=1.0,
                                               nan_color=theme.MISSING_COLOR)
        self.point_renderers = []
        self.ranges = {}

        def tools(fig):
            box, lasso, wheel = BoxSelectTool(), LassoSelectTool(), WheelZoomTool()
            fig.add_tools(box, lasso, PanTool(), wheel, ResetTool())
            fig.toolbar.active_drag = box
            fig.toolbar.active_scroll = wheel

        def shared_range(j):
            from bokeh.models import Range1d

            if j not in self.ranges:
                self.ranges[j] = Range1d(*windows[j])
            return self.ranges[j]

        def scatter(fig, i, j):
            r = fig.scatter(column_name(i), column_name(j), source=self.points, size=POINT_SIZE,
                            fill_color={"field": "shade", "transform": self.orbit_mapper}, line_color=None,
                            fill_alpha=0.85, view=CDSView(filter=self.all_rows),
                            nonselection_fill_alpha=0.08, selection_fill_alpha=1.0)
            self.point_renderers.append(r)
            return r

        a, b = pair
        main = figure(frame_width=SEED_FRAME, frame_height=SEED_FRAME, x_range=windows[a], y_range=windows[b],
                      tools=[], output_backend=BACKEND, name="phaselab-seeding", min_border_right=12)
        _style(main, labels[a], labels[b])
        tools(main)
        scatter(main, a, b)
        self.seeds = ColumnDataSource(dict(x=[], y=[], color=[], orbit=[]), name="phaselab-linked-seeds")
        main.scatter("x", "y", source=self.seeds, size=8, marker="circle", fill_color="#ffffff",
                     line_color="color", line_width=2.0)
        self.main = main

        side = max(70, int(GRID_FRAME / max(k - 1, 1)))
        cells = []
        self.grid = []
        for i in range(1, k):
            line = []
            for j in range(k - 1):
                if j >= i:
                    line.append(None)
                    continue
                fig = figure(frame_width=side, frame_height=side, x_range=shared_range(j), y_range=shared_range(i),
                             tools=[], output_backend=BACKEND, toolbar_location=None,
                             name=f"phaselab-projection-{j}-{i}", min_border=4)
                _style(fig, labels[j] if i == k - 1 else "", labels[i] if j == 0 else "")
                if i != k - 1:
                    fig.xaxis.major_label_text_font_size = "0px"
                if j != 0:
                    fig.yaxis.major_label_text_font_size = "0px"
                tools(fig)
                scatter(fig, j, i)
                line.append(fig)
                self.grid.append(fig)
            cells.append(line)
        grid = gridplot(cells, toolbar_location="right", merge_tools=True)

        self.color_bar = ColorBar(color_mapper=self.scalar_mapper, title="", width=12, padding=6,
                                  major_label_text_font_size="10px", background_fill_alpha=0.0,
                                  title_text_font_size="11px", title_text_font_style="normal",
                                  title_text_color=theme.INK, visible=False)
        main.add_layout(self.color_bar, "right")
        self.layout = row(main, grid, spacing=12)

    # ------------------------------------------------------------------ drawing
    def set_points(self, columns):
        """Replace every point (numbers only: binary on the wire). The selection is cleared
        (its row numbers would name other points)."""
        self.points.selected.indices = []
        self.points.data = columns

    def append_points(self, columns):
        """Add rows at the end (streamed: only the new rows are sent)."""
        if len(self.points.data["orbit"]) == 0:
            self.points.data = columns
        else:
            self.points.stream(columns)

    def set_slab_rows(self, rows):
        """Show only ``rows`` (int array) in every projection; None shows every row."""
        from bokeh.core.property.validation import without_property_validation

        @without_property_validation
        def assign():
            # an int32 array made here: bokeh's element-by-element check of it would cost
            # more than the rest of a slab change
            self.slab_filter.indices = np.ascontiguousarray(rows, dtype=np.int32)

        if rows is None:
            target = self.all_rows
        else:
            assign()
            target = self.slab_filter
        for r in self.point_renderers:
            if r.view.filter is not target:
                r.view.filter = target

    def color_by_orbit(self):
        self._fill({"field": "shade", "transform": self.orbit_mapper})
        self.color_bar.visible = False

    def color_by_column(self, column, low, high, palette, title):
        """Colour by a data column (a section coordinate or ``value``) on ``palette``."""
        self.scalar_mapper.palette = list(palette)
        self.scalar_mapper.low, self.scalar_mapper.high = float(low), float(high)
        self.color_bar.title = title
        self._fill({"field": column, "transform": self.scalar_mapper})
        self.color_bar.visible = True

    def _fill(self, spec):
        # the selected and the faded points are drawn by glyphs of their own
        for r in self.point_renderers:
            for g in (r.glyph, r.selection_glyph, r.nonselection_glyph):
                if hasattr(g, "fill_color"):
                    g.fill_color = spec

    def show_seeds(self, xs, ys, colors, ids):
        self.seeds.data = dict(x=list(map(float, xs)), y=list(map(float, ys)), color=list(colors),
                               orbit=list(map(int, ids)))

    def set_axis_labels(self, labels, pair):
        self.main.xaxis.axis_label, self.main.yaxis.axis_label = labels[pair[0]], labels[pair[1]]
