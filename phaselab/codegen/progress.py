"""Saying that compilation is under way.

Compiling is the one wait a new system cannot avoid, so it is announced through
:mod:`logging` (logger ``phaselab.compile``, level INFO): a record when a compilation takes
longer than :data:`ANNOUNCE_AFTER` seconds and always one when it ends. Listeners (the
notebook explorer registers one) are told when any compilation starts and ends, whatever
its length, and show it in their status line.

Where no listener is registered (a script, a console), the records are written to standard
error by one handler of this module; while a listener is registered that handler stays
silent, so a notebook shows compile news in the explorer's status line and never as stray
error output under it. An application that configures logging itself gets every record
through the usual propagation. ``PHASELAB_QUIET=1`` silences the console handler.
"""

from __future__ import annotations

import contextlib
import logging
import os
import sys
import threading
import time

ANNOUNCE_AFTER = 1.0
"""Seconds after which a running compilation is announced on the console."""

_listeners: list = []
_lock = threading.Lock()
_active: list[str] = []

log = logging.getLogger("phaselab.compile")
"""The logger of compile news."""


class _ConsoleFilter(logging.Filter):
    """Passes records only where nobody shows them otherwise (no listener) and not quiet."""

    def filter(self, record) -> bool:
        if os.environ.get("PHASELAB_QUIET", "") not in ("", "0"):
            return False
        if logging.getLogger().handlers:
            return False  # the application configured logging: it prints what it wants
        with _lock:
            return not _listeners


class _StderrHandler(logging.StreamHandler):
    """Writes to the standard error of the moment (a test or a notebook may swap it)."""

    @property
    def stream(self):
        return sys.stderr

    @stream.setter
    def stream(self, value):
        pass


console_handler = _StderrHandler()
console_handler.setFormatter(logging.Formatter("phaselab: %(message)s"))
console_handler.addFilter(_ConsoleFilter())
log.addHandler(console_handler)
log.setLevel(logging.INFO)


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
    log.info(text)


@contextlib.contextmanager
def compiling(what: str):
    """Announce ``what`` (e.g. "kernels of this system") while the block compiles."""
    with _lock:
        _active.append(what)
    _notify("start", what)
    t0 = time.perf_counter()
    state = {"done": False, "announced": False}
    guard = threading.Lock()

    def announce():
        with guard:  # never a start line after the end line
            if state["done"]:
                return
            state["announced"] = True
            _say(f"compiling {what} (first time only) ...")

    timer = threading.Timer(ANNOUNCE_AFTER, announce)
    timer.daemon = True
    timer.start()
    try:
        yield
    finally:
        timer.cancel()
        with guard:
            state["done"] = True
            announced = state["announced"]
        with _lock:
            if what in _active:
                _active.remove(what)
        seconds = time.perf_counter() - t0
        if announced:  # an announced compilation always gets its end
            _say(f"compiled {what} in {seconds:.1f} s")
        else:
            log.debug("compiled %s in %.1f s", what, seconds)
        _notify("end", what)
