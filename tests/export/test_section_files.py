"""Crafted section data files (CSV and NetCDF) are refused with a DataFileError naming the
problem, before anything of the size they declare is read or allocated; the files phaselab
writes still load back exactly.

The refused shapes are what phaselab never writes (see phaselab.export.section_checks): the
expected values come from the writer itself (each case edits a file the writer made)."""

import os
import time
from pathlib import Path

import numpy as np
import pytest

import phaselab
from phaselab.errors import DataFileError
from phaselab.export import load_section, save

from test_export import molecule_section

xr = pytest.importorskip("xarray")
netCDF4 = pytest.importorskip("netCDF4")


@pytest.fixture(scope="module")
def section():
    sec, _ = molecule_section(n_orbits=3, n_cross=20)
    return sec


@pytest.fixture
def csv(section, tmp_path):
    return save(section, tmp_path / "m.csv")


@pytest.fixture
def nc(section, tmp_path):
    return save(section, tmp_path / "m.nc")


def _edit_header(path: Path, key: str, value_text: str) -> Path:
    lines = path.read_text().splitlines()
    out = [f"# {key}: {value_text}" if line.startswith(f"# {key}:") else line for line in lines]
    assert out != lines, key
    path.write_text("\n".join(out) + "\n")
    return path


def test_written_files_load_back_exactly(section, csv, nc):
    for path in (csv, nc):
        back = load_section(path)
        np.testing.assert_array_equal(back.points, section.points)
        np.testing.assert_array_equal(back.counts, section.counts)
        np.testing.assert_array_equal(back.status, section.status)


@pytest.mark.parametrize("key, value, message", [
    ("status", "[100000000000000000000000000000, 0, 0]", "status.*orbit 0.*not a status code"),
    ("status", "[Infinity, 0, 0]", "status.*not a status code"),
    ("status", "[NaN, 0, 0]", "status.*not a status code"),
    ("status", "[99, 0, 0]", "status.*not a status code"),
    ("status", "[0, 0]", "status.*one entry per orbit"),
    ("counts", "[20, 19.5, 20]", "counts.*whole numbers"),
    ("counts", "[20, 1e400, 20]", "counts.*whole numbers"),
    ("escaped", "[2, false, false]", "escaped.*orbit 0"),
    ("energy_error", '["x", 0.0, 0.0]', "energy_error.*orbit 0"),
    ("seeds", "[[0, 1], [0, 1], [0, 1]]", "seeds.*3 rows of 4 numbers"),
    ("energy", '"high"', "'energy' must be a number"),
    ("dt", "[0.01]", "'dt' must be a number"),
    ("params", '{"wy": "1.7"}', "params.*names to numbers"),
    ("system", "5", "'system' must be text"),
    ("n_orbits", "3.0", "n_orbits.*whole number"),
    ("plane", '{"kind": "plane", "index": 0, "value": 0.0, "direction": "up"}', "'direction'"),
    ("plane", '{"kind": "plane", "index": 9, "value": 0.0, "direction": 1}', "index 9"),
    ("plane", '{"kind": "plane", "index": 0, "value": "0", "direction": 1}', "'value'"),
    ("plane", '{"kind": "stroboscopic", "period": [1]}', "'period'"),
    ("plane", '{"kind": "by hand", "note": {"a": 1}}', "'note'"),
    ("plane", '{"index": 0}', "plane record with a 'kind'"),
    ("plane", '[1, 2]', "plane record with a 'kind'"),
])
def test_crafted_csv_header_is_refused(csv, key, value, message):
    _edit_header(csv, key, value)
    with pytest.raises(DataFileError, match=message):
        load_section(csv)


def test_duplicated_crossings_are_refused(csv):
    """Every row of each orbit given crossing 0: the header says 20 per orbit, and the rows
    are as many as it declares, but each crossing appears 20 times."""
    lines = csv.read_text().splitlines()
    start = next(i for i, line in enumerate(lines) if line.startswith("orbit,"))
    rows = [line.split(",") for line in lines[start + 1:]]
    edited = [",".join([r[0], "0"] + r[2:]) for r in rows]
    csv.write_text("\n".join(lines[:start + 1] + edited) + "\n")
    with pytest.raises(DataFileError, match="orbit 0, crossing 0 appears twice"):
        load_section(csv)


def test_a_huge_body_under_a_small_header_is_not_read(csv):
    """A 1.5 GB file whose header declares 60 rows: refused from its size, at once (the file
    is sparse: extending it writes nothing to disk)."""
    with open(csv, "r+b") as fh:
        fh.truncate(1_500_000_000)
    start = time.perf_counter()
    with pytest.raises(DataFileError, match="more than the 60 rows its header declares can hold"):
        load_section(csv)
    assert time.perf_counter() - start < 1.0


def test_a_header_over_the_memory_limit_names_the_limit(csv):
    before = phaselab.set_limits(memory_bytes=2**20)
    try:
        _edit_header(csv, "max_crossings", "20000")
        with pytest.raises(DataFileError, match=r"memory limit of .*set_limits\(memory_bytes"):
            load_section(csv)
    finally:
        phaselab.set_limits(memory_bytes=before.memory_bytes)


# ----------------------------------------------------------------------------- NetCDF
def _nc_edit(path: Path, edit) -> Path:
    with netCDF4.Dataset(path, "a") as ds:
        edit(ds)
    return path


def _set_attr(var, key, value):
    def edit(ds):
        ds.variables[var].setncattr(key, value)
    return edit


def _set_values(var, values):
    def edit(ds):
        ds.variables[var][:] = values
    return edit


def _add_big_variable(ds):
    ds.createDimension("a", 20000)
    ds.createDimension("b", 25000)
    ds.createVariable("extra", "f8", ("a", "b"))  # declared, never written: the file stays small


NC_CASES = {
    "times in calendar units": (_set_attr("times", "units", "days since 2000-01-01"), "attribute 'units'"),
    "a calendar": (_set_attr("times", "calendar", "noleap"), "attribute 'calendar'"),
    "a scale factor": (_set_attr("points", "scale_factor", 2.0), "attribute 'scale_factor'"),
    "an offset": (_set_attr("energy_error", "add_offset", 1.0), "attribute 'add_offset'"),
    "a huge status": (_set_values("status", [2**31 - 1, 0, 0]), "status.*not a status code"),
    "an unknown status": (_set_values("status", [42, 0, 0]), "status.*not a status code"),
    "escaped not 0 or 1": (_set_values("escaped", [3, 0, 0]), "escaped"),
    "counts past the crossings": (_set_values("counts", [21, 0, 0]), "counts.*between 0 and 20"),
    "orbit coordinate renumbered": (_set_values("orbit", [5, 6, 7]), "'orbit' must count"),
    "an unwritten 20000 x 25000 variable": (_add_big_variable, "variable 'extra' is not one phaselab writes"),
}


@pytest.mark.parametrize("case", list(NC_CASES))
def test_crafted_netcdf_is_refused(nc, case):
    edit, message = NC_CASES[case]
    _nc_edit(nc, edit)
    assert os.path.getsize(nc) < 100_000
    with pytest.raises(DataFileError, match=message):
        load_section(nc)


def test_a_netcdf_of_another_dtype_is_refused(section, tmp_path):
    ds = xr.open_dataset(save(section, tmp_path / "m.nc")).load()
    ds["counts"] = ds["counts"].astype(float)
    ds.to_netcdf(tmp_path / "float_counts.nc")
    with pytest.raises(DataFileError, match="variable 'counts' is float64.*phaselab writes int32"):
        load_section(tmp_path / "float_counts.nc")


def test_a_netcdf_declaring_huge_points_is_refused_before_reading(section, tmp_path):
    """A complete file whose orbit and crossing dimensions are 20000 x 25000 (3.73 GiB of
    points declared, none written): refused by the memory limit, with little memory used
    (child process under a 2 GiB address-space limit)."""
    from bounded import run_bounded

    path = tmp_path / "huge.nc"
    with netCDF4.Dataset(path, "w") as ds:
        small = xr.open_dataset(save(section, tmp_path / "m.nc"))
        for key, value in small.attrs.items():
            ds.setncattr(key, value)
        ds.createDimension("orbit", 20000)
        ds.createDimension("crossing", 25000)
        ds.createDimension("component", 4)
        for name, dims, dtype in (("points", ("orbit", "crossing", "component"), "f8"),
                                  ("times", ("orbit", "crossing"), "f8"), ("counts", ("orbit",), "i4"),
                                  ("energy_error", ("orbit",), "f8"), ("escaped", ("orbit",), "i1"),
                                  ("status", ("orbit",), "i4"), ("seeds", ("orbit", "component"), "f8"),
                                  ("orbit", ("orbit",), "i8"), ("crossing", ("crossing",), "i8")):
            ds.createVariable(name, dtype, dims)
        ds.createVariable("component", str, ("component",))[:] = np.array(["x", "y", "p_x", "p_y"],
                                                                         dtype=object)
    assert os.path.getsize(path) < 1_000_000
    result = run_bounded(f"""
        from phaselab.export import load_section
        bounded(lambda: load_section({str(path)!r}))
    """)
    assert result.finished, result
    assert "DataFileError" in result.kinds, result
    assert "20000 orbits x 25000 crossings x 4 components" in result.message, result
    assert result.rss_mib < 600, result


def test_a_section_file_not_written_by_phaselab_is_refused(tmp_path):
    bad = tmp_path / "other.csv"
    bad.write_text("a,b\n1,2\n")
    with pytest.raises(DataFileError, match="not a phaselab section CSV"):
        load_section(bad)
    with pytest.raises(phaselab.ParameterError, match="from .csv or .nc"):
        load_section(tmp_path / "other.txt")
