"""How the explorer draws: orbits, seeds with their ring colours, the selection, periodic
orbits and manifolds, the orbit count, all sent to the page as one patch per update."""

from __future__ import annotations

from phaselab.widgets.marks_key import key_entries, key_html
from phaselab.widgets.worker import call_later


class Drawing:
    """Drawing the session into the figures, inside one held patch (mixed into
    :class:`Explorer`)."""

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
            self._schedule_picture()  # the picture kept in the notebook follows every change
        return hold()

    def _ring_colors(self, shown):
        if self.scale is None:
            return [o.color for o in shown]
        return self.scale.colors([o.scalar for o in shown])

    def _draw_all(self):
        with self._held():
            self._fit_scale()
            self.figures.show_orbits(self.session.orbits)
            self._draw_seeds()
            self._draw_selected()
            self._update_pick()
            self._show_count()

    def _draw_added(self, previous, records):
        with self._held():
            self._fit_scale()
            self.figures.show_added(previous, records)
            self._draw_seeds()
            self._draw_selected()
            self._show_count()

    def _draw_newest(self):
        with self._held():
            self._fit_scale()
            self.figures.show_orbits(self.session.orbits[-1:], newest_only=True)
            self._draw_seeds(keep_latest=True)
            self._draw_selected()
            self._show_count()

    def _draw_seeds(self, keep_latest=False):
        shown = self.session.shown()
        self.figures.show_seeds(shown, self._ring_colors(shown), self.session.newest, keep_latest)

    def _draw_selected(self):
        rec = self.session.get(self.session.selected) if self.session.selected is not None else None
        self.figures.show_selected(rec)

    def _draw_structures(self):
        manifolds = bool(self.controls.manifolds.value)
        with self._held():
            self.figures.show_structures(self.structures, manifolds)
        branches = [b for f in self.structures for b, lines in f.manifolds if lines] if manifolds else []
        self.controls.key.value = key_html(key_entries([f.orbit.stability for f in self.structures], branches))

    def _show_waiting(self):
        """Placeholders at the points whose orbits are on the way (sent only when they change)."""
        pts = [(float(x), float(y)) for batch in self._waiting.values() for x, y in batch]
        shown = list(zip(self.figures.pending.data["x"], self.figures.pending.data["y"]))
        if pts != shown:
            with self._held():
                self.figures.show_pending(pts)

    def _show_on_the_way(self):
        """Placeholders and the orbit count while orbits are on the way (one patch)."""
        with self._held():
            self._show_waiting()
            self._show_count()

    def _soon(self, delay, fn):
        """Call ``fn()`` after ``delay`` seconds on the kernel's event loop; at once without one."""
        call_later(self._loop, delay, fn)

    def _show_count(self):
        """The orbit and point count under the plot."""
        shown = self.session.shown()
        self.controls.set_count(len(shown), int(sum(len(o.points) for o in shown)), self._pending)

    def _aspect_ranges(self, ranges):
        from phaselab.widgets.figures import FRAME_H, FRAME_W

        if not getattr(self, "_equal", False):
            return ranges
        (x0, x1), (y0, y1) = ranges
        sx, sy = (x1 - x0) / FRAME_W, (y1 - y0) / FRAME_H
        s = max(sx, sy)
        cx, cy = (x0 + x1) / 2, (y0 + y1) / 2
        return ((cx - s * FRAME_W / 2, cx + s * FRAME_W / 2), (cy - s * FRAME_H / 2, cy + s * FRAME_H / 2))
