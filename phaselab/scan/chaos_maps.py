"""Chaos maps: one chaos indicator for every seed of a grid (or list), in chunks, on the
local cores or a Dask cluster, resumable through a Zarr store.

Only what is asked is computed: one deviation vector per orbit for the Lyapunov exponent,
MEGNO and FLI, two only for SALI, and no running history. Each orbit's initial deviation
vectors depend only on ``seed`` and its own state
(:func:`phaselab.orbits.chaos.deviation_vectors`), so the map does not depend on the
chunking, on the order of the orbits, on the cluster, or on whether it was resumed.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field
from functools import partial

import numpy as np

from phaselab.engine import inputs, limits
from phaselab.engine import status as codes
from phaselab.errors import ParameterError
from phaselab.scan import datasets as labels
from phaselab.scan.grids import StateGrid, scan_rows
from phaselab.scan.runner import RunInfo, chunk_size, run_chunks, run_valid_rows
from phaselab.scan.store import seeds_digest

INDICATORS = ("lyapunov", "megno", "fli", "sali")

UNITS = {
    "lyapunov": ("1 / model time unit", "1 / iterate"),
    "megno": ("1", "1"),
    "fli": ("1", "1"),
    "sali": ("1", "1"),
}
DESCRIPTIONS = {
    "lyapunov": "largest Lyapunov exponent (Benettin's algorithm)",
    "megno": "time-averaged MEGNO (2 on invariant tori, growing on chaotic orbits)",
    "fli": "fast Lyapunov indicator: largest log-length of the deviation vector",
    "sali": "smaller alignment index of two deviation vectors",
}


@dataclass
class ChaosMap:
    """A chaos indicator over a set of seeds.

    Attributes
    ----------
    indicator : str
    values : ndarray, shape (n_seeds,)
        The indicator's final value per seed (NaN for seeds not run or stopped early).
    status : ndarray of int, shape (n_seeds,)
        Why each orbit stopped (:mod:`phaselab.engine.status`), -1 for a seed not run.
    t_end : ndarray, shape (n_seeds,)
        Time (iterate) each orbit reached: ``t``, or earlier for a stopped orbit.
    seeds : ndarray, shape (n_seeds, 2n)
    grid : StateGrid or None
        The grid the seeds came from, if any.
    t : float
        Integration time (iterates for maps).
    meta : dict
        Provenance (see :func:`phaselab.scan.datasets.provenance`).
    run : RunInfo or None
        How the scan ran (chunks computed and reused, time, where).
    """

    indicator: str
    values: np.ndarray
    status: np.ndarray
    t_end: np.ndarray
    seeds: np.ndarray
    grid: StateGrid | None
    t: float
    meta: dict = field(default_factory=dict)
    run: RunInfo | None = None

    @property
    def escaped(self) -> np.ndarray:
        """Orbits cut short (left the box, non-finite, failed step), shape (n_seeds,)."""
        return codes.stopped(self.status)

    @property
    def valid(self) -> np.ndarray:
        """Seeds run to the end with a finite value, shape (n_seeds,)."""
        return (self.status == codes.OK) & np.isfinite(self.values)

    @property
    def image(self) -> np.ndarray:
        """The values as a picture of shape (ny, nx) (needs a grid)."""
        if self.grid is None:
            raise ParameterError("this chaos map was computed from a list of seeds, not a grid")
        return self.values.reshape(self.grid.shape)

    def to_xarray(self):
        """An ``xarray.Dataset``: dims named after the two grid components (vertical first)
        or ``seed``; variables ``<indicator>``, ``status``, ``t_end``, ``valid`` (1/0) and
        ``seeds`` (over ``state``); provenance in ``attrs``."""
        flow = self.meta.get("system_kind", "flow") != "map"
        unit = UNITS[self.indicator][0 if flow else 1]
        time_unit = "model time units" if flow else "iterates"
        variables = {
            self.indicator: (self.values, {"units": unit, "description": DESCRIPTIONS[self.indicator]}),
            "status": (self.status.astype(np.int32), {"description": "why each orbit stopped; codes in "
                                                                     "the status_codes attribute"}),
            "t_end": (self.t_end, {"units": time_unit, "description": "time each orbit reached"}),
            "valid": (self.valid.astype(np.int8), {"description": "1 where the seed ran to the end"}),
        }
        return labels.seed_dataset(self.grid, self.seeds, variables, self.meta)

    def plot(self, **kwargs):
        """A matplotlib figure of the values over the grid with a colour bar (per seed
        without a grid); see :func:`phaselab.export.result_figures.picture_figure`."""
        from phaselab.export.result_figures import picture_figure

        values = self.values
        from phaselab.export.result_figures import scan_label

        return picture_figure(values, self.grid, scan_label(self.indicator, self.meta), result=self, **kwargs)

    def save(self, path, **kwargs):
        """Write :meth:`to_xarray` to ``path``: ``.nc`` NetCDF, ``.zarr`` Zarr, no suffix:
        by size; ``.svg``, ``.pdf``, ``.png`` the picture of :meth:`plot`. Written
        atomically; returns the path."""
        from phaselab.export import save

        return save(self, path, **kwargs)

    def __repr__(self) -> str:
        where = f"grid {self.grid.shape}" if self.grid is not None else f"{len(self.values)} seeds"
        return (f"ChaosMap({self.indicator} over {where} to t={self.t:g}, valid={int(self.valid.sum())}, "
                f"stopped={int(self.escaped.sum())})")


def _chunk(states, valid, threads, system, t, indicator, params, seed, options):
    """One chunk: the indicator of every valid row (the scaffolding in
    :func:`phaselab.scan.runner.run_valid_rows`)."""
    from phaselab.orbits.chaos import chaos_indicators

    def compute(z):
        with warnings.catch_warnings():     # stopped orbits are NaN cells of the map, with their status
            warnings.filterwarnings("ignore", "orbit.s. stopped early", RuntimeWarning)
            res = chaos_indicators(system, z, t, params=params, seed=seed,
                                   vectors=2 if indicator == "sali" else 1, history=False, **options)
        values = np.array(getattr(res, indicator), dtype=float)
        values[codes.stopped(res.status)] = np.nan
        info = {"method": res.method, "dt": float(res.dt), "params": res.params}
        return {"values": values, "status": res.status, "t_end": res.t_end}, info

    return run_valid_rows(states, valid, threads, {"values": ((), np.nan, float),
                                                   "status": ((), labels.NOT_RUN, np.int32),
                                                   "t_end": ((), np.nan, float)}, compute)


def chaos_map(system, states, t, *, indicator: str = "megno", params=None, dt=None, method="auto",
              box=None, tol=None, maxit=None, seed: int = 0, batch_size=None, client=None,
              progress=None, store=None) -> ChaosMap:
    """A chaos indicator for every seed, computed in chunks.

    Parameters
    ----------
    system : Hamiltonian or AreaPreservingMap
    states : StateGrid or array_like, shape (n_seeds, 2n)
        A grid from :func:`phaselab.state_grid` or :func:`phaselab.shell_grid` (invalid
        points are not run), or seeds.
    t : float
        Integration time (model time units), or iterates for a map.
    indicator : {"lyapunov", "megno", "fli", "sali"}
    params : mapping, optional
    dt, method, box, tol, maxit
        As in :func:`phaselab.orbits.chaos.chaos_indicators` (``dt`` default 0.01, 0.005
        for second-order methods).
    seed : int
        Seed of the initial deviation vectors (each orbit's depend only on it and the
        orbit's own state).
    batch_size : int, optional
        Seeds per chunk (one compiled call, one Dask task, one step of a store); default
        from the rule in :mod:`phaselab.scan.runner`.
    client : distributed.Client, optional
        Run the chunks on a Dask cluster; default: the local cores.
    progress : bool or None
        A progress bar with the time left: None (default) shows it when the scan is
        expected to take more than about two seconds; True always, False never.
    store : str, os.PathLike or zarr store, optional
        A Zarr store (a folder such as ``"megno.zarr"``) that keeps each finished chunk;
        running the same scan again computes only the chunks not yet done.

    Returns
    -------
    ChaosMap

    Raises
    ------
    ParameterError
        Bad arguments (unknown indicator, bad seeds, ``t``, ``dt``, ``method``...), or a
        store that holds a different scan.
    """
    if not isinstance(indicator, str) or indicator not in INDICATORS:
        raise ParameterError(f"unknown indicator {indicator!r}; choose one of {', '.join(INDICATORS)}")
    states, valid, grid = scan_rows(system, states)
    is_map = system.kind == "map"
    t = float(inputs.count(t, "t (the number of iterates)")) if is_map else inputs.positive_number(t, "t")
    seed = inputs.count(seed, "seed", minimum=0)
    used = system.param_values(params)  # refuses unknown parameters before any work
    if not is_map:
        flow = system.extended() if not system.is_autonomous else system
        inputs.symplectic(inputs.method(flow, method))
        inputs.step(dt)
    inputs.box(system, box)
    inputs.implicit_solver(tol, maxit)
    limits.scan_budget(int(valid.sum()), t, inputs.step(dt), is_map, "chaos_map")
    options = dict(dt=dt, method=method, box=box, tol=tol, maxit=maxit) if not is_map else dict(box=box)
    fingerprint = {"scan": "chaos_map", "system": system.key, "params": used.tolist(), "t": t,
                   "indicator": indicator, "seed": seed, "options": options,
                   "seeds": seeds_digest(states, valid)}
    work = partial(_chunk, system=system, t=t, indicator=indicator, params=params, seed=seed,
                   options=options)
    out = run_chunks(work, states, valid, chunk_size(len(states), batch_size, client), client=client,
                     progress=progress, desc=indicator, store=store, fingerprint=fingerprint,
                     fill={"status": labels.NOT_RUN})
    info = out.info or {}
    meta = labels.provenance(
        system, params, energy=labels.finite_or_nan(grid.energy if grid is not None else None),
        method=info.get("method", "map" if is_map else str(method)), dt=float(info.get("dt", np.nan)),
        t=t, indicator=indicator, deviation_seed=seed, deviation_vectors=2 if indicator == "sali" else 1,
        box=box, status_codes=labels.status_codes(),
        grid_axes=list(grid.axis_names) if grid is not None else None)
    f = out.fields
    return ChaosMap(indicator=indicator, values=f["values"], status=f["status"], t_end=f["t_end"],
                    seeds=states, grid=grid, t=t, meta=meta, run=out.run)


__all__ = ["ChaosMap", "chaos_map", "INDICATORS"]
