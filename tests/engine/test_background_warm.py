"""The background warm-up of the other common paths (engine/background_warm.py): started
only where wanted, at most one per cache."""

import fcntl
import os
import subprocess
import sys

from phaselab.engine import background_warm

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))


def test_not_started_outside_the_default_loop_form(monkeypatch):
    monkeypatch.setenv("PHASELAB_LOOPS", "generic")          # the suite's form
    assert not background_warm.wanted()
    monkeypatch.setenv("PHASELAB_LOOPS", "auto")
    monkeypatch.setenv("PHASELAB_BACKGROUND_WARM", "0")
    assert not background_warm.wanted()


def test_a_second_background_warm_of_one_cache_exits_at_once(tmp_path):
    """While one holds the lock, another child exits without warming (no marker written)."""
    env = dict(os.environ, PHASELAB_CACHE_DIR=str(tmp_path), PHASELAB_QUIET="1",
               PYTHONPATH=ROOT + os.pathsep + os.environ.get("PYTHONPATH", ""))
    with open(tmp_path / ".background-warm.lock", "a") as handle:
        fcntl.flock(handle.fileno(), fcntl.LOCK_EX)
        res = subprocess.run([sys.executable, "-m", "phaselab.engine.background_warm"], env=env,
                             capture_output=True, text=True, timeout=120)
    assert res.returncode == 0, res.stderr
    assert not any(p.name.startswith("warm-") for p in tmp_path.iterdir())
