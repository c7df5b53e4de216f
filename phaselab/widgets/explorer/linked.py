"""The explorer for three or more degrees of freedom: linked projections of a section with
``2n - 2 >= 4`` coordinates (``explore`` chooses it by the system's dimension).

* a click in the seeding projection gives two section coordinates, sliders hold the others,
  and the conjugate of the plane's component is solved from H = E; a point outside the
  energy shell is refused with the reason in the status line;
* every pairwise projection of the section coordinates is drawn from one data source:
  a box or lasso selection in one selects the same points in all (bokeh's linked
  selection); the explorer reports what the selection holds;
* the slab of a slice (coordinate, centre, half-width) keeps the points with
  ``|w - w0| < eps`` in every projection (Richter, Lange, Baecker and Ketzmerick, Phys.
  Rev. E 89, 022902, 2014), so the projections not involving ``w`` show the slice;
* colouring by the orbit, by a section coordinate (the hidden one of Froeschle's method) or
  by a chaos indicator (MEGNO, ...);
* a picture of the last state (the figure Export writes) kept in an output beside the
  widget, for a notebook opened without a kernel (explorer/picture_keeping.py).

Section points are model results; where they inform a design decision confirm them with
validated tools and the responsible engineers.
"""

from __future__ import annotations

import secrets
from pathlib import Path

import ipywidgets as W
import numpy as np

from phaselab.codegen import progress
from phaselab.errors import ParameterError
from phaselab.model.params import finite_number
from phaselab.widgets import page_sync, scales, theme
from phaselab.widgets.controls import slider_range
from phaselab.widgets.explorer.files import EXPORT_FORMATS, safe_stem
from phaselab.widgets.explorer.linked_commands import LinkedCommands
from phaselab.widgets.explorer.linked_files import LinkedFiles
from phaselab.widgets.explorer.picture_keeping import PictureKeeping
from phaselab.widgets.linked_controls import SLAB_FRACTION, LinkedControls
from phaselab.widgets.session import Session
from phaselab.widgets.views.section4_view import Section4View
from phaselab.widgets.worker import JobRunner, current_loop, wait_all

#: Options of :func:`phaselab.explore` the linked explorer takes (besides the essentials).
OPTIONS = ("ranges", "sign", "axes", "held", "energy_range", "color_by", "background", "export_dir",
           "export_formats", "method", "dt", "title", "session")


def wants_linked(system, plane=None, solve_for=None) -> bool:
    """True for an autonomous flow of three or more degrees of freedom whose plane fixes one
    component (or none is given): its section has ``2n - 2 >= 4`` coordinates."""
    if getattr(system, "kind", None) != "flow" or not getattr(system, "is_autonomous", False):
        return False
    if getattr(system, "dof", 0) < 3:
        return False
    return plane is None or (isinstance(plane, dict) and len(plane) == 1)


class LinkedExplorer(LinkedCommands, LinkedFiles, PictureKeeping, W.VBox):
    """The explorer of sections with four or more coordinates (see :func:`phaselab.explore`).

    Attributes
    ----------
    view : Section4View
    figures : phaselab.widgets.linked_figures.LinkedFigures
    controls : phaselab.widgets.linked_controls.LinkedControls
    session : phaselab.widgets.session.Session
        Orbits; each record's ``points`` are its crossings in the section coordinates,
        shape (m, 2n - 2), columns in the order of ``view.coordinates``.
    held : dict of str to float
        Values of the held coordinates for the next seeds.
    slab : phaselab.widgets.linked_points.Slab or None
    selection : (int, list of int)
        Points selected in the projections and the orbits they belong to.
    last_timing : dict of str to float
        Seconds of the last updates (``columns``, ``slab``, ``selection``, ``orbits``).
    """

    def __init__(self, system, energy=None, plane=None, solve_for=None, crossings=300, params=None, **options):
        from phaselab.widgets.linked_figures import LinkedFigures
        from phaselab.widgets.linked_page import LinkedBokehModel
        from phaselab.widgets.page import StaticPicture

        unknown = sorted(set(options) - set(OPTIONS))
        if unknown:
            raise ParameterError(f"{', '.join(unknown)}: not an option of the explorer for {system.dof} degrees of "
                                 f"freedom; it takes {', '.join(OPTIONS)}")
        o = dict(options)
        self.system = system
        self.view = Section4View(system, plane=plane, solve_for=solve_for, crossings=crossings,
                                 ranges=o.get("ranges"), sign=o.get("sign", +1), method=o.get("method", "auto"),
                                 dt=o.get("dt"), axes=o.get("axes"))
        if energy is None:
            raise ParameterError("a surface of section needs an energy: pass energy=E (units of H)")
        energy = finite_number(energy, "energy")
        p0 = dict(system.params)
        if params:
            system.param_values(params)
            p0.update({str(getattr(k, "name", k)): float(v) for k, v in params.items()})
        self.crossings = int(self.view.crossings)
        self.session = Session(energy, p0, theme.ORBIT_COLORS)
        self.export_dir = Path(o.get("export_dir", "."))
        formats = o.get("export_formats", (".png", ".csv"))
        self.export_formats = tuple(str(f) if str(f).startswith(".") else f".{f}" for f in formats)
        bad = [f for f in self.export_formats if f not in EXPORT_FORMATS or f == ".html"]
        if bad or not self.export_formats:
            raise ParameterError(f"export_formats must be some of .png .svg .pdf .csv .nc; got {formats!r}")
        self.jobs = JobRunner(o.get("background", True))
        self.picture_jobs = JobRunner(o.get("background", True))   # the kept picture: never before a click
        self._loop = current_loop()
        self.name = o.get("title") or getattr(system, "name", "system")
        self.last_timing: dict[str, float] = {}
        self.last_error = None
        self.selection = (0, [])
        self.slab = None
        self._seed_of: dict[int, np.ndarray] = {}   # orbit id -> seed in the section coordinates
        self._message, self._refused = "", False
        self._pending = 0
        self._setting_controls = False
        self._uid = secrets.token_hex(6)
        self._last_tap = None

        self.view.fit_ranges(energy, p0)
        coords = self.view.coordinates
        self._labels = [self.view.label_of(c) for c in coords]
        self._pair = (coords.index(self.view.axis_names[0]), coords.index(self.view.axis_names[1]))
        self.held = self.view.held_defaults()
        self._apply_held(o.get("held"))
        self.figures = LinkedFigures(self._labels, [self.view.windows[c] for c in coords], self._pair)
        self._wire_figures()   # before the document is made: its events are subscribed then
        self.bokeh = LinkedBokehModel(self.figures.layout, self.figures.points.selected, combine_events=False)
        self.bokeh.add_class("pl-plot")
        self._wire_page_ready()
        self.picture = StaticPicture(self._uid)
        self.controls = c = LinkedControls(self.name, self.view.describe(), f"pl-readout-{self._uid}",
                                           list(zip(self._labels, coords)), self.picture.hide_rule)
        self._add_controls(energy, o.get("energy_range"), p0)
        c.stem.value = f"{safe_stem(self.name)}-section"
        self.color_by = None
        self.set_color(o.get("color_by"))
        self._wire()
        super().__init__(c.linked_layout(self.bokeh), layout=W.Layout(width="fit-content"))
        self.add_class("phaselab-explorer")
        self._say("Click the left plot to start an orbit (the sliders hold the other section coordinates); "
                  "select points with the box or lasso in any projection.")
        self._show_count()
        # compile news (the first orbit of a new system) goes to the status line, not the console
        progress.add_listener(self._on_compile_event)
        if o.get("session") is not None:
            self.load_session(o["session"])

    # ================================================================= set-up
    def _apply_held(self, held):
        if held is None:
            return
        if not isinstance(held, dict):
            raise ParameterError(f"held must be a dict of section coordinate -> value, got {held!r}")
        for key, v in held.items():
            name = str(getattr(key, "name", key))
            if name not in self.view.held:
                raise ParameterError(f"held: {key!r} is not a held coordinate; the held coordinates are "
                                     + ", ".join(self.view.held))
            self.held[name] = finite_number(v, f"held value of {name}")

    def _add_controls(self, energy, energy_range, p0):
        c = self.controls
        for name in self.view.held:
            lo, hi = self.view.windows[name]
            v = self.held[name]
            c.add_held(name, self.view.label_of(name), v, min(lo, v), max(hi, v))
        lo, hi = energy_range if energy_range is not None else (energy - (abs(energy) or 1.0),
                                                                 energy + (abs(energy) or 1.0))
        lo, hi = finite_number(lo, "energy_range low"), finite_number(hi, "energy_range high")
        if not lo < hi:
            raise ParameterError(f"energy_range must be (low, high) with low < high, got {energy_range!r}")
        c.add_slider("energy", "energy E", energy, lo, hi)
        for prm in self.system.parameters:
            a, b = slider_range(prm)
            c.add_slider(prm.name, prm.name, p0[prm.name], a, b)
        name = c.slab_name.value
        wlo, whi = self.view.windows[name]
        c.set_slab_window(wlo, whi, self.held.get(name, 0.5 * (wlo + whi)) if wlo < self.held.get(name, 0.0) < whi
                          else 0.5 * (wlo + whi), SLAB_FRACTION * (whi - wlo))
        options = [("own colours", "")] + [(f"{lab} (section coordinate)", nm)
                                           for nm, lab in zip(self.view.coordinates, self._labels)]
        options += [(scales.MENU_WORDS[n], n) for n in scales.CHAOS_INDICATORS]
        c.color.options = options
        c.color.value = ""

    def _wire_figures(self):
        from bokeh.events import DoubleTap, Tap

        self.figures.main.on_event(Tap, self._on_tap)
        # the page calls a second click within 300 ms a double tap, wherever it lands: it is
        # a click too (unless it repeats the last one on the same spot)
        self.figures.main.on_event(DoubleTap, self._on_double_tap)
        self.figures.points.selected.on_change("indices", self._on_selection)
        for slot in self.figures.slots:
            slot.selected.on_change("indices", self._on_selection)

    def _wire_page_ready(self):
        """A page that built a view says so (resend the document if it changed, the kept
        picture after a rebuild); a zoom or pan of the seeding projection redraws the picture."""
        f = self.figures
        page_sync.connect(f.sync, f.main, self.bokeh, self._page_ready)
        for r in (f.main.x_range, f.main.y_range):
            for end in ("start", "end"):
                r.on_change(end, lambda attr, old, new: self._schedule_picture())

    def _wire(self):
        c = self.controls
        c.clear.on_click(lambda _: self.clear())
        c.undo.on_click(lambda _: self.undo())
        c.export.on_click(lambda _: self._export_clicked())
        c.save.on_click(lambda _: self._save_clicked())
        c.load.on_click(lambda _: self._load_clicked())
        for name, s in c.held.items():
            s.observe(lambda ch, name=name: self._quiet(self.set_held, **{name: ch["new"]}), "value")
        c.sliders["energy"].observe(lambda ch: self._quiet(self.set_energy, ch["new"]), "value")
        for prm in self.system.parameters:
            c.sliders[prm.name].observe(lambda ch, nm=prm.name: self._quiet(self.set_params, **{nm: ch["new"]}),
                                        "value")
        for w in (c.slab_on, c.slab_center, c.slab_width):
            w.observe(lambda ch: self._on_slab_control(), "value")
        c.slab_name.observe(lambda ch: self._on_slab_name(ch["new"]), "value")
        c.color.observe(lambda ch: self._quiet(self.set_color, ch["new"] or None), "value")

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

    @property
    def status(self) -> str:
        return self._message

    def _runners(self):
        """The explorer's job runners (those made so far, if its construction failed)."""
        return [getattr(self, name) for name in ("jobs", "picture_jobs") if hasattr(self, name)]

    def wait(self, timeout=60.0) -> bool:
        """Block until pending computations are done and shown (scripts and tests)."""
        return wait_all(self._runners(), timeout)

    def _repr_mimebundle_(self, **kwargs):
        from phaselab.widgets.page import load_bokehjs as load

        load()
        self.bokeh.refresh(send=True)
        self._show_picture()
        return super()._repr_mimebundle_(**kwargs)

    def _on_compile_event(self, event, what):
        # called from any thread: shown by the widgets' thread
        if event not in ("start", "end"):
            return
        text = f"Compiling {what} (first time only) ..." if event == "start" else f"Compiled {what}."
        self.jobs.call_soon(lambda: self._say(text), self._loop)

    def close(self):
        progress.remove_listener(self._on_compile_event)
        for runner in self._runners():
            runner.close()
        super().close()
