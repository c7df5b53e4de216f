"""The explorer's public commands on orbits: seeds, drag, undo, clear, delete, more crossings,
selection, energy and parameters, periodic orbits."""

from __future__ import annotations

import time

import numpy as np

from phaselab.errors import ParameterError, PhaselabError
from phaselab.widgets import computations, messages
from phaselab.widgets.worker import Outcome


#: Seconds after a click at which a placeholder marks the point if its orbit is not shown yet
#: (a warm click is answered sooner and draws once).
PLACEHOLDER_DELAY = 0.15


class OrbitCommands:
    """The commands that add, move, remove, select and recompute orbits, change the energy or
    the parameters, and search periodic orbits (mixed into :class:`Explorer`)."""

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
        serial = self._serial
        self._pending += n
        self._waiting[serial] = pts
        # placeholders, the count of orbits on the way and the status line's note follow only
        # if the orbits are not back within PLACEHOLDER_DELAY: a quick click sends the page
        # one patch, its points (an empty plot says at once that orbits are on the way)
        if not self.session.orbits:
            self._show_count()
        self._soon(PLACEHOLDER_DELAY, self._show_on_the_way)
        t_asked = time.perf_counter()
        accepted = []

        def compute():
            return computations.seed_and_orbits(view, pts, energy, params, cross, color)

        def deliver(out: Outcome):
            # the new points first, as one patch, before the status line, the orbit list and
            # the follow-up work: the page can draw them while the kernel finishes the rest
            with self._held():
                records, refused = self._show_new_orbits(out, pts, n, serial, cross, view)
            self.last_timing["sent_wall"] = time.time()  # the patch is on its way to the page
            if out.error is not None or view is not self.view:
                return
            with self._held():
                self._after_new_orbits(out, records, refused, setting)
            accepted.extend(records)
            self.last_timing["orbit"] = time.perf_counter() - t_asked
            self.last_timing["orbit_compute"] = out.seconds
            self.click_log.append({k: self.last_timing.get(k, float("nan"))
                                   for k in ("tap_wall", "shown_wall", "sent_wall", "orbit_compute")})

        what = (f"computing the orbit from ({self._axis_number(pts[0, 0], 0)}, {self._axis_number(pts[0, 1], 1)})"
                if n == 1 else f"computing {n} orbits")
        self._submit(f"seeds-{serial}", what, compute, deliver, hold=False, announce_after=PLACEHOLDER_DELAY)
        return accepted

    def _show_new_orbits(self, out, pts, n, serial, cross, view):
        """Draw the orbits of one seed request (and take its placeholders away); returns the
        new records and the refused points with their reasons."""
        self._pending -= n
        self._waiting.pop(serial, None)
        self._show_waiting()
        if out.error is not None:
            self._report(out)
            self._show_count()
            return [], []
        batch = out.value
        if view is not self.view:  # the plane changed meanwhile: these points meant another plane
            self._show_count()
            return [], []
        refused = [(pts[k], why) for k, why in enumerate(batch.reasons) if why]
        records = []
        for k, part in enumerate(batch.parts):
            if part is None:
                continue
            rec = self.session.new_record(pts[k], batch.states[k], np.broadcast_to(np.asarray(cross), (n,))[k])
            self._store_part(rec, part)
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
        self.last_timing["shown_wall"] = time.time()
        return records, refused

    def _after_new_orbits(self, out, records, refused, setting):
        """What follows new orbits once they are on their way to the page: the orbit list,
        the status line, a recomputation if the setting changed meanwhile, the companion
        panels and the saved picture."""
        batch = out.value
        if records:
            self._update_pick()
        if refused:
            (x, y), why = refused[0]
            more = f" ({len(refused)} points refused)" if len(refused) > 1 else ""
            self._say(f"No orbit at ({self._axis_number(x, 0)}, {self._axis_number(y, 1)}): {why}{more}.", refused=True)
        elif records:
            self._say(self._orbit_message(records, out.seconds), refused=bool(records[-1].note))
        if batch.value_error:
            self._say(f"{self._message} Colour values failed: {batch.value_error}", refused=True)
        if records and setting != self._setting_key():
            self._recompute([r.id for r in records])
        self._show_count()
        if records:
            self._update_trace()
            self._schedule_picture()

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
            return computations.seed_and_orbits(view, [(x, y)], energy, params, crossings, color)

        def deliver(out: Outcome):
            if out.error is not None:
                self._report(out)
                return
            now = self.session.get(rid)
            batch = out.value
            if now is None or view is not self.view or now is not self.session.newest:
                return
            if batch.parts[0] is None:
                self._say(f"Cannot move the seed to ({self._axis_number(x, 0)}, {self._axis_number(y, 1)}): {batch.reasons[0]}.",
                          refused=True)
                return
            self.session.move(rid, (x, y), batch.states[0])
            self._store_part(now, batch.parts[0])
            self._draw_newest()
            self.last_timing["drag"] = time.perf_counter() - t_asked
            self._say(self._orbit_message([now], out.seconds), refused=bool(now.note))
            self._update_trace()
            self._schedule_picture()

        self._submit("drag", f"moving orbit {rid}", compute, deliver)

    def undo(self):
        """Take back the last action: seeds added, an orbit deleted, or a clear."""
        change = self.session.undo()
        self._after_change(change)

    def clear(self):
        """Remove every orbit (Undo brings them back)."""
        for key in list(self._busy):
            if key.startswith("seeds-") or key in ("drag", "all"):
                self.jobs.cancel(key)
        change = self.session.clear()
        self._after_change(change)

    def delete(self, orbit_id=None):
        """Remove one orbit (default the selected one); Undo brings it back."""
        if orbit_id is None:
            self._say("No orbit to delete.", refused=True)
            return
        self._after_change(self.session.remove(orbit_id))

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
        self._setting_controls = True
        try:
            self.controls.pick.value = orbit_id or 0
        finally:
            self._setting_controls = False
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
            self._refresh_normal_form_curves()

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
            self._refresh_normal_form_curves()

    def find_periodic_orbit(self, x, y, *, returns=None):
        """Find the periodic orbit of ``returns`` returns (default the control's) nearest ``(x, y)``;
        it is marked with its stability's shape and its residue is shown in the status."""
        k = int(self.controls.returns.value if returns is None else returns)
        view, energy, params = self.view, self.session.energy, self.params
        manifolds = bool(self.controls.manifolds.value)

        # a newer search replaces one that has not started: only the newest keeps its mark
        for old in [w for w in self._waiting if isinstance(w, tuple) and w[0] == "periodic"]:
            del self._waiting[old]
        key = ("periodic", self._next_serial())
        self._waiting[key] = np.array([[float(x), float(y)]])
        self._soon(PLACEHOLDER_DELAY, self._show_waiting)

        def compute():
            return computations.periodic(view, (x, y), k, energy, params, manifolds=manifolds)

        def deliver(out: Outcome):
            self._waiting.pop(key, None)
            self._show_waiting()
            if view is not self.view:
                return
            if out.error is not None:
                why = out.error if isinstance(out.error, PhaselabError) else f"{type(out.error).__name__}: {out.error}"
                self._say(f"No period-{k} orbit found near ({self._axis_number(x, 0)}, {self._axis_number(y, 1)}): {why}",
                          refused=True)
                return
            found = out.value
            self.structures.append(found)
            self._draw_structures()
            self._say(messages.periodic(found, view.kind, view.ranges))
            self._schedule_picture()

        self._submit("periodic", f"searching a period-{k} orbit near ({self._axis_number(x, 0)}, "
                     f"{self._axis_number(y, 1)})", compute, deliver)

    def clear_structures(self):
        self.structures = []
        self._draw_structures()
        self._say("Removed the periodic orbits and manifolds.")

    def _after_change(self, change):
        """Redraw after a session change; compute what must be computed."""
        if change.removed or change.added or change.selection:
            self._draw_all()
        if change.message:
            self._say(change.message, refused=change.refused)
        if change.recompute:
            self._recompute(change.recompute)
        self._update_trace()
        self._schedule_picture()
