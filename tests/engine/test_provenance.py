"""What every labelled result records beside its numbers (engine/provenance.py)."""

import json
from importlib import metadata

import numpy as np

import phaselab
from phaselab.engine.provenance import NOTE, netcdf_attrs, plain, provenance, versions


def test_provenance_of_a_hamiltonian_names_model_parameters_and_versions():
    H = phaselab.Hamiltonian("p**2/2 + k*q**2/2", ["q"], ["p"], params={"k": 2.5})
    meta = provenance(H, {"k": 3.0}, method="leapfrog", dt=0.01)
    assert meta["system_kind"] == "flow"
    assert meta["params"] == {"k": 3.0}
    assert "k*q**2" in meta["expression"]
    assert meta["state"] == ["q", "p"]
    assert meta["method"] == "leapfrog" and meta["dt"] == 0.01
    assert meta["note"] == NOTE
    # versions read from the installed metadata (the reference: importlib.metadata)
    assert meta["numpy_version"] == metadata.version("numpy")
    assert meta["phaselab_version"] == phaselab.__version__


def test_defaults_fill_missing_parameters():
    H = phaselab.Hamiltonian("p**2/2 + k*q**2/2", ["q"], ["p"], params={"k": 2.5})
    assert provenance(H)["params"] == {"k": 2.5}


def test_versions_skip_libraries_that_are_absent():
    v = versions()
    assert set(v) >= {"phaselab_version", "python_version", "numpy_version"}


def test_file_attributes_are_plain_and_json():
    attrs = netcdf_attrs({"params": {"k": np.float64(2.0)}, "flag": np.bool_(True),
                          "n": np.int64(3), "none": None, "text": "x"})
    assert json.loads(attrs["params"]) == {"k": 2.0}
    assert attrs["flag"] == 1 and attrs["n"] == 3 and isinstance(attrs["n"], int)
    assert attrs["none"] == "null" and attrs["text"] == "x"
    assert plain({"a": np.array([1.0, np.nan])}, nan_as_none=True) == {"a": [1.0, None]}
