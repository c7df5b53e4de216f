"""What every test shares: one private kernel cache for the whole session, the loops' form,
and the model fixtures used across files.

The cache is ``$PHASELAB_CACHE_DIR`` when set (CI sets a fresh one), else ``.cache/kernels``
in the checkout: no test writes to the user's own kernel cache. It is set at import time so
that the subprocesses tests start (CLI, notebooks, a second Python) share it. The loops run
in their generic form unless a test asks otherwise (``PHASELAB_LOOPS``), so the suite does
not spend the machine's cores on background builds of inlined modules.

Compiling the shared loops happens once, before the first test that needs them, in the
session step :func:`compiled_loops` (``phaselab.warm``): its time is reported in the summary
and no single test is charged with it. Several pytest-xdist workers sharing the cache
compile each loop once (the file lock around every compilation makes the others wait and
load). Runs that need no compiled loops (only the folders in :data:`NO_LOOPS`) skip it, as
does ``PHASELAB_TEST_WARM=0``.
"""

import os
import time
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
os.environ.setdefault("PHASELAB_CACHE_DIR", str(ROOT / ".cache" / "kernels"))
os.environ.setdefault("PHASELAB_LOOPS", "generic")

import phaselab  # noqa: E402  (after the environment is set)
from phaselab import models  # noqa: E402


NO_LOOPS = ("tests/model/", "tests/codegen/", "tests/base/", "tests/test_layers.py",
            "tests/test_errors.py")
"""Test files that never run a compiled loop: a session of only these skips the warm-up."""

_warm_seconds: list = []


def _needs_loops(items) -> bool:
    for item in items:
        path = Path(str(item.fspath)).resolve().relative_to(ROOT).as_posix()
        if not path.startswith(NO_LOOPS):
            return True
    return False


@pytest.fixture(scope="session", autouse=True)
def compiled_loops(request):
    """Compile (or load from the session's cache) every shared loop of the public calls once,
    before the first test (see the module docstring); yields the seconds per path."""
    if os.environ.get("PHASELAB_TEST_WARM", "1") == "0" or not _needs_loops(request.session.items):
        yield {}
        return
    t0 = time.perf_counter()
    report = phaselab.warm()
    seconds = time.perf_counter() - t0
    _warm_seconds.append(seconds)
    if hasattr(request.config, "workeroutput"):        # a pytest-xdist worker tells the controller
        request.config.workeroutput["phaselab_warm_seconds"] = seconds
    yield report


@pytest.hookimpl(optionalhook=True)
def pytest_testnodedown(node, error):
    """(pytest-xdist controller) collect each worker's warm-up time."""
    seconds = getattr(node, "workeroutput", {}).get("phaselab_warm_seconds")
    if seconds is not None:
        _warm_seconds.append(seconds)


def pytest_terminal_summary(terminalreporter):
    for seconds in _warm_seconds:
        terminalreporter.write_line(f"phaselab: shared loops compiled or loaded once for the session in "
                                    f"{seconds:.1f} s (phaselab.warm, before the first test)")


@pytest.fixture(scope="session")
def kernel_cache() -> Path:
    """The session's kernel cache folder."""
    return Path(os.environ["PHASELAB_CACHE_DIR"])


@pytest.fixture(scope="session")
def henon_heiles():
    """Henon-Heiles, H = (px^2 + py^2)/2 + (x^2 + y^2)/2 + x^2 y - y^3/3 (lam = 1)."""
    return models.henon_heiles()


@pytest.fixture(scope="session")
def hh(henon_heiles):
    """Short name of the Henon-Heiles fixture."""
    return henon_heiles


@pytest.fixture(scope="session")
def pendulum():
    """The pendulum of the catalogue, H = p^2/2 - omega0^2 cos q."""
    return models.pendulum()


@pytest.fixture(scope="session")
def standard_map():
    """The standard map p' = p + K sin q, q' = q + p' (mod 2 pi)."""
    return models.standard_map()
