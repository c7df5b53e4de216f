"""Frequency maps: the frequencies and their diffusion for every seed of a grid.

:func:`frequency_map` runs :func:`phaselab.compute.frequencies.frequencies` (or
:func:`~phaselab.compute.frequencies.rotation_number`) over a
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

from phaselab.compute.frequencies import (STATUS_TEXT, attrs_for_netcdf, frequencies,
                                          integration_step, rotation_number, xarray_module)
from phaselab.errors import ParameterError
from phaselab.scan.grids import StateGrid
from phaselab.scan.runner import run_batches

__all__ = ["FrequencyMap", "frequency_map"]

NOT_RUN = -1
"""Status of a seed that was not analysed (invalid grid point)."""


@dataclass
class FrequencyMap:
    """Frequencies (or rotation numbers) and diffusion over a set of seeds.

    Attributes
    ----------
    nu : ndarray, shape (n_seeds, k)
        As :attr:`phaselab.compute.frequencies.Frequencies.nu`; NaN where invalid.
    diffusion : ndarray, shape (n_seeds,)
        log10 of the change of the frequencies between the two halves of each orbit.
    status : ndarray of int, shape (n_seeds,)
        Codes of :data:`phaselab.compute.frequencies.STATUS_TEXT`; -1 for a seed not run
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

    @property
    def valid(self) -> np.ndarray:
        """Seeds analysed in full with finite frequencies, shape (n_seeds,)."""
        return (self.status == 0) & np.all(np.isfinite(self.nu), axis=1)

    def image(self, what="diffusion", column=0) -> np.ndarray:
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
        ``attrs``."""
        xr = xarray_module()
        state = list(self.meta.get("state") or [f"z{k}" for k in range(self.seeds.shape[1])])
        taken = {"nu", "diffusion", "status", "valid", "seeds", "dof", "state", "seed"}
        if self.grid is not None:
            xn, yn = (_free(str(a), taken) for a in self.grid.axis_names)
            ny, nx = self.grid.shape
            where = (yn, xn)
            coords = {yn: self.grid.y, xn: self.grid.x}

            def shaped(a):
                return a.reshape((ny, nx) + a.shape[1:])
        else:
            where = ("seed",)
            coords = {"seed": np.arange(len(self.seeds))}

            def shaped(a):
                return a
        coords["dof"] = np.array(self.names, dtype=object)
        coords["state"] = np.array(state, dtype=object)
        ds = xr.Dataset(
            data_vars={
                "nu": (where + ("dof",), shaped(self.nu)),
                "diffusion": (where, shaped(self.diffusion)),
                "status": (where, shaped(self.status.astype(np.int32))),
                "valid": (where, shaped(self.valid.astype(np.int8))),
                "seeds": (where + ("state",), shaped(self.seeds)),
            },
            coords=coords, attrs=attrs_for_netcdf(self.meta))
        ds["nu"].attrs.update(units=self.unit, description=f"{self.kind} of each degree of freedom")
        ds["diffusion"].attrs.update(units=f"log10({self.unit})",
                                     description="change of the frequencies between the two "
                                                 "halves of each orbit")
        ds["valid"].attrs["description"] = "1 where the seed was analysed in full"
        ds["status"].attrs["description"] = "-1 not run; other codes in the status_codes attribute"
        return ds

    def save(self, path, **kwargs):
        """Write to ``path``: ``.nc`` (NetCDF of :meth:`to_xarray`), or ``.svg``, ``.pdf``,
        ``.png``: the diffusion map over the grid (for seeds without a grid, the frequency
        map). Written atomically."""
        from phaselab.export.frequency_figures import save_result

        return save_result(self, path, **kwargs)

    def __repr__(self) -> str:
        where = f"grid {self.grid.shape}" if self.grid is not None else f"{len(self.seeds)} seeds"
        return (f"FrequencyMap({where}, {self.kind} of {', '.join(self.names)} in {self.unit}, "
                f"valid={int(self.valid.sum())})")


def _free(name, taken):
    out = name
    while out in taken:
        out = f"grid_{out}"
    taken.add(out)
    return out


def _batch(states, system, angle, options):
    if angle is not None:
        res = rotation_number(system, states, angle=angle, **options)
    else:
        res = frequencies(system, states, **options)
    info = {"names": res.names, "unit": res.unit, "kind": res.kind, "sampling": res.sampling,
            "base_frequency": res.base_frequency, "meta": res.metadata()}
    return res.nu, res.diffusion, res.status, info


def frequency_map(system, seeds, t=None, n=None, params=None, dt=None, method="auto", plane=None,
                  direction=+1, window=1, angles=None, angle=None, box=None, t_max=None,
                  fold="signed", batch_size=512, client=None, progress=False) -> FrequencyMap:
    """Frequencies and diffusion for every seed of a grid, computed in batches.

    Parameters
    ----------
    system : Hamiltonian or AreaPreservingMap
    seeds : StateGrid or array_like, shape (n_seeds, 2n)
        A grid from :func:`phaselab.state_grid` or :func:`phaselab.shell_grid` (invalid
        grid points are skipped), or seeds.
    t, n, params, dt, method, plane, direction, window, angles, box, t_max, fold
        As in :func:`phaselab.compute.frequencies.frequencies`.
    angle : str or (str, str), optional
        Rotation numbers of this angle instead of frequencies
        (:func:`phaselab.compute.frequencies.rotation_number`).
    batch_size : int
        Seeds per compiled call (and per Dask task).
    client : distributed.Client, optional
        Run the batches on a Dask cluster; default: the local cores.
    progress : bool
        Show a progress bar over batches.

    Returns
    -------
    FrequencyMap
    """
    if isinstance(batch_size, bool) or not isinstance(batch_size, (int, np.integer)) or batch_size < 1:
        raise ParameterError(f"batch_size must be a positive integer, got {batch_size!r}")
    grid = seeds if isinstance(seeds, StateGrid) else None
    try:
        states = np.array(grid.states if grid is not None else seeds, dtype=float)
    except (TypeError, ValueError):
        raise ParameterError("seeds must be a StateGrid or numbers of shape (n_seeds, 2n)") from None
    if states.ndim == 1:
        states = states[None, :]
    width = len(system.state_symbols)
    if states.ndim != 2 or states.shape[1] != width or len(states) == 0:
        raise ParameterError(f"seeds must have shape (n_seeds, {width}), got {states.shape}")
    valid = grid.valid.copy() if grid is not None else np.ones(len(states), dtype=bool)
    valid &= np.all(np.isfinite(states), axis=1)
    todo = np.flatnonzero(valid)
    system.param_values(params)  # refuse unknown parameters before any work
    options = dict(t=t, n=n, params=params, dt=dt, method=method, plane=plane, direction=direction,
                   box=box, t_max=t_max)
    if angle is None:
        options.update(window=window, angles=angles, fold=fold, lines=1)
    elif getattr(system, "kind", "flow") == "flow" and plane is None and t is None \
            and getattr(system, "period", None) is not None:
        options["plane"] = "stroboscopic"
    if dt is None and todo.size and getattr(system, "kind", "flow") == "flow":
        options["dt"] = integration_step(system, states[todo], t=t, n=n, params=params,
                                         method=method, plane=options["plane"])
    batches = [states[idx] for idx in (todo[i:i + batch_size] for i in range(0, len(todo), batch_size))]
    work = partial(_batch, system=system, angle=angle, options=options)
    results = run_batches(work, batches, client=client, progress=progress, desc="frequencies")
    if not results:
        raise ParameterError("no valid seeds to analyse (every grid point is invalid)")
    first = results[0][3]
    k = results[0][0].shape[1]
    nu = np.full((len(states), k), np.nan)
    diff = np.full(len(states), np.nan)
    status = np.full(len(states), NOT_RUN, dtype=np.int64)
    nu[todo] = np.concatenate([r[0] for r in results])
    diff[todo] = np.concatenate([r[1] for r in results])
    status[todo] = np.concatenate([r[2] for r in results])
    meta = dict(first["meta"])
    meta["status_codes"] = {str(NOT_RUN): "not run (invalid seed)",
                            **{str(c): v for c, v in STATUS_TEXT.items()}}
    if grid is not None:
        meta["grid_axes"] = list(grid.axis_names)
        meta["energy"] = float("nan") if grid.energy is None else float(grid.energy)
    return FrequencyMap(nu=nu, diffusion=diff, status=status, seeds=states, grid=grid,
                        names=first["names"], unit=first["unit"], kind=first["kind"],
                        sampling=first["sampling"], base_frequency=first["base_frequency"], meta=meta)
