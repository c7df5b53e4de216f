"""Resumable scans: a Zarr store that keeps every finished chunk of a scan.

A scan over ``n`` seeds (or parameter points) runs in chunks of consecutive indices. Given
``store=...``, each finished chunk is written to the store (its arrays first, then its
checksum, then its "done" flag), so a scan that was interrupted (a crash, a killed job, a
closed laptop) and is started again with the same arguments computes only the chunks not
yet done and reads the rest back. Each seed's result depends only on its own state and the
scan's arguments, so the resumed result equals an uninterrupted one exactly.

Layout of the store (a Zarr group, version 3 format)::

    attrs["phaselab_scan"]    JSON: {"format": 2, "n": ..., "chunk": ..., "fingerprint": {...}}
    attrs["phaselab_fields"]  JSON: {field: [dtype, row shape]} of the result fields
    attrs["phaselab_info"]    JSON: what the first finished chunk reported (method, step...)
    chunk_done                uint8, shape (n_chunks,): 1 once a chunk's arrays are written
    chunk_rows                int64, shape (n_chunks, 2): the rows [start, stop) of each chunk
    chunk_sha256              uint8, shape (n_chunks, 32): each chunk's checksum
    <field>                   one array per result field, shape (n, ...), chunked like the scan

A chunk's checksum is the SHA-256 of its coordinates (chunk number, rows, scan size) and of
every field's name, dtype, shape and bytes over its rows. A chunk is reused only when its
rows and checksum match what is read back, so two chunks swapped on disk, flipped bytes, a
deleted or truncated chunk file, or an array whose dtype or shape was changed are found:
such chunks are recomputed, with a warning naming them, and never mixed into a result.
Damage to the scan record itself (the scan attributes) refuses the store with a
:class:`~phaselab.errors.DataFileError`.

The fingerprint names what the scan computes (kind, system, parameters, time, method,
step, indicator, seed of the deviation vectors, and a hash of the seeds). A store holding a
different scan is refused with the differences named, never mixed in. Zarr's local store
writes every file through a temporary name, so a chunk interrupted while being written is
simply not marked done. One process writes a store at a time.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
import warnings

import numpy as np

from phaselab.base.atomic import checked_path
from phaselab.engine import limits
from phaselab.errors import DataFileError, ParameterError
from phaselab.engine.provenance import cf_dataset, xarray_module
from phaselab.scan.datasets import SCAN_STORE_KEY, zarr_module

FORMAT = 2
DONE = "chunk_done"
ROWS = "chunk_rows"
DIGEST = "chunk_sha256"
RECORD = (DONE, ROWS, DIGEST)
SCAN_KEY = SCAN_STORE_KEY
FIELDS_KEY = "phaselab_fields"
INFO_KEY = "phaselab_info"


def seeds_digest(*arrays) -> str:
    """A short hash of the seeds (and masks) of a scan, for its fingerprint."""
    h = hashlib.sha256()
    for a in arrays:
        a = np.ascontiguousarray(a)
        h.update(str((a.dtype.str, a.shape)).encode())
        h.update(a.tobytes())
    return h.hexdigest()[:24]


def chunk_digest(k: int, start: int, stop: int, n: int, fields: dict) -> np.ndarray:
    """SHA-256 of chunk ``k`` (rows ``[start, stop)`` of ``n``): its coordinates and every
    field's name, dtype, shape and bytes, fields in name order. uint8 array of shape (32,)."""
    h = hashlib.sha256()
    h.update(json.dumps(["phaselab scan chunk", int(k), int(start), int(stop), int(n)]).encode())
    for name in sorted(fields):
        a = np.ascontiguousarray(fields[name])
        h.update(json.dumps([name, a.dtype.str, list(a.shape)]).encode())
        h.update(a.tobytes())
    return np.frombuffer(h.digest(), dtype=np.uint8)


def _canonical(value):
    """JSON-stable form of a fingerprint (floats by repr, tuples as lists)."""
    return json.loads(json.dumps(value, sort_keys=True, default=str, allow_nan=True))


def _whole(value) -> bool:
    return isinstance(value, int) and not isinstance(value, bool)


def _read(arr, a=None, b=None):
    """``arr[a:b]`` as an ndarray, or None when the stored chunk cannot be read (truncated,
    garbage)."""
    try:
        return np.asarray(arr[:] if a is None else arr[a:b])
    except Exception:  # zarr and its codecs raise many kinds on damaged chunk files
        return None


LONG_NAMES = {DONE: "1 where the chunk is finished", ROWS: "first and end row of each chunk",
              DIGEST: "SHA-256 digest of each finished chunk's rows"}
"""CF ``long_name`` of the record arrays."""


def dimension_names(name: str, ndim: int) -> tuple:
    """Names of an array's dimensions (Zarr 3 ``dimension_names``, which xarray.open_zarr
    reads): ``chunk`` and ``chunk_rows_bound``/``sha256_byte`` for the record arrays, ``seed``
    and ``<name>_<k>`` for a result field."""
    if name in RECORD:
        return ("chunk", {ROWS: "row_bound", DIGEST: "sha256_byte"}.get(name, "chunk_extra"))[:ndim]
    return ("seed",) + tuple(f"{name}_{k}" for k in range(1, ndim))


class ScanStore:
    """A scan's chunks in a Zarr group (see the module docstring).

    Use :meth:`open`; then :meth:`verified` returns the finished chunks that pass their
    checksums, :meth:`write` records one.

    Attributes
    ----------
    n : int
        Seeds (rows) of the scan.
    chunk : int
        Rows per chunk (the store's own, which a resumed run adopts).
    """

    def __init__(self, group, n: int, chunk: int, where: str):
        self.group = group
        self.n = n
        self.chunk = chunk
        self.where = where
        self.repairs: list[str] = []
        attrs = group.attrs.asdict()
        self._has_info = INFO_KEY in attrs
        self.schema = self._schema(attrs.get(FIELDS_KEY))
        self._arrays = self._checked_arrays()

    @property
    def n_chunks(self) -> int:
        return -(-self.n // self.chunk)

    @classmethod
    def open(cls, target, n: int, chunk: int, fingerprint: dict) -> "ScanStore":
        """Open (or create) the store at ``target`` for a scan of ``n`` rows.

        Parameters
        ----------
        target : str, os.PathLike or zarr store
            A folder (created if missing; ``.zarr`` by convention) or any zarr store
            (e.g. one on object storage).
        n : int
        chunk : int
            Rows per chunk for a new store; an existing store keeps its own.
        fingerprint : dict
            What the scan computes; must equal the stored one.

        Raises
        ------
        ParameterError
            The store holds a different scan, or the folder is not a phaselab scan store.
        DataFileError
            The store's scan record is damaged, or it was written in another format.
        """
        zarr = zarr_module()
        where = str(target) if isinstance(target, (str, os.PathLike)) else type(target).__name__
        if isinstance(target, (str, os.PathLike)):
            path = checked_path(target)
            if path.exists() and not path.is_dir():
                raise ParameterError(f"store {where}: a file of that name exists; give a folder for "
                                     "the Zarr store")
            if path.exists() and any(path.iterdir()) and not (path / "zarr.json").exists():
                raise ParameterError(f"store {where}: the folder exists and is not a Zarr store; give "
                                     "a new or empty folder")
            target = str(path)
        fp = _canonical(fingerprint)
        try:
            group = zarr.open_group(store=target, mode="a", zarr_format=3)
            attrs = group.attrs.asdict()
        except Exception as exc:
            raise DataFileError(f"store {where}: cannot open it as a Zarr group ({exc}); give a new "
                                "folder") from None
        if SCAN_KEY not in attrs:
            if len(list(group.keys())):
                raise ParameterError(f"store {where}: a Zarr group with other content, not a phaselab "
                                     "scan store; give a new folder")
            chunk = int(chunk)
            group.attrs.update({SCAN_KEY: json.dumps({"format": FORMAT, "n": int(n), "chunk": chunk,
                                                      "fingerprint": fp}, allow_nan=True)})
            group.attrs.update(cf_dataset(xarray_module().Dataset(), title="phaselab scan store "
                                          "(resumable chunks; the result is saved with save())").attrs)
            return cls(group, int(n), chunk, where)
        head = _head(attrs[SCAN_KEY], where)
        old = head.get("fingerprint")
        if old != fp or head["n"] != int(n):
            old = old if isinstance(old, dict) else {}
            keys = sorted(k for k in set(old) | set(fp) if old.get(k) != fp.get(k))
            if head["n"] != int(n):
                keys.append("number of seeds")
            raise ParameterError(f"store {where} holds a different scan (it differs in: "
                                 f"{', '.join(keys)}); use a new store for this one, or the same "
                                 "arguments to resume it")
        return cls(group, int(n), head["chunk"], where)

    # ------------------------------------------------------------------ checks on opening
    def _schema(self, text):
        """The recorded result fields ``{name: (dtype, row shape)}``, or None (no chunk
        written yet, or a damaged record: every chunk is then recomputed)."""
        if text is None:
            return None
        try:
            raw = json.loads(text)
            schema = {str(name): (np.dtype(d), tuple(int(x) for x in shape))
                      for name, (d, shape) in raw.items()}
        except Exception:
            self.repairs.append("its record of the result fields is damaged")
            return None
        if any(name in RECORD or dt.kind not in "biuf" or any(x < 0 for x in shape)
               for name, (dt, shape) in schema.items()):
            self.repairs.append("its record of the result fields is damaged")
            return None
        size = sum(float(self.n) * math.prod(shape) * dt.itemsize for dt, shape in schema.values())
        if size > limits.LIMITS.memory_bytes:  # never read back more than a call may allocate
            self.repairs.append(f"its record of the result fields declares {size / 2**30:.3g} GiB, "
                                "more than the memory limit")
            return None
        return schema

    def _expected(self) -> dict:
        """``{array name: (dtype, shape)}`` every array of a sound store has."""
        m = max(self.n_chunks, 1)
        out = {DONE: (np.dtype(np.uint8), (m,)), ROWS: (np.dtype(np.int64), (m, 2)),
               DIGEST: (np.dtype(np.uint8), (m, 32))}
        for name, (dt, shape) in (self.schema or {}).items():
            out[name] = (dt, (self.n,) + shape)
        return out

    def _checked_arrays(self) -> dict:
        """The store's arrays, each checked against the dtype and shape it must have (before
        anything is read, so that a changed shape cannot make a read allocate a huge
        array); a missing or changed one is made anew, empty (every chunk whose data it
        held then fails its checksum and is recomputed)."""
        arrays = {}
        for name, (dt, shape) in self._expected().items():
            try:
                arr = self.group[name] if name in self.group else None
                ok = arr is not None and np.dtype(arr.dtype) == dt and tuple(arr.shape) == shape
            except Exception:
                arr, ok = None, False
            if ok:
                arrays[name] = arr
                continue
            if arr is not None or self.schema is not None:
                self.repairs.append(f"its array {name!r} is missing or has another dtype or shape")
            self._drop(name)
            record = name in RECORD
            arrays[name] = self.group.create_array(
                name, shape=shape, chunks=((1,) if record else (self.chunk,)) + shape[1:], dtype=dt,
                fill_value=np.nan if dt.kind == "f" else 0, dimension_names=dimension_names(name, len(shape)),
                attributes={"long_name": LONG_NAMES.get(name, f"scan result {name} of each seed")})
        return arrays

    def _drop(self, name: str) -> None:
        """Remove the array ``name`` if there is one (through the store's own deletion when
        its metadata is too damaged for zarr to open it)."""
        try:
            if name in self.group:
                del self.group[name]
            return
        except Exception:
            pass
        try:
            from zarr.core.sync import sync

            prefix = self.group.store_path.path
            sync(self.group.store.delete_dir(f"{prefix}/{name}" if prefix else name))
        except Exception as exc:
            raise DataFileError(f"store {self.where}: its array {name!r} is damaged and cannot be "
                                f"removed ({exc}); give a new folder") from None

    # ------------------------------------------------------------------ chunks
    def bounds(self, k: int) -> tuple[int, int]:
        """Rows ``[start, stop)`` of chunk ``k``."""
        return k * self.chunk, min(self.n, (k + 1) * self.chunk)

    def done(self) -> np.ndarray:
        """Chunks marked finished (not yet checked), bool of shape (n_chunks,)."""
        stored = _read(self._arrays[DONE])
        if stored is not None:
            return stored[:self.n_chunks] == 1
        flags = np.zeros(self.n_chunks, dtype=bool)
        for k in range(self.n_chunks):  # a damaged flag reads as not done
            value = _read(self._arrays[DONE], k, k + 1)
            flags[k] = value is not None and bool(value[0] == 1)
        return flags

    def info(self):
        """What the first finished chunk reported (or None)."""
        text = self.group.attrs.asdict().get(INFO_KEY)
        try:
            return None if text is None else json.loads(text)
        except (TypeError, ValueError):
            return None

    def verified(self) -> tuple[dict, list]:
        """The finished chunks that pass their checks, and those that do not.

        Returns
        -------
        chunks : dict of int to dict of ndarray
            ``{k: {field: rows of chunk k}}`` for each finished chunk whose stored rows and
            checksum match its fields as read back.
        damaged : list of int
            Chunks marked finished that fail (to be recomputed).
        """
        marked = [int(k) for k in np.flatnonzero(self.done())]
        if not marked:
            return {}, []
        names = [name for name in (self.schema or {}) if name in self._arrays]
        if self.schema is None or len(names) < len(self.schema):
            return {}, marked
        rows, digests = _read(self._arrays[ROWS]), _read(self._arrays[DIGEST])
        whole = {name: _read(self._arrays[name]) for name in names}  # one read per field
        good, damaged = {}, []
        for k in marked:
            a, b = self.bounds(k)
            fields = {}
            for name in names:
                values = whole[name]
                fields[name] = values[a:b] if values is not None else _read(self._arrays[name], a, b)
            row = rows[k] if rows is not None else _read(self._arrays[ROWS], k, k + 1)
            digest = digests[k] if digests is not None else _read(self._arrays[DIGEST], k, k + 1)
            sound = (row is not None and digest is not None and all(v is not None for v in fields.values())
                     and np.array_equal(np.ravel(row), [a, b])
                     and np.array_equal(np.ravel(digest), chunk_digest(k, a, b, self.n, fields)))
            if sound:
                good[k] = fields
            else:
                damaged.append(k)
        return good, damaged

    def warn_damage(self, damaged) -> None:
        """Warn that the store needed repair and which chunks are recomputed."""
        if not self.repairs and not damaged:
            return
        parts = list(dict.fromkeys(self.repairs))
        if damaged:
            shown = ", ".join(str(k) for k in damaged[:10]) + (", ..." if len(damaged) > 10 else "")
            parts.append(f"{len(damaged)} finished chunk(s) fail their checksum or cannot be read "
                         f"(chunk {shown})")
        warnings.warn(f"store {self.where} is damaged: {'; '.join(parts)}; chunks that fail their "
                      "checksum are recomputed, never mixed into the result", stacklevel=3)

    def write(self, k: int, fields: dict, info=None) -> None:
        """Record chunk ``k``: each field's rows, then its coordinates and checksum, then
        (after all of them) its done flag.

        Parameters
        ----------
        k : int
        fields : dict of str to ndarray
            Each of shape ``(stop - start, ...)``; numeric or boolean.
        info : dict, optional
            JSON-able description kept once, from the first chunk that has one.
        """
        start, stop = self.bounds(k)
        fields = {name: np.asarray(values) for name, values in fields.items()}
        for name, values in fields.items():
            if values.dtype == object or values.dtype.kind not in "biuf":
                raise ParameterError(f"store {self.where}: field {name!r} holds {values.dtype} values; "
                                     "a store keeps numbers only")
        schema = {name: (values.dtype, values.shape[1:]) for name, values in fields.items()}
        if self.schema is None:
            self._set_schema(schema)
        elif schema != self.schema:
            raise DataFileError(f"store {self.where}: it holds result fields {_show(self.schema)}, this "
                                f"scan gives {_show(schema)} (another version of phaselab?); use a new "
                                "store")
        for name, values in fields.items():
            self._arrays[name][start:stop] = values
        if info is not None and not self._has_info:
            self.group.attrs.update({INFO_KEY: json.dumps(info, allow_nan=True, default=str)})
            self._has_info = True
        self._arrays[ROWS][k] = [start, stop]
        self._arrays[DIGEST][k] = chunk_digest(k, start, stop, self.n, fields)
        self._arrays[DONE][k] = 1

    def _set_schema(self, schema: dict) -> None:
        """Record the result fields and make their arrays (replacing any left over)."""
        for name, (dt, shape) in schema.items():
            self._drop(name)
            self._arrays[name] = self.group.create_array(name, shape=(self.n,) + shape,
                                                         chunks=(self.chunk,) + shape, dtype=dt,
                                                         fill_value=np.nan if dt.kind == "f" else 0,
                                                         dimension_names=dimension_names(name, 1 + len(shape)),
                                                         attributes={"long_name": f"scan result {name} of each seed"})
        text = json.dumps({name: [dt.str, list(shape)] for name, (dt, shape) in schema.items()})
        self.group.attrs.update({FIELDS_KEY: text})
        self.schema = schema


def _show(schema: dict) -> str:
    return ", ".join(f"{name} {dt.name}{list(shape) if shape else ''}" for name, (dt, shape) in
                     sorted(schema.items()))


def _head(text, where: str) -> dict:
    """The scan record, checked: a dict with this format, whole ``n >= 0`` and ``chunk >= 1``."""
    try:
        head = json.loads(text)
    except (TypeError, ValueError, RecursionError):
        head = None
    if not isinstance(head, dict):
        raise DataFileError(f"store {where}: its scan record is damaged; give a new folder")
    if head.get("format") != FORMAT:
        raise DataFileError(f"store {where}: written in another store format ({head.get('format')!r}, "
                            f"this version reads {FORMAT}, whose chunks carry checksums); give a new "
                            "folder")
    n, chunk = head.get("n"), head.get("chunk")
    if not (_whole(n) and n >= 0 and _whole(chunk) and chunk >= 1):
        raise DataFileError(f"store {where}: its scan record is damaged (n = {n!r}, chunk = {chunk!r}); "
                            "give a new folder")
    return head


__all__ = ["ScanStore", "seeds_digest", "chunk_digest"]
