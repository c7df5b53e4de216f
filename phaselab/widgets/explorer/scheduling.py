"""When the explorer's computations run and what the status line says about them: the worker
requests, the recomputations, the warm-up, what the kept picture shows (its scheduling is
:mod:`~phaselab.widgets.explorer.picture_keeping`'s), and the status text."""

from __future__ import annotations

import time

import numpy as np

from phaselab.errors import PhaselabError
from phaselab.widgets import computations, messages
from phaselab.widgets.explorer.picture_keeping import PICTURE_DPI
from phaselab.widgets.messages import number
from phaselab.widgets.worker import Outcome

#: Seconds for which the end of a compilation stays in the status line.
COMPILE_NOTE_SECONDS = 10.0
#: Seconds of quiet after which the companion panels follow the selected orbit: longer than
#: the usual gap between quick clicks, so a run of clicks computes only the points (a trace
#: and its frequency analysis, about as long as the orbit itself, would run beside the next
#: click and delay it).
TRACE_DELAY = 0.6


class Scheduling:
    """Requests to the worker threads (newest wins, results delivered as one patch), the
    recomputations after a change, and the status line's text (mixed into :class:`Explorer`)."""

    def _submit(self, key, busy, compute, deliver, delay=0.0, runner=None, hold=True, announce_after=0.0):
        """Queue ``compute`` for the worker; ``busy`` says what runs meanwhile (in the status
        line at once, or after ``announce_after`` seconds if it is still running: a quick answer
        then sends the page nothing before its result); the bokeh changes of ``deliver`` reach
        the page as one message (``hold=False``: ``deliver`` holds its changes itself, in as
        many patches as it chooses)."""
        if busy:
            self._busy[key] = busy
            self._busy_since.setdefault(key, time.monotonic())
            if announce_after:
                self._soon(announce_after, lambda: self._announce(key))
            else:
                self._announce(key)

        def held(out):
            self._busy.pop(key, None)
            self._busy_since.pop(key, None)
            if out.error is not None:
                self.last_error = out
            if hold:
                with self._held():
                    deliver(out)
            else:
                deliver(out)
            self._show_status()

        (runner or self.jobs).submit(key, compute, held, delay=delay)

    def _announce(self, key):
        """Show in the status line that ``key`` runs, if it still does."""
        if key in self._busy:
            self._show_status()
            self._tick()

    def _recompute_all(self, frame=True, what=None, keep_ranges=False):
        n = len(self.session.orbits)
        view, energy, params, color = self.view, self.session.energy, self.params, self._color_spec()
        snapshot = [(o.id, o.seed, o.crossings, o.revision) for o in self.session.orbits]
        t_asked = time.perf_counter()

        def compute():
            return computations.recompute(view, [s for _, s, _, _ in snapshot], energy, params,
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
                    self._store_part(rec, part)
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
            return computations.seed_and_orbits(view, [s for _, s, _, _ in snapshot], energy, params,
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
                self._store_part(rec, batch.parts[k])
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
            f.show_panels(([], []), ([], []))
            return
        view, state, params = self.view, rec.state.copy(), self.params
        until = np.nan
        if rec.section is not None and rec.section.counts[0] > 0:
            until = float(rec.section.times[0, int(rec.section.counts[0]) - 1])
        if view.kind == "map":
            until = rec.crossings
        rid, rev, crossings, section = rec.id, rec.revision, rec.crossings, rec.section

        def compute():
            return computations.trace(view, state, params, until, crossings, section)

        def deliver(out: Outcome):
            now = self.session.current
            if now is None or now.id != rid or now.revision != rev or view is not self.view:
                return
            if out.error is not None:
                self._say(f"{self._message} | no trace of this orbit: {out.error}", refused=True)
                return
            tr = out.value
            (x1, y1), (x2, y2) = tr.panel1, tr.panel2
            f.show_panels((x1, y1), (x2, y2))
            f.color_panels(now.color)
            now.nu = tr.nu or now.nu
            if tr.nu:
                freq = ", ".join(f"{n} {v:.6g}" for n, v in zip(tr.nu_names, tr.nu))
                base = self._message.split(" | ")[0]
                self._say(f"{base} | orbit {rid} frequencies: {freq} ({tr.nu_unit})", refused=self._refused)

        # on the second worker thread, once clicks and drags pause for TRACE_DELAY: the
        # companion curves never delay a click or a drag, on the kernel or on the page
        self._submit("trace", "", compute, deliver, delay=TRACE_DELAY, runner=self.idle_jobs)

    def _warm_up(self):
        """Compile the loops in the background while the user reads the plot: a click's
        section on the click's worker, then the companion trace on the second worker (a first
        click waits for the section's compile only, not for both)."""
        (x0, x1), (y0, y1) = self.view.ranges
        view, energy, params = self.view, self.session.energy, self.params

        def state():
            rng = np.random.default_rng(7)
            for _ in range(40):
                s = view.seeds([(rng.uniform(x0, x1), rng.uniform(y0, y1))], energy, params)
                if s.valid[0]:
                    return s.states[:1]
            return None

        def section():
            z = state()
            return z is not None and view.compute(z, energy, params, crossings=4) is not None

        def trace():
            z = state()
            return z is not None and view.trace(z[0], params, 1.0) is not None

        # numba compiles one function at a time (a process-wide lock): the trace's compile
        # starts once the section's is done, so it never stands before a click's section
        self._submit("warm-up", "", section,
                     lambda out: self._submit("warm-up trace", "", trace, lambda o: None, runner=self.idle_jobs))

    def _picture_job(self):
        """What the kept picture shows now (see :mod:`~phaselab.widgets.explorer.picture_keeping`):
        the drawing of a snapshot of the view, its state, no caption note."""
        snap = self.snapshot()

        def compute():
            return computations.picture_png(snap, dpi=PICTURE_DPI)

        return compute, self._picture_state(snap), ""

    def _picture_state(self, snap):
        """What the picture shows, in numbers a reader (or a test) can compare with the page:
        the window, the orbits and marks shown, and what the colours mean."""
        return {"ranges": [float(f"{v:.6g}") for r in snap.ranges for v in r], "orbits": len(snap.orbits),
                "marks": len(snap.periodic),
                "colour": "own" if self.color_by is None else (self.color_by if isinstance(self.color_by, str)
                                                                else "custom")}

    def _store_part(self, rec, part):
        """Copy a computed orbit part (points, colour value, frequencies, note) into its record."""
        rec.section, rec.points, rec.scalar = part.section, part.points, part.scalar
        rec.nu = part.nu or rec.nu
        rec.note, rec.stop = part.note, part.stop

    def _axis_number(self, v, axis):
        """``v`` as the status line writes a coordinate on ``axis`` (0 or 1): 4 significant
        digits, rounding noise far below the axis range shown as 0."""
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
        """What is running, each with how long it has run (once that is a second or more)."""
        now = time.monotonic()

        def since(t0):
            return f" ({now - t0:.0f} s)" if t0 is not None and now - t0 >= 1.0 else ""

        lines = []
        if self._compiling:
            first = min((self._compile_started.get(w, now) for w in self._compiling), default=now)
            lines += [self._progress.describe(what) + since(first) for what in dict.fromkeys(self._compiling)]
        lines += [t + since(self._busy_since.get(k)) for k, t in self._busy.items() if t]
        return lines

    def _tick(self):
        """Refresh the status line once a second while something runs (needs the kernel's
        event loop; scripts see the status when they ask for it)."""
        loop = self._loop
        if self._ticking or loop is None or loop.is_closed() or not loop.is_running():
            return
        if not (self._busy or self._compiling):
            return
        self._ticking = True

        def again():
            self._ticking = False
            if self._busy or self._compiling:
                self._show_status()
                self._tick()

        loop.call_later(1.0, again)

    def _show_status(self):
        text = self._message
        note = self._compile_note[0]
        if note:
            text = f"{text} ({note})" if text else note[:1].upper() + note[1:] + "."
        self.controls.say(text, self._refused, self._busy_lines())

    def _say(self, text, refused=False):
        self._message, self._refused = text, refused
        if self._compile_note[0] and time.monotonic() - self._compile_note[1] > COMPILE_NOTE_SECONDS:
            self._compile_note = ("", 0.0)
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
