"""The explorer's public commands on what the plot shows: colouring, colour scale, section
plane, aspect, and the shown orbits as a Section or a Snapshot."""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from phaselab.errors import ParameterError, PhaselabError
from phaselab.widgets import computations, scales
from phaselab.widgets.views import make_view
from phaselab.widgets.worker import Outcome


class ViewCommands:
    """The commands that change the colouring, the colour scale, the section plane and the
    aspect, and read back what is shown (mixed into :class:`Explorer`)."""

    def set_color(self, color_by, low=None, anchor=None, high=None):
        """Colour orbits by ``color_by`` (an indicator, "frequency", "diffusion", None for
        their own colours) on a fixed scale; the values are computed in the worker."""
        self._check_color_by(color_by)
        self.color_by = color_by
        self.scale = self._make_scale(color_by)
        self._scale_fixed = isinstance(color_by, str) and color_by in scales.DEFAULT_SCALES \
            and color_by not in scales.FITTED
        if self.scale is not None and any(v is not None for v in (low, anchor, high)):
            self.scale = self.scale.with_limits(low, anchor, high)
            self._scale_fixed = True
        self._setting_controls = True
        try:
            self.controls.color.value = color_by if isinstance(color_by, str) and color_by in dict(
                self.controls.color.options).values() else ("" if color_by is None else "custom")
        finally:
            self._setting_controls = False
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
            batch = computations.orbits(view, np.array([r[1] for r in records]), energy, params,
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
                self._store_part(rec, part)
            self._draw_all()
            msg = f"Now showing {view.describe()}."
            if lost:
                msg += f" Orbits {', '.join(map(str, lost))} never crossed this plane and are hidden."
            self._say(msg, refused=bool(lost))
            self._update_trace()
            self._schedule_picture()

        self._submit("view", "computing the new plane", compute, deliver)
        self._refresh_normal_form_curves()

    def set_equal_aspect(self, on=True):
        """Show both axes at the same scale (the window widens along one axis)."""
        self._equal = bool(on)
        self._setting_controls = True
        try:
            self.controls.equal.value = bool(on)
        finally:
            self._setting_controls = False
        self.figures.set_ranges(self._aspect_ranges(self.figures.view_ranges if on else self._fitted))
        self._schedule_picture()

    def section(self):
        """All shown orbits as one :class:`~phaselab.orbits.section_result.Section` (None if none)."""
        from phaselab.widgets.orbit_sections import merge_sections

        return merge_sections([o.section for o in self.session.orbits if o.section is not None and o.state is not None])

    def snapshot(self):
        """What the plot shows now, as plain numbers (:class:`phaselab.widgets.snapshot.Snapshot`)."""
        from phaselab.widgets.snapshot import Snapshot

        shown = self.session.shown()
        frame = self._frame
        forbidden = frame.shade if frame is not None else None
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

    def _make_scale(self, color_by, label=None):
        """The starting scale for ``color_by`` in this view: MEGNO with its band for the
        explorer's crossings, frequencies with their unit and sign in the title."""
        if color_by is None:
            return None
        if color_by == "megno":
            return scales.megno_scale(self.crossings, label, self.view.noun)
        scale = scales.scale_for(color_by, label)
        if color_by == "frequency" and not label:
            unit = scales.FREQUENCY_UNITS.get(self.view.kind, "cycles per sample")
            n = len(self.view.names) // 2
            scale = replace(scale, label=scales.frequency_label(self.view.label(0), self.view.label(n), unit))
        return scale

    def _fit_scale(self):
        """Stretch a scale that follows the data (frequencies, custom values) over the values
        of the shown orbits, unless the user has set its ends."""
        if self.scale is None or self._scale_fixed:
            return
        fitted = scales.fit_to_values(self.scale, [o.scalar for o in self.session.shown()])
        if fitted != self.scale:
            self.scale = fitted
            self.figures.color_by_value(fitted)
            self._show_scale()

    def _color_spec(self):
        return self.color_by

    def _check_color_by(self, color_by):
        if color_by is None or callable(color_by):
            return
        if not isinstance(color_by, str):
            raise ParameterError(f"color_by must be an indicator name, 'frequency', 'diffusion', a per-orbit field "
                                 f"or a function, got {color_by!r}")
