"""Crafted explorer session files are refused with ``file: key: problem`` before the explorer
changes anything (issue 24, item 7).

Every crafted file must give a :class:`phaselab.ParameterError` whose message starts with the
path (and names the key where there is one), or be read into checked values; no Python
error may escape, no file may be read whole before its size is known, and a file that cannot
be restored leaves the explorer's orbits as they were.
"""

from __future__ import annotations

import json
import os

import pytest

import phaselab
from phaselab.widgets.session_file import MAX_FILE_BYTES, MAX_ORBITS, read_session

GOOD = {"format": "phaselab-explorer-session", "version": 1, "system": "test", "kind": "section",
        "energy": 0.1, "params": {},
        "view": {"plane": {"x": 0.0}, "solve_for": "px", "direction": 1, "axes": ["y", "py"],
                 "ranges": [[-1, 1], [-1, 1]], "equal_aspect": False, "crossings": 300},
        "color": {"by": "megno", "low": 0.0, "anchor": 2.0, "high": 8.0},
        "orbits": [{"seed": [0.1, 0.0], "crossings": 300}, {"seed": [0.2, 0.0], "crossings": 50}],
        "selected": 1}


def _with(**changes):
    data = json.loads(json.dumps(GOOD))
    for dotted, value in changes.items():
        keys = dotted.split("__")
        target = data
        for k in keys[:-1]:
            target = target[k]
        target[keys[-1]] = value
    return json.dumps(data)


#: (name, file text, key the message must name)
CRAFTED = [
    ("plane-as-list", _with(view__plane=["x", 0.0]), "view.plane"),
    ("plane-two-components", _with(view__plane={"x": 0.0, "y": 1.0}), "view.plane"),
    ("plane-value-text", _with(view__plane={"x": "0"}), "view.plane.x"),
    ("energy-text", _with(energy="0.1"), "energy"),
    ("energy-bool", _with(energy=True), "energy"),
    ("seed-text", _with(orbits=[{"seed": ["0.1", 0.0]}]), "orbits[0].seed"),
    ("seed-three", _with(orbits=[{"seed": [0.1, 0.0, 1.0]}]), "orbits[0].seed"),
    ("seed-missing", _with(orbits=[{"crossings": 3}]), "orbits[0]"),
    ("crossings-text", _with(orbits=[{"seed": [0.1, 0.0], "crossings": "300"}]), "orbits[0].crossings"),
    ("crossings-float", _with(orbits=[{"seed": [0.1, 0.0], "crossings": 30.5}]), "orbits[0].crossings"),
    ("crossings-bool", _with(orbits=[{"seed": [0.1, 0.0], "crossings": True}]), "orbits[0].crossings"),
    ("crossings-zero", _with(orbits=[{"seed": [0.1, 0.0], "crossings": 0}]), "orbits[0].crossings"),
    ("crossings-huge", _with(orbits=[{"seed": [0.1, 0.0], "crossings": 10**9}]), "orbits[0].crossings"),
    ("crossings-1e400", _with(orbits=[{"seed": [0.1, 0.0], "crossings": 1}]).replace(
        '"crossings": 1}', '"crossings": 1e400}'), "orbits[0].crossings"),
    ("crossings-5000-digits", _with(orbits=[{"seed": [0.1, 0.0], "crossings": 1}]).replace(
        '"crossings": 1}', '"crossings": 1' + "0" * 5000 + "}"), "file"),
    ("energy-1e400", _with(energy=1.0).replace('"energy": 1.0', '"energy": 1e400'), "energy"),
    ("energy-nan", _with(energy=1.0).replace('"energy": 1.0', '"energy": NaN'), "file"),
    ("energy-infinity", _with(energy=1.0).replace('"energy": 1.0', '"energy": -Infinity'), "file"),
    ("orbit-not-mapping", _with(orbits=[[0.1, 0.0]]), "orbits[0]"),
    ("orbit-extra-key", _with(orbits=[{"seed": [0.1, 0.0], "code": "x"}]), "orbits[0].code"),
    ("orbits-not-list", _with(orbits={"seed": [0.1, 0.0]}), "orbits"),
    ("too-many-orbits", _with(orbits=[{"seed": [0.1, 0.0], "crossings": 1}] * (MAX_ORBITS + 1), selected=None),
     "orbits"),
    ("too-many-points", _with(orbits=[{"seed": [0.1, 0.0], "crossings": 100_000}] * 21, selected=None), "orbits"),
    ("params-text", _with(params={"a": "1"}), "params.a"),
    ("params-list", _with(params=[1.0]), "params"),
    ("ranges-reversed", _with(view__ranges=[[1, 0], [0, 1]]), "view.ranges[0]"),
    ("ranges-flat", _with(view__ranges=[0, 1, 0, 1]), "view.ranges"),
    ("ranges-text", _with(view__ranges=[["a", 1], [0, 1]]), "view.ranges[0]"),
    ("direction-two", _with(view__direction=2), "view.direction"),
    ("direction-bool", _with(view__direction=True), "view.direction"),
    ("axes-string", _with(view__axes="ypy"), "view.axes"),
    ("equal-text", _with(view__equal_aspect="yes"), "view.equal_aspect"),
    ("view-crossings-neg", _with(view__crossings=-3), "view.crossings"),
    ("view-not-mapping", _with(view=[1, 2]), "view"),
    ("color-low-text", _with(color__low="0"), "color.low"),
    ("color-not-mapping", _with(color="megno"), "color"),
    ("color-by-number", _with(color__by=3), "color.by"),
    ("selected-zero", _with(selected=0), "selected"),
    ("selected-past-end", _with(selected=5), "selected"),
    ("selected-bool", _with(selected=True), "selected"),
    ("version-text", _with(version="1"), "version"),
    ("version-bool", _with(version=True), "version"),
    ("format-other", _with(format="something"), "format"),
    ("unknown-key", _with(script="print(1)"), "file.script"),
    ("duplicate-key", _with().replace('"energy": 0.1', '"energy": 0.1, "energy": 0.2'), "file"),
    ("top-level-list", "[1, 2, 3]", "format"),
    ("empty", "", "file"),
    ("deep-100000", '{"format": "phaselab-explorer-session", "version": 1, "view": '
     + "[" * 100_000 + "]" * 100_000 + "}", "file"),
    ("deep-in-orbits", _with(orbits=[{"seed": [[[[[[[[[0.1]]]]]]]]]}]), "file"),
    ("system-long", _with(system="x" * 1000), "system"),
]


@pytest.mark.parametrize("name, text, key", CRAFTED, ids=[c[0] for c in CRAFTED])
def test_crafted_session_file_is_refused_at_its_key(tmp_path, name, text, key):
    path = tmp_path / f"{name}.json"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(phaselab.ParameterError) as info:
        read_session(path)
    assert str(info.value).startswith(f"{path}: {key}"), str(info.value)


def test_the_good_file_reads_into_checked_values(tmp_path):
    path = tmp_path / "good.json"
    path.write_text(json.dumps(GOOD))
    data = read_session(path)
    assert data["orbits"] == [{"seed": (0.1, 0.0), "crossings": 300}, {"seed": (0.2, 0.0), "crossings": 50}]
    assert data["view"]["plane"] == {"x": 0.0} and data["view"]["ranges"] == [(-1.0, 1.0), (-1.0, 1.0)]
    assert data["color"] == {"by": "megno", "low": 0.0, "anchor": 2.0, "high": 8.0}


def test_files_that_are_not_regular_or_too_large_are_refused_before_reading(tmp_path):
    cases = [tmp_path, "/dev/zero", tmp_path / "missing.json", str(tmp_path / "nul\0name.json")]
    big = tmp_path / "big.json"
    with open(big, "wb") as fh:   # sparse: refused by its size, never read
        fh.truncate(MAX_FILE_BYTES + 1)
    cases.append(big)
    if hasattr(os, "mkfifo"):
        fifo = tmp_path / "pipe.json"
        os.mkfifo(fifo)           # opening it would block: refused by its kind first
        cases.append(fifo)
    for path in cases:
        with pytest.raises(phaselab.ParameterError, match="session file|regular file|larger than"):
            read_session(path)
    bad_bytes = tmp_path / "latin.json"
    bad_bytes.write_bytes(b'{"format": "\xff"}')
    with pytest.raises(phaselab.ParameterError, match="UTF-8"):
        read_session(bad_bytes)
    with pytest.raises(phaselab.ParameterError, match="path"):
        read_session(3)


# ----------------------------------------------------------------------------- the explorer
pytest.importorskip("ipywidgets")
pytest.importorskip("jupyter_bokeh")

E0 = 0.125  # below the escape energy 1/6 of the Henon-Heiles potential (Henon & Heiles 1964)


@pytest.fixture(scope="module")
def explorer(henon_heiles):
    ex = phaselab.explore(henon_heiles, energy=E0, background=False, color_by="megno", crossings=40)
    ex.add_seeds([(0.1, 0.05), (-0.2, 0.1)])
    return ex


def test_a_bad_colour_bound_leaves_the_explorer_as_it_was(explorer, tmp_path):
    path = explorer.save_session(tmp_path / "s.json")
    data = json.loads(path.read_text())
    before = [o.seed for o in explorer.orbits]
    data["color"] = {"by": "megno", "low": 5.0, "anchor": 2.0, "high": 1.0}
    data["orbits"] = [{"seed": [0.05, 0.0], "crossings": 40}]
    path.write_text(json.dumps(data))
    with pytest.raises(phaselab.ParameterError, match=r"s.json: color: "):
        explorer.load_session(path)
    assert [o.seed for o in explorer.orbits] == before


def test_the_status_counts_the_orbits_restored(explorer, tmp_path):
    path = explorer.save_session(tmp_path / "s.json")
    data = json.loads(path.read_text())
    data["orbits"], data["selected"] = [], None
    path.write_text(json.dumps(data))
    explorer.load_session(path)
    assert explorer.orbits == [] and "holds no orbits" in explorer.status
    # one seed inside the energy shell, one far outside it (py = 5): one orbit restored, not two
    data["orbits"] = [{"seed": [0.1, 0.05], "crossings": 40}, {"seed": [0.0, 5.0], "crossings": 40}]
    path.write_text(json.dumps(data))
    explorer.load_session(path)
    assert len(explorer.orbits) == 1 and "Restored 1 of 2 orbits" in explorer.status
