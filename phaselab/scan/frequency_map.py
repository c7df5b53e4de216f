"""Frequency maps: the frequencies and their diffusion for every seed of a grid.

:func:`frequency_map` runs :func:`phaselab.frequency.frequencies.frequencies` (or
:func:`~phaselab.frequency.frequencies.rotation_number`) over a
:class:`~phaselab.scan.grids.StateGrid` or an array of seeds, in batches, on the local cores
or on a Dask client, and returns a :class:`FrequencyMap` that labels itself as an
``xarray.Dataset`` (:meth:`FrequencyMap.to_xarray`).

The integration step of a flow is chosen once for all seeds before batching (unless
``dt`` is given), so the result does not depend on ``batch_size`` or on the client.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import partial

import numpy as np

from phaselab.engine import inputs
from phaselab.engine import status as codes
from phaselab.frequency.frequencies import STATUS_TEXT, frequencies, integration_step, rotation_number
from phaselab.errors import ParameterError
from phaselab.scan import datasets as labels
from phaselab.scan.grids import StateGrid, scan_rows
from phaselab.scan.runner import RunInfo, chunk_size, run_chunks, run_valid_rows
from phaselab.scan.store import seeds_digest

__all__ = ["FrequencyMap", "frequency_map"]

NOT_RUN = labels.NOT_RUN
"""Status of a seed that was not analysed (invalid grid point)."""


@dataclass
class FrequencyMap:
    """Frequencies (or rotation numbers) and diffusion over a set of seeds.

    Attributes
    ----------
    nu : ndarray, shape (n_seeds, k)
        As :attr:`phaselab.frequency.frequencies.Frequencies.nu`; NaN where invalid.
    diffusion : ndarray, shape (n_seeds,)
        log10 of the change of the frequencies between the two halves of each orbit.
    status : ndarray of int, shape (n_seeds,)
        Codes of :data:`phaselab.frequency.frequencies.STATUS_TEXT`; -1 for a seed not run
        (an invalid grid point, e.g. outside the energy shell).
    seeds : ndarray, shape (n_seeds, 2n)
    grid : StateGrid or None
    names : tuple of str
        What each column of ``nu`` is.
    unit, kind, sampling : str
    base_frequency : float or None
    meta : dict
        Provenance: system, expression, params, method, dt, sample_step, n_samples, window,
        plane, versions.
    run : RunInfo or None
        How the scan ran (chunks computed and reused, time, where).
    """

    nu: np.ndarray
    diffusion: np.ndarray
    status: np.ndarray
    seeds: np.ndarray
    grid: StateGrid | None
    names: tuple
    unit: str
    kind: str
    sampling: str
    base_frequency: float | None
    meta: dict = field(default_factory=dict)
    run: RunInfo | None = None

    @property
    def valid(self) -> np.ndarray:
        """Seeds analysed in full with finite frequencies, shape (n_seeds,)."""
        return (self.status == codes.OK) & np.all(np.isfinite(self.nu), axis=1)

    def image(self, what="diffusion", *, column=0) -> np.ndarray:
        """A picture of shape (ny, nx) over the grid: ``"diffusion"`` or ``"nu"`` (the
        ``column``-th frequency); NaN where invalid."""
        if self.grid is None:
            raise ParameterError("this frequency map was computed from a list of seeds, not a grid")
        if what == "diffusion":
            values = self.diffusion
        elif what == "nu":
            values = self.nu[:, column]
        else:
            raise ParameterError(f"what must be 'diffusion' or 'nu', got {what!r}")
        return np.where(self.valid, values, np.nan).reshape(self.grid.shape)

    def to_xarray(self):
        """An ``xarray.Dataset``: for a grid, dims named after the two grid components
        (vertical first, as in a picture) and ``dof``; for seeds, dim ``seed``. Variables
        ``nu``, ``diffusion``, ``status``, ``valid`` (1/0) and ``seeds``; provenance in
        ``attrs`` (see :mod:`phaselab.scan.datasets`)."""
        variables = {
            "nu": (self.nu, {"units": self.unit, "description": f"{self.kind} of each degree of freedom"},
                   ("dof",)),
            "diffusion": (self.diffusion, {"units": f"log10({self.unit})",
                                           "description": "change of the frequencies between the two "
                                                          "halves of each orbit"}),
            "status": (self.status.astype(np.int32),
                       {"description": "-1 not run; other codes in the status_codes attribute"}),
            "valid": (self.valid.astype(np.int8), {"description": "1 where the seed was analysed in full"}),
        }
        return labels.seed_dataset(self.grid, self.seeds, variables, self.meta,
                                   extra_coords={"dof": np.array(self.names, dtype=object)})

    def plot(self, **kwargs):
        """A matplotlib figure: the diffusion map over a grid, the frequency map for two or
        more frequencies, else the profile along the seeds (see
        :mod:`phaselab.export.frequency_figures`)."""
        from phaselab.export.frequency_figures import result_figure

        return result_figure(self, **kwargs)

    def save(self, path, **kwargs):
        """Write to ``path``: ``.nc`` or ``.zarr`` (NetCDF or Zarr of :meth:`to_xarray`; no
        suffix: by size), or ``.svg``, ``.pdf``, ``.png``: the diffusion map over the grid
        (for seeds without a grid, the frequency map). Written atomically."""
        from phaselab.export import save

        return save(self, path, **kwargs)

    def __repr__(self) -> str:
        where = f"grid {self.grid.shape}" if self.grid is not None else f"{len(self.seeds)} seeds"
        return (f"FrequencyMap({where}, {self.kind} of {', '.join(self.names)} in {self.unit}, "
                f"valid={int(self.valid.sum())})")


def _chunk(states, valid, threads, system, angle, options, k):
    """One chunk: the frequencies of every valid row (the scaffolding in
    :func:`phaselab.scan.runner.run_valid_rows`)."""

    def compute(z):
        if angle is not None:
            res = rotation_number(system, z, angle=angle, **options)
        else:
            res = frequencies(system, z, **options)
        if res.nu.shape[1] != k:
            raise RuntimeError(f"frequency_map expected {k} frequencies per seed, got {res.nu.shape[1]}")
        info = {"names": list(res.names), "unit": res.unit, "kind": res.kind, "sampling": res.sampling,
                "base_frequency": res.base_frequency, "meta": res.metadata()}
        return {"nu": res.nu, "diffusion": res.diffusion, "status": res.status}, info

    return run_valid_rows(states, valid, threads, {"nu": ((k,), np.nan, float),
                                                   "diffusion": ((), np.nan, float),
                                                   "status": ((), NOT_RUN, np.int32)}, compute)


def _columns(system, angle, plane) -> int:
    """Frequencies per seed: 1 rotation number, else one per degree of freedom, less the one
    a section through a plane fixes."""
    if angle is not None:
        return 1
    dof = len(system.state_symbols) // 2
    return dof - 1 if system.kind == "flow" and inputs.plane(system, plane).kind == "fixed" else dof


def frequency_map(system, states, t=None, *, samples=None, params=None, dt=None, method="auto",
                  plane=None, direction=+1, window=1, angles=None, angle=None, box=None, t_max=None,
                  fold="signed", batch_size=None, client=None, progress=None, store=None) -> FrequencyMap:
    """Frequencies and diffusion for every seed of a grid, computed in chunks.

    Parameters
    ----------
    system : Hamiltonian or AreaPreservingMap
    states : StateGrid or array_like, shape (n_seeds, 2n)
        A grid from :func:`phaselab.state_grid` or :func:`phaselab.shell_grid` (invalid
        grid points are skipped), or seeds.
    t, samples, params, dt, method, plane, direction, window, angles, box, t_max, fold
        As in :func:`phaselab.frequency.frequencies.frequencies`.
    angle : str or (str, str), optional
        Rotation numbers of this angle instead of frequencies
        (:func:`phaselab.frequency.frequencies.rotation_number`).
    batch_size : int, optional
        Seeds per chunk (one compiled call, one Dask task, one step of a store); default
        from the rule in :mod:`phaselab.scan.runner`.
    client : distributed.Client, optional
        Run the chunks on a Dask cluster; default: the local cores.
    progress : bool or None
        A progress bar with the time left: None (default) when the scan is expected to take
        more than about two seconds; True always, False never.
    store : str, os.PathLike or zarr store, optional
        A Zarr store that keeps each finished chunk; running the same scan again computes
        only the chunks not yet done.

    Returns
    -------
    FrequencyMap
    """
    if batch_size is not None:
        inputs.count(batch_size, "batch_size")
    states, valid, grid = scan_rows(system, states)
    todo = np.flatnonzero(valid)
    if not todo.size:
        raise ParameterError("no valid seeds to analyse (every grid point is invalid)")
    used = system.param_values(params)  # refuse unknown parameters before any work
    options = dict(t=t, samples=samples, params=params, dt=dt, method=method, plane=plane, direction=direction,
                   box=box, t_max=t_max)
    if angle is None:
        options.update(window=window, angles=angles, fold=fold, lines=1)
    elif system.kind == "flow" and plane is None and t is None \
            and getattr(system, "period", None) is not None:
        options["plane"] = "stroboscopic"
    if dt is None and system.kind == "flow":
        options["dt"] = integration_step(system, states[todo], t=t, n=samples, params=params,
                                         method=method, plane=options["plane"])
    k = _columns(system, angle, options["plane"])
    fingerprint = {"scan": "frequency_map", "system": system.key, "params": used.tolist(),
                   "angle": angle, "options": {key: v for key, v in options.items() if key != "params"},
                   "seeds": seeds_digest(states, valid)}
    work = partial(_chunk, system=system, angle=angle, options=options, k=k)
    out = run_chunks(work, states, valid, chunk_size(len(states), batch_size, client), client=client,
                     progress=progress, desc="frequencies", store=store, fingerprint=fingerprint,
                     fill={"status": NOT_RUN})
    first = out.info
    meta = dict(first["meta"])
    meta["status_codes"] = labels.status_codes(STATUS_TEXT)
    if grid is not None:
        meta["grid_axes"] = list(grid.axis_names)
        meta["energy"] = float("nan") if grid.energy is None else float(grid.energy)
    f = out.fields
    return FrequencyMap(nu=f["nu"], diffusion=f["diffusion"], status=f["status"], seeds=states, grid=grid,
                        names=tuple(first["names"]), unit=first["unit"], kind=first["kind"],
                        sampling=first["sampling"], base_frequency=first["base_frequency"], meta=meta,
                        run=out.run)
