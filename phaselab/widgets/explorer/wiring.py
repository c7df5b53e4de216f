"""How the explorer's controls and figure events reach its commands: the ``_on_*`` handlers,
and the controls kept in step with the session."""

from __future__ import annotations

import time

from phaselab.errors import ParameterError
from phaselab.model.params import finite_number
from phaselab.widgets import computations, scales
from phaselab.widgets.controls import slider_range
from phaselab.widgets.worker import Outcome


class Wiring:
    """Callbacks of the figure (taps, drags) and of the controls (sliders, buttons, menus)
    turned into commands, and the controls set from the session without echoing back
    (mixed into :class:`Explorer`)."""

    def _wire_figure_events(self):
        """Taps and drags on the main figure start and move orbits."""
        from bokeh.events import DoubleTap, Tap

        self.figures.main.on_event(Tap, self._on_tap)
        # the page calls a second click within 300 ms a double tap, wherever it lands: it is
        # a click too (unless it repeats the last one on the same spot)
        self.figures.main.on_event(DoubleTap, self._on_double_tap)
        self.figures.probe.on_change("data", self._on_drag)
        self.figures.latest.on_change("data", self._on_drag)
        # a zoom or a pan changes what the picture kept in the notebook must show
        for rng in (self.figures.main.x_range, self.figures.main.y_range):
            for end in ("start", "end"):
                rng.on_change(end, lambda attr, old, new: self._schedule_picture())

    def _add_sliders(self, system, energy, energy_range, p0):
        """The energy slider (when the view has an energy) and one slider per parameter."""
        c = self.controls
        if self.view.uses_energy and energy is not None:
            lo, hi = energy_range if energy_range is not None else (energy - (abs(energy) or 1.0),
                                                                     energy + (abs(energy) or 1.0))
            lo, hi = finite_number(lo, "energy_range low"), finite_number(hi, "energy_range high")
            if not lo < hi:
                raise ParameterError(f"energy_range must be (low, high) with low < high, got {energy_range!r}")
            c.add_slider("energy", "energy E", energy, lo, hi).observe(self._on_energy_slider, "value")
        for prm in system.parameters:
            lo, hi = slider_range(prm)
            c.add_slider(prm.name, prm.name, p0[prm.name], lo, hi).observe(self._on_param_slider, "value")

    def _wire_controls(self, color_by, color_label):
        """Buttons, menus and the colour-scale fields call the commands."""
        c = self.controls
        c.clear.on_click(lambda _: self.clear())
        c.undo.on_click(lambda _: self.undo())
        c.delete.on_click(lambda _: self.delete(self.session.current.id if self.session.current else None))
        c.more.on_click(lambda _: self.more_crossings())
        c.pick.observe(self._on_pick, "value")
        c.export.on_click(lambda _: self._export_clicked())
        c.save.on_click(lambda _: self._save_clicked())
        c.load.on_click(lambda _: self._load_clicked())
        c.clear_structures.on_click(lambda _: self.clear_structures())
        c.manifolds.observe(lambda ch: self._on_manifolds(ch["new"]), "value")
        c.equal.observe(lambda ch: self.set_equal_aspect(ch["new"]), "value")
        self._fill_view_controls()
        c.plane.observe(self._on_plane_control, "value")
        c.plane_value.observe(self._on_plane_control, "value")
        c.axes.observe(self._on_plane_control, "value")
        c.direction.observe(self._on_plane_control, "value")
        options = [("own colours", "")] + [(scales.MENU_WORDS[n], n) for n in scales.MENU_WORDS]
        if color_by is not None and not (isinstance(color_by, str) and color_by in dict(options).values()):
            options.append((color_label or (color_by if isinstance(color_by, str) else "custom value"), "custom"))
        c.color.options = options
        c.color.value = "" if color_by is None else (color_by if isinstance(color_by, str) and
                                                     color_by in dict(options).values() else "custom")
        self._custom_color = color_by if c.color.value == "custom" else None
        c.color.observe(self._on_color_control, "value")
        for w in (c.low, c.anchor, c.high):
            w.observe(self._on_scale_control, "value")
        self._show_scale()

    def _on_tap(self, event):
        self.last_timing["tap_wall"] = time.time()
        x, y = event.x, event.y
        if x is None or y is None:
            return
        self._last_tap = (x, y)
        if self.controls.click.value == "periodic":
            self.find_periodic_orbit(x, y)
        else:
            self.add_seed(x, y)

    def _on_double_tap(self, event):
        last = self._last_tap
        if last is not None and event.x is not None and event.y is not None:
            (x0, x1), (y0, y1) = self.figures.view_ranges
            if abs(event.x - last[0]) <= 0.005 * abs(x1 - x0) and abs(event.y - last[1]) <= 0.005 * abs(y1 - y0):
                return  # a double click: its first click made the orbit already
        self._on_tap(event)

    def _on_drag(self, attr, old, new):
        if self._setting_controls or not self.session.orbits:
            return
        xs, ys = list(new.get("x", [])), list(new.get("y", []))
        if len(xs) != 1 or len(ys) != 1:
            return
        try:
            x, y = float(xs[0]), float(ys[0])
        except (TypeError, ValueError):
            return
        if (x, y) == self.session.newest.seed:
            return
        self.move_seed(x, y)

    @staticmethod
    def _same_value(a, b):
        # the page echoes slider values back with rounding noise: not a change
        try:
            return abs(float(a) - float(b)) <= 1e-9 * max(1.0, abs(float(b)))
        except (TypeError, ValueError):
            return False

    def _on_energy_slider(self, change):
        if self._setting_controls or self._same_value(change["new"], self.session.energy):
            return
        self.set_energy(change["new"])

    def _on_param_slider(self, change):
        if self._setting_controls:
            return
        name = next(k for k, s in self.sliders.items() if s is change["owner"])
        if self._same_value(change["new"], self.session.params[name]):
            return
        self.set_params(**{name: change["new"]})

    def _on_pick(self, change):
        if self._setting_controls:
            return
        self.select(change["new"] or None)

    def _on_color_control(self, change):
        if self._setting_controls:
            return
        v = change["new"]
        self.set_color(None if v == "" else (self._custom_color if v == "custom" else v))

    def _on_scale_control(self, change):
        if self._setting_controls or self.scale is None:
            return
        c = self.controls
        self.set_scale(c.low.value, c.anchor.value if self.scale.anchor is not None else None, c.high.value)

    def _on_manifolds(self, on):
        if self._setting_controls or not on:
            self._draw_structures()
            return
        todo = [f for f in self.structures if f.orbit.stability in ("unstable", "inverse-unstable") and not f.manifolds]
        if not todo:
            return
        view = self.view

        def compute():
            return [computations.grow_manifolds(view, f.orbit) for f in todo]

        def deliver(out: Outcome):
            if out.error is not None:
                self._report(out, what="manifolds")
                return
            for f, (lines, note) in zip(todo, out.value):
                f.manifolds, f.manifold_note = lines, note
            self._draw_structures()
            notes = [f.manifold_note for f in todo if f.manifold_note]
            self._say("Drew the manifolds" + (f" ({'; '.join(notes)})." if notes else "."))

        self._submit("manifolds", "growing manifolds", compute, deliver)

    def _on_plane_control(self, change):
        if self._setting_controls:
            return
        c = self.controls
        comp = c.plane.value
        pair = c.axes.value
        if comp is None or pair is None:
            return
        rest = [n for n in self.view.names if n != comp and n not in pair]
        if len(rest) != 1:
            self._fill_view_controls()
            return
        self.set_view(plane={comp: float(c.plane_value.value)}, solve_for=rest[0], sign=int(c.direction.value))

    def _on_compile_event(self, event, what):
        # called from any thread: hand it to the widgets' thread (what numba really compiles is
        # noted at once, so that the end, which may be applied first, names it right)
        now = time.monotonic()
        if event == "compiling":
            self._compile_real.add(what)

        def apply():
            if event == "start":
                self._compiling.append(what)
                self._compile_started.setdefault(what, now)
                self._show_status()
                self._tick()
                return
            if event == "compiling":          # numba is really compiling it, not loading it
                self._show_status()
                return
            if what in self._compiling:
                self._compiling.remove(what)
                started = self._compile_started.pop(what, None)
                verb = "compiled" if what in self._compile_real else "loaded"
                self._compile_real.discard(what)
                if started is not None and now - started >= 1.0:  # the end of a wait that was shown
                    self._compile_note = (f"{verb} {what} in {now - started:.1f} s", now)
            self._show_status()

        self.jobs.call_soon(apply, self._loop)

    def _update_pick(self):
        self._setting_controls = True
        try:
            options = [("newest", 0)] + [(f"orbit {o.id}", o.id) for o in self.session.orbits]
            sel = self.session.selected
            self.controls.pick.options = options
            self.controls.pick.value = sel if sel in [v for _, v in options] else 0
        finally:
            self._setting_controls = False

    def _sync_sliders(self):
        self._setting_controls = True
        try:
            if "energy" in self.sliders and self.session.energy is not None:
                self.sliders["energy"].value = self.session.energy
            for name, s in self.sliders.items():
                if name != "energy":
                    s.value = self.session.params[name]
        finally:
            self._setting_controls = False

    def _fill_view_controls(self):
        c = self.controls
        self._setting_controls = True
        try:
            if self.view.kind != "section" or self.system.dof != 2:
                return
            names = self.view.names
            comp = next(iter(self.view.plane))
            label = self.view.label_of  # menus write names as the axes do
            c.plane.options = [(f"{label(n)} =", n) for n in names]
            c.plane.value = comp
            c.plane_value.value = float(self.view.plane[comp])
            rest = [n for n in names if n != comp]
            pairs = []
            for k in range(3):
                pair = tuple(n for j, n in enumerate(rest) if j != k)
                pairs.append((f"{label(pair[0])}, {label(pair[1])} ({label(rest[k])} solved)", pair))
            c.axes.options = pairs
            c.axes.value = tuple(n for n in rest if n != self.view.solve_for)
            c.direction.value = self.view.sign
        finally:
            self._setting_controls = False

    def _show_scale(self):
        c = self.controls
        self._setting_controls = True
        try:
            if self.scale is None:
                c.scale_box.layout.display = "none"
                return
            c.scale_box.layout.display = ""
            c.low.value, c.high.value = self.scale.low, self.scale.high
            c.anchor.layout.display = "" if self.scale.anchor is not None else "none"
            if self.scale.anchor is not None:
                c.anchor.value = self.scale.anchor
        finally:
            self._setting_controls = False
