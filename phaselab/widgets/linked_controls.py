"""The controls of the linked explorer: those of the plane explorer it shares (status line,
count, energy and parameter sliders, orbit buttons, colour menu, files) and its own: one
slider per held section coordinate and the slab of a slice (coordinate, centre, half-width).

Controls hold no orbit data and compute nothing; the explorer connects their events.
"""

from __future__ import annotations

import ipywidgets as W

from phaselab.widgets.controls import Controls, slider_grid

#: Starting half-width of the slab, as a fraction of its coordinate's window.
SLAB_FRACTION = 0.05


def _line(label, items):
    return W.HBox([W.HTML(f"<div class='pl-group'>{label}</div>")] + list(items),
                  layout=W.Layout(align_items="center"))


class LinkedControls(Controls):
    """Every control of one linked explorer (see :class:`~phaselab.widgets.controls.Controls`
    for the shared ones).

    Parameters
    ----------
    title, subtitle : str
    readout_id : str
    coordinates : sequence of (str, str)
        The section coordinates: (label as the axes write it, name of the model).
    style_rules : str
    """

    def __init__(self, title, subtitle, readout_id, coordinates, style_rules=""):
        super().__init__(title, subtitle, readout_id, style_rules)
        self.held: dict[str, W.FloatSlider] = {}
        self.slab_on = W.Checkbox(value=False, description="slab", indent=False, layout=W.Layout(width="64px"))
        self.slab_name = W.Dropdown(options=list(coordinates), value=coordinates[-1][1], layout=W.Layout(width="90px"))
        self.slab_center = W.FloatSlider(value=0.0, min=-1.0, max=1.0, step=0.01, description="centre",
                                         readout_format=".4g", continuous_update=True,
                                         style={"description_width": "44px"}, layout=W.Layout(width="300px"))
        self.slab_width = W.BoundedFloatText(value=0.05, min=1e-12, max=1e12, step=0.005, description="half-width",
                                             style={"description_width": "62px"}, layout=W.Layout(width="150px"))
        self.selection = W.HTML("")
        self.color.description = ""   # the row's label says it

    def add_held(self, name, description, value, lo, hi):
        """A slider for held section coordinate ``name`` (its value at the next seeds)."""
        lo, hi, step = slider_grid(lo, hi, value)
        s = W.FloatSlider(value=value, min=lo, max=hi, step=step, description=description, readout_format=".4g",
                          continuous_update=False, style={"description_width": "90px"},
                          layout=W.Layout(width="430px"))
        self.held[name] = s
        return s

    def set_slab_window(self, lo, hi, center, half_width):
        """Range of the centre slider for the slab's coordinate."""
        lo, hi, step = slider_grid(lo, hi, center)
        s = self.slab_center
        # widen first, then place the value, then narrow: the slider refuses min > max
        s.min = min(lo, s.min)
        s.max = max(hi, s.max)
        s.value = center
        s.min, s.max, s.step = lo, hi, step
        self.slab_width.value = float(f"{half_width:.2g}")

    def linked_layout(self, bokeh):
        header = W.HBox([self.title, self.count], layout=W.Layout(justify_content="space-between"))
        rows = [self.style, header, bokeh, self.readout]
        if self.held:
            rows.append(W.HTML("<div class='pl-sub'>held at the next seeds (a click gives the other two):</div>"))
            rows.append(W.VBox(list(self.held.values())))
        if self.sliders:
            rows.append(W.VBox(list(self.sliders.values())))
        rows.append(_line("slice", [self.slab_on, self.slab_name, self.slab_center, self.slab_width]))
        rows.append(_line("orbits", [self.undo, self.clear, self.selection]))
        rows.append(_line("colour", [self.color]))
        rows.append(_line("files", [self.stem, self.export, self.session_path, self.save, self.load]))
        rows.append(self.status)
        return rows
