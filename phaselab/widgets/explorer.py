"""``phaselab.explore``: an interactive surface of section for a JupyterLab notebook.

The explorer wires four parts together and does little else:

* :class:`~phaselab.widgets.session.Session` holds the orbits, the undo history, the
  selection, the energy and the parameters, and says what each change changed;
* :class:`~phaselab.widgets.worker.JobRunner` runs every computation (orbits, colour values,
  companion curves, frames, periodic orbits, manifolds, pictures) in a worker thread,
  newest request first, so the notebook stays responsive;
* :class:`~phaselab.widgets.figures.Figures` draws (bokeh, through jupyter_bokeh);
* :class:`~phaselab.widgets.controls.Controls` are the ipywidgets around the plot.

A click starts an orbit (for a section the missing momentum is solved from the energy; a
click outside the allowed region is refused with the reason), the ringed newest seed can be
dragged and its orbit follows, sliders recompute every orbit, and the status line says what
is running (compiling kernels the first time, computing n orbits) with a busy mark.

Section points are model results; where they inform a design decision confirm them with
validated tools and the responsible engineers.
"""

from __future__ import annotations

import re
import secrets
import time
from pathlib import Path

import ipywidgets as W
import numpy as np

from phaselab.compute import inputs
from phaselab.errors import ParameterError, PhaselabError
from phaselab.model.params import finite_number
from phaselab.widgets import messages, scales, tasks, theme
from phaselab.widgets.messages import number  # noqa: F401  (part of this module's surface)
from phaselab.widgets.controls import Controls, slider_range
from phaselab.widgets.session import OrbitRecord, Session, read_session, write_session
from phaselab.widgets.views import make_view
from phaselab.widgets.worker import JobRunner, Outcome, _current_loop

__all__ = ["explore", "Explorer", "OrbitRecord", "load_bokehjs"]

CHAOS_INDICATORS = scales.CHAOS_INDICATORS
EXPORT_FORMATS = (".png", ".svg", ".pdf", ".csv", ".nc", ".html")
#: Seconds of quiet after which the saved-notebook picture is redrawn.
PICTURE_DELAY = 6.0
#: Seconds of quiet after which the companion panels follow the selected orbit.
TRACE_DELAY = 0.3


def load_bokehjs(force=True):
    """Put the core BokehJS library into the page (inline: no network)."""
    from phaselab.widgets.page import load_bokehjs as load

    load()


def _slug(text) -> str:
    s = re.sub(r"[^A-Za-z0-9._-]+", "-", str(text)).strip("-.")
    return s or "explorer"


class Explorer(W.VBox):
    """The interactive explorer (see :func:`explore` for the parameters).

    Attributes
    ----------
    orbits : list of OrbitRecord
    params : dict of str to float
    energy : float or None
    figures : phaselab.widgets.figures.Figures
    controls : phaselab.widgets.controls.Controls
    session : phaselab.widgets.session.Session
    status : str
        The text of the status line (without the busy part).
    busy : list of str
        What is running now.
    structures : list
        Periodic orbits found (with their manifolds).
    """

    def __init__(self, system, energy=None, plane=None, solve_for=None, crossings=300, params=None,
                 ranges=None, sign=+1, energy_range=None, color_by=None, color_label=None,
                 background=True, export_dir=".", export_formats=(".png", ".csv"), duration=None,
                 method="auto", dt=None, title=None, scale=None, session=None):
        from phaselab.widgets.figures import Figures
        from phaselab.widgets.page import LiveBokehModel, StaticPicture

        self.system = system
        self._view_options = dict(crossings=crossings, ranges=ranges, duration=duration, method=method, dt=dt)
        self.view = make_view(system, plane=plane, solve_for=solve_for, sign=sign, **self._view_options)
        p0 = dict(system.params)
        if params:
            system.param_values(params)  # names and values checked, errors name the problem
            p0.update({str(getattr(k, "name", k)): float(v) for k, v in params.items()})
        if self.view.uses_energy and self.view.kind == "section":
            if energy is None:
                raise ParameterError("a surface of section needs an energy: pass energy=E (units of H)")
            energy = finite_number(energy, "energy")
        elif energy is not None:
            energy = finite_number(energy, "energy")
        self.crossings = int(self.view.crossings)
        self.session = Session(energy, p0, theme.ORBIT_COLORS)
        self.export_dir = Path(export_dir)
        self.export_formats = tuple(str(f) if str(f).startswith(".") else f".{f}" for f in export_formats)
        bad = [f for f in self.export_formats if f not in EXPORT_FORMATS]
        if bad or not self.export_formats:
            raise ParameterError(f"export_formats must be some of {', '.join(EXPORT_FORMATS)}; got {export_formats!r}")
        self._check_color_by(color_by)
        self.color_by = color_by
        self.scale = scales.scale_for(color_by, color_label) if color_by is not None else None
        if scale is not None and self.scale is not None:
            self.scale = self.scale.with_limits(*scale)
        self._scale_fixed = scale is not None or (isinstance(color_by, str) and color_by in scales.DEFAULT_SCALES)
        self._color_label = color_label
        self.jobs = JobRunner(background)
        self.idle_jobs = JobRunner(background)
        self._loop = _current_loop()
        self.last_timing: dict[str, float] = {}
        self.last_error = None
        self._message, self._refused = "", False
        self._busy: dict[str, str] = {}
        self._compiling: list[str] = []
        self._pending = 0
        self._serial = 0
        self._frame = None
        self._last_tap = None
        self._fitted = None
        self.structures: list = []
        self._quiet = False
        self._uid = secrets.token_hex(6)
        self.name = title or getattr(system, "name", "system")

        self.view.fit_ranges(energy, p0)
        self._fitted = self.view.ranges
        self.picture = StaticPicture(self._uid)
        self.controls = c = Controls(self.name, self.view.describe(), f"pl-readout-{self._uid}",
                                     self.picture.hide_rule)
        self.figures = Figures(self.view.axis_labels, self.view.ranges, self.view.panels(), f"pl-readout-{self._uid}")
        from bokeh.events import DoubleTap, Tap

        self.figures.main.on_event(Tap, self._on_tap)
        # the page calls a second click within 300 ms a double tap, wherever it lands: it is
        # a click too (unless it repeats the last one on the same spot)
        self.figures.main.on_event(DoubleTap, self._on_double_tap)
        self.figures.probe.on_change("data", self._on_drag)
        self.figures.latest.on_change("data", self._on_drag)
        self.bokeh = LiveBokehModel(self.figures.layout, combine_events=False)
        self.bokeh.add_class("pl-plot")
        # a view built between a display and its first patch may have missed changes: when
        # the page says a view is ready, send the current document if anything changed
        self.figures.main.js_on_change("inner_width", self.figures.ready_callback)
        self.figures.ready.on_change("data", lambda attr, old, new: self.bokeh.refresh(send=True))
        self.bokeh.refresh(send=True)

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
        c.stem.value = f"{_slug(self.name)}-{self.view.kind}"
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
        options = [("own colours", "")] + [(n, n) for n in ("megno", "lyapunov", "fli", "sali", "frequency",
                                                            "diffusion")]
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

        has_plane = self.view.kind == "section" and system.dof == 2
        has_structures = self.view.kind in ("section", "map", "strobe")
        super().__init__(c.layout(self.bokeh, self.view.kind, has_plane, has_structures),
                         layout=W.Layout(width="fit-content"))
        self.add_class("phaselab-explorer")
        with self._held():
            self._frame = self.view.frame(energy, p0)
            self.figures.set_frame(self._frame)
            self.figures.color_by_value(self.scale)
        self._say("Click the plot to start an orbit; drag the ringed seed to move it.")
        self._draw_all()
        from phaselab.codegen import progress

        self._progress = progress
        progress.add_listener(self._on_compile_event)
        for what in progress.active():
            self._compiling.append(what)
        if self.jobs.background:
            self._warm_up()
        if session is not None:
            self.load_session(session)

    # ================================================================= public surface
    @property
    def orbits(self):
        return self.session.orbits

    @property
    def params(self) -> dict:
        return dict(self.session.params)

    @property
    def energy(self):
        return self.session.energy

    @energy.setter
    def energy(self, value):
        self.set_energy(value)

    @property
    def status(self) -> str:
        return self._message

    @property
    def busy(self) -> list:
        return self._busy_lines()

    @property
    def sliders(self):
        return self.controls.sliders

    @property
    def _stem(self):
        return self.controls.stem

    def add_seed(self, x, y):
        """Start an orbit at ``(x, y)`` in the shown plane; returns its record when computed at
        once (``background=False``), else None (see :meth:`wait`)."""
        out = self.add_seeds([(x, y)])
        return out[0] if out else None

    def add_seeds(self, points, crossings=None):
        """Start orbits at several points ``[(x, y), ...]``. Points outside the allowed region
        (or not finite) are refused with a message. Returns the accepted records when they
        were computed at once (``background=False``), else ``[]``."""
        try:
            pts = np.atleast_2d(np.asarray(points, dtype=float))
            if pts.ndim != 2 or pts.shape[1] != 2 or len(pts) == 0:
                raise ParameterError(f"seeds must be (x, y) pairs in the shown plane, got shape {pts.shape}")
        except (ValueError, TypeError, ParameterError) as exc:
            self._say(f"Seed refused: {exc}", refused=True)
            return []
        n = len(pts)
        cross = self.crossings if crossings is None else crossings
        view, energy, params, color = self.view, self.session.energy, self.params, self._color_spec()
        setting = self._setting_key()
        self._serial += 1
        self._pending += n
        self._count()
        t_asked = time.perf_counter()
        accepted = []

        def compute():
            return tasks.seed_and_orbits(view, pts, energy, params, cross, color)

        def deliver(out: Outcome):
            self._pending -= n
            if out.error is not None:
                self._report(out)
                self._count()
                return
            batch = out.value
            if view is not self.view:  # the plane changed meanwhile: these points meant another plane
                self._count()
                return
            refused = [(pts[k], why) for k, why in enumerate(batch.reasons) if why]
            records = []
            for k, part in enumerate(batch.parts):
                if part is None:
                    continue
                rec = self.session.new_record(pts[k], batch.states[k],
                                              np.broadcast_to(np.asarray(cross), (n,))[k])
                self._apply(rec, part)
                records.append(rec)
            if records:
                previous = self.session.newest
                self.session.add(records)
                if previous is None:
                    # the first orbits (often while the page is still building its view from
                    # a fresh copy of the document): set the data whole, which a page cannot
                    # apply twice, where a stream arriving after that copy would be doubled
                    self._draw_all()
                else:
                    self._draw_added(previous, records)
                self._update_pick()
            accepted.extend(records)
            self.last_timing["orbit"] = time.perf_counter() - t_asked
            self.last_timing["orbit_compute"] = out.seconds
            self.last_timing["shown_wall"] = time.time()
            if refused:
                (x, y), why = refused[0]
                more = f" ({len(refused)} points refused)" if len(refused) > 1 else ""
                self._say(f"No orbit at ({self._num(x, 0)}, {self._num(y, 1)}): {why}{more}.", refused=True)
            elif records:
                self._say(self._orbit_message(records, out.seconds), refused=bool(records[-1].note))
            if batch.value_error:
                self._say(f"{self._message} Colour values failed: {batch.value_error}", refused=True)
            if records and setting != self._setting_key():
                self._recompute([r.id for r in records])
            self._count()
            if records:
                self._update_trace()
                self._schedule_picture()

        self._submit(f"seeds-{self._serial}", f"computing {n} orbit{'s' if n != 1 else ''}", compute, deliver)
        return accepted

    def move_seed(self, x, y):
        """Move the newest seed to ``(x, y)`` and recompute its orbit (what a drag does; the
        newest request wins)."""
        rec = self.session.newest
        if rec is None:
            return
        rid, view, energy, params, color = rec.id, self.view, self.session.energy, self.params, self._color_spec()
        crossings = rec.crossings
        t_asked = time.perf_counter()

        def compute():
            return tasks.seed_and_orbits(view, [(x, y)], energy, params, crossings, color)

        def deliver(out: Outcome):
            if out.error is not None:
                self._report(out)
                return
            now = self.session.get(rid)
            batch = out.value
            if now is None or view is not self.view or now is not self.session.newest:
                return
            if batch.parts[0] is None:
                self._say(f"Cannot move the seed to ({self._num(x, 0)}, {self._num(y, 1)}): {batch.reasons[0]}.",
                          refused=True)
                return
            self.session.move(rid, (x, y), batch.states[0])
            self._apply(now, batch.parts[0])
            self._draw_newest()
            self.last_timing["drag"] = time.perf_counter() - t_asked
            self._say(self._orbit_message([now], out.seconds), refused=bool(now.note))
            self._update_trace()
            self._schedule_picture()

        self._submit("drag", f"moving orbit {rid}", compute, deliver)

    def undo(self):
        """Take back the last action: seeds added, an orbit deleted, or a clear."""
        change = self.session.undo()
        self._after(change)

    def clear(self):
        """Remove every orbit (Undo brings them back)."""
        for key in list(self._busy):
            if key.startswith("seeds-") or key in ("drag", "all"):
                self.jobs.cancel(key)
        change = self.session.clear()
        self._after(change)

    def delete(self, orbit_id=None):
        """Remove one orbit (default the selected one); Undo brings it back."""
        if orbit_id is None:
            self._say("No orbit to delete.", refused=True)
            return
        self._after(self.session.remove(orbit_id))

    def more_crossings(self, orbit_id=None, factor=2):
        """Compute ``factor`` times as many crossings for one orbit (default the selected one)."""
        rec = self.session.get(orbit_id) if orbit_id is not None else self.session.current
        if rec is None:
            self._say("No orbit selected.", refused=True)
            return
        change = self.session.more_crossings(rec.id, factor)
        self._say(change.message, refused=change.refused)
        if change.recompute:
            self._recompute(change.recompute)

    def select(self, orbit_id):
        """Highlight orbit ``orbit_id`` and show it in the companion panels (None: the newest)."""
        change = self.session.select(orbit_id)
        if change.refused:
            self._say(change.message, refused=True)
            return
        self._quiet = True
        try:
            self.controls.pick.value = orbit_id or 0
        finally:
            self._quiet = False
        with self._held():
            self._draw_selected()
        self._update_trace()

    def set_energy(self, value):
        """Change the energy and recompute every orbit at it."""
        if not self.view.uses_energy:
            self._say("This plot has no energy to set.", refused=True)
            return
        try:
            change = self.session.set_energy(value)
        except ParameterError as exc:
            self._say(str(exc), refused=True)
            self._sync_sliders()
            return
        self._sync_sliders()
        if change.setting:
            self._recompute_all()

    def set_params(self, **values):
        """Change parameter values by name and recompute every orbit."""
        try:
            self.system.param_values({**self.session.params, **{k: v for k, v in values.items()
                                                                if k in self.session.params}})
            change = self.session.set_params(values)
        except PhaselabError as exc:
            self._say(str(exc), refused=True)
            self._sync_sliders()
            return
        self._sync_sliders()
        if change.setting:
            self._recompute_all()

    def set_color(self, color_by, low=None, anchor=None, high=None):
        """Colour orbits by ``color_by`` (an indicator, "frequency", "diffusion", None for
        their own colours) on a fixed scale; the values are computed in the worker."""
        self._check_color_by(color_by)
        self.color_by = color_by
        self.scale = scales.scale_for(color_by) if color_by is not None else None
        self._scale_fixed = isinstance(color_by, str) and color_by in scales.DEFAULT_SCALES
        if self.scale is not None and any(v is not None for v in (low, anchor, high)):
            self.scale = self.scale.with_limits(low, anchor, high)
            self._scale_fixed = True
        self._quiet = True
        try:
            self.controls.color.value = color_by if isinstance(color_by, str) and color_by in dict(
                self.controls.color.options).values() else ("" if color_by is None else "custom")
        finally:
            self._quiet = False
        self._show_scale()
        with self._held():
            self.figures.color_by_value(self.scale)
            self._draw_seeds()
        if color_by is not None and self.session.orbits:
            self._recompute_all(frame=False, what=f"computing {color_by} of {len(self.session.orbits)} orbits")

    def set_scale(self, low=None, anchor=None, high=None):
        """Move the colour scale's ends or its split value (nothing is recomputed)."""
        if self.scale is None:
            self._say("Orbits are in their own colours; choose a value to colour by first.", refused=True)
            return
        try:
            self.scale = self.scale.with_limits(low, anchor, high)
        except ParameterError as exc:
            self._say(str(exc), refused=True)
            self._show_scale()
            return
        self._scale_fixed = True
        with self._held():
            self.figures.color_by_value(self.scale)
            self._draw_seeds()
        self._schedule_picture()

    def set_view(self, plane=None, solve_for=None, sign=None):
        """Change the section plane, the solved component (and so the shown pair of axes) or
        the crossing direction; every orbit is followed from its current state and shown on
        the new plane."""
        if self.view.kind != "section":
            self._say("Only a surface of section has a plane to choose.", refused=True)
            return
        plane = dict(self.view.plane) if plane is None else plane
        solve_for = self.view.solve_for if solve_for is None else solve_for
        sign = self.view.sign if sign is None else sign
        try:
            view = make_view(self.system, plane=plane, solve_for=solve_for, sign=sign, **self._view_options)
        except PhaselabError as exc:
            self._say(f"View refused: {exc}", refused=True)
            self._fill_view_controls()
            return
        old = self.view
        self.view = view
        self.session.invalidate()
        energy, params, color = self.session.energy, self.params, self._color_spec()
        records = [(o.id, o.state, o.crossings, o.revision) for o in self.session.orbits if o.state is not None]

        def compute():
            view.fit_ranges(energy, params)
            frame = view.frame(energy, params)
            batch = tasks.orbits(view, np.array([r[1] for r in records]), energy, params,
                                 [r[2] for r in records], color) if records else None
            return frame, batch

        def deliver(out: Outcome):
            if self.view is not view:
                return
            if out.error is not None:
                self.view = old
                self._report(out, what="view")
                self._fill_view_controls()
                return
            frame, batch = out.value
            self._fitted = view.ranges
            self._frame = frame
            self.figures.set_frame(frame)
            self.figures.set_ranges(self._aspect_ranges(view.ranges))
            self.figures.set_axis_labels(view.axis_labels)
            self.controls.set_title(self.name, view.describe())
            lost = []
            for k, (rid, _, _, rev) in enumerate(records):
                rec = self.session.get(rid)
                if rec is None or rec.revision != rev:
                    continue
                part = batch.parts[k]
                if part is None or not len(part.points):
                    rec.state, rec.points, rec.note = None, np.empty((0, 2)), "never crossed this plane"
                    lost.append(rid)
                    continue
                first = part.section.points[0, 0]
                rec.seed = (float(part.points[0, 0]), float(part.points[0, 1]))
                rec.state = np.asarray(first, float).copy()
                self._apply(rec, part)
            self._draw_all()
            msg = f"Now showing {view.describe()}."
            if lost:
                msg += f" Orbits {', '.join(map(str, lost))} never crossed this plane and are hidden."
            self._say(msg, refused=bool(lost))
            self._update_trace()
            self._schedule_picture()

        self._submit("view", "computing the new plane", compute, deliver)

    def set_equal_aspect(self, on=True):
        """Show both axes at the same scale (the window widens along one axis)."""
        self._equal = bool(on)
        self._quiet = True
        try:
            self.controls.equal.value = bool(on)
        finally:
            self._quiet = False
        self.figures.set_ranges(self._aspect_ranges(self.figures.view_ranges if on else self._fitted))
        self._schedule_picture()

    def find_periodic_orbit(self, x, y, period=None):
        """Find the periodic orbit of ``period`` (default the control's) nearest ``(x, y)``;
        it is marked with its stability's shape and its residue is shown in the status."""
        k = int(self.controls.period.value if period is None else period)
        view, energy, params = self.view, self.session.energy, self.params
        manifolds = bool(self.controls.manifolds.value)

        def compute():
            return tasks.periodic(view, (x, y), k, energy, params, manifolds=manifolds)

        def deliver(out: Outcome):
            if view is not self.view:
                return
            if out.error is not None:
                why = out.error if isinstance(out.error, PhaselabError) else f"{type(out.error).__name__}: {out.error}"
                self._say(f"No period-{k} orbit found near ({self._num(x, 0)}, {self._num(y, 1)}): {why}",
                          refused=True)
                return
            found = out.value
            self.structures.append(found)
            self._draw_structures()
            self._say(messages.periodic(found, view.kind, view.ranges))
            self._schedule_picture()

        self._submit("periodic", f"searching a period-{k} orbit", compute, deliver)

    def clear_structures(self):
        self.structures = []
        self._draw_structures()
        self._say("Removed the periodic orbits and manifolds.")

    def section(self):
        """All shown orbits as one :class:`~phaselab.compute.results.Section` (None if none)."""
        from phaselab.widgets.records import merge_sections

        return merge_sections([o.section for o in self.session.orbits if o.section is not None and o.state is not None])

    def snapshot(self):
        """What the plot shows now, as plain numbers (:class:`phaselab.widgets.picture.Snapshot`)."""
        from phaselab.widgets.picture import Snapshot

        shown = self.session.shown()
        frame = self._frame
        forbidden = None
        if frame is not None and frame.forbidden is not None:
            forbidden = (frame.grid_x, frame.grid_y, frame.forbidden)
        ring = self._ring_colors(shown)
        manifolds = {}
        for f in self.structures:
            for branch, lines in f.manifolds:
                manifolds.setdefault(branch, []).extend(lines)
        setting = self._setting_text(self.session.energy, self.session.params)
        return Snapshot(
            title=self.name, subtitle=f"{self.view.describe()}; {setting}",
            labels=self.view.axis_labels, ranges=self.figures.view_ranges,
            lines=list(frame.lines) if frame else [], accents=list(frame.accents) if frame else [],
            forbidden=forbidden,
            orbits=[(o.points, o.color, o.scalar) for o in shown],
            seeds=[(o.seed[0], o.seed[1], c) for o, c in zip(shown, ring)],
            stops=[o.stop for o in shown if o.stop is not None],
            periodic=[(float(a), float(b), f.orbit.stability) for f in self.structures for a, b in f.points],
            manifolds=manifolds, scale=self.scale,
            footer=f"{len(shown)} orbits. Model results: confirm with validated tools before they inform a design.",
            equal_aspect=getattr(self, "_equal", False))

    def export(self, stem=None, formats=None):
        """Save what the plot shows: figures (.png .svg .pdf) of the current window with
        everything drawn, data (.csv .nc) and an interactive page (.html) of the orbits.
        Runs in the calling thread; returns the paths."""
        from phaselab.export import save
        from phaselab.widgets.picture import write_figure

        sec = self.section()
        if sec is None:
            raise PhaselabError("there are no orbits to export yet")
        stem = (stem or self.controls.stem.value or "section").strip()
        if not stem or any(c in stem for c in "/\\") or stem.startswith("."):
            raise PhaselabError(f"file name {stem!r} must be a plain name without folders")
        stem = _slug(stem)
        snap = self.snapshot()
        paths = []
        for suffix in formats or self.export_formats:
            path = self.export_dir / f"{stem}{suffix}"
            if suffix in (".png", ".svg", ".pdf"):
                paths.append(write_figure(snap, path))
            elif suffix == ".html":
                paths.append(save(sec, path, title=self.name, overlays=[c for c in snap.accents]))
            else:
                paths.append(save(sec, path))
        return paths

    def save_session(self, path):
        """Write seeds, energy, parameters, view and colouring to a JSON file (see
        :mod:`phaselab.widgets.session`); returns the path."""
        return write_session(path, self.session.to_dict(self.name, self.view.kind, self._view_dict(),
                                                         self._color_dict()))

    def load_session(self, path):
        """Restore a session file: energy, parameters, view, colouring and orbits.

        The whole file is read and checked, and the view and colour scale it asks for are
        built, before the explorer changes anything: a file that cannot be restored leaves
        the explorer as it was."""
        data = read_session(path)
        view = self._session_view(path, data)
        color = self._session_color(path, data)
        v = data["view"]
        if view is not self.view:
            self.view = view
            self.figures.set_axis_labels(view.axis_labels)
            self.controls.set_title(self.name, view.describe())
            self._fill_view_controls()
        self.session.clear()
        self.session.history.clear()
        self.session.params.update(data["params"])
        if data.get("energy") is not None and self.view.uses_energy:
            self.session.energy = data["energy"]
        self._sync_sliders()
        if color is not None:
            self.color_by, self.scale = color
        self.figures.color_by_value(self.scale)
        self._show_scale()
        rng = v["ranges"]
        if not rng or not self.jobs.background:
            self.view.fit_ranges(self.session.energy, self.session.params)
        self._fitted = self.view.ranges
        self._equal = v["equal_aspect"]
        self.figures.set_ranges(tuple(tuple(r) for r in rng) if rng else self._fitted)
        self._draw_all()
        self._recompute_all(frame=True, keep_ranges=True)
        self._restore_orbits(path, data["orbits"])

    def _session_view(self, path, data):
        """The view a checked session file asks for (the current one when it names none)."""
        if data["kind"] != self.view.kind:
            raise ParameterError(f"{path}: kind: the file holds a {data['kind']} view, this explorer shows "
                                 f"a {self.view.kind}")
        unknown = [k for k in data["params"] if k not in self.session.params]
        if unknown:
            raise ParameterError(f"{path}: params: {', '.join(unknown)} not parameters of this system")
        v = data["view"]
        if self.view.kind != "section" or not (v["plane"] or v["solve_for"] or v["direction"]):
            return self.view
        try:
            return make_view(self.system, plane=v["plane"] or dict(self.view.plane),
                             solve_for=v["solve_for"] or self.view.solve_for,
                             sign=v["direction"] or self.view.sign, **self._view_options)
        except PhaselabError as exc:
            raise ParameterError(f"{path}: view: {exc}") from None

    def _session_color(self, path, data):
        """``(color_by, scale)`` from a checked session file; None keeps the current colouring
        (a colouring the explorer cannot restore, such as a custom function)."""
        col = data["color"]
        by = col["by"]
        if by is None:
            return None, None
        if by not in scales.DEFAULT_SCALES:
            return None
        try:
            return by, scales.scale_for(by).with_limits(col["low"], col["anchor"], col["high"])
        except ParameterError as exc:
            raise ParameterError(f"{path}: color: {exc}") from None

    def _restore_orbits(self, path, orbits):
        """Start the orbits of a session file and say how many were restored."""
        by_crossings = {}
        for o in orbits:
            by_crossings.setdefault(o["crossings"], []).append(o["seed"])
        restored = sum(len(self.add_seeds(seeds, crossings=c)) for c, seeds in by_crossings.items())
        n = len(orbits)
        if not n:
            self._say(f"Restored the settings from {path}; the file holds no orbits.")
        elif self.jobs.background:
            self._say(f"Restoring {n} orbits from {path} ...")
        elif restored == n:
            self._say(f"Restored {n} orbits from {path}.")
        else:
            self._say(f"Restored {restored} of {n} orbits from {path}. {self._message}", refused=True)

    def wait(self, timeout=60.0) -> bool:
        """Block until pending computations are done and shown (scripts and tests)."""
        end = time.monotonic() + timeout
        while True:
            ok = self.jobs.wait(max(end - time.monotonic(), 0.0)) and \
                self.idle_jobs.wait(max(end - time.monotonic(), 0.0))
            if not ok:
                return False
            if not self.jobs.busy and not self.idle_jobs.busy:
                return True

    # ================================================================= events
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
        if self._quiet or not self.session.orbits:
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
    def _same(a, b):
        # the page echoes slider values back with rounding noise: not a change
        try:
            return abs(float(a) - float(b)) <= 1e-9 * max(1.0, abs(float(b)))
        except (TypeError, ValueError):
            return False

    def _on_energy_slider(self, change):
        if self._quiet or self._same(change["new"], self.session.energy):
            return
        self.set_energy(change["new"])

    def _on_param_slider(self, change):
        if self._quiet:
            return
        name = next(k for k, s in self.sliders.items() if s is change["owner"])
        if self._same(change["new"], self.session.params[name]):
            return
        self.set_params(**{name: change["new"]})

    def _on_pick(self, change):
        if self._quiet:
            return
        self.select(change["new"] or None)

    def _on_color_control(self, change):
        if self._quiet:
            return
        v = change["new"]
        self.set_color(None if v == "" else (self._custom_color if v == "custom" else v))

    def _on_scale_control(self, change):
        if self._quiet or self.scale is None:
            return
        c = self.controls
        self.set_scale(c.low.value, c.anchor.value if self.scale.anchor is not None else None, c.high.value)

    def _on_manifolds(self, on):
        if self._quiet or not on:
            self._draw_structures()
            return
        todo = [f for f in self.structures if f.orbit.stability in ("unstable", "inverse-unstable") and not f.manifolds]
        if not todo:
            return
        view = self.view

        def compute():
            return [tasks.grow_manifolds(view, f.orbit) for f in todo]

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
        if self._quiet:
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
        # called from any thread: hand it to the widgets' thread
        def apply():
            if event == "start":
                self._compiling.append(what)
            elif what in self._compiling:
                self._compiling.remove(what)
            self._show_status()

        self.jobs.call_soon(apply, self._loop)

    def _export_clicked(self):
        if self.section() is None:
            self._say("Export: there are no orbits to export yet.", refused=True)
            return
        stem, formats = self.controls.stem.value, self.export_formats
        try:
            snap_check = _slug((stem or "section").strip())
        except Exception:
            snap_check = "section"
        if not stem.strip() or any(c in stem for c in "/\\") or stem.strip().startswith("."):
            self._say(f"Export: file name {stem!r} must be a plain name without folders.", refused=True)
            return

        def compute():
            return self.export(snap_check, formats)

        def deliver(out: Outcome):
            if out.error is not None:
                self._report(out, what="export")
                return
            self._say("Saved " + ", ".join(str(p) for p in out.value))

        self._submit("export", "saving files", compute, deliver)

    def _save_clicked(self):
        try:
            path = self.save_session(self.export_dir / self.controls.session_path.value.strip())
        except PhaselabError as exc:
            self._say(f"Session not saved: {exc}", refused=True)
            return
        self._say(f"Saved the session to {path}.")

    def _load_clicked(self):
        try:
            self.load_session(self.export_dir / self.controls.session_path.value.strip())
        except PhaselabError as exc:
            self._say(f"Session not loaded: {exc}", refused=True)

    # ================================================================= computing
    def _submit(self, key, busy, compute, deliver, delay=0.0, runner=None):
        """Queue ``compute`` for the worker; ``busy`` says what runs meanwhile; the bokeh
        changes of ``deliver`` reach the page as one message."""
        if busy:
            self._busy[key] = busy
            self._show_status()

        def held(out):
            self._busy.pop(key, None)
            if out.error is not None:
                self.last_error = out
            with self._held():
                deliver(out)
            self._show_status()

        (runner or self.jobs).submit(key, compute, held, delay=delay)

    def _recompute_all(self, frame=True, what=None, keep_ranges=False):
        n = len(self.session.orbits)
        view, energy, params, color = self.view, self.session.energy, self.params, self._color_spec()
        snapshot = [(o.id, o.seed, o.crossings, o.revision) for o in self.session.orbits]
        t_asked = time.perf_counter()

        def compute():
            return tasks.recompute(view, [s for _, s, _, _ in snapshot], energy, params,
                                   [c for _, _, c, _ in snapshot], color, frame=frame)

        def deliver(out: Outcome):
            if view is not self.view:
                return
            if out.error is not None:
                self._report(out)
                return
            res = out.value
            if res.frame is not None:
                self._frame = res.frame
                self.figures.set_frame(res.frame)
            hidden, stopped = [], []
            if res.batch is not None:
                for k, (rid, _, _, rev) in enumerate(snapshot):
                    rec = self.session.get(rid)
                    if rec is None or rec.revision != rev:
                        continue
                    part = res.batch.parts[k]
                    if part is None:
                        rec.state, rec.section, rec.points, rec.stop = None, None, np.empty((0, 2)), None
                        rec.note = res.batch.reasons[k]
                        hidden.append(rid)
                        continue
                    rec.state = res.batch.states[k].copy()
                    self._apply(rec, part)
                    if rec.note:
                        stopped.append(rec)
            self._draw_all()
            self.last_timing["all"] = time.perf_counter() - t_asked
            what_text = self._setting_text(energy, params)
            if res.frame is not None and res.frame.empty:
                self._say(f"At {what_text} the shown plane has no energetically allowed region (the energy "
                          "shell is empty here); orbits are kept and come back when it is not.", refused=True)
            elif hidden:
                self._say(f"At {what_text}: {len(hidden)} of {len(snapshot)} seeds lie outside the allowed region "
                          f"and are hidden (orbit{'s' if len(hidden) > 1 else ''} {', '.join(map(str, hidden))})."
                          + self._stopped_text(stopped), refused=True)
            elif snapshot:
                self._say(f"Recomputed {len(snapshot)} orbit{'s' if len(snapshot) != 1 else ''} at {what_text} "
                          f"in {out.seconds * 1000:.0f} ms." + self._stopped_text(stopped), refused=bool(stopped))
            if res.batch is not None and res.batch.value_error:
                self._say(f"{self._message} Colour values failed: {res.batch.value_error}", refused=True)
            self._update_trace()
            self._schedule_picture()

        busy = what or (f"computing {n} orbit{'s' if n != 1 else ''} at "
                        f"{self._setting_text(energy, params)}" if n else "drawing the allowed region")
        self._submit("all", busy, compute, deliver)

    def _recompute(self, ids):
        """Compute some orbits again from their seeds (after undo, or more crossings)."""
        view, energy, params, color = self.view, self.session.energy, self.params, self._color_spec()
        recs = [self.session.get(i) for i in ids]
        snapshot = [(r.id, r.seed, r.crossings, r.revision) for r in recs if r is not None]
        if not snapshot:
            return

        def compute():
            return tasks.seed_and_orbits(view, [s for _, s, _, _ in snapshot], energy, params,
                                         [c for _, _, c, _ in snapshot], color)

        def deliver(out: Outcome):
            if view is not self.view:
                return
            if out.error is not None:
                self._report(out)
                return
            batch = out.value
            for k, (rid, _, _, rev) in enumerate(snapshot):
                rec = self.session.get(rid)
                if rec is None or rec.revision != rev:
                    continue
                if batch.parts[k] is None:
                    rec.state, rec.points, rec.note = None, np.empty((0, 2)), batch.reasons[k]
                    continue
                rec.state = batch.states[k].copy()
                self._apply(rec, batch.parts[k])
            self._draw_all()
            recs_now = [self.session.get(i) for i, *_ in snapshot]
            recs_now = [r for r in recs_now if r is not None and r.state is not None]
            if recs_now:
                self._say(self._orbit_message(recs_now, out.seconds), refused=bool(recs_now[-1].note))
            self._update_trace()
            self._schedule_picture()

        n = len(snapshot)
        self._submit(f"some-{self._next_serial()}", f"computing {n} orbit{'s' if n != 1 else ''}", compute, deliver)

    def _update_trace(self):
        rec = self.session.current
        f = self.figures
        if rec is None or rec.state is None:
            f.panel1_source.data, f.panel2_source.data = dict(x=[], y=[]), dict(x=[], y=[])
            return
        view, state, params = self.view, rec.state.copy(), self.params
        until = np.nan
        if rec.section is not None and rec.section.counts[0] > 0:
            until = float(rec.section.times[0, int(rec.section.counts[0]) - 1])
        if view.kind == "map":
            until = rec.crossings
        rid, rev, crossings, section = rec.id, rec.revision, rec.crossings, rec.section

        def compute():
            return tasks.trace(view, state, params, until, crossings, section)

        def deliver(out: Outcome):
            now = self.session.current
            if now is None or now.id != rid or now.revision != rev or view is not self.view:
                return
            if out.error is not None:
                self._say(f"{self._message} | no trace of this orbit: {out.error}", refused=True)
                return
            tr = out.value
            (x1, y1), (x2, y2) = tr.panel1, tr.panel2
            f.panel1_source.data = dict(x=np.asarray(x1, float), y=np.asarray(y1, float))
            f.panel2_source.data = dict(x=np.asarray(x2, float), y=np.asarray(y2, float))
            f.panel1_line.glyph.line_color = now.color
            f.panel2_line.glyph.line_color = now.color
            now.nu = tr.nu or now.nu
            if tr.nu:
                freq = ", ".join(f"{n} {v:.6g}" for n, v in zip(tr.nu_names, tr.nu))
                base = self._message.split(" | ")[0]
                self._say(f"{base} | orbit {rid} frequencies: {freq} ({tr.nu_unit})", refused=self._refused)

        # on the second worker thread, once clicks and drags pause for TRACE_DELAY: the
        # companion curves never delay a click or a drag, on the kernel or on the page
        self._submit("trace", "", compute, deliver, delay=TRACE_DELAY, runner=self.idle_jobs)

    def _warm_up(self):
        """Compile the kernels in the background while the user reads the plot."""
        (x0, x1), (y0, y1) = self.view.ranges
        view, energy, params = self.view, self.session.energy, self.params

        def compute():
            rng = np.random.default_rng(7)
            for _ in range(40):
                p = (rng.uniform(x0, x1), rng.uniform(y0, y1))
                s = view.seeds([p], energy, params)
                if s.valid[0]:
                    view.compute(s.states[:1], energy, params, crossings=4)
                    view.trace(s.states[0], params, 1.0)
                    return True
            return False

        self._submit("warm-up", "", compute, lambda out: None)

    def _schedule_picture(self):
        """Redraw the picture kept for a notebook opened without a kernel (after a quiet spell)."""
        if self.picture.handle is None or not self.jobs.background:
            return
        snap = self.snapshot()
        caption = f"{self.name}: picture of the explorer's last state (run the notebook for the live explorer)"

        def compute():
            return tasks.picture_png(snap, dpi=80)

        def deliver(out: Outcome):
            if out.error is None:
                self.picture.update(out.value, caption)

        self.idle_jobs.submit("picture", compute, deliver, delay=PICTURE_DELAY)

    # ================================================================= drawing
    def _apply(self, rec, part):
        rec.section, rec.points, rec.scalar = part.section, part.points, part.scalar
        rec.nu = part.nu or rec.nu
        rec.note, rec.stop = part.note, part.stop

    def _color_spec(self):
        return self.color_by

    def _held(self):
        """Collect the bokeh changes made inside into one patch to the page (applied and drawn
        at once), sent before the changes of the status, count and orbit list."""
        from contextlib import ExitStack, contextmanager

        doc = self.figures.main.document
        c = self.controls

        @contextmanager
        def hold():
            if getattr(self, "_hold_depth", 0):
                self._hold_depth += 1  # inside an outer hold: it sends everything
                try:
                    yield
                finally:
                    self._hold_depth -= 1
                return
            self._hold_depth = 1
            try:
                with ExitStack() as stack:
                    for w in (c.status, c.count, c.pick):
                        stack.enter_context(w.hold_sync())
                    if doc is not None:
                        # the batch closes after unhold has replayed the held changes into it
                        stack.enter_context(self.bokeh.batch())
                        doc.hold("combine")
                        stack.callback(doc.unhold)
                    yield
            finally:
                self._hold_depth = 0
        return hold()

    def _ring_colors(self, shown):
        if self.scale is None:
            return [o.color for o in shown]
        return self.scale.colors([o.scalar for o in shown])

    def _draw_all(self):
        with self._held():
            self.figures.show_orbits(self.session.orbits)
            self._draw_seeds()
            self._draw_selected()
            self._update_pick()
            self._count()

    def _draw_added(self, previous, records):
        with self._held():
            self.figures.show_added(previous, records)
            self._draw_seeds()
            self._draw_selected()
            self._count()

    def _draw_newest(self):
        with self._held():
            self.figures.show_orbits(self.session.orbits[-1:], newest_only=True)
            self._draw_seeds(keep_latest=True)
            self._draw_selected()
            self._count()

    def _draw_seeds(self, keep_latest=False):
        shown = self.session.shown()
        self.figures.show_seeds(shown, self._ring_colors(shown), self.session.newest, keep_latest)

    def _draw_selected(self):
        rec = self.session.get(self.session.selected) if self.session.selected is not None else None
        self.figures.show_selected(rec)

    def _draw_structures(self):
        with self._held():
            self.figures.show_structures(self.structures, bool(self.controls.manifolds.value))

    def _after(self, change):
        """Redraw after a session change; compute what must be computed."""
        if change.removed or change.added or change.selection:
            self._draw_all()
        if change.message:
            self._say(change.message, refused=change.refused)
        if change.recompute:
            self._recompute(change.recompute)
        self._update_trace()
        self._schedule_picture()

    def _update_pick(self):
        self._quiet = True
        try:
            options = [("newest", 0)] + [(f"orbit {o.id}", o.id) for o in self.session.orbits]
            sel = self.session.selected
            self.controls.pick.options = options
            self.controls.pick.value = sel if sel in [v for _, v in options] else 0
        finally:
            self._quiet = False

    def _count(self):
        shown = self.session.shown()
        self.controls.set_count(len(shown), int(sum(len(o.points) for o in shown)), self._pending)

    def _sync_sliders(self):
        self._quiet = True
        try:
            if "energy" in self.sliders and self.session.energy is not None:
                self.sliders["energy"].value = self.session.energy
            for name, s in self.sliders.items():
                if name != "energy":
                    s.value = self.session.params[name]
        finally:
            self._quiet = False

    def _fill_view_controls(self):
        c = self.controls
        self._quiet = True
        try:
            if self.view.kind != "section" or self.system.dof != 2:
                return
            names = self.view.names
            comp = next(iter(self.view.plane))
            c.plane.options = [(f"{n} =", n) for n in names]
            c.plane.value = comp
            c.plane_value.value = float(self.view.plane[comp])
            rest = [n for n in names if n != comp]
            pairs = []
            for k in range(3):
                pair = tuple(n for j, n in enumerate(rest) if j != k)
                pairs.append((f"{pair[0]}, {pair[1]} ({rest[k]} solved)", pair))
            c.axes.options = pairs
            c.axes.value = tuple(n for n in rest if n != self.view.solve_for)
            c.direction.value = self.view.sign
        finally:
            self._quiet = False

    def _show_scale(self):
        c = self.controls
        self._quiet = True
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
            self._quiet = False

    def _aspect_ranges(self, ranges):
        from phaselab.widgets.figures import FRAME_H, FRAME_W

        if not getattr(self, "_equal", False):
            return ranges
        (x0, x1), (y0, y1) = ranges
        sx, sy = (x1 - x0) / FRAME_W, (y1 - y0) / FRAME_H
        s = max(sx, sy)
        cx, cy = (x0 + x1) / 2, (y0 + y1) / 2
        return ((cx - s * FRAME_W / 2, cx + s * FRAME_W / 2), (cy - s * FRAME_H / 2, cy + s * FRAME_H / 2))

    # ================================================================= text
    def _num(self, v, axis):
        (x0, x1), (y0, y1) = self.view.ranges
        return number(v, (x1 - x0) if axis == 0 else (y1 - y0))

    def _orbit_message(self, records, seconds):
        return messages.orbits(records, seconds, self.view.noun, self.view.ranges, self.scale)

    def _stopped_text(self, stopped):
        return messages.stopped(stopped)

    def _setting_text(self, energy, params):
        return messages.setting(energy, params, self.view.uses_energy)

    def _setting_key(self):
        return (self.session.energy, tuple(sorted(self.session.params.items())))

    def _busy_lines(self):
        lines = []
        if self._compiling:
            lines.append("compiling kernels for this system (first time only)")
        lines += [t for t in self._busy.values() if t]
        return lines

    def _show_status(self):
        self.controls.say(self._message, self._refused, self._busy_lines())

    def _say(self, text, refused=False):
        self._message, self._refused = text, refused
        self._show_status()

    def _report(self, out: Outcome, what="orbit"):
        exc = out.error
        self.last_error = out
        if isinstance(exc, PhaselabError):
            self._say(f"Could not compute the {what}: {exc}", refused=True)
        else:
            self._say(f"Could not compute the {what} ({type(exc).__name__}: {exc}); the explorer "
                      "keeps working.", refused=True)

    def _next_serial(self):
        self._serial += 1
        return self._serial

    def _check_color_by(self, color_by):
        if color_by is None or callable(color_by):
            return
        if not isinstance(color_by, str):
            raise ParameterError(f"color_by must be an indicator name, 'frequency', 'diffusion', a per-orbit field "
                                 f"or a function, got {color_by!r}")

    def _view_dict(self):
        v = self.view
        out = {"axes": list(v.axis_names), "ranges": [list(r) for r in self.figures.view_ranges],
               "equal_aspect": bool(getattr(self, "_equal", False)), "crossings": self.crossings}
        if v.kind == "section":
            out.update(plane=dict(v.plane), solve_for=v.solve_for, direction=v.sign)
        return out

    def _color_dict(self):
        if self.scale is None or not isinstance(self.color_by, str):
            return {"by": None}
        return {"by": self.color_by, "low": self.scale.low, "anchor": self.scale.anchor, "high": self.scale.high}

    # ================================================================= display
    def _repr_mimebundle_(self, **kwargs):
        from phaselab.widgets.page import load_bokehjs as load

        load()
        self.bokeh.refresh(send=True)
        self.picture.show()
        self._schedule_picture()
        return super()._repr_mimebundle_(**kwargs)

    def close(self):
        if hasattr(self, "_progress"):
            self._progress.remove_listener(self._on_compile_event)
        for runner in ("jobs", "idle_jobs"):
            if hasattr(self, runner):
                getattr(self, runner).close()
        super().close()


def explore(system, energy=None, plane=None, solve_for=None, crossings=300, params=None, **options):
    """An interactive surface of section (or phase portrait, or map iterates) for a notebook.

    Parameters
    ----------
    system : Hamiltonian or AreaPreservingMap
    energy : float, optional
        The energy E of the shell (needed for a surface of section; for one degree of
        freedom the level curve drawn strongly).
    plane : dict, optional
        Fixed components of the section, default ``{q1: 0.0}``.
    solve_for : str, optional
        The component solved from H = E (default the momentum of the plane's coordinate).
    crossings : int
        Crossings (periods, iterates, samples) per orbit.
    params : dict, optional
        Starting parameter values.
    **options
        ``ranges`` ((x0, x1), (y0, y1)) or by name; ``sign`` (+1/-1, root and crossing
        direction); ``energy_range`` (low, high) of the energy slider; ``color_by`` (a
        chaos indicator ``"megno"``, ``"lyapunov"``, ``"fli"`` or ``"sali"`` computed for
        each orbit over the time its points span; ``"frequency"`` or ``"diffusion"`` from
        Laskar's frequency analysis; a function of a one-orbit Section returning a number;
        or the name of a per-orbit field such as ``"energy_error"``), ``color_label`` and
        ``scale`` ((low, anchor, high) of the colour scale; indicators have fixed defaults,
        MEGNO split at 2); ``background`` (False to compute in the calling thread);
        ``export_dir`` and ``export_formats`` (what Export writes, default PNG and CSV;
        any of .png .svg .pdf .csv .nc .html); ``duration`` (time traced per orbit of a
        phase portrait); ``method``, ``dt``; ``title``; ``session`` (a session JSON file
        to restore, see :mod:`phaselab.widgets.session`).

    Returns
    -------
    Explorer
        An ``ipywidgets`` widget; ``.orbits``, ``.params``, ``.energy``, ``add_seed``,
        ``add_seeds``, ``move_seed``, ``undo``, ``clear``, ``delete``, ``more_crossings``,
        ``select``, ``set_energy``, ``set_params``, ``set_color``, ``set_scale``,
        ``set_view``, ``set_equal_aspect``, ``find_periodic_orbit``, ``export``,
        ``save_session``, ``load_session``, ``wait``.
    """
    inputs.system(system), inputs.count(crossings, "crossings", maximum=100_000)
    return Explorer(system, energy=energy, plane=plane, solve_for=solve_for, crossings=crossings,
                    params=params, **options)
