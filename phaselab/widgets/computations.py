"""The explorer's computations, run by the worker thread (never on the notebook's event loop).

Each function takes plain values (a view, states, the energy, parameters) and returns a
small result object; none touches a widget or a figure. The explorer submits them to
:class:`phaselab.widgets.worker.JobRunner` and applies the results when they come back.

Results are model results; where they inform a design decision confirm them with
validated tools and the responsible engineers.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field

import numpy as np

from phaselab.engine import status as codes
from phaselab.errors import ModelError, ParameterError, PhaselabError
from phaselab.widgets.scales import CHAOS_INDICATORS


@dataclass
class OrbitPart:
    """One orbit's result: its section, shown points, colour value and stop."""

    section: object
    points: np.ndarray          # (m, 2)
    scalar: float = float("nan")
    nu: tuple = ()
    note: str = ""
    stop: tuple | None = None


@dataclass
class OrbitBatch:
    """Orbits computed together.

    Attributes
    ----------
    parts : list of OrbitPart or None
        One per requested state (None where the seed was refused).
    reasons : list of str
        Why a seed was refused ("" where it was accepted).
    states : ndarray, shape (n, 2n)
        The initial states (NaN rows where refused).
    value_error : str
        Why colour values are missing, when they failed ("" otherwise).
    """

    parts: list
    reasons: list
    states: np.ndarray
    value_error: str = ""


def _quiet(fn, *args, **kwargs):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        return fn(*args, **kwargs)


def shown_points(view, part) -> np.ndarray:
    i, j = view.axes
    pts = part.points[0, : int(part.counts[0])]
    return np.column_stack([pts[:, i], pts[:, j]]) if len(pts) else np.empty((0, 2))


def _stop_of(view, part, pts):
    """Why the orbit ended early ("" if it ran as asked) and where (shown plane)."""
    code = int(part.status[0])
    if code == codes.OK:
        return "", None
    word = codes.STATUS.get(code, f"status {code}")
    if code in codes.STOPPED or code == codes.TIME_LIMIT or code == codes.NO_CROSSING:
        where = None
        if len(pts):
            where = (float(pts[-1, 0]), float(pts[-1, 1]))
        return word, where
    return word, None


def color_values(view, section, color_by, params, energy):
    """Per-orbit values to colour by, shape (n_orbits,), and frequencies (n_orbits, k) or None.

    ``color_by``: a chaos indicator name (computed over the time each orbit's points span),
    ``"frequency"`` or ``"diffusion"`` (Laskar's frequency analysis over the same number of
    crossings), a function of a one-orbit Section returning a number, or the name of a
    per-orbit field of the Section (e.g. ``"energy_error"``).
    """
    n = section.n_orbits
    vals = np.full(n, np.nan)
    nu = None
    if color_by is None:
        return vals, nu
    system = view.system
    if isinstance(color_by, str) and color_by in CHAOS_INDICATORS:
        from phaselab.orbits.chaos import chaos_indicators

        is_map = system.kind == "map"
        m = len(system.state_symbols)
        for k in range(n):
            c = int(section.counts[k])
            if c == 0:
                continue
            span = float(c) if is_map else float(section.times[k, c - 1])
            if not span > 0:
                continue
            opts = {} if is_map else {"dt": section.dt, "method": section.method}
            ind = _quiet(chaos_indicators, system, section.seeds[k:k + 1, :m], span, params=dict(params),
                         vectors=2 if color_by == "sali" else 1, **opts)
            v = float(getattr(ind, color_by)[0])
            vals[k] = (math.log10(v) if v > 0 else np.nan) if color_by == "sali" else v
        return vals, nu
    if color_by in ("frequency", "diffusion"):
        fr = orbit_frequencies(view, section.seeds, params, max(int(np.max(section.counts, initial=0)), 32),
                               section)
        nu = fr.nu
        vals = fr.diffusion.copy() if color_by == "diffusion" else fr.nu[:, 0].copy()
        return vals, nu
    for k in range(n):
        part = section.take([k])
        if callable(color_by):
            vals[k] = float(np.ravel(color_by(part))[0])
        else:
            vals[k] = float(np.ravel(getattr(part, color_by))[0])
    return vals, nu


def orbit_frequencies(view, seeds, params, n, section=None):
    """Frequencies of the orbits from ``seeds`` sampled as the view samples them."""
    from phaselab.frequency.frequencies import frequencies

    system = view.system
    n = max(int(n), 32)
    kw = {"params": dict(params), "samples": n}
    if view.kind == "section":
        kw.update(plane=view.plane, direction=view.sign, dt=view.dt, method=view.method)
    elif view.kind == "strobe":
        kw.update(plane="stroboscopic", dt=view.dt, method=view.method)
    elif view.kind == "portrait":
        kw.update(t=view.duration, method=view.method)
    return _quiet(frequencies, system, np.asarray(seeds, float), **kw)


def orbits(view, states, energy, params, crossings, color_by=None) -> OrbitBatch:
    """Sections of ``states`` (one per row), each with its own number of crossings, and the
    values to colour them by."""
    states = np.atleast_2d(np.asarray(states, float))
    crossings = np.broadcast_to(np.asarray(crossings, int), (len(states),))
    parts = [None] * len(states)
    value_error = ""
    for c in sorted(set(int(v) for v in crossings)):
        rows = np.flatnonzero(crossings == c)
        sec = view.compute(states[rows], energy, params, crossings=c)
        try:
            vals, nu = color_values(view, sec, color_by, params, energy)
        except PhaselabError as exc:
            vals, nu, value_error = np.full(sec.n_orbits, np.nan), None, str(exc)
        except Exception as exc:  # a user's colour function: report, keep the orbits
            vals, nu, value_error = np.full(sec.n_orbits, np.nan), None, f"{type(exc).__name__}: {exc}"
        for k, row in enumerate(rows):
            one = sec.take([k])
            pts = shown_points(view, one)
            note, stop = _stop_of(view, one, pts)
            parts[row] = OrbitPart(one, pts, float(vals[k]),
                                   tuple(float(v) for v in nu[k]) if nu is not None else (), note, stop)
    return OrbitBatch(parts, [""] * len(states), states, value_error)


def seed_and_orbits(view, points, energy, params, crossings, color_by=None) -> OrbitBatch:
    """Clicked points -> states (refusals with reasons) -> their orbits."""
    seeding = view.seeds(np.atleast_2d(np.asarray(points, float)), energy, params)
    ok = np.flatnonzero(seeding.valid)
    batch = OrbitBatch([None] * len(seeding.valid), list(seeding.reasons), seeding.states)
    if ok.size:
        c = np.broadcast_to(np.asarray(crossings, int), (len(seeding.valid),))[ok]
        inner = orbits(view, seeding.states[ok], energy, params, c, color_by)
        for k, row in enumerate(ok):
            batch.parts[row] = inner.parts[k]
        batch.value_error = inner.value_error
    return batch


@dataclass
class Recomputed:
    frame: object
    batch: OrbitBatch | None


def recompute(view, seeds, energy, params, crossings, color_by=None, frame=True) -> Recomputed:
    """The frame at a new setting and every orbit from its seed."""
    fr = view.frame(energy, params) if frame else None
    if len(seeds) == 0:
        return Recomputed(fr, None)
    if fr is not None and fr.empty:
        states = np.full((len(seeds), len(view.names)), np.nan)
        return Recomputed(fr, OrbitBatch([None] * len(seeds), ["the shown plane has no allowed region at this setting"]
                                         * len(seeds), states))
    return Recomputed(fr, seed_and_orbits(view, seeds, energy, params, crossings, color_by))


@dataclass
class TraceResult:
    """The companion panels' curves of one orbit and its frequencies."""

    panel1: tuple   # (x, y) arrays
    panel2: tuple
    nu: tuple = ()
    nu_names: tuple = ()
    nu_unit: str = ""


def section_frequencies(view, section):
    """Frequencies (cycles per crossing) from the crossings already computed for one orbit of
    a surface of section, without integrating again; ``((), ())`` when too few."""
    from phaselab.frequency.frequencies import MIN_SAMPLES, analyse_samples

    c = int(section.counts[0])
    if c < MIN_SAMPLES:
        return (), ()
    n = len(view.names) // 2
    fixed = view.names.index(next(iter(view.plane))) % n
    cols = [i for i in range(n) if i != fixed]
    out = analyse_samples(section.points[:, :c], cols, step=1.0, diffusion=False)
    return tuple(float(v) for v in out.nu[0]), tuple(view.names[i] for i in cols)


def trace(view, state, params, until, crossings, section=None) -> TraceResult | None:
    """Curves for the two companion panels of the selected orbit (see ``view.panels``) and its
    frequencies (from its own crossings for a section; sampled afresh otherwise)."""
    tr = view.trace(state, params, until)
    nu, names, unit = (), (), ""
    try:
        if view.kind == "section" and section is not None:
            nu, names = section_frequencies(view, section)
            unit = "cycles per crossing"
        else:
            fr = orbit_frequencies(view, np.asarray(state, float)[None, :], params, min(max(crossings, 64), 2048))
            nu, names, unit = tuple(float(v) for v in fr.nu[0]), tuple(fr.names), fr.unit
    except PhaselabError:
        pass
    if tr is None:
        return TraceResult((np.empty(0), np.empty(0)), (np.empty(0), np.empty(0)), nu, names, unit)
    return TraceResult(*view.panel_curves(tr, params), nu=nu, nu_names=names, nu_unit=unit)


@dataclass
class PeriodicFound:
    orbit: object
    points: np.ndarray          # (k, 2) shown coordinates
    manifolds: list = field(default_factory=list)   # (branch, [ (m, 2) arrays ])
    manifold_note: str = ""


def periodic(view, guess_point, period, energy, params, manifolds=False) -> PeriodicFound:
    """The periodic orbit of ``period`` nearest the clicked point, and optionally its
    manifolds (both branches, both sides)."""
    from phaselab.structures.periodic import periodic_orbit

    seeding = view.seeds(np.atleast_2d(np.asarray(guess_point, float)), energy, params)
    if not seeding.valid[0]:
        raise ParameterError(f"no state at the clicked point: {seeding.reasons[0]}")
    guess = seeding.states[0]
    kw = {"returns": int(period), "params": dict(params)}
    if view.kind == "section":
        kw.update(plane=view.plane, energy=energy, direction=view.sign, solve_for=view.solve_for)
    elif view.kind == "portrait":
        raise ModelError("an autonomous flow of one degree of freedom has no section map: every orbit "
                         "through a level curve is periodic")
    po = _quiet(periodic_orbit, view.system, guess, **kw)
    i, j = view.axes
    pts = np.column_stack([po.points[:, i], po.points[:, j]])
    found = PeriodicFound(po, pts)
    if manifolds and po.stability in ("unstable", "inverse-unstable"):
        found.manifolds, found.manifold_note = grow_manifolds(view, po)
    return found


def grow_manifolds(view, po, length=None):
    """Both branches, both sides, of ``po``'s manifolds, in the shown axes."""
    from phaselab.structures.manifolds import manifold

    (x0, x1), (y0, y1) = view.ranges
    size = math.hypot(x1 - x0, y1 - y0)
    length = 1.5 * size if length is None else length
    i, j = view.axes
    out, notes = [], []
    for branch in ("unstable", "stable"):
        lines = []
        for side in (+1, -1):
            try:
                man = _quiet(manifold, po, branch=branch, side=side, length=length, max_segment=size / 400.0,
                             max_points=40_000)
            except PhaselabError as exc:
                notes.append(f"{branch} side {side:+d}: {exc}")
                continue
            if not man.complete and man.note:
                notes.append(f"{branch} side {side:+d} stopped early: {man.note}")
            lines += [np.column_stack([b[:, i], b[:, j]]) for b in man.branches if len(b) > 1]
        out.append((branch, lines))
    return out, "; ".join(notes)


def picture_png(snapshot, dpi=100) -> bytes:
    """PNG bytes of the current view (for the picture kept for a notebook without kernel)."""
    import io

    from phaselab.widgets.snapshot import view_figure

    fig = view_figure(snapshot, dpi=dpi)
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi, facecolor="white")
    return buf.getvalue()


def slice_png(result, dpi=80, title=None) -> bytes:
    """PNG bytes of the figure the linked explorer's Export writes for ``result`` (a
    :class:`~phaselab.orbits.slices.SectionSlice`: the projection grid, or the slice), for
    the picture kept for a notebook without kernel."""
    import io

    import matplotlib

    from phaselab.export.figures import REPORT_RC
    from phaselab.export.slice_figures import slice_figure

    fig = slice_figure(result, dpi=dpi, title=title)
    buf = io.BytesIO()
    with matplotlib.rc_context(REPORT_RC):
        fig.savefig(buf, format="png", dpi=dpi, facecolor="white")
    return buf.getvalue()
