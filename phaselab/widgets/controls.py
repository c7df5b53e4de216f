"""The explorer's controls (ipywidgets): header, sliders, buttons, view and colour choices,
periodic-orbit search, files, and a status line with a busy indicator.

Controls hold no orbit data and compute nothing; the explorer connects their events.
"""

from __future__ import annotations

import html
import math

import ipywidgets as W

from phaselab.widgets import theme

BUSY_DELAY = 0.25
"""Seconds before the busy indicator shows (quick answers do not flicker)."""

CSS = f"""
.phaselab-explorer {{ font-family: {theme.FONT}; color: {theme.INK}; background: #ffffff;
  border: 1px solid {theme.RULE}; border-radius: 6px; padding: 14px 16px 10px 16px; }}
.phaselab-explorer .pl-plot {{ contain: layout style paint; }}
.phaselab-explorer .pl-status, .phaselab-explorer .pl-count, .phaselab-explorer .pl-readout {{
  contain: layout style paint; }}
.phaselab-explorer .pl-title {{ font-size: 15px; font-weight: 600; letter-spacing: 0.01em; }}
.phaselab-explorer .pl-sub {{ font-size: 12px; color: {theme.MUTED}; }}
.phaselab-explorer .pl-count {{ font-size: 12px; color: {theme.MUTED}; text-align: right; }}
.phaselab-explorer .pl-readout {{ font-size: 12px; color: {theme.MUTED}; font-variant-numeric: tabular-nums;
  min-height: 16px; }}
.phaselab-explorer .pl-status {{ font-size: 12px; color: {theme.MUTED}; border-top: 1px solid {theme.RULE};
  padding-top: 6px; min-height: 18px; }}
.phaselab-explorer .pl-status.refused {{ color: {theme.REFUSED}; }}
.phaselab-explorer .pl-busy {{ color: {theme.INK}; opacity: 0; animation: pl-show 0s {BUSY_DELAY}s forwards; }}
.phaselab-explorer .pl-spin {{ display: inline-block; width: 9px; height: 9px; margin-right: 6px;
  border: 2px solid {theme.RULE}; border-top-color: {theme.INK}; border-radius: 50%;
  animation: pl-turn 0.8s linear infinite; vertical-align: -1px; }}
@keyframes pl-turn {{ to {{ transform: rotate(360deg); }} }}
@keyframes pl-show {{ to {{ opacity: 1; }} }}
.phaselab-explorer .pl-group {{ font-size: 11px; color: {theme.MUTED}; width: 70px; }}
.phaselab-explorer .widget-label {{ color: {theme.INK}; }}
.phaselab-explorer .widget-button {{ background: {theme.PANEL}; color: {theme.INK};
  border: 1px solid {theme.RULE}; border-radius: 4px; }}
.phaselab-explorer .widget-button:hover {{ background: #ebe8de; }}
"""


def slider_range(param):
    if param.range is not None:
        return param.range
    d = float(param.default)
    if d > 0:
        return (d / 4.0, d * 4.0)
    if d < 0:
        return (d * 4.0, d / 4.0)
    return (-1.0, 1.0)


def slider_grid(lo, hi, value):
    """A round step near (hi - lo) / 400, refined until ``value`` lies on the grid (the page
    snaps slider values to min + k * step), and the range widened to multiples of it."""
    raw = (hi - lo) / 400.0
    k = math.floor(math.log10(raw))
    step = next(m * 10.0 ** k for m in (1, 2, 5, 10) if m * 10.0 ** k >= raw * (1 - 1e-12))
    for _ in range(6):
        q = value / step
        if abs(q - round(q)) < 1e-7:
            break
        step /= 10.0
    lo = min(math.floor(lo / step + 1e-9) * step, value)
    hi = max(math.ceil(hi / step - 1e-9) * step, value)
    return lo, hi, step


def _label(text):
    return W.HTML(f"<div class='pl-group'>{html.escape(text)}</div>")


class Controls:
    """Every control of one explorer.

    Parameters
    ----------
    title, subtitle : str
    readout_id : str
        DOM id of the pointer readout (written by the plot's own script).
    style_rules : str
        Extra CSS (the rule hiding the saved picture while the live explorer is shown).
    """

    def __init__(self, title, subtitle, readout_id, style_rules=""):
        self.style = W.HTML(f"<style>{CSS}\n{style_rules}</style>")
        self.title = W.HTML(self._title_html(title, subtitle))
        self.count = W.HTML("", layout=W.Layout(width="300px"))
        self.readout = W.HTML(f"<div class='pl-readout' id='{readout_id}'>&nbsp;</div>")
        self.status = W.HTML("")
        self.sliders: dict[str, W.FloatSlider] = {}
        bl = W.Layout(width="auto")
        self.clear = W.Button(description="Clear", tooltip="Remove every orbit", layout=bl)
        self.undo = W.Button(description="Undo", tooltip="Take back the last seed, deletion or clear", layout=bl)
        self.delete = W.Button(description="Delete orbit", tooltip="Remove the selected orbit", layout=bl)
        self.more = W.Button(description="More crossings", tooltip="Double the crossings of the selected orbit",
                             layout=bl)
        self.pick = W.Dropdown(options=[("newest", 0)], value=0, description="orbit",
                               style={"description_width": "40px"}, layout=W.Layout(width="150px"))
        # view
        self.plane = W.Dropdown(options=[], description="plane", style={"description_width": "40px"},
                                layout=W.Layout(width="130px"))
        self.plane_value = W.FloatText(value=0.0, layout=W.Layout(width="70px"))
        self.axes = W.Dropdown(options=[], description="axes", style={"description_width": "36px"},
                               layout=W.Layout(width="170px"))
        self.direction = W.Dropdown(options=[("increasing", 1), ("decreasing", -1)], value=1,
                                    description="crossing", style={"description_width": "60px"},
                                    layout=W.Layout(width="175px"))
        self.equal = W.Checkbox(value=False, description="equal aspect", indent=False,
                                layout=W.Layout(width="120px"))
        # colour
        self.color = W.Dropdown(options=[("own colours", "")], value="", description="colour",
                                style={"description_width": "46px"}, layout=W.Layout(width="200px"))
        # one layout each: hiding the split box must not hide the ends
        self.low = W.FloatText(description="low", style={"description_width": "28px"}, layout=W.Layout(width="92px"))
        self.anchor = W.FloatText(description="split", style={"description_width": "30px"},
                                  layout=W.Layout(width="92px"))
        self.high = W.FloatText(description="high", style={"description_width": "30px"},
                                layout=W.Layout(width="92px"))
        self.scale_box = W.HBox([self.low, self.anchor, self.high])
        # structures
        self.click = W.Dropdown(options=[("starts an orbit", "orbit"), ("finds a periodic orbit", "periodic")],
                                value="orbit", description="a click", style={"description_width": "46px"},
                                layout=W.Layout(width="230px"))
        self.returns = W.BoundedIntText(value=1, min=1, max=64, description="returns",
                                       style={"description_width": "52px"}, layout=W.Layout(width="118px"))
        self.manifolds = W.Checkbox(value=False, description="manifolds of unstable ones", indent=False,
                                    layout=W.Layout(width="210px"))
        self.clear_structures = W.Button(description="Remove marks", tooltip="Remove periodic orbits and manifolds",
                                         layout=bl)
        self.key = W.HTML("")  # what the periodic-orbit marks and manifold lines mean
        # files
        self.stem = W.Text(value="section", placeholder="file name", layout=W.Layout(width="200px"))
        self.export = W.Button(description="Export", tooltip="Save the view as shown (figure) and the data", layout=bl)
        self.session_path = W.Text(value="explorer-session.json", layout=W.Layout(width="200px"))
        self.save = W.Button(description="Save session", tooltip="Seeds, energy, parameters and view to JSON",
                             layout=bl)
        self.load = W.Button(description="Load session", tooltip="Restore a saved session", layout=bl)

    @staticmethod
    def _title_html(title, subtitle):
        return (f"<div class='pl-title'>{html.escape(title)}</div>"
                f"<div class='pl-sub'>{html.escape(subtitle)}</div>")

    def set_title(self, title, subtitle):
        self.title.value = self._title_html(title, subtitle)

    def add_slider(self, name, description, value, lo, hi):
        lo, hi, step = slider_grid(lo, hi, value)
        s = W.FloatSlider(value=value, min=lo, max=hi, step=step, description=description, readout_format=".4g",
                          continuous_update=True, style={"description_width": "90px"},
                          layout=W.Layout(width="430px"))
        self.sliders[name] = s
        return s

    def layout(self, bokeh, kind, has_plane, has_structures):
        def line(items):
            return W.HBox(items, layout=W.Layout(align_items="center"))

        header = W.HBox([self.title, self.count], layout=W.Layout(justify_content="space-between"))
        rows = [self.style, header, bokeh, self.readout]
        if self.sliders:
            rows.append(W.VBox(list(self.sliders.values())))
        rows.append(line([_label("orbits"), self.pick, self.delete, self.more, self.undo, self.clear]))
        view = [self.equal]
        if has_plane:
            view = [self.plane, self.plane_value, self.axes, self.direction, self.equal]
        rows.append(line([_label("view")] + view))
        rows.append(line([_label("colour")] + [self.color, self.scale_box]))
        if has_structures:
            rows.append(line([_label("structures"), self.click, self.returns, self.manifolds,
                                self.clear_structures]))
            rows.append(line([_label(""), self.key]))
        rows.append(line([_label("files"), self.stem, self.export, self.session_path, self.save, self.load]))
        rows.append(self.status)
        return rows

    def say(self, text, refused=False, busy=()):
        """Show ``text``; ``busy`` lists what is running (shown with a turning mark after a
        short delay)."""
        cls = "pl-status refused" if refused else "pl-status"
        inner = html.escape(text)
        if busy:
            work = html.escape("; ".join(busy))
            inner = f"<span class='pl-busy'><span class='pl-spin'></span>{work}</span>" + \
                    (f" &middot; {inner}" if text else "")
        self.status.value = f"<div class='{cls}' data-busy='{1 if busy else 0}'>{inner}</div>"

    def set_count(self, n_orbits, n_points, pending=0):
        if n_orbits:
            text = f"{n_orbits} orbit{'s' if n_orbits != 1 else ''} &middot; {n_points} points"
        elif pending:
            text = f"{pending} orbit{'s' if pending != 1 else ''} on the way"
        else:
            text = "no orbits yet: click the plot"
        self.count.value = (f"<div class='pl-count' data-orbits='{n_orbits}' data-points='{n_points}' "
                            f"data-pending='{pending}'>{text}</div>")
