"""``phaselab.explore``: an interactive surface of section for a JupyterLab notebook.

The widget is an ``ipywidgets.VBox`` holding one bokeh layout (through
``jupyter_bokeh.BokehModel``, so bokeh's tap and drag events reach Python without a bokeh
server), sliders for the energy and every model parameter, a few buttons and a status line.

* a click on the plot starts an orbit there (for a section the missing momentum is solved
  from the current energy; a click outside the allowed region is refused in the status line);
* the newest seed (the ringed one) can be dragged: its orbit follows, newest position wins;
* moving a slider recomputes every orbit with the new value;
* the two small plots show the selected orbit in configuration space and its energy error.

Computations run in a worker thread (compiled kernels release the GIL) and their results
are applied on the kernel's event loop, so the notebook stays responsive. ``background=False``
computes in the calling thread instead (scripts, tests, timing).

Section points are model results; where they inform a design decision confirm them with
validated tools and the responsible engineers.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field
from pathlib import Path

import ipywidgets as W
import numpy as np

from phaselab.model.params import finite_number
from phaselab.errors import ParameterError, PhaselabError
from phaselab.widgets import theme
from phaselab.widgets.views import make_view
from phaselab.widgets.worker import JobRunner, Outcome

CHAOS_INDICATORS = ("megno", "lyapunov", "fli", "sali")

__all__ = ["explore", "Explorer", "OrbitRecord", "load_bokehjs"]

#: Seconds of computation per new orbit below which a click is answered without the worker
#: thread (the event loop is then held for at most about this long).
INLINE_BUDGET = 0.04


@dataclass
class OrbitRecord:
    """One orbit on the plot.

    Attributes
    ----------
    id : int
        Stable identifier (1, 2, ... in order of creation).
    seed : tuple of float
        The clicked point in the shown plane ``(x, y)``.
    state : ndarray, shape (2n,), or None
        The full initial state at the current energy and parameters (None when the seed is
        outside the allowed region there).
    points : ndarray, shape (m, 2)
        The shown coordinates of its crossings (iterates, samples).
    section : Section or None
        The one-orbit result the points came from.
    color : str
    scalar : float
        The per-orbit value used for colouring when ``color_by`` is given (NaN otherwise).
    note : str
        Why the orbit is hidden, when it is.
    """

    id: int
    seed: tuple
    state: np.ndarray | None = None
    points: np.ndarray = field(default_factory=lambda: np.empty((0, 2)))
    section: object = None
    color: str = theme.ORBIT_COLORS[0]
    scalar: float = float("nan")
    note: str = ""
    revision: int = 0


def _slider_range(param):
    if param.range is not None:
        return param.range
    d = float(param.default)
    if d > 0:
        return (d / 4.0, d * 4.0)
    if d < 0:
        return (d * 4.0, d / 4.0)
    return (-1.0, 1.0)


def _slider_grid(lo, hi, value):
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


def _finite(value, what):
    return finite_number(value, what)


_CSS = f"""
<style>
.phaselab-explorer {{ font-family: {theme.FONT}; color: {theme.INK}; background: #ffffff;
  border: 1px solid {theme.RULE}; border-radius: 6px; padding: 14px 16px 10px 16px; }}
.phaselab-explorer .pl-title {{ font-size: 15px; font-weight: 600; letter-spacing: 0.01em; }}
.phaselab-explorer .pl-sub {{ font-size: 12px; color: {theme.MUTED}; }}
.phaselab-explorer .pl-count {{ font-size: 12px; color: {theme.MUTED}; text-align: right; }}
.phaselab-explorer .pl-status {{ font-size: 12px; color: {theme.MUTED}; border-top: 1px solid {theme.RULE};
  padding-top: 6px; min-height: 18px; }}
.phaselab-explorer .pl-status.refused {{ color: {theme.REFUSED}; }}
.phaselab-explorer .widget-label {{ color: {theme.INK}; }}
.phaselab-explorer .widget-button {{ background: {theme.PANEL}; color: {theme.INK};
  border: 1px solid {theme.RULE}; border-radius: 4px; }}
.phaselab-explorer .widget-button:hover {{ background: #ebe8de; }}
</style>
"""


_BOKEHJS_SHOWN = False


def load_bokehjs(force=False):
    """Put BokehJS (the version matching the Python bokeh, inline: no network) into the page.

    jupyter_bokeh renders with the BokehJS already on the page, so the explorer calls this
    before it is first displayed in a kernel session; call it again with ``force=True``
    after reloading the browser tab.
    """
    global _BOKEHJS_SHOWN
    if _BOKEHJS_SHOWN and not force:
        return
    from bokeh.io import output_notebook
    from bokeh.resources import INLINE

    output_notebook(resources=INLINE, hide_banner=True)
    _BOKEHJS_SHOWN = True


class Explorer(W.VBox):
    """The interactive explorer (see :func:`explore` for the parameters).

    Attributes
    ----------
    orbits : list of OrbitRecord
    params : dict of str to float
        Current parameter values (a copy; change them with the sliders or :meth:`set_params`).
    energy : float or None
        Current energy (assign to change it).
    figures : phaselab.widgets.figures.Figures
        The bokeh models and their data sources.
    status : str
        The text of the status line.
    """

    def __init__(self, system, energy=None, plane=None, solve_for=None, crossings=300, params=None,
                 ranges=None, sign=+1, energy_range=None, color_by=None, color_label=None,
                 background=True, export_dir=".", export_formats=(".png", ".csv"), duration=None,
                 method="auto", dt=None, title=None):
        from jupyter_bokeh import BokehModel

        from phaselab.widgets.figures import Figures

        self.system = system
        self.view = make_view(system, plane=plane, solve_for=solve_for, crossings=crossings,
                              ranges=ranges, sign=sign, duration=duration, method=method, dt=dt)
        self._params = dict(system.params)
        if params:
            system.param_values(params)  # names and values checked, errors name the problem
            self._params.update({str(getattr(k, "name", k)): float(v) for k, v in params.items()})
        if self.view.uses_energy and self.view.kind == "section":
            if energy is None:
                raise ParameterError("a surface of section needs an energy: pass energy=E (units of H)")
            self._energy = _finite(energy, "energy")
        else:
            self._energy = None if energy is None else _finite(energy, "energy")
        self.color_by = color_by
        self.export_dir = Path(export_dir)
        allowed = (".png", ".svg", ".pdf", ".csv", ".nc", ".html")
        self.export_formats = tuple(str(f) if str(f).startswith(".") else f".{f}" for f in export_formats)
        bad = [f for f in self.export_formats if f not in allowed]
        if bad or not self.export_formats:
            raise ParameterError(f"export_formats must be some of {', '.join(allowed)}; got {export_formats!r}")
        self.orbits: list[OrbitRecord] = []
        self._history: list[tuple] = []
        self._next_id = 1
        self._version = 0
        self._selected: int | None = None
        self._quiet = False
        self.jobs = JobRunner(background)
        self._cost: float | None = None
        self.last_timing: dict[str, float] = {}

        self.view.fit_ranges(self._energy, self._params)
        trace_labels = self._trace_labels()
        self._color_label = (color_label or (color_by if isinstance(color_by, str) else "value")) \
            if color_by is not None else None
        self.figures = Figures(self.view.axis_names, self.view.ranges, trace_labels,
                               scalar_label=self._color_label)
        from bokeh.events import Tap

        self.figures.main.on_event(Tap, self._on_tap)
        self.figures.latest.on_change("data", self._on_drag)
        self.bokeh = BokehModel(self.figures.layout)

        # ---------------------------------------------------------------- controls
        name = title or getattr(system, "name", "system")
        self._title = W.HTML(f"<div class='pl-title'>{name}</div><div class='pl-sub'>{self.view.describe()}</div>")
        self._count = W.HTML("<div class='pl-count'>no orbits yet: click the plot</div>",
                             layout=W.Layout(width="260px"))
        slider_style = {"description_width": "90px"}
        self.sliders: dict[str, W.FloatSlider] = {}
        rows = []
        if self.view.uses_energy and self._energy is not None:
            lo, hi = energy_range if energy_range is not None else self._energy_range(self._energy)
            lo, hi = _finite(lo, "energy_range low"), _finite(hi, "energy_range high")
            if not lo < hi:
                raise ParameterError(f"energy_range must be (low, high) with low < high, got {energy_range!r}")
            lo, hi, step = _slider_grid(lo, hi, self._energy)
            s = W.FloatSlider(value=self._energy, min=lo, max=hi, step=step, description="energy E", readout_format=".4g",
                              continuous_update=True, style=slider_style, layout=W.Layout(width="420px"))
            s.observe(self._on_energy_slider, "value")
            self.sliders["energy"] = s
            rows.append(s)
        for p in system.parameters:
            lo, hi = _slider_range(p)
            v = self._params[p.name]
            lo, hi, step = _slider_grid(lo, hi, v)
            s = W.FloatSlider(value=v, min=lo, max=hi, step=step, description=p.name, readout_format=".4g", continuous_update=True,
                              style=slider_style, layout=W.Layout(width="420px"))
            s.observe(self._on_param_slider, "value")
            self.sliders[p.name] = s
            rows.append(s)
        bl = W.Layout(width="84px")
        self._clear = W.Button(description="Clear", tooltip="Remove every orbit", layout=bl)
        self._undo = W.Button(description="Undo", tooltip="Take back the last seed or the last clear", layout=bl)
        self._export = W.Button(description="Export", tooltip="Save figure (PNG) and data (CSV)", layout=bl)
        self._stem = W.Text(value=f"{name}-section", placeholder="file name", layout=W.Layout(width="180px"))
        self._clear.on_click(lambda _: self.clear())
        self._undo.on_click(lambda _: self.undo())
        self._export.on_click(lambda _: self._export_clicked())
        self._pick = W.Dropdown(options=[("newest", 0)], value=0, description="trace of",
                                style={"description_width": "56px"}, layout=W.Layout(width="180px"))
        self._pick.observe(self._on_pick, "value")
        self._status = W.HTML("")
        self._status_text = ""
        controls = W.HBox([W.VBox(rows, layout=W.Layout(flex="1 1 auto")),
                           W.VBox([W.HBox([self._clear, self._undo, self._export]),
                                   W.HBox([self._stem]), self._pick],
                                  layout=W.Layout(align_items="flex-end"))],
                          layout=W.Layout(justify_content="space-between", margin="6px 0 4px 0"))
        header = W.HBox([self._title, self._count], layout=W.Layout(justify_content="space-between"))
        super().__init__([W.HTML(_CSS), header, self.bokeh, controls, self._status],
                         layout=W.Layout(width="fit-content"))
        self.add_class("phaselab-explorer")
        self._apply_frame(self.view.frame(self._energy, self._params))
        self._say("Click the plot to start an orbit; drag the ringed seed to move it.")
        if self.jobs.background:
            self._warm_up()

    # ================================================================= public surface
    @property
    def params(self) -> dict:
        return dict(self._params)

    @property
    def energy(self):
        return self._energy

    @energy.setter
    def energy(self, value):
        self.set_energy(value)

    @property
    def status(self) -> str:
        return self._status_text

    def add_seed(self, x, y):
        """Start an orbit at ``(x, y)`` in the shown plane; returns its record (or None if refused)."""
        out = self.add_seeds([(x, y)])
        return out[0] if out else None

    def add_seeds(self, points):
        """Start orbits at several points ``[(x, y), ...]``; returns the accepted records.

        Points outside the allowed region (or not finite) are refused with a message.
        """
        try:
            pts = np.atleast_2d(np.asarray(points, dtype=float))
            if pts.ndim != 2 or pts.shape[1] != 2:
                raise ParameterError(f"seeds must be (x, y) pairs in the shown plane, got shape {pts.shape}")
            seeding = self.view.seeds(pts, self._energy, self._params)
        except (PhaselabError, ValueError, TypeError) as exc:
            self._say(f"Seed refused: {exc}", refused=True)
            return []
        records = []
        refused = []
        for k, (x, y) in enumerate(pts):
            if not seeding.valid[k]:
                refused.append((x, y, seeding.reasons[k]))
                continue
            rec = OrbitRecord(id=self._next_id, seed=(float(x), float(y)), state=seeding.states[k].copy(),
                              color=theme.orbit_color(self._next_id - 1))
            self._next_id += 1
            records.append(rec)
        if refused:
            x, y, why = refused[0]
            more = f" ({len(refused)} points refused)" if len(refused) > 1 else ""
            self._say(f"No orbit at ({x:.4g}, {y:.4g}): {why}{more}.", refused=True)
        if not records:
            return []
        self.orbits.extend(records)
        self._history.append(("add", [r.id for r in records]))
        self._selected = None
        with self._held():
            self._render_seeds()
            self._compute_orbits(records, key=f"orbits-{records[0].id}", stream=True)
        self._update_pick()
        return records

    def _held(self):
        """Collect the bokeh changes made inside into one message to the page."""
        from contextlib import contextmanager

        doc = self.figures.main.document

        @contextmanager
        def hold():
            if doc is None:
                yield
                return
            doc.hold("combine")
            try:
                yield
            finally:
                doc.unhold()
        return hold()

    def undo(self):
        """Take back the last action: the last seeds added, or the last clear."""
        if not self._history:
            self._say("Nothing to undo.")
            return
        kind, payload = self._history.pop()
        if kind == "add":
            ids = set(payload)
            self.orbits = [o for o in self.orbits if o.id not in ids]
            self._say(f"Removed {len(ids)} orbit{'s' if len(ids) > 1 else ''}.")
        else:
            self.orbits = payload + self.orbits
            self._say(f"Restored {len(payload)} orbits.")
            self._recompute_all()
        self._redraw()

    def clear(self):
        """Remove every orbit (Undo brings them back)."""
        if self.orbits:
            self._history.append(("clear", list(self.orbits)))
        self.orbits = []
        self.jobs.cancel()
        self._version += 1
        self._redraw()
        self._say("Cleared.")

    def set_energy(self, value):
        """Change the energy and recompute every orbit at it."""
        if not self.view.uses_energy:
            self._say("This plot has no energy to set.", refused=True)
            return
        try:
            value = _finite(value, "energy")
        except ParameterError as exc:
            self._say(str(exc), refused=True)
            self._sync_sliders()
            return
        self._energy = value
        self._sync_sliders()
        self._recompute_all()

    def set_params(self, **values):
        """Change parameter values by name and recompute every orbit."""
        try:
            new = {k: _finite(v, f"parameter {k!r}") for k, v in values.items()}
            self.system.param_values({**self._params, **new})
        except PhaselabError as exc:
            self._say(str(exc), refused=True)
            self._sync_sliders()
            return
        self._params.update(new)
        self._sync_sliders()
        self._recompute_all()

    def select(self, orbit_id):
        """Show orbit ``orbit_id`` in the companion views."""
        if not any(o.id == orbit_id for o in self.orbits):
            self._say(f"There is no orbit {orbit_id}.", refused=True)
            return
        self._selected = orbit_id
        self._quiet = True
        try:
            self._pick.value = orbit_id
        finally:
            self._quiet = False
        self._compute_trace()

    def section(self):
        """All shown orbits as one :class:`~phaselab.compute.results.Section` (None if none)."""
        from phaselab.widgets.records import merge_sections

        return merge_sections([o.section for o in self.orbits if o.section is not None and o.state is not None])

    def export(self, stem=None, formats=None):
        """Save the figure and the data with :func:`phaselab.export.save` in ``formats``
        (default the explorer's ``export_formats``); returns the paths."""
        from phaselab.export import save

        sec = self.section()
        if sec is None:
            raise PhaselabError("there are no orbits to export yet")
        stem = (stem or self._stem.value or "section").strip()
        if not stem or any(c in stem for c in "/\\") or stem.startswith("."):
            raise PhaselabError(f"file name {stem!r} must be a plain name without folders")
        paths = []
        for suffix in formats or self.export_formats:
            kwargs = {}
            if suffix in (".png", ".svg", ".pdf", ".html"):
                if self.color_by is not None:
                    kwargs["color"] = np.array([o.scalar for o in self.orbits if o.section is not None and o.state is not None])
                    kwargs["color_label"] = self._color_label
            paths.append(save(sec, self.export_dir / f"{stem}{suffix}", **kwargs))
        return paths

    def wait(self, timeout=60.0) -> bool:
        """Block until pending computations are done and shown (scripts and tests)."""
        return self.jobs.wait(timeout)

    # ================================================================= events
    def _on_tap(self, event):
        self.last_timing["tap_wall"] = time.time()
        x, y = event.x, event.y
        if x is None or y is None:
            return
        self.add_seed(x, y)

    def _on_drag(self, attr, old, new):
        if self._quiet or not self.orbits:
            return
        xs, ys = list(new.get("x", [])), list(new.get("y", []))
        rec = self.orbits[-1]
        if len(xs) != 1 or len(ys) != 1:
            self._render_seeds()  # a deleted or added point: put the newest seed back
            return
        try:
            x, y = float(xs[0]), float(ys[0])
        except (TypeError, ValueError):
            return
        if (x, y) == rec.seed:
            return
        self.move_seed(x, y)

    def move_seed(self, x, y):
        """Move the newest seed to ``(x, y)`` and recompute its orbit (what a drag does)."""
        if not self.orbits:
            return
        rec = self.orbits[-1]
        try:
            seeding = self.view.seeds([(x, y)], self._energy, self._params)
        except PhaselabError as exc:
            self._say(f"Seed refused: {exc}", refused=True)
            return
        if not seeding.valid[0]:
            self._say(f"Cannot move the seed to ({x:.4g}, {y:.4g}): {seeding.reasons[0]}.", refused=True)
            return
        rec.seed = (float(x), float(y))
        rec.state = seeding.states[0].copy()
        rec.revision += 1
        self._render_seeds(keep_latest=True)
        self._compute_orbits([rec], key="drag", delay=0.02)

    @staticmethod
    def _same(a, b):
        # the page echoes slider values back with rounding noise: not a change
        try:
            return abs(float(a) - float(b)) <= 1e-9 * max(1.0, abs(float(b)))
        except (TypeError, ValueError):
            return False

    def _on_energy_slider(self, change):
        if self._quiet or self._same(change["new"], self._energy):
            return
        self.set_energy(change["new"])

    def _on_param_slider(self, change):
        if self._quiet:
            return
        name = next(k for k, s in self.sliders.items() if s is change["owner"])
        if self._same(change["new"], self._params[name]):
            return
        self.set_params(**{name: change["new"]})

    def _on_pick(self, change):
        if self._quiet:
            return
        self._selected = change["new"] or None
        self._compute_trace()

    def _export_clicked(self):
        try:
            paths = self.export()
        except PhaselabError as exc:
            self._say(f"Export: {exc}", refused=True)
            return
        self._say("Saved " + ", ".join(str(p) for p in paths))

    # ================================================================= computing
    def _compute_orbits(self, records, key, stream=False, delay=0.0):
        states = np.array([r.state for r in records])
        wanted = [(r.id, r.revision) for r in records]
        energy, params, version = self._energy, dict(self._params), self._version
        t_asked = time.perf_counter()

        def compute():
            return self.view.compute(states, energy, params)

        def deliver(out: Outcome):
            if version != self._version:
                return
            if out.error is not None:
                self._report(out)
                return
            self._learn_cost(out, len(wanted))
            live = {o.id: o for o in self.orbits}
            fresh = []
            for k, (oid, rev) in enumerate(wanted):
                rec = live.get(oid)
                if rec is None or rec.revision != rev:
                    continue
                self._store(rec, out.value, k)
                fresh.append(rec)
            if not fresh:
                return
            if stream and len(fresh) == len(wanted):
                self._stream_points(fresh)
            else:
                self._render_points()
            self.last_timing["orbit"] = time.perf_counter() - t_asked
            self.last_timing["orbit_compute"] = out.seconds
            self.last_timing["shown_wall"] = time.time()
            n = int(sum(len(r.points) for r in fresh))
            rec = fresh[-1]
            extra = f" (stopped: {rec.note})" if rec.note else ""
            self._say(f"Orbit {rec.id}: {len(rec.points)} {self.view.noun} from "
                      f"({rec.seed[0]:.4g}, {rec.seed[1]:.4g}) in {out.seconds * 1000:.0f} ms{extra}."
                      if len(fresh) == 1 else f"{len(fresh)} orbits, {n} {self.view.noun}.")
            self._update_count()
            self._compute_trace()

        budget = INLINE_BUDGET * len(records)
        if stream and self.jobs.background and self._cost is not None and self._cost * len(records) < budget:
            # cheap enough to answer a click at once (well under the ~100 ms the event loop
            # may be held): no thread hop, one combined message to the page
            self.jobs.submit_inline(compute, deliver)
        else:
            self._submit(key, compute, deliver, delay=delay)

    def _submit(self, key, compute, deliver, delay=0.0):
        """Queue ``compute`` for the worker; its bokeh changes reach the page as one message."""
        def held(out):
            with self._held():
                deliver(out)
        self.jobs.submit(key, compute, held, delay=delay)

    def _learn_cost(self, out: Outcome, n_orbits: int):
        """Running estimate of the seconds one orbit's computation takes."""
        if out.error is None and n_orbits > 0:
            self._cost = out.seconds / n_orbits  # the latest one (the first includes compiling)

    def _store(self, rec, sec, k):
        from phaselab.widgets.records import one_orbit

        part = one_orbit(sec, k)
        i, j = self.view.axes
        pts = part.points[0, : int(part.counts[0])]
        rec.points = np.column_stack([pts[:, i], pts[:, j]]) if len(pts) else np.empty((0, 2))
        rec.section = part
        rec.note = "escaped or stopped early" if bool(part.escaped[0]) else ""
        rec.scalar = self._scalar(part)

    def _scalar(self, part):
        if self.color_by is None:
            return float("nan")
        try:
            if isinstance(self.color_by, str) and self.color_by in CHAOS_INDICATORS:
                return self._indicator(part)
            if callable(self.color_by):
                return float(np.ravel(self.color_by(part))[0])
            return float(np.ravel(getattr(part, self.color_by))[0])
        except Exception as exc:  # a user function: report, never break the widget
            self._say(f"color_by failed: {exc}", refused=True)
            return float("nan")

    def _indicator(self, part):
        """A chaos indicator of the orbit's seed, over the time its section points span."""
        from phaselab.compute.chaos import chaos_indicators

        count = int(part.counts[0])
        if count == 0:
            return float("nan")
        is_map = getattr(self.system, "kind", "flow") == "map"
        span = float(count) if is_map else float(part.times[0, count - 1])
        if not span > 0:
            return float("nan")
        seed = part.seeds[:, : len(self.system.state_symbols)]
        options = {} if is_map else {"dt": part.dt, "method": part.method}
        ind = chaos_indicators(self.system, seed, span, params=dict(self._params),
                               vectors=2 if self.color_by == "sali" else 1, **options)
        return float(getattr(ind, self.color_by)[0])

    def _recompute_all(self):
        self._version += 1
        version = self._version
        energy, params = self._energy, dict(self._params)
        snapshot = [(o.id, o.seed) for o in self.orbits]
        view = self.view
        t_asked = time.perf_counter()

        def compute():
            frame = view.frame(energy, params)
            if not snapshot:
                return frame, None, None
            seeding = view.seeds([s for _, s in snapshot], energy, params)
            sec = None
            if seeding.valid.any():
                sec = view.compute(seeding.states[seeding.valid], energy, params)
            return frame, seeding, sec

        def deliver(out: Outcome):
            if version != self._version:
                return
            if out.error is not None:
                self._report(out)
                return
            frame, seeding, sec = out.value
            if sec is not None:
                self._learn_cost(out, sec.n_orbits)
            self._apply_frame(frame)
            hidden = 0
            if seeding is not None:
                live = {o.id: o for o in self.orbits}
                row = 0
                for k, (oid, _) in enumerate(snapshot):
                    rec = live.get(oid)
                    if not seeding.valid[k]:
                        if rec is not None:
                            rec.state, rec.section, rec.points = None, None, np.empty((0, 2))
                            rec.note = seeding.reasons[k]
                        hidden += 1
                        continue
                    if rec is not None:
                        rec.state = seeding.states[k].copy()
                        rec.revision += 1
                        self._store(rec, sec, row)
                    row += 1
            self._render_points()
            self._render_seeds()
            self.last_timing["all"] = time.perf_counter() - t_asked
            self._update_count()
            what = self._setting_text(energy, params)
            if frame.empty:
                self._say(f"At {what} the shown plane has no energetically allowed region (the energy "
                          "shell is empty here); orbits are kept and come back when it is not.", refused=True)
            elif hidden:
                self._say(f"At {what}: {hidden} of {len(snapshot)} seeds lie outside the allowed region "
                          "and are hidden.", refused=True)
            else:
                self._say(f"Recomputed {len(snapshot)} orbit{'s' if len(snapshot) != 1 else ''} at {what} "
                          f"in {out.seconds * 1000:.0f} ms.")
            self._compute_trace()

        self._submit("all", compute, deliver)

    def _compute_trace(self):
        rec = self._selected_record()
        src_t, src_e = self.figures.trace_source, self.figures.error_source
        if rec is None or rec.state is None:
            src_t.data, src_e.data = dict(x=[], y=[]), dict(x=[], y=[])
            return
        if self.view.kind == "map":
            n = np.arange(len(rec.points), dtype=float)
            src_t.data = dict(x=n, y=rec.points[:, 0])
            src_e.data = dict(x=[], y=[])
            self.figures.trace_line.glyph.line_color = rec.color
            return
        state, params, version = rec.state.copy(), dict(self._params), self._version
        until = np.nan
        if rec.section is not None and rec.section.counts[0] > 0:
            until = float(rec.section.times[0, int(rec.section.counts[0]) - 1])
        view, rid, rrev = self.view, rec.id, rec.revision

        def compute():
            return view.trace(state, params, until)

        def deliver(out: Outcome):
            if version != self._version:
                return
            now = self._selected_record()
            if now is None or now.id != rid or now.revision != rrev:
                return
            if out.error is not None:
                self._report(out, what="trace")
                return
            tr = out.value
            if tr is None:
                return
            step = max(1, len(tr.t) // 1500)
            a, b = view.trace_axes
            xs = tr.t[::step] if a == "t" else tr.states[0, ::step, a]
            ys = tr.states[0, ::step, b]
            src_t.data = dict(x=np.asarray(xs, float), y=np.asarray(ys, float))
            src_e.data = dict(x=np.asarray(tr.t[::step], float), y=np.asarray(tr.energy_error[0, ::step], float))
            self.figures.trace_line.glyph.line_color = now.color
            self.figures.error_line.glyph.line_color = now.color

        self._submit("trace", compute, deliver, delay=0.05)

    def _warm_up(self):
        """Compile the kernels in the background while the user reads the plot."""
        (x0, x1), (y0, y1) = self.view.ranges
        view, energy, params = self.view, self._energy, dict(self._params)

        def compute():
            rng = np.random.default_rng(7)
            for _ in range(40):
                p = (rng.uniform(x0, x1), rng.uniform(y0, y1))
                s = view.seeds([p], energy, params)
                if s.valid[0]:
                    view.compute(s.states[:1], energy, params)
                    view.trace(s.states[0], params, 1.0)
                    return True
            return False

        self.jobs.submit("warm-up", compute, lambda out: None)

    # ================================================================= drawing
    def _apply_frame(self, frame):
        f = self.figures
        f.lines.data = dict(xs=[c[:, 0] for c in frame.lines], ys=[c[:, 1] for c in frame.lines])
        f.accents.data = dict(xs=[c[:, 0] for c in frame.accents], ys=[c[:, 1] for c in frame.accents])
        if frame.forbidden is not None:
            gx, gy = frame.grid_x, frame.grid_y
            f.forbidden.data = dict(image=[frame.forbidden.astype(float)], x=[gx[0]], y=[gy[0]],
                                    dw=[gx[-1] - gx[0]], dh=[gy[-1] - gy[0]])
        self._frame = frame

    def _point_columns(self, records):
        shown = [r for r in records if r.state is not None and len(r.points)]
        if not shown:
            return dict(x=np.empty(0), y=np.empty(0), shade=np.empty(0, np.int32), orbit=np.empty(0, np.int32),
                        value=np.empty(0))
        x = np.concatenate([r.points[:, 0] for r in shown])
        y = np.concatenate([r.points[:, 1] for r in shown])
        n_colors = len(theme.ORBIT_COLORS)
        shade = np.concatenate([np.full(len(r.points), (r.id - 1) % n_colors, np.int32) for r in shown])
        orbit = np.concatenate([np.full(len(r.points), r.id, np.int32) for r in shown])
        value = np.concatenate([np.full(len(r.points), r.scalar) for r in shown])
        return dict(x=x, y=y, shade=shade, orbit=orbit, value=value)

    def _render_points(self):
        self.figures.points.data = self._point_columns(self.orbits)
        self._update_scale()

    def _stream_points(self, records):
        self.figures.points.stream(self._point_columns(records))
        self._update_scale()

    def _update_scale(self):
        m = self.figures.scalar_mapper
        if m is None:
            return
        v = np.array([o.scalar for o in self.orbits if o.state is not None], float)
        v = v[np.isfinite(v)]
        if v.size:
            lo, hi = float(v.min()), float(v.max())
            if hi <= lo:
                hi = lo + (abs(lo) * 1e-3 or 1e-12)
            m.low, m.high = lo, hi

    def _render_seeds(self, keep_latest=False):
        shown = [o for o in self.orbits if o.state is not None]
        self.figures.seeds.data = dict(x=[o.seed[0] for o in shown], y=[o.seed[1] for o in shown],
                                       color=[o.color for o in shown])
        self._quiet = True
        try:
            if self.orbits and self.orbits[-1].state is not None:
                s = self.orbits[-1].seed
                cur = self.figures.latest.data
                if not (keep_latest and list(cur.get("x", [])) == [s[0]] and list(cur.get("y", [])) == [s[1]]):
                    self.figures.latest.data = dict(x=[s[0]], y=[s[1]])
            else:
                self.figures.latest.data = dict(x=[], y=[])
        finally:
            self._quiet = False

    def _redraw(self):
        self._render_points()
        self._render_seeds()
        self._update_pick()
        self._update_count()
        self._compute_trace()

    def _update_count(self):
        shown = [o for o in self.orbits if o.state is not None]
        n = sum(len(o.points) for o in shown)
        text = (f"{len(shown)} orbit{'s' if len(shown) != 1 else ''} &middot; {n} points"
                if self.orbits else "no orbits yet: click the plot")
        self._count.value = f"<div class='pl-count' data-orbits='{len(shown)}' data-points='{n}'>{text}</div>"

    def _update_pick(self):
        self._quiet = True
        try:
            options = [("newest", 0)] + [(f"orbit {o.id}", o.id) for o in self.orbits]
            keep = self._pick.value if any(v == self._pick.value for _, v in options) else 0
            self._pick.options = options
            self._pick.value = keep
            if keep == 0:
                self._selected = None
        finally:
            self._quiet = False

    def _selected_record(self):
        if not self.orbits:
            return None
        if self._selected is None:
            return self.orbits[-1]
        return next((o for o in self.orbits if o.id == self._selected), self.orbits[-1])

    def _sync_sliders(self):
        self._quiet = True
        try:
            if "energy" in self.sliders and self._energy is not None:
                self.sliders["energy"].value = self._energy
            for name, s in self.sliders.items():
                if name != "energy":
                    s.value = self._params[name]
        finally:
            self._quiet = False

    def _energy_range(self, e):
        half = abs(e) if e != 0 else 1.0
        return (e - half, e + half)

    def _setting_text(self, energy, params):
        parts = [f"E = {energy:.4g}"] if energy is not None and self.view.uses_energy else []
        parts += [f"{k} = {v:.4g}" for k, v in params.items()]
        return ", ".join(parts) or "these settings"

    def _trace_labels(self):
        a, b = self.view.trace_axes
        names = self.view.names
        if a == "t":
            return ("t", names[b])
        if a == "n":
            return ("iterate", names[b])
        return (names[a], names[b])

    def _report(self, out: Outcome, what="orbit"):
        exc = out.error
        self.last_error = out
        if what == "trace":
            # the orbit itself is fine: keep its message, add why the side views are empty
            base = self._status_text.split(" | ")[0]
            self._say(f"{base} | no trace of this orbit: {exc}", refused=True)
            return
        if isinstance(exc, PhaselabError):
            self._say(f"Could not compute the {what}: {exc}", refused=True)
        else:
            self._say(f"Could not compute the {what} ({type(exc).__name__}: {exc}); the explorer "
                      "keeps working.", refused=True)
        self.last_error = out

    def _say(self, text, refused=False):
        import html

        self._status_text = text
        cls = "pl-status refused" if refused else "pl-status"
        self._status.value = f"<div class='{cls}'>{html.escape(text)}</div>"

    def _repr_mimebundle_(self, **kwargs):
        load_bokehjs()
        return super()._repr_mimebundle_(**kwargs)

    def close(self):
        if hasattr(self, "jobs"):
            self.jobs.close()
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
        chaos indicator, ``"megno"``, ``"lyapunov"``, ``"fli"`` or ``"sali"``, computed
        for each orbit over the time its points span; a function of a one-orbit Section
        returning a number; or the name of a per-orbit field such as ``"energy_error"``)
        and ``color_label``; ``background`` (False to
        compute in the calling thread); ``export_dir`` and ``export_formats`` (what the Export
        button writes, default PNG and CSV; any of .png .svg .pdf .csv .nc .html); ``duration`` (time traced per
        orbit of a phase portrait); ``method``, ``dt``; ``title``.

    Returns
    -------
    Explorer
        An ``ipywidgets`` widget; ``.orbits``, ``.params``, ``.energy``, ``add_seed``,
        ``add_seeds``, ``undo``, ``clear``, ``set_energy``, ``set_params``, ``export``.
    """
    return Explorer(system, energy=energy, plane=plane, solve_for=solve_for, crossings=crossings,
                    params=params, **options)
