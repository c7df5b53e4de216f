"""The explorer's bokeh figures: the main plot, its colour bar and two companion panels.

Built once per explorer; afterwards only data sources and a few properties change, which is
what jupyter_bokeh sends to the page. The newest orbit has a source of its own
(``newest``), so a drag or a click sends one orbit's points, not all of them.

Main plot layers, bottom to top: shading outside the allowed region, level curves, the
boundary, orbit points, the selected orbit's highlight, where orbits stopped early (a
cross), periodic orbits (a shape per stability, the same as in static figures), manifolds,
seed rings and the ringed (draggable) newest seed.

Reading the pointer costs no kernel round trip: a hover readout on the points (orbit,
crossing, coordinates, value) and a pointer position written straight into the page.
"""

from __future__ import annotations

import numpy as np

from phaselab.widgets import theme
from phaselab.widgets.page_sync import page_sync
from phaselab.widgets.shading import polygon_columns

#: matplotlib marker codes of phaselab.export.structures.MARKERS -> bokeh marker names
BOKEH_MARKERS = {"o": "circle", "X": "x", "^": "triangle", "s": "square", "D": "diamond"}

FRAME_W, FRAME_H = 440, 400

#: Page code run when the pointer enters the main plot and when its view is laid out: the drag
#: tool's views on the page stop treating a click as a selection of the ringed seed. Left as
#: it is, the tool selects (or clears) the ring's point on every click, and the page draws the
#: whole plot for that alone, then once more when the click's points arrive. Dragging is
#: untouched (a drag selects the ring as it starts). Without the expected method (another
#: BokehJS) nothing changes.
QUIET_TAP = """
const index = window.Bokeh && window.Bokeh.index;
if (!index || typeof index.find_all !== 'function') return;
for (const view of index.find_all(tool)) {
    if (view.__phaselab_quiet_tap || typeof view._tap !== 'function' || tool.add) continue;
    view.__phaselab_quiet_tap = true;
    view._tap = () => {};
}
"""

#: Page code run at the same moments: the notebook's bridge to the kernel (it listens to the
#: document through a callback calling its ``_change_event``) hears only the changes made on
#: the page. Left as it is, it sends every change the kernel made back to the kernel once the
#: page has applied it (bokeh marks those ``sync = false``; the bridge does not look): six
#: messages a click, each making the kernel busy and the notebook page redraw its busy signs,
#: and a streamed echo appended to the kernel's copy of the points a second time.
SYNC_ONLY = """
const doc = tool.document;
if (doc == null || doc.__phaselab_sync_only || !(doc._callbacks instanceof Map)) return;
for (const [callback, batches] of [...doc._callbacks]) {
    if (!String(callback).includes('_change_event')) continue;
    doc.__phaselab_sync_only = true;
    const page_only = (event) => {
        if (event.sync === false) return;
        if (Array.isArray(event.events) && event.events.every((e) => e.sync === false)) return;
        callback(event);
    };
    doc._callbacks.delete(callback);
    doc._callbacks.set(page_only, batches);
}
"""


def _style(fig, xlabel, ylabel):
    fig.background_fill_color = theme.GROUND
    fig.border_fill_color = "#ffffff"
    fig.outline_line_color = theme.RULE
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


def _panel_marks(fig, source, dots, alpha):
    """A companion panel's renderer: a curve, or one dot per value (``dots``)."""
    if dots:
        return fig.scatter("x", "y", source=source, size=2.5, marker="circle", line_color=theme.ORBIT_COLORS[0],
                           fill_color=theme.ORBIT_COLORS[0], line_alpha=alpha, fill_alpha=alpha)
    return fig.line("x", "y", source=source, line_width=1.0, line_color=theme.ORBIT_COLORS[0], line_alpha=alpha)


def empty_points():
    return dict(x=np.empty(0, np.float64), y=np.empty(0, np.float64), shade=np.empty(0, np.int32),
                orbit=np.empty(0, np.int32), crossing=np.empty(0, np.int32), value=np.empty(0, np.float64))


def point_columns(records, n_colors):
    """The points of ``records`` as data-source columns (numbers only: binary on the wire)."""
    shown = [r for r in records if r.state is not None and len(r.points)]
    if not shown:
        return empty_points()
    return dict(
        x=np.concatenate([r.points[:, 0] for r in shown]).astype(np.float64),
        y=np.concatenate([r.points[:, 1] for r in shown]).astype(np.float64),
        shade=np.concatenate([np.full(len(r.points), (r.id - 1) % n_colors, np.int32) for r in shown]),
        orbit=np.concatenate([np.full(len(r.points), r.id, np.int32) for r in shown]),
        crossing=np.concatenate([np.arange(1, len(r.points) + 1, dtype=np.int32) for r in shown]),
        value=np.concatenate([np.full(len(r.points), r.scalar) for r in shown]).astype(np.float64))


class Figures:
    """The bokeh models of one explorer.

    Attributes
    ----------
    main : bokeh figure
    points, newest : ColumnDataSource
        Points of the older orbits, and of the newest orbit.
    selected, stops, seeds, latest, probe, periodic, forbidden, lines, accents :
    unstable, stable : ColumnDataSource
        Highlight, stop marks, seed rings, the draggable seed, the drag position sent
        while dragging, periodic orbits, shading, curves, manifold branches.
    bar : bokeh figure holding the colour bar (hidden unless colouring by a value)
    panel1, panel2 : bokeh figures of the selected orbit; ``panel1_source``, ``panel2_source``
    layout : the whole bokeh layout (one jupyter_bokeh model)
    """

    def __init__(self, labels, ranges, panels, readout_id, panel_dots=False):
        from bokeh import events
        from bokeh.layouts import column, row
        from bokeh.models import (BasicTickFormatter, BoxZoomTool, ColorBar, ColumnDataSource, CustomJS,
                                  HoverTool, Label, LinearColorMapper, PanTool, PointDrawTool, ResetTool,
                                  WheelZoomTool)
        from bokeh.plotting import figure

        (x0, x1), (y0, y1) = ranges
        main = figure(frame_width=FRAME_W, frame_height=FRAME_H, x_range=(x0, x1), y_range=(y0, y1),
                      tools=[], output_backend="canvas", name="phaselab-main", min_border_right=12)
        _style(main, *labels)
        # the forbidden region: filled polygons ending exactly on the boundary curve
        self.forbidden = ColumnDataSource(dict(xs=[], ys=[]), name="phaselab-forbidden")
        main.multi_polygons("xs", "ys", source=self.forbidden, fill_color=theme.FORBIDDEN, line_color=None,
                            level="underlay")
        self.lines = ColumnDataSource(dict(xs=[], ys=[]), name="phaselab-lines")
        main.multi_line("xs", "ys", source=self.lines, line_color=theme.MUTED, line_width=0.8, line_alpha=0.55)
        self.accents = ColumnDataSource(dict(xs=[], ys=[]), name="phaselab-boundary")
        main.multi_line("xs", "ys", source=self.accents, line_color=theme.BOUNDARY, line_width=1.4)

        n = len(theme.ORBIT_COLORS)
        self.orbit_mapper = LinearColorMapper(palette=list(theme.ORBIT_COLORS), low=-0.5, high=n - 0.5)
        self.scalar_mapper = LinearColorMapper(palette=["#888888"] * 2, low=0.0, high=1.0,
                                               nan_color=theme.MISSING_COLOR)
        self.points = ColumnDataSource(empty_points(), name="phaselab-points")
        self.newest = ColumnDataSource(empty_points(), name="phaselab-newest")
        own = {"field": "shade", "transform": self.orbit_mapper}
        self.point_renderers = [
            main.scatter("x", "y", source=src, size=2.6, fill_color=own, line_color=None, fill_alpha=0.9)
            for src in (self.points, self.newest)]
        self.selected = ColumnDataSource(dict(x=[], y=[]), name="phaselab-selected")
        main.scatter("x", "y", source=self.selected, size=6.0, fill_color=None, line_color=theme.INK,
                     line_width=0.8, line_alpha=0.7)
        self.stops = ColumnDataSource(dict(x=[], y=[], orbit=[], why=[]), name="phaselab-stops")
        stop_r = main.scatter("x", "y", source=self.stops, marker="x", size=11, line_color=theme.REFUSED,
                              line_width=2.0)
        self.unstable = ColumnDataSource(dict(xs=[], ys=[]), name="phaselab-unstable")
        self.stable = ColumnDataSource(dict(xs=[], ys=[]), name="phaselab-stable")
        from phaselab.export.structures import BRANCH_STYLE, MARKERS

        main.multi_line("xs", "ys", source=self.unstable, line_color=BRANCH_STYLE["unstable"][0], line_width=1.1)
        main.multi_line("xs", "ys", source=self.stable, line_color=BRANCH_STYLE["stable"][0], line_width=1.1,
                        line_dash="dashed")
        self.seeds = ColumnDataSource(dict(x=[], y=[], color=[], orbit=[]), name="phaselab-seeds")
        main.scatter("x", "y", source=self.seeds, size=8, marker="circle", fill_color="#ffffff",
                     line_color="color", line_width=2.0)
        self.latest = ColumnDataSource(dict(x=[], y=[]), name="phaselab-latest")
        latest = main.scatter("x", "y", source=self.latest, size=15, marker="circle", fill_color=None,
                              line_color=theme.INK, line_width=1.8)
        # where a click asked for an orbit that is still being computed (drawn at once)
        self.pending = ColumnDataSource(dict(x=[], y=[]), name="phaselab-pending")
        main.scatter("x", "y", source=self.pending, size=13, marker="circle_dot", fill_color=None,
                     line_color=theme.MUTED, line_width=1.6, line_dash="dotted")
        # periodic orbits above the seed rings: a mark is never hidden under a ring
        self.periodic = ColumnDataSource(dict(x=[], y=[], marker=[], color=[], what=[]), name="phaselab-periodic")
        po_r = main.scatter("x", "y", source=self.periodic, marker="marker", size=12, fill_color="color",
                            line_color="color", line_width=2.2, fill_alpha=0.85)
        self.markers = MARKERS
        # the drag position, sent to the kernel while the pointer moves (the draw tool itself
        # reports only when the button is released); only while the ring is held (selected by
        # the drag tool): the ring moved by the kernel (every new orbit) sends nothing back
        self.probe = ColumnDataSource(dict(x=[], y=[]), name="phaselab-probe")
        self.latest.js_on_change("change", CustomJS(args=dict(probe=self.probe), code="""
            const d = cb_obj.data;
            if (d.x.length !== 1 || cb_obj.selected.indices.length === 0) return;
            const x = d.x[0], y = d.y[0];
            const p = probe.data;
            if (p.x.length === 1 && p.x[0] === x && p.y[0] === y) return;
            probe.data = {x: [x], y: [y]};
        """))
        drag = PointDrawTool(renderers=[latest], add=False, drag=True, description="Drag the ringed seed")
        wheel = WheelZoomTool()
        # the readout under the plot: the orbit point under the pointer (orbit, crossing,
        # coordinates, the value it is coloured by), else the pointer's coordinates; written
        # into the page directly, no message to the kernel
        self.color_bar_title = ColumnDataSource(dict(t=[""]), name="phaselab-value-name")
        # names travel as data, never as script text
        self.axis_names = ColumnDataSource(dict(x=[labels[0]], y=[labels[1]]), name="phaselab-axis-names")
        hover = HoverTool(renderers=self.point_renderers, tooltips=None, callback=CustomJS(
            args=dict(name=self.color_bar_title, axes=self.axis_names, rid=readout_id), code="""
            const el = document.getElementById(rid);
            if (!el) return;
            const g = cb_data.geometry, idx = cb_data.index.indices;
            const st = window.__phaselab_hover || (window.__phaselab_hover = {});
            const key = g.sx + ',' + g.sy;
            if (!idx.length) { if (st.key === key && st.hit) return; st.key = key; st.hit = false; return; }
            st.key = key; st.hit = true;
            const d = cb_data.renderer.data_source.data, i = idx[0];
            const xl = axes.data.x[0], yl = axes.data.y[0];
            let text = `orbit ${d.orbit[i]}, crossing ${d.crossing[i]}:  ${xl} = ${d.x[i].toPrecision(5)},  ${yl} = ${d.y[i].toPrecision(5)}`;
            const v = d.value[i], nm = name.data.t[0];
            if (nm && Number.isFinite(v)) text += `,  ${nm} ${v.toPrecision(4)}`;
            el.textContent = text;
        """))
        self.hover = hover
        hover_po = HoverTool(renderers=[po_r], tooltips=[("", "@what")])
        hover_stop = HoverTool(renderers=[stop_r], tooltips=[("orbit @orbit stopped", "@why")])
        main.add_tools(drag, PanTool(), wheel, BoxZoomTool(), ResetTool(), hover, hover_po, hover_stop)
        main.toolbar.active_drag = drag
        quiet_tap = CustomJS(args=dict(tool=drag), code=QUIET_TAP)
        sync_only = CustomJS(args=dict(tool=drag), code=SYNC_ONLY)
        for hook in (quiet_tap, sync_only):
            main.js_on_event(events.MouseEnter, hook)
            main.js_on_change("inner_width", hook)
        main.toolbar.active_scroll = wheel
        main.js_on_event(events.MouseMove, CustomJS(args=dict(axes=self.axis_names, rid=readout_id), code="""
            const el = document.getElementById(rid);
            const st = window.__phaselab_hover || {};
            if (!el || (st.hit && st.key === cb_obj.sx + ',' + cb_obj.sy)) return;
            el.textContent = `${axes.data.x[0]} = ${cb_obj.x.toPrecision(5)},  ${axes.data.y[0]} = ${cb_obj.y.toPrecision(5)}`;
        """))
        self.main = main
        self.drag_tool = drag
        # set by the page when a view of the document has been built (see Explorer)
        self.sync = page_sync()
        main.tags = self.sync.models  # part of the document without a view of their own

        bar = figure(width=110, height=FRAME_H + 60, toolbar_location=None, tools=[], min_border=0,
                     outline_line_color=None, name="phaselab-colorbar", x_range=(0, 1), y_range=(0, 1))
        bar.axis.visible = False
        bar.grid.visible = False
        bar.background_fill_color = None
        bar.border_fill_color = None
        self.color_bar = ColorBar(color_mapper=self.scalar_mapper, title="", width=12,
                                  major_label_text_font_size="10px", background_fill_alpha=0.0,
                                  location=(0, 0), padding=4)
        bar.add_layout(self.color_bar, "left")
        # the title runs along the bar (it may be long: unit, sign, band)
        # (to the right of the bar and its numbers, reading upwards from the bar's foot)
        self.bar_title = Label(x=64, y=34, x_units="screen", y_units="screen", angle=np.pi / 2, text="",
                               text_font_size="10.5px", text_color=theme.INK, text_baseline="bottom",
                               name="phaselab-colorbar-title")
        bar.add_layout(self.bar_title)
        bar.visible = False
        self.bar = bar

        pw = 300
        (t1, x1l, y1l), (t2, x2l, y2l) = panels
        # fixed ranges set with the data: a range computed from an empty source would leave the
        # page without a starting window (a console warning on every redraw)
        p1 = figure(width=pw, height=250, tools="pan,wheel_zoom,reset", title=t1, name="phaselab-panel1",
                    x_range=(0.0, 1.0), y_range=(0.0, 1.0))
        _style(p1, x1l, y1l)
        self.panel1_source = ColumnDataSource(dict(x=[], y=[]), name="phaselab-panel1-data")
        self.panel1_marks = _panel_marks(p1, self.panel1_source, panel_dots, alpha=0.85)
        p2 = figure(width=pw, height=216, tools="pan,wheel_zoom,reset", title=t2, name="phaselab-panel2",
                    x_range=(0.0, 1.0), y_range=(0.0, 1.0))
        _style(p2, x2l, y2l)
        p2.yaxis.formatter = BasicTickFormatter(use_scientific=True, precision=1, power_limit_low=-2)
        self.panel2_source = ColumnDataSource(dict(x=[], y=[]), name="phaselab-panel2-data")
        self.panel2_marks = _panel_marks(p2, self.panel2_source, panel_dots, alpha=1.0)
        for fig in (p1, p2):
            fig.grid.visible = False  # fewer styled parts to paint on every new orbit
        self.panel1, self.panel2 = p1, p2
        self.layout = row(main, bar, column(p1, p2, spacing=10), spacing=8)

    # ------------------------------------------------------------------ drawing
    def set_frame(self, frame):
        self.lines.data = dict(xs=[c[:, 0] for c in frame.lines], ys=[c[:, 1] for c in frame.lines])
        self.accents.data = dict(xs=[c[:, 0] for c in frame.accents], ys=[c[:, 1] for c in frame.accents])
        self.forbidden.data = polygon_columns(frame.shade) if frame.shade else dict(xs=[], ys=[])

    def color_panels(self, color):
        """Draw the companion panels' curves (or dots) in ``color``."""
        for marks in (self.panel1_marks, self.panel2_marks):
            marks.glyph.line_color = color
            if hasattr(marks.glyph, "fill_color"):
                marks.glyph.fill_color = color

    def show_panels(self, curve1, curve2):
        """The companion panels' curves, ``(x, y)`` each, with windows fitted to them (5 %
        margins); empty curves leave the windows where they are."""
        for fig, src, (x, y) in ((self.panel1, self.panel1_source, curve1), (self.panel2, self.panel2_source, curve2)):
            x, y = np.asarray(x, float), np.asarray(y, float)
            src.data = dict(x=x, y=y)
            for rng, v in ((fig.x_range, x), (fig.y_range, y)):
                v = v[np.isfinite(v)]
                if not v.size:
                    continue
                lo, hi = float(v.min()), float(v.max())
                pad = 0.05 * (hi - lo) if hi > lo else max(0.05 * abs(lo), 1e-12)
                rng.start, rng.end = lo - pad, hi + pad
                rng.reset_start, rng.reset_end = lo - pad, hi + pad

    def set_axis_labels(self, labels):
        self.main.xaxis.axis_label, self.main.yaxis.axis_label = labels
        self.axis_names.data = dict(x=[labels[0]], y=[labels[1]])

    def set_panels(self, panels):
        for fig, (title, xl, yl) in zip((self.panel1, self.panel2), panels):
            fig.title.text = title
            fig.xaxis.axis_label, fig.yaxis.axis_label = xl, yl

    def color_by_value(self, scale):
        """Colour points (and seed rings) by the ``value`` column on ``scale``; None: own colours."""
        if scale is None:
            spec = {"field": "shade", "transform": self.orbit_mapper}
            self.bar.visible = False
            self.color_bar_title.data = dict(t=[""])
        else:
            self.scalar_mapper.palette = scale.palette()
            self.scalar_mapper.low, self.scalar_mapper.high = scale.low, scale.high
            self.bar_title.text = scale.title
            spec = {"field": "value", "transform": self.scalar_mapper}
            self.bar.visible = True
            self.color_bar_title.data = dict(t=[scale.label.split(" (")[0]])
        for r in self.point_renderers:
            r.glyph.fill_color = spec

    def show_orbits(self, orbits, newest_only=False):
        """All orbits: the older ones in ``points``, the last in ``newest`` (only that one
        with ``newest_only``)."""
        n = len(theme.ORBIT_COLORS)
        if not newest_only:
            self.points.data = point_columns(orbits[:-1], n)
        self.newest.data = point_columns(orbits[-1:], n)

    def show_added(self, previous, records):
        """Records were appended: the former newest and all but the last new one join the
        older points (streamed), the last one becomes the newest."""
        n = len(theme.ORBIT_COLORS)
        cols = point_columns(([previous] if previous is not None else []) + records[:-1], n)
        if len(cols["x"]):
            self.points.stream(cols)
        self.newest.data = point_columns(records[-1:], n)

    def show_seeds(self, shown, ring_colors, newest, keep_latest=False):
        """Seed rings (in the orbits' colours or on the colour scale), stop marks, and the
        ringed newest seed (left where the page put it while it is being dragged)."""
        self.seeds.data = dict(x=[o.seed[0] for o in shown], y=[o.seed[1] for o in shown],
                               color=list(ring_colors), orbit=[o.id for o in shown])
        stops = [o for o in shown if o.stop]
        self.stops.data = dict(x=[o.stop[0] for o in stops], y=[o.stop[1] for o in stops],
                               orbit=[o.id for o in stops], why=[o.note for o in stops])
        if newest is not None and newest.state is not None:
            if not keep_latest:
                self.latest.data = dict(x=[newest.seed[0]], y=[newest.seed[1]])
        else:
            self.latest.data = dict(x=[], y=[])

    def show_pending(self, points):
        """Placeholders where orbits were asked for and are still on the way, ``points`` (n, 2)."""
        pts = np.asarray(points, float).reshape(-1, 2)
        self.pending.data = dict(x=pts[:, 0].tolist(), y=pts[:, 1].tolist())

    def show_selected(self, rec):
        if rec is None or rec.state is None:
            self.selected.data = dict(x=[], y=[])
        else:
            self.selected.data = dict(x=rec.points[:, 0], y=rec.points[:, 1])

    def show_structures(self, structures, manifolds=False):
        """Periodic orbits (a shape and colour per stability, as in static figures) and, with
        ``manifolds``, their stable (dashed) and unstable branches."""
        xs, ys, marks, cols, what = [], [], [], [], []
        for s in structures:
            marker, colour = self.markers.get(s.orbit.stability, ("D", "#333333"))
            r = s.orbit.residue
            label = f"period {s.orbit.crossings}, {s.orbit.stability}" + ("" if r is None else f", residue {r:.4g}")
            for a, b in s.points:
                xs.append(float(a))
                ys.append(float(b))
                marks.append(BOKEH_MARKERS.get(marker, "diamond"))
                cols.append(colour)
                what.append(label)
        self.periodic.data = dict(x=xs, y=ys, marker=marks, color=cols, what=what)
        lines = {"unstable": [], "stable": []}
        if manifolds:
            for s in structures:
                for branch, ls in s.manifolds:
                    lines[branch].extend(ls)
        self.unstable.data = dict(xs=[c[:, 0] for c in lines["unstable"]], ys=[c[:, 1] for c in lines["unstable"]])
        self.stable.data = dict(xs=[c[:, 0] for c in lines["stable"]], ys=[c[:, 1] for c in lines["stable"]])

    def set_ranges(self, ranges):
        (x0, x1), (y0, y1) = ranges
        self.main.x_range.start, self.main.x_range.end = x0, x1
        self.main.y_range.start, self.main.y_range.end = y0, y1

    @property
    def view_ranges(self):
        xr, yr = self.main.x_range, self.main.y_range
        return ((float(xr.start), float(xr.end)), (float(yr.start), float(yr.end)))

    def all_points(self):
        """Columns of every orbit's points (older ones, then the newest)."""
        a, b = self.points.data, self.newest.data
        return {k: np.concatenate([np.asarray(a[k]), np.asarray(b[k])]) for k in ("x", "y", "orbit", "value", "shade")}
