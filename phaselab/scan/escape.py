"""Escape and survival maps: how long each seed of a grid stays inside a region.

:func:`escape_map` follows every seed until it leaves the region (``box``, as everywhere in
phaselab: a number R for every component within [-R, R], or ``{name: (low, high)}``) or
the cap ``t`` is reached. In accelerator terms the set of surviving seeds is the dynamic
aperture; in celestial mechanics the map of escape times shows the escape basins. Flows
run through :func:`phaselab.trajectory` (the compiled ensemble loop, keeping only the first
and last states), maps through :func:`phaselab.section` (the compiled map loop, iterated in
segments so that memory stays bounded for long caps); both stop an orbit at the first step
(iterate) found outside the region.

:meth:`EscapeMap.aperture` summarises a map over a grid: along each of several directions
from a chosen centre, the largest radius inside which every seed survived.

These are model results: before they inform the design of a machine or a mission, confirm
them with validated tools and the responsible engineers.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field
from functools import partial

import numpy as np

from phaselab.engine import inputs, limits
from phaselab.engine import status as codes
from phaselab.errors import ParameterError
from phaselab.scan import datasets as labels
from phaselab.scan.grids import StateGrid, scan_rows
from phaselab.scan.runner import RunInfo, chunk_size, interleave, numba_threads, run_chunks, run_valid_rows
from phaselab.scan.store import seeds_digest

MAP_SEGMENT_VALUES = 4_000_000
"""Most float64 values one segment of map iterates may hold (32 MB): a long cap is run in
segments, each continuing from where the last one ended."""


@dataclass
class Aperture:
    """The largest radius around a centre inside which every seed survived, per direction.

    Attributes
    ----------
    center : tuple of float
        In the two grid components (horizontal, vertical).
    angles : ndarray, shape (k,)
        Directions in radians, counter-clockwise from the horizontal grid axis.
    radius : ndarray, shape (k,)
        Along each direction, the distance from the centre to the last point of the ray
        whose nearest grid point survived, before the first whose nearest grid point did
        not (or that was not run). Resolution: half the grid spacing.
    at_edge : ndarray of bool, shape (k,)
        Directions where every grid point up to the edge of the grid survived: the aperture
        may reach further than the grid.
    axis_names : tuple of str
    """

    center: tuple
    angles: np.ndarray
    radius: np.ndarray
    at_edge: np.ndarray
    axis_names: tuple

    @property
    def minimum(self) -> float:
        """The smallest radius over the directions: every seed within it survived (to the
        resolution of the grid and of the directions)."""
        return float(np.min(self.radius))

    def __repr__(self) -> str:
        return (f"Aperture(center={self.center}, {len(self.angles)} directions in "
                f"({', '.join(self.axis_names)}), minimum radius {self.minimum:.4g})")


@dataclass
class EscapeMap:
    """How long each seed stayed inside a region.

    Attributes
    ----------
    survival : ndarray, shape (n_seeds,)
        The time (iterate, for maps) at which the orbit was first found outside the region
        (0 for a seed outside from the start), or ``t`` for a seed that survived; NaN for a
        seed not run.
    status : ndarray of int, shape (n_seeds,)
        ``LEFT_BOX`` for escapes, another stop code for orbits that went non-finite or whose
        implicit step failed (counted as not surviving), ``OK`` or ``ENERGY_DRIFT`` for
        survivors, -1 for seeds not run.
    seeds : ndarray, shape (n_seeds, 2n)
    grid : StateGrid or None
    t : float
        The cap (model time units, or iterates for a map).
    region : object
        The region as given (``box``).
    meta : dict
        Provenance.
    run : RunInfo or None
    """

    survival: np.ndarray
    status: np.ndarray
    seeds: np.ndarray
    grid: StateGrid | None
    t: float
    region: object
    meta: dict = field(default_factory=dict)
    run: RunInfo | None = None

    @property
    def ran(self) -> np.ndarray:
        """Seeds that were run, shape (n_seeds,)."""
        return self.status != labels.NOT_RUN

    @property
    def survived(self) -> np.ndarray:
        """Seeds still inside the region at the cap, shape (n_seeds,)."""
        return self.ran & ~codes.stopped(self.status)

    def image(self, what: str = "survival") -> np.ndarray:
        """A picture of shape (ny, nx): ``"survival"`` (NaN where not run) or ``"survived"``
        (1/0, NaN where not run)."""
        if self.grid is None:
            raise ParameterError("this escape map was computed from a list of seeds, not a grid")
        if what == "survival":
            values = self.survival
        elif what == "survived":
            values = np.where(self.ran, self.survived.astype(float), np.nan)
        else:
            raise ParameterError(f"what must be 'survival' or 'survived', got {what!r}")
        return np.asarray(values, dtype=float).reshape(self.grid.shape)

    def aperture(self, *, center=(0.0, 0.0), directions=16) -> Aperture:
        """The largest radius around ``center`` inside which every seed survived, per direction.

        Parameters
        ----------
        center : pair of float
            In the two grid components (horizontal, vertical); must lie inside the grid.
        directions : int or array_like
            A number k of directions evenly spaced over the full turn (starting along the
            horizontal axis), or the angles in radians.

        Returns
        -------
        Aperture
        """
        if self.grid is None:
            raise ParameterError("the aperture needs an escape map over a grid (state_grid or shell_grid)")
        g = self.grid
        try:
            cx, cy = (inputs.number(c, "center") for c in center)
        except (TypeError, ValueError):
            raise ParameterError(f"center must be a pair of numbers, got {center!r}") from None
        if not (g.x[0] <= cx <= g.x[-1] and g.y[0] <= cy <= g.y[-1]):
            raise ParameterError(f"center ({cx:g}, {cy:g}) lies outside the grid "
                                 f"[{g.x[0]:g}, {g.x[-1]:g}] x [{g.y[0]:g}, {g.y[-1]:g}]")
        if np.ndim(directions) == 0:
            k = inputs.count(directions, "directions")
            angles = 2 * np.pi * np.arange(k) / k
        else:
            angles = np.asarray(directions, dtype=float).ravel()
            if angles.size == 0 or not np.all(np.isfinite(angles)):
                raise ParameterError("directions must be a count or finite angles in radians")
        ok = self.survived.reshape(g.shape)
        dx = (g.x[-1] - g.x[0]) / (len(g.x) - 1) if len(g.x) > 1 else np.inf
        dy = (g.y[-1] - g.y[0]) / (len(g.y) - 1) if len(g.y) > 1 else np.inf
        ds = 0.5 * min(dx, dy)
        if not np.isfinite(ds):
            raise ParameterError("the aperture needs a grid with more than one point along an axis")
        radius = np.zeros(len(angles))
        edge = np.zeros(len(angles), dtype=bool)
        for a, theta in enumerate(angles):
            c, s = math.cos(theta), math.sin(theta)
            r, last = 0.0, None
            while True:
                px, py = cx + r * c, cy + r * s
                if px < g.x[0] - 1e-12 * abs(dx) or px > g.x[-1] + 1e-12 * abs(dx) or \
                        py < g.y[0] - 1e-12 * abs(dy) or py > g.y[-1] + 1e-12 * abs(dy):
                    edge[a] = True
                    break
                i = int(round((px - g.x[0]) / dx)) if np.isfinite(dx) else 0
                j = int(round((py - g.y[0]) / dy)) if np.isfinite(dy) else 0
                if not ok[j, i]:
                    break
                last = r
                r += ds
            radius[a] = 0.0 if last is None else last
        return Aperture((cx, cy), angles, radius, edge, tuple(g.axis_names))

    def to_xarray(self):
        """An ``xarray.Dataset``: dims named after the grid components (vertical first) or
        ``seed``; variables ``survival_time``, ``survived`` (1/0), ``status``, ``valid`` (1
        where run) and ``seeds``; the region and provenance in ``attrs``."""
        unit = "iterates" if self.meta.get("system_kind") == "map" else "model time units"
        variables = {
            "survival_time": (self.survival, {"units": unit, "description": "time at which the orbit "
                              "was first found outside the region; the cap t where it survived"}),
            "survived": (self.survived.astype(np.int8), {"description": "1 where the orbit stayed "
                                                                        "inside up to the cap"}),
            "status": (self.status.astype(np.int32), {"description": "codes in the status_codes "
                                                                     "attribute"}),
            "valid": (self.ran.astype(np.int8), {"description": "1 where the seed was run"}),
        }
        return labels.seed_dataset(self.grid, self.seeds, variables, self.meta)

    def plot(self, **kwargs):
        """A matplotlib figure of the values over the grid with a colour bar (per seed
        without a grid); see :func:`phaselab.export.result_figures.picture_figure`."""
        from phaselab.export.result_figures import picture_figure, scan_label

        values = self.survival
        return picture_figure(values, self.grid, scan_label("survival time", self.meta), result=self, **kwargs)

    def save(self, path, **kwargs):
        """Write :meth:`to_xarray` to ``path`` (``.nc``, ``.zarr``, or no suffix: by size),
        or the picture of :meth:`plot` (``.svg``, ``.pdf``, ``.png``), atomically; returns the path."""
        from phaselab.export import save

        return save(self, path, **kwargs)

    def __repr__(self) -> str:
        where = f"grid {self.grid.shape}" if self.grid is not None else f"{len(self.survival)} seeds"
        return (f"EscapeMap({where}, cap {self.t:g}, survived {int(self.survived.sum())} of "
                f"{int(self.ran.sum())})")


# ----------------------------------------------------------------------------- chunks
def _flow_chunk(states, valid, threads, system, t, dt, method, params, box):
    from phaselab.orbits.trajectory import trajectory

    def compute(z):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)   # summed up once by escape_map
            tr = trajectory(system, z, t, dt=dt, method=method, params=params, box=box,
                            save_every=2**40, check_step=False)
        survival = np.where(codes.stopped(tr.status), tr.escape_time, t)
        info = {"method": tr.method, "dt": float(tr.dt), "params": tr.params}
        return {"survival": survival, "status": tr.status}, info

    return run_valid_rows(states, valid, threads, {"survival": ((), np.nan, float),
                                                   "status": ((), labels.NOT_RUN, np.int32)}, compute)


def _map_chunk(states, valid, threads, system, n_iter, params, box):
    from phaselab.orbits.section import section

    n = len(states)
    survival = np.full(n, np.nan)
    status = np.full(n, labels.NOT_RUN, dtype=np.int32)
    idx = np.flatnonzero(valid)
    if not idx.size:
        return {"survival": survival, "status": status}, None
    lo, hi = inputs.box(system, box)
    order = idx[interleave(idx.size, threads)]
    z = states[order].copy()
    width = z.shape[1]
    outside = np.any((z < lo) | (z > hi), axis=1)
    st = np.where(outside, codes.LEFT_BOX, codes.OK).astype(np.int32)
    surv = np.where(outside, 0.0, float(n_iter))
    alive = np.flatnonzero(~outside)
    done = 0
    with numba_threads(threads), warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        while alive.size and done < n_iter:
            seg = int(max(1, min(n_iter - done, MAP_SEGMENT_VALUES // (alive.size * width))))
            sec = section(system, z[alive], crossings=seg, params=params, box=box)
            stop = codes.stopped(sec.status)
            gone = alive[stop]
            st[gone] = sec.status[stop]
            surv[gone] = done + sec.counts[stop] + 1
            keep = ~stop
            alive = alive[keep]
            z[alive] = sec.points[keep, seg - 1]
            done += seg
    status[order] = st
    survival[order] = surv
    return {"survival": survival, "status": status}, {"method": "map", "dt": 1.0}


def escape_map(system, states, t, *, box=None, params=None, dt=None, method="auto", batch_size=None,
               client=None, progress=None, store=None) -> EscapeMap:
    """How long every seed stays inside a region, up to a cap.

    Parameters
    ----------
    system : Hamiltonian or AreaPreservingMap
    states : StateGrid or array_like, shape (n_seeds, 2n)
        A grid from :func:`phaselab.state_grid` or :func:`phaselab.shell_grid` (invalid
        points are not run), or seeds.
    t : float
        The cap: model time for a flow, the number of iterates for a map.
    box : float or mapping
        The region: a number R (every component within [-R, R]) or ``{name: (low, high)}``
        for the named components (``-inf``/``inf`` for an open side).
    params : mapping, optional
    dt : float, optional
        Step of a flow; by default chosen once for all seeds
        (:func:`phaselab.engine.integrators.default_step` over the seeds), so the map does
        not depend on the chunking. An orbit is found outside at the first step past the
        boundary: escape times are resolved to ``dt``.
    method : str
        As in :func:`phaselab.trajectory`.
    batch_size, client, progress, store
        As in :func:`phaselab.chaos_map`.

    Returns
    -------
    EscapeMap

    Raises
    ------
    ParameterError
        Bad arguments (``box`` missing or malformed, bad seeds, ``t``, ``dt``, ``method``),
        or a store that holds a different scan.

    Notes
    -----
    Survivors whose relative energy error exceeds ``1e-3`` keep their status
    ``ENERGY_DRIFT`` and one warning says how many: their step was too large.
    """
    if box is None:
        raise ParameterError("an escape map needs the region: box=R or box={name: (low, high)}")
    states, valid, grid = scan_rows(system, states)
    if batch_size is not None:
        inputs.count(batch_size, "batch_size")
    inputs.box(system, box)
    used = system.param_values(params)
    is_map = system.kind == "map"
    if is_map:
        cap = inputs.count(t, "t (the number of iterates)")
        t = float(cap)
        work = partial(_map_chunk, system=system, n_iter=cap, params=params, box=box)
        options = {}
    else:
        t = inputs.positive_number(t, "t")
        inputs.method(system.extended() if not system.is_autonomous else system, method)
        dt = inputs.step(dt)
        if dt is None and valid.any():
            from phaselab.frequency.frequencies import integration_step

            dt = integration_step(system, states[valid], t=t, params=params, method=method)
        options = {"dt": dt, "method": method}
        work = partial(_flow_chunk, system=system, t=t, dt=dt, method=method, params=params, box=box)
    limits.scan_budget(int(valid.sum()), t, None if is_map else dt, is_map, "escape_map")
    fingerprint = {"scan": "escape_map", "system": system.key, "params": used.tolist(), "t": t,
                   "box": box, "options": options, "seeds": seeds_digest(states, valid)}
    out = run_chunks(work, states, valid, chunk_size(len(states), batch_size, client), client=client,
                     progress=progress, desc="escape", store=store, fingerprint=fingerprint,
                     fill={"status": labels.NOT_RUN})
    info = out.info or {}
    status = out.fields["status"]
    drift = int(np.sum(status == codes.ENERGY_DRIFT))
    if drift:
        warnings.warn(f"{drift} surviving seed(s) have a relative energy error above "
                      f"{codes.ENERGY_LIMIT:g} (status 'relative energy error above the limit'); their "
                      "step is too large for them: try a smaller dt", RuntimeWarning, stacklevel=2)
    meta = labels.provenance(
        system, params, energy=labels.finite_or_nan(grid.energy if grid is not None else None),
        method=info.get("method", "map" if is_map else str(method)), dt=float(info.get("dt", np.nan)),
        t=t, region=box, status_codes=labels.status_codes(),
        grid_axes=list(grid.axis_names) if grid is not None else None)
    return EscapeMap(survival=out.fields["survival"], status=status, seeds=states, grid=grid, t=t,
                     region=box, meta=meta, run=out.run)


__all__ = ["EscapeMap", "Aperture", "escape_map", "MAP_SEGMENT_VALUES"]
