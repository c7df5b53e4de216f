"""Data files of a surface of section: CSV with a commented header, and NetCDF.

CSV layout
----------
Comment lines ``# key: value`` first, each value written as JSON (strings quoted, floats at
full precision, NaN as ``NaN``), then one header row and one row per crossing::

    # phaselab section data
    # system: "bead on a hoop"
    # expression: "p_theta**2/2 - cos(theta)"
    # state: ["theta", "p_theta"]
    # ...
    orbit,crossing,time,theta,p_theta
    0,0,0.0,1.2345,-0.5

Floats are written with Python's shortest round-trip repr, so reading gives back the same
binary64 numbers. Per-orbit fields (counts, seeds, energy errors, escapes) are header lines
too, so :func:`load_section` rebuilds the whole :class:`~phaselab.orbits.section_result.Section`
(without the system object, whose name and expression are kept as text).

NetCDF layout
-------------
An xarray Dataset with dims ``orbit``, ``crossing``, ``component``: variables ``points``
(orbit, crossing, component), ``times`` (orbit, crossing), ``counts``, ``energy_error``,
``escaped`` (orbit) and ``seeds`` (orbit, component); attributes carry the metadata, with
dicts and lists as JSON text. Needs xarray and a NetCDF engine (``pip install phaselab[lab]``).
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np

from phaselab.engine import limits
from phaselab.engine.status import LEFT_BOX, OK, STATUS
from phaselab.engine.provenance import plain
from phaselab.errors import DataFileError, MissingExtraError, ParameterError
from phaselab.export import section_checks as checks
from phaselab.export.describe import check_section, label_units, section_metadata
from phaselab.base.atomic import atomic_path, checked_path
from phaselab.engine.provenance import cf_dataset

FORMAT_LINE = "# phaselab section data"
#: largest section CSV file read, in bytes (what a file may declare is bounded by the memory
#: limit of phaselab.set_limits, see :mod:`phaselab.export.section_checks`)
MAX_CSV_BYTES = 2_000_000_000
_FIXED_COLUMNS = ("orbit", "crossing", "time")
# Attributes stored as JSON text in NetCDF (attrs hold only strings and numbers).
_JSON_ATTRS = ("state", "axes", "params", "plane", "energy", "angles", "units")
_NC_VARIABLES = ("points", "times", "counts", "energy_error", "escaped", "seeds")


def _per_orbit(section) -> dict:
    n = section.n_orbits
    ncomp = section.points.shape[-1]

    def field(name, shape, dtype, fill):
        value = getattr(section, name, None)
        if value is None:
            return np.full(shape, fill, dtype=dtype)
        arr = np.asarray(value, dtype=dtype)
        if arr.shape != shape:
            raise ParameterError(f"section.{name} has shape {arr.shape}, expected {shape}")
        return arr

    return {
        "counts": field("counts", (n,), np.int64, 0),
        "energy_error": field("energy_error", (n,), float, np.nan),
        "escaped": field("escaped", (n,), bool, False),
        "status": field("status", (n,), np.int64, 0),
        "seeds": field("seeds", (n, ncomp), float, np.nan),
    }


def _rows(section, counts):
    """orbit, crossing, time and state arrays of every recorded crossing, in orbit order."""
    points = np.asarray(section.points, dtype=float)
    times = np.asarray(section.times, dtype=float)
    max_c = points.shape[1]
    if np.any(counts < 0) or np.any(counts > max_c):
        raise ParameterError(f"section.counts must lie between 0 and {max_c}, got {counts}")
    keep = np.arange(max_c)[None, :] < counts[:, None]
    orbit, crossing = np.nonzero(keep)
    return orbit, crossing, times[orbit, crossing], points[orbit, crossing, :]


def _dump(value) -> str:
    return json.dumps(plain(value), ensure_ascii=False, allow_nan=True)


# ---------------------------------------------------------------------------------- CSV
def write_section_csv(section, path):
    """Write ``section`` as CSV with a ``# key: value`` metadata header.

    Parameters
    ----------
    section : phaselab.orbits.section_result.Section
    path : str or pathlib.Path

    Returns
    -------
    pathlib.Path
    """
    check_section(section)
    path = Path(path)
    meta = section_metadata(section)
    extra = _per_orbit(section)
    meta.update({"n_orbits": section.n_orbits, "max_crossings": int(section.points.shape[1])})
    meta.update({k: v for k, v in extra.items()})
    orbit, crossing, time, states = _rows(section, extra["counts"])
    lines = [FORMAT_LINE]
    lines += [f"# {key}: {_dump(value)}" for key, value in meta.items()]
    lines.append(",".join(_FIXED_COLUMNS + tuple(meta["state"])))
    fmt = repr  # shortest string that reads back to the same binary64 (Python's float repr)
    for o, c, t, z in zip(orbit.tolist(), crossing.tolist(), time.tolist(), states.tolist()):
        lines.append(f"{o},{c},{fmt(t)}," + ",".join(map(fmt, z)))
    with atomic_path(path) as tmp:
        tmp.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def read_section_csv(path):
    """Read a CSV written by :func:`write_section_csv`.

    The file is read line by line: its header first, whose declared sizes are checked
    (against the memory limit of :func:`phaselab.set_limits`, and against the file's size)
    before any row is read; then exactly the rows the header declares.

    Returns
    -------
    meta : dict
        The header values (system, expression, state, axes, params, energy, plane, method,
        dt, phaselab_version, n_orbits, max_crossings, counts, energy_error, escaped, seeds).
    data : dict of ndarray
        ``orbit`` (int, shape (n_rows,)), ``crossing`` (int), ``time`` (float) and
        ``states`` (float, shape (n_rows, 2n)).

    Raises
    ------
    DataFileError
        If the file is not phaselab section data, a line is malformed (the line is named),
        a header value has a type or range phaselab never writes, the rows are fewer or more
        than the header declares (a truncated file) or repeat a crossing, or the header
        declares more than the memory limit allows.
    """
    path = checked_path(path)
    try:
        size = path.stat().st_size
        handle = open(path, "rb")
    except OSError as exc:
        raise DataFileError(f"cannot read {path}: {exc.strerror or exc}") from None
    if size > MAX_CSV_BYTES:
        handle.close()
        raise DataFileError(f"{path} is {size} bytes; section CSV files are read up to {MAX_CSV_BYTES} bytes")
    with handle:
        reader = _Lines(handle, path)
        if reader.next(len(FORMAT_LINE) + 2).strip() != FORMAT_LINE:
            raise DataFileError(f"{path} is not a phaselab section CSV (first line should be {FORMAT_LINE!r})")
        meta, line = _read_header(reader)
        header = line.split(",")
        ncomp = len(header) - len(_FIXED_COLUMNS)
        if tuple(header[:3]) != _FIXED_COLUMNS or ncomp < 1:
            raise DataFileError(f"{path}, line {reader.number}: expected columns orbit,crossing,time,<state...>")
        n, max_c, counts = _layout(path, meta, ncomp)
        declared = int(counts.sum())
        checks.check_size(path, n, max_c, ncomp, declared)
        checks.check_csv_bytes(path, size, reader.bytes, declared, len(header))
        first = reader.number + 1
        values = _read_rows(reader, declared, len(header))
    orbit, crossing = values[:, 0], values[:, 1]
    checks.check_rows(path, orbit, crossing, counts, max_c, first)
    data = {
        "orbit": orbit.astype(np.int64),
        "crossing": crossing.astype(np.int64),
        "time": values[:, 2].copy(),
        "states": values[:, 3:].copy(),
    }
    meta = checks.check_header(path, meta, n, ncomp)
    meta["counts"] = counts
    return meta, data


class _Lines:
    """Lines of a file opened in binary, each read up to a length, counted and decoded."""

    def __init__(self, handle, path):
        self.handle = handle
        self.path = path
        self.number = 0
        self.bytes = 0

    def next(self, cap: int) -> str:
        """The next line without its end (``""`` at the end of the file)."""
        raw = self.handle.readline(cap + 1)
        if not raw:
            return ""
        self.number += 1
        self.bytes += len(raw)
        if len(raw) > cap:
            raise DataFileError(f"{self.path}, line {self.number}: longer than {cap} bytes, more than "
                                "phaselab writes there")
        if not raw.endswith(b"\n"):
            raise DataFileError(f"{self.path} is truncated: its last line is incomplete")
        try:
            return raw.decode("utf-8").rstrip("\r\n")
        except UnicodeDecodeError:
            raise DataFileError(f"{self.path} is not a phaselab section CSV (not UTF-8 text)") from None


def _read_header(reader: _Lines):
    """The ``# key: value`` lines and the column header row after them; the header may
    take at most an eighth of the memory limit."""
    cap = int(limits.LIMITS.memory_bytes // 8)
    meta = {}
    while True:
        line = reader.next(max(cap - reader.bytes, 1))
        if not line.startswith("#"):
            break
        key, sep, value = line[1:].partition(":")
        if not sep:
            raise DataFileError(f"{reader.path}, line {reader.number}: expected '# key: value', got "
                                f"{line[:60]!r}")
        try:
            meta[key.strip()] = json.loads(value)
        except (json.JSONDecodeError, RecursionError) as exc:
            why = getattr(exc, "msg", "nested too deeply")
            raise DataFileError(f"{reader.path}, line {reader.number}: value of {key.strip()!r} is not "
                                f"valid: {why}") from None
    if not line:
        raise DataFileError(f"{reader.path}: the column header row is missing")
    return meta, line


def _read_rows(reader: _Lines, declared: int, columns: int) -> np.ndarray:
    """Exactly ``declared`` rows of ``columns`` numbers, then the end of the file."""
    cap = columns * checks.CSV_CHARS_PER_VALUE + 2
    values = np.empty((declared, columns), dtype=float)
    first = reader.number + 1
    for r in range(declared):
        line = reader.next(cap)
        if not line:
            raise DataFileError(f"{reader.path}: the header declares {declared} section points but the "
                                f"file has {r} rows (a truncated or edited file)")
        cells = line.split(",")
        if len(cells) != columns:
            raise DataFileError(f"{reader.path}, line {first + r}: {len(cells)} values but {columns} columns")
        try:
            values[r] = [float(c) for c in cells]
        except ValueError:
            raise DataFileError(f"{reader.path}, line {first + r}: a value is not a number: {line!r}") from None
    more = 0
    while reader.next(cap):
        more += 1
    if more:
        raise DataFileError(f"{reader.path}: the header declares {declared} section points but the file has "
                            f"{declared + more} rows (a truncated or edited file)")
    return values


def _layout(path, meta: dict, ncomp: int):
    """(n_orbits, max_crossings, counts) from a header, checked to describe arrays within
    the memory limit and counts within the crossings."""
    for key in ("n_orbits", "max_crossings", "counts", "state", "axes"):
        if key not in meta:
            raise DataFileError(f"{path}: the header lacks {key!r}")
    n, max_c = meta["n_orbits"], meta["max_crossings"]
    for key, value in (("n_orbits", n), ("max_crossings", max_c)):
        if isinstance(value, bool) or not isinstance(value, int) or value < 0:
            raise DataFileError(f"{path}: header value {key!r} must be a whole number >= 0, got {value!r}")
    checks.check_size(path, n, max_c, ncomp)
    counts = checks.check_counts(path, meta["counts"], n, max_c)
    state, axes = meta["state"], meta["axes"]
    if not isinstance(state, list) or len(state) != ncomp or not all(isinstance(s, str) for s in state):
        raise DataFileError(f"{path}: header value 'state' must name the {ncomp} state columns")
    if (not isinstance(axes, list) or len(axes) != 2
            or not all(isinstance(a, int) and not isinstance(a, bool) and 0 <= a < ncomp for a in axes)):
        raise DataFileError(f"{path}: header value 'axes' must be two column indices below {ncomp}")
    return n, max_c, counts


# ---------------------------------------------------------------------------------- NetCDF
def _xarray():
    try:
        import xarray
    except ImportError:
        raise MissingExtraError(
            "NetCDF export needs xarray and netCDF4; install them with pip install 'phaselab[lab]'") from None
    return xarray


def write_section_netcdf(section, path):
    """Write ``section`` as NetCDF (dims orbit, crossing, component) through xarray.

    Returns
    -------
    pathlib.Path

    Raises
    ------
    MissingExtraError
        If xarray (or a NetCDF engine) is not installed.
    """
    check_section(section)
    xr = _xarray()
    path = Path(path)
    meta = section_metadata(section)
    extra = _per_orbit(section)
    points = np.asarray(section.points, dtype=float)
    times = np.asarray(section.times, dtype=float)
    attrs = {}
    for key, value in meta.items():
        if key in _JSON_ATTRS:
            attrs[key] = _dump(value)
        else:
            attrs[key] = value
    attrs["format"] = "phaselab section data"
    ds = xr.Dataset(
        data_vars={
            "points": (("orbit", "crossing", "component"), points),
            "times": (("orbit", "crossing"), times),
            "counts": (("orbit",), extra["counts"].astype(np.int32)),
            "energy_error": (("orbit",), extra["energy_error"]),
            "escaped": (("orbit",), extra["escaped"].astype(np.int8)),
            "status": (("orbit",), extra["status"].astype(np.int32)),
            "seeds": (("orbit", "component"), extra["seeds"]),
        },
        coords={
            "orbit": np.arange(points.shape[0]),
            "crossing": np.arange(points.shape[1]),
            "component": np.array(meta["state"], dtype=object),
        },
        attrs=attrs,
    )
    ds["points"].attrs["description"] = "full states at the crossings; NaN past an orbit's last crossing"
    label_units(ds, meta)
    ds["escaped"].attrs["description"] = "1 where the orbit left the box or went non-finite"
    ds["status"].attrs["description"] = "why each orbit stopped: " + "; ".join(
        f"{k} {v}" for k, v in STATUS.items())
    ds = cf_dataset(ds, title=f"Surface of section of {meta.get('system') or 'a model'}")
    with atomic_path(path) as tmp:
        try:
            ds.to_netcdf(tmp)
        except ValueError as exc:  # xarray says so when no NetCDF engine is installed
            raise MissingExtraError(
                f"cannot write NetCDF ({exc}); install netCDF4 with pip install 'phaselab[lab]'") from None
    return path


def read_section_netcdf(path):
    """Read a NetCDF file written by :func:`write_section_netcdf`.

    The file is opened without decoding (no units, calendars or scale factors are applied)
    and its variables are checked against what phaselab writes (names, dimensions, dtypes,
    attributes) and their sizes against the memory limit of :func:`phaselab.set_limits`
    before any array is read.

    Returns
    -------
    meta : dict
        The same keys as :func:`section_metadata` plus ``counts``, ``energy_error``,
        ``escaped`` and ``seeds`` arrays.
    data : dict of ndarray
        ``points`` (n_orbits, max_crossings, 2n) and ``times`` (n_orbits, max_crossings).

    Raises
    ------
    DataFileError
        For a file that is not such a NetCDF file, or declares more than the limit allows.
    """
    xr = _xarray()
    path = checked_path(path)
    if not path.is_file():
        raise DataFileError(f"cannot read {path}: no such file")
    try:
        with xr.open_dataset(path, decode_cf=False, cache=False) as lazy:
            if lazy.attrs.get("format") != "phaselab section data":
                raise DataFileError(f"{path} is not a phaselab section NetCDF file")
            checks.check_netcdf_layout(path, lazy)
            ds = lazy.load()
    except (OSError, ValueError, KeyError, RuntimeError, TypeError) as exc:
        if isinstance(exc, DataFileError):
            raise
        raise DataFileError(f"cannot read {path} as NetCDF: {exc}") from None
    meta = {}
    for key, value in ds.attrs.items():
        if key == "format":
            continue
        try:
            meta[key] = json.loads(value) if key in _JSON_ATTRS else plain(value)
        except (TypeError, ValueError, RecursionError):
            raise DataFileError(f"{path}: attribute {key!r} is not valid") from None
    n, max_c = int(ds.sizes["orbit"]), int(ds.sizes["crossing"])
    meta["n_orbits"], meta["max_crossings"] = n, max_c
    meta["counts"] = ds["counts"].values.astype(np.int64)
    for key in ("energy_error", "escaped", "status", "seeds"):
        if key in ds:
            meta[key] = ds[key].values
    data = {"points": ds["points"].values.astype(float), "times": ds["times"].values.astype(float)}
    ncomp = data["points"].shape[-1]
    _, _, counts = _layout(path, meta, ncomp)
    checks.check_netcdf_values(path, ds, counts)
    meta = checks.check_header(path, meta, n, ncomp)
    meta["counts"] = counts
    return meta, data


# ---------------------------------------------------------------------------------- Section
def load_section(path):
    """Rebuild a :class:`~phaselab.orbits.section_result.Section` from a .csv or .nc file.

    The system object is not rebuilt (``system`` is None); its name, expression and
    parameters come back in ``section.params`` and in the metadata of the readers.

    Returns
    -------
    phaselab.orbits.section_result.Section

    Raises
    ------
    DataFileError
        For a file that is not a complete phaselab
        section file (see the readers and :mod:`phaselab.export.section_checks`), or that
        declares more than the memory limit allows: the sizes are checked before anything
        of that size is read or allocated.
    """
    import sympy as sp

    from phaselab.orbits.section_result import Section

    path = checked_path(path)
    suffix = path.suffix.lower()
    if suffix == ".csv":
        meta, data = read_section_csv(path)
        n, max_c = int(meta["n_orbits"]), int(meta["max_crossings"])
        ncomp = data["states"].shape[1]
        points = np.full((n, max_c, ncomp), np.nan)
        times = np.full((n, max_c), np.nan)
        points[data["orbit"], data["crossing"]] = data["states"]
        times[data["orbit"], data["crossing"]] = data["time"]
    elif suffix == ".nc":
        meta, data = read_section_netcdf(path)
        points, times = data["points"], data["times"]
    else:
        raise ParameterError(f"a section is loaded from .csv or .nc, not {suffix or 'no suffix'!r}")
    names = meta["state"]
    axes = tuple(int(a) for a in meta["axes"])
    symbols = tuple(sp.Symbol(names[a], real=True) for a in axes)
    n, ncomp = points.shape[0], points.shape[-1]
    try:
        energy = meta.get("energy")
        energy = None if energy is None else float(energy)
        dt = float(meta.get("dt", math.nan))
        plane = dict(meta.get("plane") or {})
        params = dict(meta.get("params") or {})
    except (TypeError, ValueError):
        raise DataFileError(f"{path}: the header values energy, dt, plane or params are not valid") from None
    status = meta.get("status")
    if status is None:  # files written before status codes were recorded
        status = np.where(meta.get("escaped", np.zeros(n, bool)), LEFT_BOX, OK)
    return Section(points=points, counts=meta["counts"], times=times, axes=axes,
                   axis_symbols=symbols, energy_error=meta.get("energy_error", np.full(n, np.nan)),
                   status=status,
                   seeds=meta.get("seeds", np.full((n, ncomp), np.nan)), plane=plane,
                   energy=energy, method=str(meta.get("method", "")), dt=dt,
                   system=None, params=params)
