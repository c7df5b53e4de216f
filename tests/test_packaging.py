"""The wheel holds what an installed phaselab needs beside its Python modules: the study files
and their key reference, the compiled loops' sources, and the JupyterLab plugin where
JupyterLab looks for prebuilt extensions (share/jupyter/labextensions/<name>/, with the
``load`` file its package.json names; JupyterLab's documented layout of a prebuilt
extension)."""

from __future__ import annotations

import json
import zipfile
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def wheel_names(tmp_path_factory):
    build = pytest.importorskip("hatchling.build", reason="hatchling (the build backend) is not installed")
    out = tmp_path_factory.mktemp("wheel")
    with pytest.MonkeyPatch.context() as mp:
        mp.chdir(ROOT)
        name = build.build_wheel(str(out))
    with zipfile.ZipFile(out / name) as whl:
        files = {n: whl.read(n) for n in whl.namelist() if not n.endswith(".py")}
        return set(whl.namelist()), files.__getitem__


def test_the_wheel_holds_the_study_files_and_the_loop_sources(wheel_names):
    names, _ = wheel_names
    for path in ("phaselab/studies/README.md", "phaselab/studies/molecule.toml", "phaselab/cli.py"):
        assert path in names, path
    loops = sorted(p.name for p in (ROOT / "phaselab" / "engine" / "loops").glob("*.py"))
    assert loops and all(f"phaselab/engine/loops/{n}" in names for n in loops)


def test_the_wheel_installs_the_jupyterlab_plugin_where_jupyterlab_looks(wheel_names):
    names, read = wheel_names
    data = "phaselab-0.1.0.data/data/share/jupyter/labextensions/phaselab-notebook/"
    meta = json.loads(read(data + "package.json"))
    assert meta["name"] == "phaselab-notebook"
    assert data + meta["jupyterlab"]["_build"]["load"] in names
    source = read(data + meta["jupyterlab"]["_build"]["load"]).decode()
    # the container JupyterLab asks for: window._JUPYTERLAB[<package name>] with init and get
    assert 'window._JUPYTERLAB[NAME] = container' in source and f'const NAME = "{meta["name"]}"' in source
    assert meta["jupyterlab"]["_build"]["extension"] == "./extension" and 'module !== "./extension"' in source
