"""The linked explorer's commands: seeds from clicks and held coordinates, energy and
parameters, the slab, colouring, selection, undo and clear (mixed into
:class:`~phaselab.widgets.explorer.linked.LinkedExplorer`)."""

from __future__ import annotations

import contextlib
import time

import numpy as np

from phaselab.errors import ParameterError, PhaselabError
from phaselab.model.params import finite_number
from phaselab.widgets import computations, scales, theme
from phaselab.widgets.linked_points import Slab, column_name, point_columns, selection_summary
from phaselab.widgets.worker import Outcome

#: Seconds without a new orbit after which the fresh points are folded into the big source
#: (the page then draws every point again: longer than the usual gap between clicks).
FOLD_DELAY = 3.0
#: (The fresh rows are folded at once when the fresh slots are full: linked_figures.FRESH_SLOTS
#: slots of SLOT_ROWS rows. A fold has the page draw every point again, seconds at 100,000
#: points without a graphics processor: measured, folding past 3,000 rows made every tenth
#: click of a quick run wait 5 s.)
#: New orbits go to the fresh layer (False: streamed into the big source, the design
#: before; kept for the browser benchmark's comparison).
FRESH_LAYER = True


class LinkedCommands:
    """Public commands and the handlers of clicks, selections and controls."""

    # ------------------------------------------------------------------ seeds
    def add_seed(self, x, y):
        """Start an orbit at ``(x, y)`` of the clicked pair, the held coordinates at their
        slider values; returns its record when computed at once (``background=False``)."""
        out = self.add_seeds([(x, y)])
        return out[0] if out else None

    def add_seeds(self, points, crossings=None, held=None):
        """Start orbits at clicked pairs ``[(x, y), ...]``; ``held`` (a dict, or a list of
        dicts, one per point) overrides the held coordinates. Points outside the energy shell
        are refused, the reason in the status line. Returns the accepted records when they
        were computed at once, else ``[]``."""
        try:
            pts = np.atleast_2d(np.asarray(points, dtype=float))
            if pts.ndim != 2 or pts.shape[1] != 2 or len(pts) == 0:
                raise ParameterError(f"seeds must be ({', '.join(self.view.axis_names)}) pairs, got shape {pts.shape}")
            helds = self._held_rows(held, len(pts))
        except (ValueError, TypeError, ParameterError) as exc:
            self._say(f"Seed refused: {exc}", refused=True)
            return []
        view, energy, params = self.view, self.session.energy, self.params
        cross = self.crossings if crossings is None else int(crossings)
        color = self.color_by if self.color_by in scales.CHAOS_INDICATORS else None
        seeds = [self._seed_vector(p, h) for p, h in zip(pts, helds)]
        self._pending += len(pts)
        self._show_count()
        accepted = []

        def compute():
            return self._orbit_batch(view, seeds, energy, params, cross, color)

        def deliver(out: Outcome):
            self._pending -= len(pts)
            if out.error is not None:
                self._report(out)
                return
            batch, seconds = out.value
            refused = [(seeds[k], why) for k, why in enumerate(batch.reasons) if why]
            records = []
            for k, part in enumerate(batch.parts):
                if part is None:
                    continue
                rec = self.session.new_record(seeds[k][list(self._pair)], batch.states[k], cross)
                self._store(rec, part)
                self._seed_of[rec.id] = seeds[k]
                records.append(rec)
            self.session.add(records)
            accepted.extend(records)
            self._append(records)
            self.last_timing["orbits"] = seconds
            if refused:
                where, why = refused[0]
                text = ", ".join(f"{nm} = {v:.4g}" for nm, v in zip(self.view.coordinates, where))
                self._say(f"Seed refused at {text}: {why}", refused=True)
            elif records:
                n = sum(len(r.points) for r in records)
                self._say(f"{len(records)} orbit{'s' if len(records) > 1 else ''}, {n} crossings "
                          f"in {seconds:.2f} s.")

        self.jobs.submit(f"seeds-{time.monotonic_ns()}", compute, deliver)
        return accepted

    def _held_rows(self, held, n):
        if held is None or isinstance(held, dict):
            base = dict(self.held)
            for key, v in (held or {}).items():
                if key not in self.view.held:
                    raise ParameterError(f"held: {key!r} is not a held coordinate; they are "
                                         + ", ".join(self.view.held))
                base[key] = finite_number(v, f"held value of {key}")
            return [base] * n
        rows = list(held)
        if len(rows) != n:
            raise ParameterError(f"held gives {len(rows)} rows for {n} points")
        return [self._held_rows(r, 1)[0] for r in rows]

    def _seed_vector(self, point, held):
        """The seed in the section coordinates (clicked pair and held values)."""
        v = np.empty(len(self.view.coordinates))
        for j, c in enumerate(self.view.coordinates):
            v[j] = held[c] if c in held else np.nan
        v[self._pair[0]], v[self._pair[1]] = point
        return v

    @staticmethod
    def _orbit_batch(view, seeds, energy, params, crossings, color):
        """States on the shell for the seeds (refusals with reasons), then their orbits."""
        t0 = time.perf_counter()
        seeds = np.atleast_2d(np.asarray(seeds, float))
        held_cols = [view.coordinates.index(c) for c in view.held]
        pair = [view.coordinates.index(c) for c in view.axis_names]
        states = np.full((len(seeds), len(view.names)), np.nan)
        reasons = [""] * len(seeds)
        for k, s in enumerate(seeds):   # one shell solve per seed: the held values may differ
            seeding = view.seeds(s[pair][None, :], energy, params, dict(zip(view.held, s[held_cols])))
            states[k] = seeding.states[0]
            reasons[k] = seeding.reasons[0]
        ok = np.flatnonzero([not r for r in reasons])
        batch = computations.OrbitBatch([None] * len(seeds), reasons, states)
        if ok.size:
            inner = computations.orbits(view, states[ok], energy, params, crossings, color)
            for k, row in enumerate(ok):
                batch.parts[row] = inner.parts[k]
        return batch, time.perf_counter() - t0

    def _store(self, rec, part):
        rec.section = part.section
        rec.points = self.view.coordinate_points(part.section)
        rec.scalar = part.scalar
        rec.note = part.note

    # ------------------------------------------------------------------ settings
    def set_held(self, **values):
        """Set held coordinates for the next seeds (existing orbits are kept)."""
        for name, v in values.items():
            if name not in self.view.held:
                raise ParameterError(f"{name!r} is not a held coordinate; they are " + ", ".join(self.view.held))
            self.held[name] = finite_number(v, f"held value of {name}")
        self._sync(self.controls.held, self.held)
        self._say("Next seeds at " + ", ".join(f"{self.view.label_of(k)} = {v:.4g}" for k, v in self.held.items())
                  + ".")

    def set_energy(self, value):
        """Change the energy: every orbit is started again from its seed on the new shell."""
        change = self.session.set_energy(value)
        self._sync(self.controls.sliders, {"energy": self.session.energy})
        if change.anything:
            self._recompute_all()

    def set_params(self, **values):
        change = self.session.set_params(values)
        self._sync(self.controls.sliders, values)
        if change.anything:
            self._recompute_all()

    def _recompute_all(self):
        records = list(self.session.orbits)
        seeds = [self._seed_of[r.id] for r in records]
        if not records:
            return
        view, energy, params = self.view, self.session.energy, self.params
        color = self.color_by if self.color_by in scales.CHAOS_INDICATORS else None
        revisions = [r.revision for r in records]

        def compute():
            return [self._orbit_batch(view, [s], energy, params, r.crossings, color)[0]
                    for s, r in zip(seeds, records)]

        def deliver(out: Outcome):
            if out.error is not None:
                self._report(out)
                return
            gone = 0
            for rec, rev, batch in zip(records, revisions, out.value):
                if rec.revision != rev:
                    continue
                part = batch.parts[0]
                if part is None:
                    rec.state, rec.points, gone = None, np.empty((0, len(view.coordinates))), gone + 1
                else:
                    rec.state = batch.states[0]
                    self._store(rec, part)
            self._redraw()
            self._say(f"Recomputed {len(records)} orbits" + (f"; {gone} seeds are outside the shell now "
                                                              "and hidden." if gone else "."), refused=bool(gone))

        self.jobs.submit("recompute", compute, deliver)

    def set_color(self, color_by):
        """Colour by the orbit (None), a section coordinate (its name) or a chaos indicator
        (``"megno"``, ``"lyapunov"``, ``"fli"``, ``"sali"``), computed per orbit."""
        coords = self.view.coordinates
        if color_by is not None and color_by not in coords and color_by not in scales.CHAOS_INDICATORS:
            raise ParameterError(f"color_by must be a section coordinate ({', '.join(coords)}) or one of "
                                 f"{', '.join(scales.CHAOS_INDICATORS)}, got {color_by!r}")
        old, self.color_by = self.color_by, color_by
        self._sync({"c": self.controls.color}, {"c": color_by or ""})
        with self._patch(models_change=True):
            self._draw_color()
        self._schedule_picture()
        if color_by in scales.CHAOS_INDICATORS and old != color_by and self.session.orbits:
            self._recompute_all()   # the values of the new indicator

    def _draw_color(self):
        coords, color_by, f = self.view.coordinates, self.color_by, self.figures
        if color_by is None:
            f.color_by_orbit()
        elif color_by in coords:
            j = coords.index(color_by)
            lo, hi = self.view.windows[color_by]
            f.color_by_column(column_name(j), lo, hi, theme.scalar_palette(), self.view.label_of(color_by))
        else:
            scale = (scales.megno_scale(self.crossings, None, self.view.noun) if color_by == "megno"
                     else scales.scale_for(color_by))
            f.color_by_column("value", scale.low, scale.high, scale.palette(), scale.title)

    # ------------------------------------------------------------------ slab
    def set_slab(self, name=None, center=None, half_width=None):
        """Show only the points with ``|name - center| < half_width`` in every projection
        (a 3-D phase-space slice; Richter et al. 2014). Omitted parts keep their values."""
        c = self.controls
        name = c.slab_name.value if name is None else str(getattr(name, "name", name))
        if name not in self.view.coordinates:
            raise ParameterError(f"the slab's coordinate must be one of {', '.join(self.view.coordinates)}, "
                                 f"got {name!r}")
        center = c.slab_center.value if center is None else finite_number(center, "slab centre")
        half_width = c.slab_width.value if half_width is None else finite_number(half_width, "slab half-width")
        self.slab = Slab(name, self.view.coordinates.index(name), float(center), float(half_width))
        self._sync({"n": c.slab_name, "c": c.slab_center, "w": c.slab_width, "on": c.slab_on},
                   {"n": name, "c": center, "w": half_width, "on": True})
        self._apply_slab()

    def clear_slab(self):
        """Show every point again."""
        self.slab = None
        self._sync({"on": self.controls.slab_on}, {"on": False})
        self._apply_slab()

    def _apply_slab(self):
        t0 = time.perf_counter()
        with self._patch():
            self.figures.set_slab_rows(self._slab_rows())
        self.last_timing["slab"] = time.perf_counter() - t0
        self._show_count()
        self._schedule_picture()

    def _slab_rows(self):
        """Rows of the whole table inside the slab, or None without a slab."""
        if self.slab is None:
            return None
        return np.flatnonzero(self.slab.mask({column_name(self.slab.index): self._column(self.slab.index)}))

    def _column(self, j):
        """Section coordinate ``j`` over the whole table (big source, then fresh), (n_rows,)."""
        return self.figures.table()[column_name(j)]

    def shown_rows(self) -> np.ndarray:
        """Row numbers of the points shown (inside the slab, or all), rows of the whole table."""
        rows = self._slab_rows()
        return np.arange(self.figures.n_rows) if rows is None else rows

    # ------------------------------------------------------------------ selection
    def select_points(self, rows):
        """Select points by row number (as a box or lasso in the page does)."""
        from bokeh.core.property.validation import without_property_validation

        rows = np.asarray(rows)
        f = self.figures
        n = f.n_rows
        if rows.ndim != 1 or (rows.size and (rows.dtype.kind not in "iu" or rows.min() < 0 or rows.max() >= n)):
            raise ParameterError(f"rows must be whole numbers from 0 to {n - 1}, got {rows!r:.80}")
        parts = f.split_rows(np.sort(rows))

        @without_property_validation
        def assign():   # whole numbers in range, checked above
            for src, part in zip([f.points] + f.slots, parts):
                if len(part) or len(src.selected.indices):
                    src.selected.indices = part.astype(np.int32)

        with self._patch():
            assign()

    def _on_selection(self, attr, old, new):
        t0 = time.perf_counter()
        f = self.figures
        orbit = np.concatenate([np.asarray(src.data["orbit"]) for src in [f.points] + f.slots])
        self.selection = selection_summary({"orbit": orbit}, f.selected_rows())
        n, ids = self.selection
        words = ", ".join(map(str, ids[:12])) + (" ..." if len(ids) > 12 else "")
        self.controls.selection.value = (f"<span class='pl-sub'>{n} points selected, orbits {words}</span>"
                                         if n else "")
        self.last_timing["selection"] = time.perf_counter() - t0

    # ------------------------------------------------------------------ undo, clear
    def undo(self):
        change = self.session.undo()
        self._redraw()
        self._say(change.message)

    def clear(self):
        change = self.session.clear()
        self._redraw()
        self._say(change.message)

    # ------------------------------------------------------------------ drawing
    @contextlib.contextmanager
    def _patch(self, models_change=False):
        """The bokeh changes made inside reach the page as one patch. ``models_change``: the
        changes name models (a colour spec names its mapper), and the document's list of
        models is then walked once at the end instead of after each (7 walks otherwise)."""
        doc = self.figures.main.document
        if doc is None:
            yield
            return
        with self.bokeh.batch(), (doc.models.freeze() if models_change else contextlib.nullcontext()):
            doc.hold("combine")
            try:
                yield
            finally:
                doc.unhold()

    def _redraw(self):
        """Every orbit's points into the big source (the fresh one emptied), the slab and the
        seed marks."""
        t0 = time.perf_counter()
        shown = self.session.shown()
        self.jobs.cancel("fold")
        with self._patch():
            self.figures.set_points(point_columns(shown, len(self.view.coordinates), len(theme.ORBIT_COLORS)))
            self._show_seed_marks()
            if self.slab is not None:
                self.figures.set_slab_rows(self._slab_rows())
        self.last_timing["columns"] = time.perf_counter() - t0
        self._show_count()
        self._schedule_picture()

    def _show_seed_marks(self):
        a, b = self._pair
        every = self.session.shown()
        self.figures.show_seeds([self._seed_of[r.id][a] for r in every], [self._seed_of[r.id][b] for r in every],
                                [r.color for r in every], [r.id for r in every])

    def _append(self, records):
        """New orbits' points into the fresh source: only their rows travel to the page, and
        the page repaints only the layer of the fresh points (the shown points stay, and so
        does the selection's meaning). The fresh rows are folded into the big source after
        FOLD_DELAY seconds without a new orbit, or at once when the fresh slots are full."""
        if not FRESH_LAYER:
            self._append_to_big(records)
            return
        t0 = time.perf_counter()
        shown = [r for r in records if r.shown]
        with self._patch():
            if shown:
                self.figures.add_fresh(point_columns(shown, len(self.view.coordinates), len(theme.ORBIT_COLORS)),
                                       whole=self.slab is not None)
                if self.slab is not None:
                    self.figures.set_slab_rows(self._slab_rows())
            self._show_seed_marks()
        self.last_timing["columns"] = time.perf_counter() - t0
        self._show_count()
        self._schedule_picture()
        if self.figures.n_fresh:
            delay = 0.0 if self.figures.slots_full else FOLD_DELAY
            self.jobs.submit("fold", lambda: None, lambda out: self._fold(), delay=delay)

    def _append_to_big(self, records):
        """The design measured before the fresh layer (benchmarks): new rows streamed into
        the big source (all of it sent again with the slab on)."""
        if self.slab is not None:
            self._redraw()
            return
        t0 = time.perf_counter()
        shown = [r for r in records if r.shown]
        with self._patch():
            if shown:
                cols = point_columns(shown, len(self.view.coordinates), len(theme.ORBIT_COLORS))
                if len(self.figures.points.data["orbit"]) == 0:
                    self.figures.points.data = cols
                else:
                    self.figures.points.stream(cols)
            self._show_seed_marks()
        self.last_timing["columns"] = time.perf_counter() - t0
        self._show_count()
        self._schedule_picture()

    def _fold(self):
        """The fresh rows into the big source (with the slab on, every point sent again)."""
        if not self.figures.n_fresh:
            return
        t0 = time.perf_counter()
        if self.slab is not None:
            picked = self.figures.selected_rows()
            self._redraw()
            if picked.size:
                self.select_points(picked)
        else:
            with self._patch():
                self.figures.fold()
        self.last_timing["fold"] = time.perf_counter() - t0

    # ------------------------------------------------------------------ handlers
    def _on_tap(self, event):
        if event.x is None or event.y is None:
            return
        self.last_timing["tap_wall"] = time.time()   # wall clock, beside the page's (benchmarks)
        self._last_tap = (event.x, event.y)
        self.add_seed(event.x, event.y)

    def _on_double_tap(self, event):
        last, main = self._last_tap, self.figures.main
        if last is not None and event.x is not None and event.y is not None:
            dx = abs(main.x_range.end - main.x_range.start)
            dy = abs(main.y_range.end - main.y_range.start)
            if abs(event.x - last[0]) <= 0.005 * dx and abs(event.y - last[1]) <= 0.005 * dy:
                return  # a double click: its first click made the orbit already
        self._on_tap(event)

    def _on_slab_control(self):
        if self._setting_controls:
            return
        c = self.controls
        if not c.slab_on.value:
            self._quiet(self.clear_slab)
        else:
            self._quiet(self.set_slab)

    def _on_slab_name(self, name):
        if self._setting_controls:
            return
        lo, hi = self.view.windows[name]
        center = self.held.get(name, 0.5 * (lo + hi))
        self._setting_controls = True
        try:
            self.controls.set_slab_window(lo, hi, min(max(center, lo), hi), 0.05 * (hi - lo))
        finally:
            self._setting_controls = False
        if self.controls.slab_on.value:
            self._quiet(self.set_slab, name)

    def _quiet(self, fn, *args, **kwargs):
        """Run a command from a control; a refusal goes to the status line."""
        if self._setting_controls:
            return
        try:
            fn(*args, **kwargs)
        except PhaselabError as exc:
            self._say(str(exc), refused=True)

    def _sync(self, widgets, values):
        """Set controls from the session without their observers acting again."""
        self._setting_controls = True
        try:
            for k, v in values.items():
                if k in widgets and widgets[k].value != v:
                    widgets[k].value = v
        finally:
            self._setting_controls = False

    def _say(self, text, refused=False):
        self._message, self._refused = text, refused
        self.controls.say(text, refused)

    def _report(self, out: Outcome, what="orbit"):
        self.last_error = out
        exc = out.error
        detail = str(exc) if isinstance(exc, PhaselabError) else f"{type(exc).__name__}: {exc}"
        self._say(f"Could not compute the {what}: {detail}", refused=True)

    def _show_count(self):
        shown = self.session.shown()
        n = sum(len(r.points) for r in shown)
        self.controls.set_count(len(shown), n, self._pending)
