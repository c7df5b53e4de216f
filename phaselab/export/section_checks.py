"""Checks of a section data file read back: only what phaselab writes is accepted.

A section file (:mod:`phaselab.export.data`) is checked against what
:func:`~phaselab.export.data.write_section_csv` and
:func:`~phaselab.export.data.write_section_netcdf` write: the header values' types and
ranges (counts within the crossings, status codes that exist, one entry per orbit), the
NetCDF variables' names, dimensions, dtypes and attributes (no units, calendars, scale
factors or offsets: phaselab writes none, and a reader that applied them would hand back
dates or rescaled numbers), and the sizes the file declares against the memory limit of
:func:`phaselab.set_limits` *before* anything of that size is read or allocated. A file
that fails is refused with a :class:`~phaselab.errors.DataFileError` naming the file and
the problem.

Header keys phaselab does not write are ignored (kept in the metadata, used for nothing).
"""

from __future__ import annotations

import math

import numpy as np

from phaselab.engine import limits
from phaselab.engine.status import STATUS
from phaselab.errors import DataFileError

#: the longest row of a section CSV, per column, in characters: a float's shortest repr is
#: at most 24 characters ("-1.2345678901234567e-308"), plus its comma
CSV_CHARS_PER_VALUE = 25
#: NetCDF variables phaselab writes: dims and dtype of each
NC_SCHEMA = {
    "points": (("orbit", "crossing", "component"), "float64"),
    "times": (("orbit", "crossing"), "float64"),
    "counts": (("orbit",), "int32"),
    "energy_error": (("orbit",), "float64"),
    "escaped": (("orbit",), "int8"),
    "status": (("orbit",), "int32"),
    "seeds": (("orbit", "component"), "float64"),
    "orbit": (("orbit",), "int64"),
    "crossing": (("crossing",), "int64"),
}
#: variables a file may lack (written by versions before status codes were recorded)
NC_OPTIONAL = {"status"}
#: variable attributes phaselab writes: the fill value and the CF labels (anything else, such
#: as calendar, scale_factor or add_offset, would change what the numbers mean)
NC_VARIABLE_ATTRS = {"_FillValue", "description", "long_name", "units", "component_units", "comment"}
#: header values that are text, when present
TEXT_KEYS = ("system", "kind", "expression", "method", "phaselab_version")


def _whole(value) -> bool:
    return isinstance(value, int) and not isinstance(value, bool)


def _real(value) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool)


# ----------------------------------------------------------------------------- sizes
def load_bytes(n: int, max_c: int, ncomp: int, rows: int = 0) -> float:
    """Bytes a loaded section takes: points and times (n x max_c), per-orbit arrays, and
    ``rows`` parsed CSV rows of ``ncomp + 3`` numbers."""
    return 8.0 * (n * max_c * (ncomp + 1) + n * (ncomp + 4) + rows * (ncomp + 3))


def check_size(path, n: int, max_c: int, ncomp: int, rows: int = 0) -> None:
    """Refuse a file whose declared arrays would need more memory than the limit in force.

    Raises
    ------
    DataFileError
        Naming the declared sizes, the memory they need and how to raise the limit.
    """
    need = load_bytes(n, max_c, ncomp, rows)
    limit = limits.LIMITS.memory_bytes
    if not math.isfinite(need) or need > limit:
        total = n * max_c * ncomp
        raise DataFileError(
            f"{path}: it declares {n} orbits x {max_c} crossings x {ncomp} components = {total} values "
            f"({need / 2**30:.3g} GiB to load); sections are loaded up to the memory limit of "
            f"{limit / 2**30:.3g} GiB, raised with phaselab.set_limits(memory_bytes=...)")


def check_csv_bytes(path, size: int, header_bytes: int, rows: int, columns: int) -> None:
    """Refuse a CSV file larger than its header and declared rows can fill (so that a huge
    body under a small header is never read)."""
    most = header_bytes + rows * (columns * CSV_CHARS_PER_VALUE + 1)
    if size > most:
        raise DataFileError(f"{path}: the file has {size} bytes, more than the {rows} rows its header "
                            f"declares can hold (at most {most} bytes); an edited or crafted file")


# ----------------------------------------------------------------------------- header
def check_header(path, meta: dict, n: int, ncomp: int) -> dict:
    """The per-orbit and descriptive header values, checked and converted.

    Parameters
    ----------
    path : path, for messages
    meta : dict
        Header values as read (JSON values for CSV, attributes and arrays for NetCDF).
    n, ncomp : int
        Orbits and state components.

    Returns
    -------
    dict
        ``meta`` with ``energy_error`` (float, (n,)), ``escaped`` (bool, (n,)), ``status``
        (int64, (n,)) and ``seeds`` (float, (n, ncomp)) as arrays where present.
    """
    for key in TEXT_KEYS:
        if key in meta and not isinstance(meta[key], str):
            raise DataFileError(f"{path}: header value {key!r} must be text, got {_show(meta[key])}")
    for key in ("energy", "dt"):
        value = meta.get(key)
        if value is not None and not _real(value):
            raise DataFileError(f"{path}: header value {key!r} must be a number, got {_show(value)}")
    params = meta.get("params")
    if params is not None and (not isinstance(params, dict)
                               or not all(_real(v) for v in params.values())):
        raise DataFileError(f"{path}: header value 'params' must map names to numbers")
    _check_plane(path, meta.get("plane"), ncomp)
    out = dict(meta)
    if "energy_error" in meta:
        out["energy_error"] = _per_orbit(path, "energy_error", meta["energy_error"], n, _real, float)
    if "escaped" in meta:
        out["escaped"] = _per_orbit(path, "escaped", meta["escaped"], n,
                                    lambda v: isinstance(v, bool) or v in (0, 1), bool, "true or false",
                                    (0, 1))
    if "status" in meta:
        out["status"] = _per_orbit(path, "status", meta["status"], n, lambda v: _whole(v) and v in STATUS,
                                   np.int64, f"a status code ({', '.join(map(str, STATUS))})", STATUS)
    if "seeds" in meta:
        out["seeds"] = _seeds(path, meta["seeds"], n, ncomp)
    return out


#: the plane records of phaselab's sections: kind -> {key: check}
PLANE_KEYS = {
    "plane": {"kind": None, "index": _whole, "name": lambda v: isinstance(v, str), "value": _real,
              "direction": lambda v: v in (1, -1) and not isinstance(v, bool)},
    "stroboscopic": {"kind": None, "period": _real},
    "map": {"kind": None},
    "trajectory": {"kind": None, "duration": _real},
}


def _check_plane(path, plane, ncomp: int) -> None:
    """The plane record: one of :data:`PLANE_KEYS` as :mod:`phaselab.orbits.section` writes
    it (see :attr:`~phaselab.orbits.section_result.Section.plane`), an empty one, or a record of
    another kind (a section made by hand) whose values are text or numbers."""
    if plane is None or plane == {}:
        return
    if not isinstance(plane, dict) or not isinstance(plane.get("kind"), str):
        raise DataFileError(f"{path}: header value 'plane' must be a plane record with a 'kind', got "
                            f"{_show(plane)}")
    keys = PLANE_KEYS.get(plane["kind"])
    for key, value in plane.items():
        check = keys.get(key, False) if keys else (lambda v: v is None or isinstance(v, str) or _real(v))
        if check is False or (check is not None and not check(value)):
            raise DataFileError(f"{path}: header value 'plane': {key!r} = {_show(value)} is not what "
                                "phaselab writes")
    if "index" in plane and keys and not 0 <= plane["index"] < ncomp:
        raise DataFileError(f"{path}: header value 'plane': index {plane['index']} is not a state column")


def _seeds(path, seeds, n: int, ncomp: int) -> np.ndarray:
    """The seeds as float of shape (n, ncomp): a typed float array (NetCDF) as it is, JSON
    rows checked entry by entry."""
    if isinstance(seeds, np.ndarray) and seeds.dtype.kind == "f" and seeds.shape == (n, ncomp):
        return seeds.astype(float)
    rows = seeds.tolist() if isinstance(seeds, np.ndarray) else seeds
    if (not isinstance(rows, list) or len(rows) != n
            or not all(isinstance(r, list) and len(r) == ncomp and all(map(_real, r)) for r in rows)):
        raise DataFileError(f"{path}: header value 'seeds' must hold {n} rows of {ncomp} numbers")
    return np.asarray(rows, dtype=float).reshape(n, ncomp)


def _per_orbit(path, key, values, n, accept, dtype, what="a number", allowed=None):
    """One entry per orbit, each accepted by ``accept`` (JSON values) or, for a typed
    numeric array (NetCDF), checked at once: any float for a float field, else one of
    ``allowed``."""
    if isinstance(values, np.ndarray) and values.shape == (n,) and values.dtype.kind in "biuf":
        if np.dtype(dtype).kind == "f":
            return values.astype(dtype)
        bad = np.flatnonzero(~np.isin(values, list(allowed)))
        if bad.size:
            i = int(bad[0])
            raise DataFileError(f"{path}: header value {key!r}, orbit {i}: {_show(values[i].item())} is not "
                                f"{what}")
        return values.astype(dtype)
    items = values.tolist() if isinstance(values, np.ndarray) else values
    if not isinstance(items, list) or len(items) != n:
        raise DataFileError(f"{path}: header value {key!r} must hold one entry per orbit ({n})")
    for i, value in enumerate(items):
        if not accept(value):
            raise DataFileError(f"{path}: header value {key!r}, orbit {i}: {_show(value)} is not {what}")
    return np.asarray(items, dtype=dtype).reshape(n)


def check_counts(path, counts, n: int, max_c: int) -> np.ndarray:
    """``counts`` as int64 of shape (n,), each a whole number in ``[0, max_c]``."""
    items = counts.tolist() if isinstance(counts, np.ndarray) else counts
    if (not isinstance(items, list) or len(items) != n
            or not all(_whole(c) and 0 <= c <= max_c for c in items)):
        raise DataFileError(f"{path}: header value 'counts' must hold {n} whole numbers between 0 and {max_c}")
    return np.asarray(items, dtype=np.int64).reshape(n)


def check_rows(path, orbit, crossing, counts, max_c: int, first_line: int) -> None:
    """Each CSV row names a distinct (orbit, crossing) the header declares.

    Parameters
    ----------
    orbit, crossing : ndarray of float, shape (rows,)
    counts : ndarray of int, shape (n,)
    first_line : int
        File line number of the first row, for messages.
    """
    n = len(counts)
    bad = ~((orbit >= 0) & (orbit < n) & (orbit == np.floor(orbit)) & (crossing >= 0)
            & (crossing < max_c) & (crossing == np.floor(crossing)))
    if not bad.any():
        bad = crossing >= counts[orbit.astype(np.int64)]
    if bad.any():
        r = int(np.argmax(bad))
        raise DataFileError(f"{path}, line {first_line + r}: orbit {orbit[r]:g}, crossing {crossing[r]:g} is "
                            "not one the header declares")
    key = orbit.astype(np.int64) * max(max_c, 1) + crossing.astype(np.int64)
    order = np.argsort(key, kind="stable")
    twice = np.flatnonzero(key[order][1:] == key[order][:-1])
    if twice.size:
        r = int(order[twice[0] + 1])
        raise DataFileError(f"{path}, line {first_line + r}: orbit {orbit[r]:g}, crossing {crossing[r]:g} "
                            "appears twice (each crossing is one row)")


# ----------------------------------------------------------------------------- NetCDF
def check_netcdf_layout(path, lazy) -> None:
    """The variables of a lazily opened (undecoded) NetCDF section file: names, dims,
    dtypes and attributes as phaselab writes them, and their total size within the memory
    limit, checked before any array is read.

    Parameters
    ----------
    lazy : xarray.Dataset
        Opened with ``decode_cf=False`` (nothing read yet).
    """
    names = set(lazy.variables)
    extra = sorted(names - set(NC_SCHEMA) - {"component"})
    if extra:
        raise DataFileError(f"{path}: variable {extra[0]!r} is not one phaselab writes")
    for name, (dims, dtype) in NC_SCHEMA.items():
        if name not in names and name in NC_OPTIONAL:
            continue
        if name not in names:
            raise DataFileError(f"{path}: variable {name!r} is missing")
        var = lazy.variables[name]
        if tuple(var.dims) != dims or str(var.dtype) != dtype:
            raise DataFileError(f"{path}: variable {name!r} is {var.dtype} over {tuple(var.dims)}; "
                                f"phaselab writes {dtype} over {dims}")
        unknown = sorted(set(var.attrs) - NC_VARIABLE_ATTRS)
        if " since " in str(var.attrs.get("units", "")):   # a time reference (CF 4.4): not a model unit
            unknown = ["units"]
        if unknown:
            raise DataFileError(f"{path}: variable {name!r} carries the attribute {unknown[0]!r}, which "
                                "phaselab never writes (it would change what the numbers mean)")
        fill = var.attrs.get("_FillValue")
        if fill is not None and not (dtype == "float64" and _real(float(fill)) and math.isnan(float(fill))):
            raise DataFileError(f"{path}: variable {name!r} has the fill value {fill!r}; phaselab writes NaN "
                                "for floats and none for whole numbers")
    comp = lazy.variables.get("component")
    if comp is None or tuple(comp.dims) != ("component",) or comp.dtype.kind not in "UOS":
        raise DataFileError(f"{path}: the coordinate 'component' (the state names) is missing or not text")
    sizes = dict(lazy.sizes)
    check_size(path, int(sizes.get("orbit", 0)), int(sizes.get("crossing", 0)),
               int(sizes.get("component", 0)))


def check_netcdf_values(path, ds, counts) -> None:
    """Values of a loaded NetCDF section: the coordinates count from 0, escaped flags are 0
    or 1."""
    for name in ("orbit", "crossing"):
        values = np.asarray(ds[name].values)
        if not np.array_equal(values, np.arange(values.size)):
            raise DataFileError(f"{path}: coordinate {name!r} must count 0, 1, 2, ...")
    escaped = np.asarray(ds["escaped"].values)
    if np.any((escaped != 0) & (escaped != 1)):
        raise DataFileError(f"{path}: variable 'escaped' must hold 0 or 1")


def _show(value) -> str:
    text = repr(value)
    return text if len(text) <= 40 else text[:37] + "..."


__all__ = ["check_size", "check_csv_bytes", "check_header", "check_counts", "check_rows",
           "check_netcdf_layout", "check_netcdf_values", "load_bytes"]
