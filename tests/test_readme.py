"""The README's tour runs as written (its Python blocks, in order, in a scratch folder), the
cluster snippet on a local two-worker Dask cluster."""

import os
import re
from pathlib import Path

import pytest

README = Path(__file__).resolve().parents[1] / "README.md"


@pytest.mark.slow
def test_readme_tour_runs(tmp_path, monkeypatch):
    blocks = re.findall(r"```python\n(.*?)```", README.read_text(), re.S)
    assert blocks, "the README has no Python tour"
    monkeypatch.chdir(tmp_path)
    scope: dict = {}
    # the project's own README, not user input: executing it is the point of the check
    exec(compile("\n".join(blocks), str(README), "exec"), scope)  # noqa: S102
    assert (tmp_path / "section.svg").stat().st_size > 0
    assert (tmp_path / "bead_portrait.svg").stat().st_size > 0
    assert scope["picture"].shape == (200, 200)
    assert (tmp_path / "megno.nc").stat().st_size > 0 and (tmp_path / "megno.zarr").is_dir()
    # the cluster snippet ran on a local two-worker cluster and gave the local numbers
    assert scope["spread"].image.shape == (200, 200)


def test_readme_commands_match_ci():
    # the README's test command is what .ci/run calls (kept true by this check)
    text = README.read_text()
    ci = (README.parent / ".ci" / "run").read_text()
    commands = re.search(r"```\n(.*?)```", text, re.S).group(1).strip().splitlines()
    assert len(commands) == 2
    assert commands[1].strip() in ci
    assert "phaselab demo" in commands[0] and 'pip install -e ".[all]"' in commands[0]
    assert os.access(README.parent / ".ci" / "run", os.X_OK) or ci.startswith("#!")
