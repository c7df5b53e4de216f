"""The notebook explorer (``phaselab.explore``), one file per responsibility so each part is found by name.

An interactive surface of section for a JupyterLab notebook. The explorer wires four parts
together and does little else:

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

The :class:`Explorer` is assembled here from one plain class per file:
:mod:`~phaselab.widgets.explorer.orbit_commands` and
:mod:`~phaselab.widgets.explorer.view_commands` (the public commands),
:mod:`~phaselab.widgets.explorer.wiring` (controls and figure events to commands),
:mod:`~phaselab.widgets.explorer.scheduling` (worker requests and the status text),
:mod:`~phaselab.widgets.explorer.picture_keeping` (the picture kept for a notebook without kernel,
shared with the linked explorer),
:mod:`~phaselab.widgets.explorer.drawing` (the figures, one patch per update) and
:mod:`~phaselab.widgets.explorer.files` (session files and Export).
"""

from __future__ import annotations

import secrets
from collections import deque
from pathlib import Path

import ipywidgets as W

from phaselab.codegen import progress
from phaselab.engine import inputs
from phaselab.errors import ParameterError
from phaselab.model.params import finite_number
from phaselab.widgets import messages, page_sync, scales, theme
from phaselab.widgets.controls import Controls
from phaselab.widgets.explorer.drawing import Drawing
from phaselab.widgets.explorer.files import EXPORT_FORMATS, SessionFiles, safe_stem
from phaselab.widgets.explorer.linked import LinkedExplorer, wants_linked
from phaselab.widgets.explorer.normal_form_curves import NormalFormCurves
from phaselab.widgets.explorer.orbit_commands import OrbitCommands
from phaselab.widgets.explorer.picture_keeping import PictureKeeping
from phaselab.widgets.explorer.scheduling import Scheduling
from phaselab.widgets.explorer.view_commands import ViewCommands
from phaselab.widgets.explorer.wiring import Wiring
from phaselab.widgets.session import OrbitRecord, Session
from phaselab.widgets.views import make_view
from phaselab.widgets.worker import JobRunner, current_loop, wait_all

__all__ = ["explore", "Explorer", "LinkedExplorer", "OrbitRecord", "load_bokehjs"]

CHAOS_INDICATORS = scales.CHAOS_INDICATORS
#: The second half of the default export name, per kind of view (the first is the system's name).
STEM_WORDS = {"section": "section", "map": "iterates", "portrait": "portrait", "strobe": "stroboscopic"}
#: How the status line writes a number (importable from here as before the split).
number = messages.number


def load_bokehjs(force=True):
    """Put the core BokehJS library into the page (inline: no network); without ``force``
    only when this page's notebook does not hold it yet."""
    from phaselab.widgets.page import load_bokehjs as load

    return load(force=force)



def _building(event, what):
    """The compile listener while an explorer is built: it only keeps the console quiet."""

class Explorer(OrbitCommands, ViewCommands, Wiring, Scheduling, PictureKeeping, Drawing, SessionFiles, NormalFormCurves,
               W.VBox):
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

    def __init__(self, system, *, energy=None, plane=None, solve_for=None, crossings=300, params=None,
                 ranges=None, sign=+1, energy_range=None, color_by=None, color_label=None,
                 background=True, export_dir=".", export_formats=(".png", ".csv"), duration=None,
                 method="auto", dt=None, title=None, scale=None, session=None):
        from phaselab.widgets.figures import Figures
        from phaselab.widgets.page import LiveBokehModel, StaticPicture

        # compile news while the explorer is being built stays off the console (a notebook
        # would show it as error output); the status line takes over once it exists
        progress.add_listener(_building)
        try:
            self._build(system, energy, plane, solve_for, crossings, params, ranges, sign, energy_range,
                        color_by, color_label, background, export_dir, export_formats, duration, method,
                        dt, title, scale, session, Figures, LiveBokehModel, StaticPicture)
        finally:
            progress.remove_listener(_building)

    def _build(self, system, energy, plane, solve_for, crossings, params, ranges, sign, energy_range,
               color_by, color_label, background, export_dir, export_formats, duration, method, dt,
               title, scale, session, Figures, LiveBokehModel, StaticPicture):
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
        self._color_label = color_label
        self.jobs = JobRunner(background)
        self.idle_jobs = JobRunner(background)     # companion panels, warm-up compiles
        self.picture_jobs = JobRunner(background)  # the kept picture: never behind a compile
        self._loop = current_loop()
        self.last_timing: dict[str, float] = {}
        # per seed request: the page's tap, points drawn, patch sent (wall clock, s) and the
        # computing time (s); read by the browser test to split a click into its legs
        self.click_log: deque = deque(maxlen=64)
        self.last_error = None
        self._message, self._refused = "", False
        self._busy: dict[str, str] = {}
        self._compiling: list[str] = []
        self._compile_started: dict[str, float] = {}
        self._compile_real: set[str] = set()   # what numba is really compiling (not loading)
        self._compile_note = ("", 0.0)  # the end of the last compilation shown, and when
        self._pending = 0
        self._waiting: dict = {}  # request serial -> points (n, 2) whose orbits are on the way
        self._busy_since: dict[str, float] = {}
        self._ticking = False
        self._serial = 0
        self._frame = None
        self._last_tap = None
        self._fitted = None
        self.structures: list = []
        # True while the explorer sets its own controls: their observers then do nothing
        self._setting_controls = False
        self._uid = secrets.token_hex(6)
        self.name = title or getattr(system, "name", "system")

        self.scale = self._make_scale(color_by, color_label)
        if scale is not None and self.scale is not None:
            self.scale = self.scale.with_limits(*scale)
        self._scale_fixed = scale is not None or (isinstance(color_by, str) and color_by in scales.DEFAULT_SCALES
                                                  and color_by not in scales.FITTED)
        self.view.fit_ranges(energy, p0)
        self._fitted = self.view.ranges
        self.picture = StaticPicture(self._uid)
        self.controls = c = Controls(self.name, self.view.describe(), f"pl-readout-{self._uid}",
                                     self.picture.hide_rule)
        self.figures = Figures(self.view.axis_labels, self.view.ranges, self.view.panels(), f"pl-readout-{self._uid}",
                               panel_dots=self.view.panel_dots)
        self._wire_figure_events()
        self.bokeh = LiveBokehModel(self.figures.layout, combine_events=False)
        self.bokeh.add_class("pl-plot")
        # a view built between a display and a patch misses it: the page finds out (page_sync)
        page_sync.connect(self.figures.sync, self.figures.main, self.bokeh, self._page_ready)
        self.bokeh.refresh(send=True)

        self._add_sliders(system, energy, energy_range, p0)
        c.stem.value = f"{safe_stem(self.name)}-{STEM_WORDS.get(self.view.kind, self.view.kind)}"
        self._wire_controls(color_by, color_label)
        self._add_normal_form_control()

        has_plane = self.view.kind == "section" and system.dof == 2
        has_structures = self.view.kind in ("section", "map", "strobe")
        super().__init__(c.layout(self.bokeh, self.view.kind, has_plane, has_structures),
                         layout=W.Layout(width="fit-content"))
        self.children = self._with_normal_form_row(self.children)
        self.add_class("phaselab-explorer")
        with self._held():
            self._frame = self.view.frame(energy, p0)
            self.figures.set_frame(self._frame)
            self.figures.color_by_value(self.scale)
        self._say("Click the plot to start an orbit; drag the ringed seed to move it.")
        self._draw_all()
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

    def _runners(self):
        """The explorer's job runners (those made so far, if its construction failed)."""
        return [getattr(self, name) for name in ("jobs", "idle_jobs", "picture_jobs") if hasattr(self, name)]

    def wait(self, timeout=60.0) -> bool:
        """Block until pending computations are done and shown (scripts and tests)."""
        return wait_all(self._runners(), timeout)

    # ================================================================= display
    def _repr_mimebundle_(self, **kwargs):
        from phaselab.widgets.page import load_bokehjs as load

        load()
        self.bokeh.refresh(send=True)
        self._show_picture()
        return super()._repr_mimebundle_(**kwargs)

    def close(self):
        if hasattr(self, "_progress"):
            self._progress.remove_listener(self._on_compile_event)
        for runner in self._runners():
            runner.close()
        super().close()


def explore(system, *, energy=None, plane=None, solve_for=None, crossings=300, params=None, **options):
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
        MEGNO split at 2 by a band whose width follows from ``crossings``; frequencies and
        custom values span the values found until a scale is given); ``background`` (False to compute in the calling thread);
        ``export_dir`` and ``export_formats`` (what Export writes, default PNG and CSV;
        any of .png .svg .pdf .csv .nc .html); ``duration`` (time traced per orbit of a
        phase portrait); ``method``, ``dt``; ``title``; ``session`` (a session JSON file
        to restore, see :mod:`phaselab.widgets.session`).

    With three or more degrees of freedom and a plane fixing one component (or none given)
    the section has ``2n - 2 >= 4`` coordinates and a
    :class:`~phaselab.widgets.explorer.linked.LinkedExplorer` is returned instead: a click
    gives two section coordinates (``axes``), sliders hold the others (``held``), every
    pairwise projection is linked (a selection in one selects in all), a slab control
    shows a slice, colouring by a section coordinate or a chaos indicator.

    Returns
    -------
    Explorer or LinkedExplorer
        An ``ipywidgets`` widget; ``.orbits``, ``.params``, ``.energy``, ``add_seed``,
        ``add_seeds``, ``move_seed``, ``undo``, ``clear``, ``delete``, ``more_crossings``,
        ``select``, ``set_energy``, ``set_params``, ``set_color``, ``set_scale``,
        ``set_view``, ``set_equal_aspect``, ``find_periodic_orbit``, ``export``,
        ``save_session``, ``load_session``, ``wait``.
    """
    inputs.system(system), inputs.count(crossings, "crossings", maximum=100_000)
    if wants_linked(system, plane, solve_for):
        return LinkedExplorer(system, energy=energy, plane=plane, solve_for=solve_for, crossings=crossings,
                              params=params, **options)
    return Explorer(system, energy=energy, plane=plane, solve_for=solve_for, crossings=crossings,
                    params=params, **options)
