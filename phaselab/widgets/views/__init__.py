"""What the explorer's main plot shows, and how a click becomes an orbit: one file per kind of view.

One class per kind of system, all with the same small surface used by the explorer:

=====================  ==========================================================
:class:`SectionView`   autonomous flow, two or more degrees of freedom: a surface of
                       section at fixed energy; a click gives the two shown components
                       and the remaining momentum is solved from H = E
:class:`PortraitView`  autonomous flow, one degree of freedom: level curves of H (the
                       phase portrait); a click is a full state, its orbit is traced
:class:`StrobeView`    time-periodic H: stroboscopic section, a click is the state at t = 0
:class:`MapView`       area-preserving map: a click is a state, its iterates are shown
=====================  ==========================================================

Everything here calls the compute layer and returns numbers; nothing imports bokeh or
ipywidgets, so the views are tested and timed without a display.

The shared parts (:class:`Frame`, :class:`Seeding`, the base class) are in
:mod:`~phaselab.widgets.views.base`; :func:`make_view` chooses the view for a system.
"""

from __future__ import annotations

from phaselab.engine import inputs
from phaselab.errors import ModelError
from phaselab.widgets.views.base import GRID, TRACE_SAMPLES, BaseView, Frame, Seeding
from phaselab.widgets.views.map_view import MapView
from phaselab.widgets.views.portrait_view import PortraitView
from phaselab.widgets.views.section_view import SectionView
from phaselab.widgets.views.strobe_view import StrobeView

__all__ = ["GRID", "TRACE_SAMPLES", "BaseView", "Frame", "Seeding", "SectionView", "PortraitView",
           "StrobeView", "MapView", "make_view"]


def make_view(system, plane=None, solve_for=None, crossings=300, ranges=None, sign=+1, duration=None,
              method="auto", dt=None):
    """The view for ``system``: map, stroboscopic, phase portrait or surface of section."""
    if inputs.system(system).kind == "map":
        if plane is not None or solve_for is not None:
            raise ModelError("a map has no section plane or energy: leave plane and solve_for out")
        return MapView(system, crossings, ranges)
    if not system.is_autonomous:
        if system.period is None:
            raise ModelError(f"{system.name!r} depends on time but has no driving period; give period= "
                             "when building it so that a stroboscopic section can be drawn")
        return StrobeView(system, crossings, ranges, method, dt)
    if system.dof == 1 and plane is None and solve_for is None:
        return PortraitView(system, crossings, ranges, duration, method, dt)
    return SectionView(system, plane, solve_for, crossings, ranges, sign, method, dt)
