"""Labels and provenance of scan results, and writing them to files.

The one place where every scan-like result (chaos maps, escape maps, frequency maps,
parameter scans, and the frequencies of an ensemble) turns into an ``xarray.Dataset``:

- dimensions and coordinates in the model's own names: the two grid components (vertical
  first, as in a picture) for a grid, ``seed`` for a list of seeds, the parameter names for
  a parameter scan, and ``state`` labelled by the state components;
- units where they are known (times in model time units or iterates, indicators);
- a ``valid`` mask (1 where the seed was run to the end);
- provenance in the attributes: the system and its expression, the parameters, the
  energy, the method, the step, the time, and the versions of phaselab and of the
  libraries that computed it.

:func:`save_dataset` writes NetCDF (``.nc``) for small results and Zarr (``.zarr``) for
large ones, atomically: the data goes to a temporary name in the same folder and is renamed
into place when complete.
"""

from __future__ import annotations

import json
import os
import shutil
import warnings
from pathlib import Path

import numpy as np

from phaselab.base.atomic import atomic_path, checked_path, open_folder, remove_stale, temporary_name, write_error
from phaselab.engine import status as codes
from phaselab.engine.provenance import (NOTE, expression_text, netcdf_attrs, provenance,  # noqa: F401
                                     state_names, versions, xarray_module)
from phaselab.engine.provenance import cf_dataset
from phaselab.errors import MissingExtraError, ParameterError

SCAN_STORE_KEY = "phaselab_scan"
"""The group attribute that marks a scan's resume store (:mod:`phaselab.scan.store`)."""

SMALL_BYTES = 64 * 2**20
"""Results up to this size are saved as NetCDF when the path has no suffix, larger ones as Zarr."""



# ----------------------------------------------------------------------------- modules
def zarr_module():
    """zarr, or a clear error naming the extra that installs it."""
    try:
        import zarr
    except ImportError:
        raise MissingExtraError("Zarr stores need zarr; install it with pip install 'phaselab[scale]'") from None
    return zarr


# ----------------------------------------------------------------------------- datasets
def _free(name: str, taken: set) -> str:
    out = name
    while out in taken:
        out = f"grid_{out}"
    taken.add(out)
    return out


def seed_dataset(grid, seeds, variables: dict, meta: dict, state=None, extra_coords=None):
    """A Dataset of per-seed results, laid out as the grid's picture when there is a grid.

    Parameters
    ----------
    grid : StateGrid or None
        With a grid, the seed dimension becomes the two grid dimensions named after its
        components (vertical first), with their values as coordinates; without one it is
        ``seed`` (0, 1, ...).
    seeds : ndarray, shape (n_seeds, 2n)
        Stored as the variable ``seeds`` over (..., ``state``).
    variables : dict
        ``name -> (array, attrs)`` or ``name -> (array, attrs, trailing_dims)``; each array
        has the seeds along its first axis.
    meta : dict
        Provenance, stored as attributes (:func:`netcdf_attrs`).
    state : sequence of str, optional
        Names of the state components (default from ``meta["state"]``).
    extra_coords : dict, optional
        Coordinates of the trailing dimensions.
    """
    xr = xarray_module()
    seeds = np.asarray(seeds)
    state = list(state or meta.get("state") or [f"z{k}" for k in range(seeds.shape[1])])
    taken = {"state", "seed", "seeds", *variables, *(extra_coords or {})}
    for spec in variables.values():
        taken.update(spec[2] if len(spec) > 2 else ())
    if grid is not None:
        xn, yn = (_free(str(a), taken) for a in grid.axis_names)
        ny, nx = grid.shape
        where = (yn, xn)
        coords = {yn: np.asarray(grid.y, dtype=float), xn: np.asarray(grid.x, dtype=float)}

        def shaped(a):
            return np.asarray(a).reshape((ny, nx) + np.shape(a)[1:])
    else:
        where = ("seed",)
        coords = {"seed": np.arange(len(seeds))}

        def shaped(a):
            return np.asarray(a)
    coords["state"] = np.array(state, dtype=object)
    coords.update(extra_coords or {})
    data = {}
    for name, spec in variables.items():
        array, attrs = spec[0], spec[1]
        trailing = tuple(spec[2]) if len(spec) > 2 else ()
        data[name] = (where + trailing, shaped(array), dict(attrs or {}))
    data["seeds"] = (where + ("state",), shaped(seeds), {"description": "initial state of each seed"})
    ds = xr.Dataset(data_vars=data, coords=coords, attrs=netcdf_attrs(meta))
    if grid is not None:
        ds[where[1]].attrs["description"] = f"grid values of the state component {grid.axis_names[0]}"
        ds[where[0]].attrs["description"] = f"grid values of the state component {grid.axis_names[1]}"
        units = meta.get("units") or {}
        for dim, name in ((where[1], grid.axis_names[0]), (where[0], grid.axis_names[1])):
            if units.get(str(name)):
                ds[dim].attrs["units"] = units[str(name)]    # CF: the model's unit of the component
        ds[where[1]].attrs["axis"] = "X"
        ds[where[0]].attrs["axis"] = "Y"
    return cf_dataset(ds)


def time_unit(system) -> str:
    """``"iterates"`` for a map, ``"model time units"`` for a flow."""
    return "iterates" if system.kind == "map" else "model time units"


# ----------------------------------------------------------------------------- files
def atomic_write(path, write) -> Path:
    """Call ``write(temporary_path)`` for a file beside ``path``, then rename it to ``path``:
    a reader never sees a half-written file (the one writer, :func:`phaselab.base.atomic.atomic_path`,
    which also gives the one message for a folder that cannot be written)."""
    path = checked_path(path)
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.exists():  # a folder that is a file is refused when it is opened
        raise ParameterError(f"cannot save to {path}: folder {folder} does not exist")
    with atomic_path(path) as tmp:
        write(str(tmp))
    return path


def save_netcdf(dataset, path) -> Path:
    """Write an xarray Dataset to NetCDF atomically."""
    dataset = cf_dataset(dataset)

    def write(tmp):
        try:
            dataset.to_netcdf(tmp)
        except ValueError as exc:
            raise MissingExtraError(f"cannot write NetCDF ({exc}); install netCDF4 with "
                                    "pip install 'phaselab[lab]'") from None

    return atomic_write(path, write)


def save_zarr(dataset, path) -> Path:
    """Write an xarray Dataset to a Zarr folder: first under a temporary name in the same
    folder, then renamed into place (an existing store of that name is replaced only once
    the new one is complete)."""
    zarr_module()
    dataset = cf_dataset(dataset)
    path = checked_path(path)
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.exists():  # a folder that is a file is refused when it is opened
        raise ParameterError(f"cannot save to {path}: folder {folder} does not exist")
    if path.exists() and not path.is_dir():
        raise ParameterError(f"cannot save a Zarr store to {path}: a file of that name exists")
    if is_scan_store(path):
        raise ParameterError(f"cannot save to {path}: it is the resume store of a scan (store={path.name!r}), "
                             "which saving would replace; save to another name, or delete the store "
                             "first if the scan will not be resumed")
    tmp = folder / temporary_name(path, "partial")
    old = folder / temporary_name(path, "old")
    try:
        dfd = open_folder(folder)
        try:
            remove_stale(dfd)
        finally:
            os.close(dfd)
        with warnings.catch_warnings():
            # consolidated metadata (one file to read on opening) is an extension of the Zarr
            # 3 format that xarray and zarr-python read; zarr says so on every write
            warnings.filterwarnings("ignore", message="Consolidated metadata", category=UserWarning)
            dataset.to_zarr(str(tmp), mode="w", consolidated=True)
        if path.exists():
            os.replace(path, old)
        os.replace(tmp, path)
    except BaseException as exc:
        shutil.rmtree(tmp, ignore_errors=True)
        if old.exists() and not path.exists():
            os.replace(old, path)
        if isinstance(exc, OSError):
            raise write_error(path, exc) from None
        raise
    shutil.rmtree(old, ignore_errors=True)
    return path


def is_scan_store(path) -> bool:
    """Whether the folder ``path`` is a scan's resume store (its Zarr group metadata carries
    :data:`SCAN_STORE_KEY`)."""
    meta = Path(path) / "zarr.json"
    try:
        attrs = json.loads(meta.read_text(encoding="utf-8")).get("attributes") or {}
    except (OSError, ValueError, AttributeError):
        return False
    return isinstance(attrs, dict) and SCAN_STORE_KEY in attrs


def save_dataset(dataset, path) -> Path:
    """Write a Dataset by the suffix of ``path``: ``.nc`` NetCDF, ``.zarr`` Zarr; with no
    suffix, NetCDF up to :data:`SMALL_BYTES` and Zarr above (the suffix is added). Returns
    the path written."""
    path = checked_path(path)
    suffix = path.suffix.lower()
    if suffix == "":
        suffix = ".nc" if dataset.nbytes <= SMALL_BYTES else ".zarr"
        path = path.with_name(path.name + suffix)
    if suffix == ".nc":
        return save_netcdf(dataset, path)
    if suffix == ".zarr":
        return save_zarr(dataset, path)
    raise ParameterError(f"cannot save data as {path.suffix!r}; use .nc (NetCDF), .zarr (Zarr), or no "
                         "suffix to choose by size")


def read_json_attr(attrs: dict, key: str, default=None):
    """An attribute written by :func:`netcdf_attrs` as JSON text, decoded."""
    value = attrs.get(key, default)
    if isinstance(value, str):
        try:
            return json.loads(value)
        except ValueError:
            return value
    return value


def finite_or_nan(value) -> float:
    """``float(value)``, NaN for None."""
    return float("nan") if value is None else float(value)


__all__ = ["SMALL_BYTES", "NOTE", "NOT_RUN", "status_codes", "xarray_module", "zarr_module", "expression_text", "versions",
           "state_names", "provenance", "netcdf_attrs", "seed_dataset", "time_unit", "atomic_write",
           "save_netcdf", "save_zarr", "save_dataset", "read_json_attr", "finite_or_nan"]


# ----------------------------------------------------------------------------- status
NOT_RUN = codes.NOT_RUN


def status_codes(table: dict | None = None) -> dict:
    """Status code -> word for a result's attributes: ``table`` (default the compiled loops'
    codes) and :data:`NOT_RUN`."""
    table = codes.STATUS if table is None else table
    return {str(NOT_RUN): codes.STATUS[NOT_RUN], **{str(k): v for k, v in table.items()}}
