"""Parameter scans: any function evaluated over a Cartesian grid of parameter values, in
chunks of points, locally or on a Dask client, with progress and an optional Zarr store."""

from __future__ import annotations

import itertools
import numbers
from dataclasses import dataclass, field
from functools import partial
from typing import Callable, Mapping

import numpy as np

from phaselab.errors import ParameterError
from phaselab.scan import datasets as labels
from phaselab.scan.runner import RunInfo, chunk_size, numba_threads, run_chunks
from phaselab.scan.store import seeds_digest
from phaselab.engine.provenance import cf_dataset


@dataclass
class ParameterScan:
    """Results of a function evaluated over a Cartesian grid of parameter values.

    Attributes
    ----------
    names : tuple of str
        Parameter names, in grid order.
    axes : tuple of ndarray
        The values of each parameter.
    points : list of dict
        The parameter values of each evaluation (the last name varies fastest).
    results : list
        The function's return value at each point, in the order of ``points``.
    meta : dict
        Provenance (the function's name, the parameter names, versions).
    run : RunInfo or None
    """

    names: tuple
    axes: tuple
    points: list
    results: list = field(default_factory=list)
    meta: dict = field(default_factory=dict)
    run: RunInfo | None = None

    @property
    def shape(self) -> tuple[int, ...]:
        return tuple(len(a) for a in self.axes)

    def array(self) -> np.ndarray:
        """The results as an array of shape ``self.shape`` (+ the shape of one result, for
        array results)."""
        try:
            values = np.asarray(self.results, dtype=float)
        except (TypeError, ValueError):
            raise ParameterError("the results are not numbers or arrays of one shape") from None
        return values.reshape(self.shape + values.shape[1:])

    def to_xarray(self):
        """An ``xarray.Dataset`` with one dimension per parameter (named after it, its values
        as coordinates): one variable ``result`` for numbers or arrays of one shape (their
        own axes named ``result_0``, ...), or one variable per key when every result is a
        mapping of names to numbers. Provenance in ``attrs``."""
        xr = labels.xarray_module()
        coords = {name: np.asarray(axis, dtype=float) for name, axis in zip(self.names, self.axes)}
        dims = tuple(self.names)
        data = {}
        if self.results and all(isinstance(r, Mapping) for r in self.results):
            keys = list(self.results[0])
            if any(list(r) != keys for r in self.results):
                raise ParameterError("every result mapping must have the same keys to be labelled")
            for key in keys:
                try:
                    values = np.asarray([r[key] for r in self.results], dtype=float)
                except (TypeError, ValueError):
                    raise ParameterError(f"result {key!r} is not a number at every point") from None
                if values.ndim != 1:
                    raise ParameterError(f"result {key!r} must be one number per point")
                data[str(key)] = (dims, values.reshape(self.shape))
        else:
            values = self.array()
            extra = tuple(f"result_{k}" for k in range(values.ndim - len(dims)))
            data["result"] = (dims + extra, values)
        return cf_dataset(xr.Dataset(data_vars=data, coords=coords, attrs=labels.netcdf_attrs(self.meta)))

    def plot(self, **kwargs):
        """A matplotlib figure: a curve over one parameter, a picture over two."""
        from phaselab.export.result_figures import parameter_scan_figure

        return parameter_scan_figure(self, **kwargs)

    def save(self, path, **kwargs):
        """Write :meth:`to_xarray` to ``path`` (``.nc``, ``.zarr``, or no suffix: by size),
        or the figure of :meth:`plot`, atomically; returns the path."""
        from phaselab.export import save

        return save(self, path, **kwargs)

    def __repr__(self) -> str:
        grid = " x ".join(f"{n}[{len(a)}]" for n, a in zip(self.names, self.axes))
        return f"ParameterScan({grid}, {len(self.results)} results)"


def _numeric(result):
    if isinstance(result, (bool, np.bool_)):
        raise TypeError
    if isinstance(result, numbers.Real):
        return float(result)
    arr = np.asarray(result)
    if arr.dtype.kind not in "iuf":
        raise TypeError
    return arr.astype(float)


def _points_chunk(points, valid, threads, names, function, numeric):
    results = []
    with numba_threads(threads):
        for row in points:
            results.append(function(dict(zip(names, map(float, row)))))
    if numeric:
        try:
            values = np.asarray([_numeric(r) for r in results], dtype=float)
        except (TypeError, ValueError):
            raise ParameterError("with store=..., the function must return a number or an array of "
                                 "one shape at every point") from None
        return {"result": values}, None
    out = np.empty(len(results), dtype=object)
    for i, r in enumerate(results):
        out[i] = r
    return {"result": out}, None


def _function_name(function) -> str:
    module = getattr(function, "__module__", None) or ""
    name = getattr(function, "__qualname__", None) or type(function).__name__
    return f"{module}.{name}" if module else name


def parameter_scan(function: Callable, grid: Mapping, *, client=None, progress=None, store=None,
                   batch_size=1) -> ParameterScan:
    """Evaluate ``function(params)`` at every point of a grid of parameter values.

    Parameters
    ----------
    function : callable
        Takes a dict of parameter values (e.g. ``lambda p: section(H, seeds, ..., params=p)``).
        With a Dask client it must be picklable (a module-level function).
    grid : mapping of str to sequence of float
    client : distributed.Client, optional
    progress : bool or None
        A progress bar with the time left: None (default) when the scan is expected to take
        more than about two seconds; True always, False never.
    store : str, os.PathLike or zarr store, optional
        Keep each finished chunk of points in this Zarr store; a rerun computes only the
        missing ones. The function must then return numbers (or arrays of one shape). The
        store recognises the scan by the function's name and the grid: a changed function
        body under the same name is not detected.
    batch_size : int
        Points per chunk (one Dask task, one step of the store).

    Returns
    -------
    ParameterScan
    """
    if not callable(function):
        raise ParameterError(f"function must be callable, got {type(function).__name__}")
    if not isinstance(grid, Mapping) or not grid:
        raise ParameterError("grid must map parameter names to sequences of values")
    names = tuple(str(k) for k in grid)
    axes = []
    for name, values in grid.items():
        try:
            arr = np.atleast_1d(np.asarray(values, dtype=float))
        except (TypeError, ValueError):
            arr = None
        if arr is None or arr.ndim != 1 or arr.size == 0 or not np.all(np.isfinite(arr)):
            raise ParameterError(f"values of {name!r} must be a non-empty 1-d sequence of finite numbers")
        axes.append(arr)
    rows = np.array(list(itertools.product(*axes)), dtype=float).reshape(-1, len(names))
    points = [dict(zip(names, map(float, r))) for r in rows]
    fname = _function_name(function)
    fingerprint = {"scan": "parameter_scan", "function": fname, "names": list(names),
                   "points": seeds_digest(rows)}
    work = partial(_points_chunk, names=names, function=function, numeric=store is not None)
    out = run_chunks(work, rows, np.ones(len(rows), dtype=bool), chunk_size(len(rows), batch_size, client),
                     client=client, progress=progress, desc="parameters", store=store,
                     fingerprint=fingerprint, unit="point")
    values = out.fields["result"]
    results = list(values) if values.dtype == object else [v if v.ndim else float(v) for v in values]
    meta = labels.provenance(None, None, function=fname, parameters=list(names))
    return ParameterScan(names, tuple(axes), points, results, meta=meta, run=out.run)


__all__ = ["ParameterScan", "parameter_scan"]
