"""What every test shares: one private kernel cache for the whole session, the loops' form,
and the model fixtures used across files.

The cache is ``$PHASELAB_CACHE_DIR`` when set (CI sets a fresh one), else ``.cache/kernels``
in the checkout: no test writes to the user's own kernel cache. It is set at import time so
that the subprocesses tests start (CLI, notebooks, a second Python) share it. The loops run
in their generic form unless a test asks otherwise (``PHASELAB_LOOPS``), so the suite does
not spend the machine's cores on background builds of inlined modules.
"""

import os
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
os.environ.setdefault("PHASELAB_CACHE_DIR", str(ROOT / ".cache" / "kernels"))
os.environ.setdefault("PHASELAB_LOOPS", "generic")

import phaselab  # noqa: E402  (after the environment is set)
from phaselab import models  # noqa: E402


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
