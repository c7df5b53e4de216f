"""A resumable scan store that was damaged on disk is repaired (the damaged chunks recomputed,
with a warning naming them) or refused with a DataFileError: never mixed into a result.

Each case writes a whole store, damages it one way, resumes, and checks that the result equals
an uninterrupted run without a store bit for bit (the reference is the computation itself,
so the check is independent of the store's code)."""

import json
import shutil
import warnings
from pathlib import Path

import numpy as np
import pytest

import phaselab
from phaselab.errors import DataFileError
from phaselab.scan import chaos_map, state_grid

pytest.importorskip("zarr")

ARGS = dict(params={"K": 1.2}, progress=False)
T = 300


@pytest.fixture(scope="module")
def rotor():
    return phaselab.models.standard_map()


@pytest.fixture(scope="module")
def grid(rotor):
    return state_grid(rotor, {"q": (0.1, 6.0, 9), "p": (0.1, 6.0, 8)})


@pytest.fixture(scope="module")
def whole(rotor, grid):
    return chaos_map(rotor, grid, T, **ARGS)


@pytest.fixture(scope="module")
def pristine(rotor, grid, tmp_path_factory):
    """A complete store of 8 chunks of 10 seeds (the last one 2)."""
    store = tmp_path_factory.mktemp("pristine") / "megno.zarr"
    chaos_map(rotor, grid, T, batch_size=10, store=store, **ARGS)
    return store


def _copy(pristine, tmp_path) -> Path:
    store = tmp_path / "megno.zarr"
    shutil.copytree(pristine, store)
    return store


def _resume(rotor, grid, store):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        result = chaos_map(rotor, grid, T, store=store, **ARGS)
    return result, [str(w.message) for w in caught]


def _chunk_file(store, array, k) -> Path:
    return store / array / "c" / str(k)


def _swap(a: Path, b: Path):
    data_a, data_b = a.read_bytes(), b.read_bytes()
    a.write_bytes(data_b)
    b.write_bytes(data_a)


def _flip(path: Path):
    data = bytearray(path.read_bytes())
    mid = len(data) // 2
    data[mid:mid + 8] = bytes(x ^ 0xFF for x in data[mid:mid + 8])
    path.write_bytes(bytes(data))


def _edit_meta(store, array, change):
    meta_path = store / array / "zarr.json"
    meta = json.loads(meta_path.read_text())
    change(meta)
    meta_path.write_text(json.dumps(meta))


def _set(key, value):
    def change(meta):
        meta[key] = value
    return change


def _edit_fields_record(store, change):
    meta_path = store / "zarr.json"
    meta = json.loads(meta_path.read_text())
    change(meta["attributes"])
    meta_path.write_text(json.dumps(meta))


def _huge_rows(attrs):
    fields = json.loads(attrs["phaselab_fields"])
    fields["values"][1] = [10**9]
    attrs["phaselab_fields"] = json.dumps(fields)


DAMAGE = {
    # case: (how, chunks that must be recomputed)
    "two value chunks swapped": (lambda s: _swap(_chunk_file(s, "values", 1), _chunk_file(s, "values", 2)),
                                 2),
    "8 bytes flipped in a value chunk": (lambda s: _flip(_chunk_file(s, "values", 3)), 1),
    "a value chunk deleted": (lambda s: _chunk_file(s, "values", 4).unlink(), 1),
    "a value chunk truncated": (lambda s: _chunk_file(s, "values", 0).write_bytes(
        _chunk_file(s, "values", 0).read_bytes()[:7]), 1),
    "a value chunk copied over another": (
        lambda s: shutil.copy(_chunk_file(s, "values", 0), _chunk_file(s, "values", 5)), 1),
    "the values array deleted": (lambda s: shutil.rmtree(s / "values"), 8),
    # every status of this scan is 0 (ok), the array's fill value: the array made anew holds
    # the same numbers, its chunks pass their checksums and need no recomputing
    "the status array deleted": (lambda s: shutil.rmtree(s / "status"), 0),
    "values dtype changed to float32": (lambda s: _edit_meta(s, "values", _set("data_type", "float32")), 8),
    "values shape changed to 10**12 rows": (lambda s: _edit_meta(s, "values", _set("shape", [10**12])), 8),
    "values metadata garbage": (lambda s: (s / "values" / "zarr.json").write_text("{not json"), 8),
    "the done flags deleted": (lambda s: shutil.rmtree(s / "chunk_done"), 8),
    "the checksums deleted": (lambda s: shutil.rmtree(s / "chunk_sha256"), 8),
    "two checksum chunks swapped": (lambda s: _swap(_chunk_file(s, "chunk_sha256", 1) / "0",
                                                    _chunk_file(s, "chunk_sha256", 6) / "0"), 2),
    "the record of the fields deleted": (lambda s: _edit_fields_record(s, lambda a: a.pop("phaselab_fields")),
                                         8),
    "the record of the fields declares 10**9 values per row": (lambda s: _edit_fields_record(s, _huge_rows), 8),
    "chunk rows edited": (lambda s: _edit_meta(s, "chunk_rows", _set("shape", [3, 2])), 8),
}


@pytest.mark.parametrize("case", list(DAMAGE))
def test_a_damaged_store_is_repaired_never_mixed_in(case, rotor, grid, whole, pristine, tmp_path):
    damage, recomputed = DAMAGE[case]
    store = _copy(pristine, tmp_path)
    damage(store)
    result, messages = _resume(rotor, grid, store)
    np.testing.assert_array_equal(result.values, whole.values)
    np.testing.assert_array_equal(result.t_end, whole.t_end)
    np.testing.assert_array_equal(result.status, whole.status)
    assert result.run.computed == recomputed and result.run.reused == 8 - recomputed, result.run
    assert any("is damaged" in m and "recomputed" in m for m in messages), messages
    if 0 < recomputed < 8:  # damage to single chunks is reported chunk by chunk
        assert any(f"{recomputed} finished chunk(s) fail their checksum" in m for m in messages), messages
    again, messages = _resume(rotor, grid, store)  # the repaired store is whole again
    assert again.run.computed == 0 and not messages, (again.run, messages)
    np.testing.assert_array_equal(again.values, whole.values)


def test_an_intact_store_resumes_without_warning(rotor, grid, whole, pristine, tmp_path):
    store = _copy(pristine, tmp_path)
    result, messages = _resume(rotor, grid, store)
    assert result.run.computed == 0 and not messages
    np.testing.assert_array_equal(result.values, whole.values)


def _edit_head(store, change):
    meta_path = store / "zarr.json"
    meta = json.loads(meta_path.read_text())
    head = json.loads(meta["attributes"]["phaselab_scan"])
    meta["attributes"]["phaselab_scan"] = change(head)
    meta_path.write_text(json.dumps(meta))


@pytest.mark.parametrize("change, message", [
    (lambda h: json.dumps(dict(h, chunk=0)), "scan record is damaged"),
    (lambda h: json.dumps(dict(h, chunk="10")), "scan record is damaged"),
    (lambda h: json.dumps(dict(h, chunk=10.5)), "scan record is damaged"),
    (lambda h: json.dumps([h]), "scan record is damaged"),
    (lambda h: "{not json", "scan record is damaged"),
    (lambda h: json.dumps(dict(h, format=1)), "another store format"),
])
def test_a_damaged_scan_record_is_refused(change, message, rotor, grid, pristine, tmp_path):
    store = _copy(pristine, tmp_path)
    _edit_head(store, change)
    with pytest.raises(DataFileError, match=message):
        chaos_map(rotor, grid, T, store=store, **ARGS)


def test_a_garbage_group_record_is_refused(rotor, grid, pristine, tmp_path):
    store = _copy(pristine, tmp_path)
    (store / "zarr.json").write_text("{garbage")
    with pytest.raises(DataFileError, match="cannot open it as a Zarr group"):
        chaos_map(rotor, grid, T, store=store, **ARGS)
