"""The hosted-notebook environment in binder/ agrees with pyproject.toml.

Every dependency of the package (core and the ``lab`` extra) must be pinned in
binder/requirements.txt to a version that satisfies pyproject's specifier, under the same
environment markers; the Python of runtime.txt must satisfy ``requires-python``; and
postBuild must install the project itself. Versions are compared with ``packaging`` (the
reference implementation of the version-specifier standard).
"""

from __future__ import annotations

import re
import sys
from pathlib import Path

import pytest
from packaging.markers import default_environment
from packaging.requirements import Requirement
from packaging.specifiers import SpecifierSet
from packaging.utils import canonicalize_name
from packaging.version import Version

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

ROOT = Path(__file__).resolve().parents[1]
BINDER = ROOT / "binder"


def pyproject():
    return tomllib.loads((ROOT / "pyproject.toml").read_text())


def declared() -> list[Requirement]:
    project = pyproject()["project"]
    reqs = [Requirement(r) for r in project["dependencies"]]
    reqs += [Requirement(r) for r in project["optional-dependencies"]["lab"]]
    return reqs


def pinned() -> dict[str, Requirement]:
    out = {}
    for raw in (BINDER / "requirements.txt").read_text().splitlines():
        line = raw.split("#", 1)[0].strip()
        if not line or line.startswith("-"):
            continue
        req = Requirement(line)
        name = canonicalize_name(req.name)
        assert name not in out, f"{req.name} is listed twice in binder/requirements.txt"
        out[name] = req
    return out


def runtime_python() -> Version:
    text = (BINDER / "runtime.txt").read_text().strip()
    match = re.fullmatch(r"python-(\d+\.\d+(?:\.\d+)?)", text)
    assert match, f"runtime.txt should read python-X.Y, got {text!r}"
    return Version(match.group(1))


def binder_environment() -> dict:
    """Marker environment of the binder image (its Python version from runtime.txt)."""
    env = default_environment()
    version = runtime_python()
    env["python_version"] = f"{version.major}.{version.minor}"
    env["python_full_version"] = str(version) if version.micro else f"{version}.0"
    return env


@pytest.mark.parametrize("req", declared(), ids=lambda r: r.name)
def test_every_dependency_is_pinned_within_pyprojects_range(req):
    pins = pinned()
    name = canonicalize_name(req.name)
    assert name in pins, f"{req.name} (from pyproject.toml) is missing in binder/requirements.txt"
    pin = pins[name]
    exact = [s for s in pin.specifier if s.operator == "=="]
    assert len(exact) == 1 and len(pin.specifier) == 1, \
        f"{pin}: pin an exact version (name==X.Y.Z) so the hosted environment is reproducible"
    version = Version(exact[0].version)
    assert req.specifier.contains(version, prereleases=True), \
        f"binder pins {req.name}=={version}, outside pyproject's {req.specifier}"
    assert str(pin.marker or "") == str(req.marker or ""), \
        f"{req.name}: markers differ (pyproject {req.marker!r}, binder {pin.marker!r})"
    assert set(pin.extras) >= set(req.extras)


def test_nothing_in_binder_that_pyproject_does_not_declare():
    names = {canonicalize_name(r.name) for r in declared()}
    extra = sorted(set(pinned()) - names)
    assert not extra, f"binder/requirements.txt pins packages pyproject does not declare: {extra}"


def test_runtime_python_satisfies_requires_python():
    requires = SpecifierSet(pyproject()["project"]["requires-python"])
    assert requires.contains(runtime_python())


def test_pins_apply_in_the_binder_image():
    env = binder_environment()
    for req in declared():
        pin = pinned()[canonicalize_name(req.name)]
        wanted = req.marker is None or req.marker.evaluate(env)
        applies = pin.marker is None or pin.marker.evaluate(env)
        assert wanted == applies, req.name


def test_postbuild_installs_the_project_from_the_repository_root():
    post = BINDER / "postBuild"
    text = post.read_text()
    assert text.startswith("#!/usr/bin/env bash")
    assert post.stat().st_mode & 0o111, "postBuild must be executable"
    assert 'cd "$(dirname "$0")/.."' in text
    assert re.search(r"pip install .*-e \.\s*$", text, re.M), "postBuild must pip-install the project"



def test_post_build_warms_every_shared_loop():
    """A hosted session starts with the shared loops compiled: postBuild runs ``phaselab
    warm`` after installing the project."""
    lines = [ln.strip() for ln in (BINDER / "postBuild").read_text().splitlines()]
    install = next(i for i, ln in enumerate(lines) if "pip install" in ln)
    assert "phaselab warm" in lines[install + 1:]
