"""Saying that compilation is under way.

Compiling is the one wait a new system cannot avoid, so it is announced: the console gets a
line on standard error when a compilation takes longer than :data:`ANNOUNCE_AFTER` seconds
(and one when it ends), and listeners (the notebook explorer registers one) are told when
any compilation starts and ends, whatever its length. ``PHASELAB_QUIET=1`` silences the
console lines.
"""

from __future__ import annotations

import contextlib
import os
import sys
import threading
import time

ANNOUNCE_AFTER = 1.0
"""Seconds after which a running compilation is announced on the console."""

_listeners: list = []
_lock = threading.Lock()
_active: list[str] = []


def add_listener(callback) -> None:
    """Call ``callback(event, what)`` with ``event`` "start" or "end" around every compilation."""
    with _lock:
        _listeners.append(callback)


def remove_listener(callback) -> None:
    with _lock:
        if callback in _listeners:
            _listeners.remove(callback)


def active() -> list[str]:
    """What is being compiled right now (descriptions), in this process."""
    with _lock:
        return list(_active)


def _notify(event: str, what: str) -> None:
    with _lock:
        listeners = list(_listeners)
    for callback in listeners:
        try:
            callback(event, what)
        except Exception:  # a broken listener must not break a computation
            pass


def _say(text: str) -> None:
    if os.environ.get("PHASELAB_QUIET", "") not in ("", "0"):
        return
    print(f"phaselab: {text}", file=sys.stderr, flush=True)


@contextlib.contextmanager
def compiling(what: str):
    """Announce ``what`` (e.g. "kernels of this system") while the block compiles."""
    with _lock:
        _active.append(what)
    _notify("start", what)
    t0 = time.perf_counter()
    announced = threading.Event()

    def announce():
        announced.set()
        _say(f"compiling {what} (first time only) ...")

    timer = threading.Timer(ANNOUNCE_AFTER, announce)
    timer.daemon = True
    timer.start()
    try:
        yield
    finally:
        timer.cancel()
        with _lock:
            if what in _active:
                _active.remove(what)
        if announced.is_set():
            _say(f"compiled {what} in {time.perf_counter() - t0:.1f} s")
        _notify("end", what)
