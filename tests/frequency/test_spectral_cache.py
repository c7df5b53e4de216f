"""Where the spectral routines' machine code is kept: under ``PHASELAB_CACHE_DIR`` (beside the
kernels, with their integrity rules), never in the package's folder; a second process loads
it without compiling (numba's compiler passes counted through its event API, common
practice for observing numba compilation)."""

import json
import os
import subprocess
import sys
import textwrap
from pathlib import Path

import numpy as np
import pytest

import phaselab
from phaselab.frequency import spectral

CHILD = textwrap.dedent("""
    import json
    import numpy as np
    from numba.core import event

    class Passes(event.Listener):
        count = 0
        def on_start(self, ev):
            Passes.count += 1
        def on_end(self, ev):
            pass

    event.register("numba:run_pass", Passes())
    from phaselab.frequency.spectral import leading_lines, routines
    k = np.arange(64)
    lines = leading_lines(np.exp(2j * np.pi * 0.123 * k)[None, :], lines=1)
    print(json.dumps({"nu": float(lines.nu[0, 0]), "passes": Passes.count,
                      "module": routines().__file__}))
""")


def _child(cache: Path) -> dict:
    env = dict(os.environ, PHASELAB_CACHE_DIR=str(cache), PHASELAB_QUIET="1")
    res = subprocess.run([sys.executable, "-c", CHILD], env=env, capture_output=True, text=True,
                         timeout=900)
    assert res.returncode == 0, res.stderr[-2000:]
    return json.loads(res.stdout.strip().splitlines()[-1])


def _package_index_files() -> set:
    folder = Path(phaselab.__file__).parent / "frequency"
    return {p.name for p in folder.rglob("*.nbi")}


@pytest.mark.slow
def test_spectral_machine_code_is_kept_in_the_cache_folder(tmp_path):
    before = _package_index_files()
    first = _child(tmp_path)
    # the exact frequency of the test signal, exp(2 pi i 0.123 k) (its value by construction;
    # the point here is where the machine code goes)
    assert first["nu"] == pytest.approx(0.123, abs=1e-6)
    assert Path(first["module"]).parent == tmp_path
    kept = {p.name for p in tmp_path.rglob("*.nbi")}
    assert any(name.startswith(spectral.routines_module_name()) for name in kept)
    assert _package_index_files() == before, "machine code written into the package"
    second = _child(tmp_path)
    assert second["passes"] == 0, "a second process compiled the spectral routines again"
    assert second["nu"] == first["nu"]


def test_routines_are_read_as_text_from_the_package():
    """The routines' module name follows their text: an edit of spectral_loops.py gets a new
    module (and new machine code) instead of stale cached code."""
    name = spectral.routines_module_name()
    assert name.startswith("spectral_")
    assert spectral.ROUTINES_FILE.is_file()
    w = spectral.window(16, 1)
    # the symmetric Hann window 1 + cos(pi s / T), s = k - T, T = (n - 1)/2, scaled to unit mean
    # (common practice; scipy.signal.windows.hann(n) is the same shape)
    from scipy.signal import windows

    ref = windows.hann(16)
    np.testing.assert_allclose(w, ref / ref.mean(), rtol=1e-12, atol=1e-14)


def test_no_imported_module_keeps_machine_code_in_the_package():
    """numba's ``cache=True`` writes beside the module's file: only loop text that the engine
    loads from the kernel cache (engine/loops, frequency/spectral_loops.py) may use it; an
    imported module of the package may not (read from each module's ast; common practice)."""
    import ast

    package = Path(phaselab.__file__).parent
    text_only = {package / "frequency" / "spectral_loops.py"}
    offenders = []
    for path in package.rglob("*.py"):
        if "loops" in path.relative_to(package).parts or path in text_only:
            continue
        for node in ast.walk(ast.parse(path.read_text())):
            if isinstance(node, ast.Call) and any(
                    k.arg == "cache" and isinstance(k.value, ast.Constant) and k.value.value is True
                    for k in node.keywords):
                offenders.append(f"{path.relative_to(package)}:{node.lineno}")
    assert not offenders, f"numba cache=True in imported modules: {offenders}"
