"""What the console says about compiling: "compiling ... (first time only ...)" only when numba
really compiles (its compiler passes run, observed through numba's event API, common
practice), never for code loaded from the cache; every announced compilation says its end."""

import logging
import time

import numba
import pytest

from phaselab.codegen import progress


@pytest.fixture
def loud(monkeypatch, caplog):
    """Compile news as the console would print it: the records of the ``phaselab.compile``
    logger (pytest's own log capture stands in for the console handler, which stays silent
    while an application, here pytest, has configured logging)."""
    monkeypatch.delenv("PHASELAB_QUIET", raising=False)
    monkeypatch.setattr(progress, "ANNOUNCE_AFTER", 0.0)
    caplog.set_level(logging.INFO, logger="phaselab.compile")

    def said():
        return "\n".join(r.getMessage() for r in caplog.records if r.name == "phaselab.compile")

    return said


def test_a_real_compilation_is_announced_with_its_end(loud):
    with progress.compiling("a test loop"):
        numba.njit(lambda x: 2 * x)(3)   # compiled now (no cache for a lambda)
        time.sleep(0.6)                   # the watcher looks every 0.2 s
    err = loud()
    assert "compiling a test loop (first time only: kept in the cache) ..." in err
    assert "compiled a test loop in" in err
    assert err.count("compiling a test loop") == 1


def test_a_quick_load_says_nothing_and_never_first_time(loud):
    with progress.compiling("a cached loop"):
        time.sleep(0.6)                   # no compiler pass runs
        assert progress.describe("a cached loop") == "loading a cached loop from the cache"
    err = loud()
    assert "first time" not in err and "compiling" not in err


def test_a_slow_load_is_announced_as_loading(loud, monkeypatch):
    monkeypatch.setattr(progress, "LOAD_ANNOUNCE_AFTER", 0.0)
    with progress.compiling("a cached loop"):
        time.sleep(0.6)
    err = loud()
    assert "loading a cached loop from the cache ..." in err
    assert "loaded a cached loop in" in err
    assert "first time" not in err


def test_listeners_hear_start_compiling_end():
    heard = []

    def listen(event, what):
        heard.append(event)

    progress.add_listener(listen)
    try:
        with progress.compiling("a listened loop"):
            numba.njit(lambda x: x - 1)(3)
            time.sleep(0.6)
    finally:
        progress.remove_listener(listen)
    assert heard == ["start", "compiling", "end"]
