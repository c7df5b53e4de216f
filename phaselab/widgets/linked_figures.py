"""The bokeh figures of the linked explorer: a seeding projection and a grid of every
pairwise projection of the section coordinates, all drawn from one data source.

Every renderer of section points uses the same :class:`~bokeh.models.ColumnDataSource`,
so a box or lasso selection in any projection selects the same rows in all of them
(bokeh's linked selection, done in the page). The slab of a slice is one
:class:`~bokeh.models.IndexFilter` shared by every renderer's view: a slab change sends
the kept row numbers once, not the points.

New orbits' points go first into small sources (the fresh "slots") drawn by renderers on
the overlay level of each projection: a click repaints only that layer of each projection,
not the 100,000 points already there. New rows are streamed into one slot until it holds
``SLOT_ROWS`` rows, then into the next: the page indexes and colours again only the rows
of the slot that changed (O(slot) per click, not O(every waiting row)). The fresh rows are
folded into the big source later (:meth:`LinkedFigures.fold`, after a quiet spell or when
the slots are full). Row numbers of the whole table run through the big source, then the
slots in order: a selection and a slab are given and reported in those numbers.

Colour: the orbit's own colour (``shade``), a section coordinate (Froeschle's colouring by
a hidden coordinate: the mapper's field changes, no data is sent) or a per-orbit value such
as MEGNO (``value``).
"""

from __future__ import annotations

import numpy as np

from phaselab.widgets import theme
from phaselab.widgets.linked_points import column_name, empty_columns
from phaselab.widgets.page_sync import page_sync

#: Frame of the seeding projection (px).
SEED_FRAME = 400
#: Width and height of the frames of the projection grid together (px).
GRID_FRAME = 460
POINT_SIZE = 2.2
#: How the page draws the points. The page holds BokehJS's core only (phaselab.widgets.bokehjs:
#: the WebGL bundle is not sent), so "webgl" drew with the canvas anyway; the canvas it is,
#: stated here (measured: benchmarks/linked_browser_benchmark.py).
BACKEND = "canvas"
#: Fresh sources (each with one overlay renderer per projection) and the rows one takes
#: before the next is used; the slots full, the fresh rows are folded. Measured with
#: benchmarks/linked_browser_benchmark.py (24 clicks, 0.4 s apart, 100,000 points, no GPU):
#: one slot of 10,000 rows, click-to-points median 218-284 ms, p95 350-446; eight slots,
#: 237-272, p95 295-352 over three pairs of runs (the page's re-indexing per click fell from
#: every waiting row to one slot; painting the waiting rows on the overlay layer remains).
FRESH_SLOTS = 8
SLOT_ROWS = 1250


def _empty_like(columns) -> dict:
    return {k: np.empty(0, np.asarray(v).dtype) for k, v in columns.items()}


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
    sync : PageSync
        The page's report of its views (:mod:`phaselab.widgets.page_sync`).
    """

    def __init__(self, labels, windows, pair):
        from bokeh.layouts import gridplot, row
        from bokeh.models import (AllIndices, BoxSelectTool, CDSView, ColorBar, ColumnDataSource, IndexFilter,
                                  LassoSelectTool, LinearColorMapper, PanTool, ResetTool, WheelZoomTool)
        from bokeh.plotting import figure

        k = len(labels)
        self.labels = tuple(labels)
        self.points = ColumnDataSource(empty_columns(k), name="phaselab-linked-points")
        self.slots = [ColumnDataSource(empty_columns(k), name=f"phaselab-linked-fresh-{s}")
                      for s in range(FRESH_SLOTS)]
        self.slab_filter = IndexFilter(indices=[], name="phaselab-slab")
        self.slot_filters = [IndexFilter(indices=[], name=f"phaselab-slab-fresh-{s}") for s in range(FRESH_SLOTS)]
        self.slot_renderers = [[] for _ in range(FRESH_SLOTS)]
        self.filling = 0   # the slot new rows go to
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
            style = dict(size=POINT_SIZE, fill_color={"field": "shade", "transform": self.orbit_mapper},
                         line_color=None, fill_alpha=0.85, nonselection_fill_alpha=0.08, selection_fill_alpha=1.0)
            r = fig.scatter(column_name(i), column_name(j), source=self.points, view=CDSView(filter=self.all_rows),
                            **style)
            # the new orbits' points, on the overlay layer: drawing them leaves the big layer as it is
            for slot, group in zip(self.slots, self.slot_renderers):
                group.append(fig.scatter(column_name(i), column_name(j), source=slot,
                                         view=CDSView(filter=self.all_rows), level="overlay", **style))
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
                     line_color="color", line_width=2.0, level="overlay")
        self.main = main
        # set by the page when a view of the document has been built (the kept picture is
        # sent again after a rebuild: explorer/picture_keeping.py)
        self.sync = page_sync()
        main.tags = self.sync.models  # part of the document without a view of their own

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
    @property
    def fresh_renderers(self) -> list:
        """Every renderer of the fresh slots, slot by slot."""
        return [r for group in self.slot_renderers for r in group]

    def _slot_sizes(self) -> list[int]:
        return [len(slot.data["orbit"]) for slot in self.slots]

    @property
    def n_rows(self) -> int:
        """Rows of the whole table (big source, then the fresh slots)."""
        return len(self.points.data["orbit"]) + self.n_fresh

    @property
    def n_fresh(self) -> int:
        return sum(self._slot_sizes())

    @property
    def slots_full(self) -> bool:
        """The last slot holds SLOT_ROWS rows or more: new rows have no room left."""
        return len(self.slots[-1].data["orbit"]) >= SLOT_ROWS

    def _sources(self) -> list:
        return [self.points] + self.slots

    def table(self) -> dict:
        """Every column of the whole table (big source rows, then the slots'), numpy arrays."""
        parts = [src.data for src in self._sources() if len(src.data["orbit"])] or [self.points.data]
        if len(parts) == 1:
            return {k: np.asarray(v) for k, v in parts[0].items()}
        return {k: np.concatenate([np.asarray(p[k]) for p in parts]) for k in self.points.data}

    def _empty_slots(self, like):
        """Every slot emptied (their filters first: the page applies changes in order)."""
        for slot, filt in zip(self.slots, self.slot_filters):
            if len(slot.data["orbit"]):
                filt.indices = []
                slot.data = _empty_like(like)
        self.filling = 0

    def set_points(self, columns):
        """Replace every point (numbers only: binary on the wire); the slots are emptied.
        The selection is cleared (its row numbers would name other points)."""
        for src in self._sources():
            src.selected.indices = []
        self.points.data = columns
        self._empty_slots(columns)

    def add_fresh(self, columns, whole=False):
        """New rows at the end of the table, into the slot being filled (streamed: only the
        new rows are sent; the page repaints the overlay layer only and indexes that slot
        again). ``whole``: the slot is sent whole instead (with the slab on: streamed rows
        would escape its filter in the page). Call :meth:`fold` first when
        :attr:`slots_full`."""
        if len(self.slots[self.filling].data["orbit"]) >= SLOT_ROWS and self.filling + 1 < len(self.slots):
            self.filling += 1
        slot = self.slots[self.filling]
        if len(slot.data["orbit"]) == 0:
            slot.data = columns
        elif whole:
            old = slot.data
            slot.data = {k: np.concatenate([np.asarray(old[k]), np.asarray(columns[k])]) for k in old}
        else:
            slot.stream(columns)

    def fold(self):
        """The fresh rows appended to the big source (streamed), the slots emptied; the
        selection keeps naming the same points."""
        from bokeh.core.property.validation import without_property_validation

        if not self.n_fresh:
            return
        n_big = len(self.points.data["orbit"])
        picked = self.selected_rows()
        parts = [slot.data for slot in self.slots if len(slot.data["orbit"])]
        fresh = {k: np.concatenate([np.asarray(p[k]) for p in parts]) for k in parts[0]}
        if n_big == 0:
            self.points.data = fresh
        else:
            self.points.stream(fresh)
        self._empty_slots(fresh)

        @without_property_validation
        def assign():   # whole numbers in range, from the page's own selections
            for slot in self.slots:
                if len(slot.selected.indices):
                    slot.selected.indices = []
            if picked.size:
                self.points.selected.indices = picked.astype(np.int32)

        assign()

    def _offsets(self) -> np.ndarray:
        """First row of each source (big, then slots) in the whole table, and the end, (S+2,)."""
        sizes = [len(self.points.data["orbit"])] + self._slot_sizes()
        return np.concatenate([[0], np.cumsum(sizes)])

    def selected_rows(self) -> np.ndarray:
        """Rows of the whole table selected in the page, int64 ascending."""
        starts = self._offsets()
        parts = [np.asarray(src.selected.indices, dtype=np.int64) + start
                 for src, start in zip(self._sources(), starts)]
        return np.unique(np.concatenate(parts))

    def split_rows(self, rows) -> list[np.ndarray]:
        """Rows of the whole table (int, ascending) as row numbers of each source (big,
        then the slots)."""
        rows = np.asarray(rows, dtype=np.int64)
        starts = self._offsets()
        cuts = np.searchsorted(rows, starts)
        return [rows[cuts[s]:cuts[s + 1]] - starts[s] for s in range(len(starts) - 1)]

    def set_slab_rows(self, rows):
        """Show only ``rows`` (int array ascending, rows of the whole table) in every
        projection; None shows every row."""
        from bokeh.core.property.validation import without_property_validation

        filters = [self.slab_filter] + self.slot_filters
        groups = [self.point_renderers] + self.slot_renderers

        @without_property_validation
        def assign(parts):
            # int32 arrays made here: bokeh's element-by-element check of them would cost
            # more than the rest of a slab change
            for filt, part in zip(filters, parts):
                filt.indices = np.ascontiguousarray(part, dtype=np.int32)

        if rows is None:
            targets = [self.all_rows] * len(filters)
        else:
            assign(self.split_rows(rows))
            # an empty slot's renderers keep their filter until rows arrive (this is called
            # again then): each switch has the page rebuild a view and draw again
            targets = [filt if k == 0 or len(self.slots[k - 1].data["orbit"]) else None
                       for k, filt in enumerate(filters)]
        for group, target in zip(groups, targets):
            for r in group:
                if target is not None and r.view.filter is not target:
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
        for r in self.point_renderers + self.fresh_renderers:
            for g in (r.glyph, r.selection_glyph, r.nonselection_glyph):
                if hasattr(g, "fill_color"):
                    g.fill_color = spec

    def show_seeds(self, xs, ys, colors, ids):
        self.seeds.data = dict(x=list(map(float, xs)), y=list(map(float, ys)), color=list(colors),
                               orbit=list(map(int, ids)))

    def set_axis_labels(self, labels, pair):
        self.main.xaxis.axis_label, self.main.yaxis.axis_label = labels[pair[0]], labels[pair[1]]
