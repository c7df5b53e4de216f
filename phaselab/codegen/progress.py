"""Saying that compilation is under way.

Compiling is the one wait a new system cannot avoid, so it is announced through
:mod:`logging` (logger ``phaselab.compile``, level INFO): a record when numba is really
compiling (its compiler passes are running, told apart from loading machine code from the
cache) for longer than :data:`ANNOUNCE_AFTER` seconds, and always one when an announced
compilation ends ("first time only" only when the cache keeps the code). Listeners (the
notebook explorer registers one) are told when any compilation starts and ends, whatever its
length, and show it in their status line.

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

from numba.core import event

from phaselab.codegen.cache import is_fallback

ANNOUNCE_AFTER = 1.0
"""Seconds after which a running compilation is announced on the console."""
LOAD_ANNOUNCE_AFTER = 5.0
"""Seconds after which loading compiled code from the cache is announced (it is usually
quick; a busy machine can make it slow)."""

_listeners: list = []
_lock = threading.Lock()
_active: list[str] = []


def add_listener(callback) -> None:
    """Call ``callback(event, what)`` with ``event`` "start" or "end" around every compilation
    (or load from the cache), and "compiling" when numba really starts compiling ``what``."""
    with _lock:
        _listeners.append(callback)


def remove_listener(callback) -> None:
    with _lock:
        if callback in _listeners:
            _listeners.remove(callback)


_baselines: dict = {}        # what -> (thread, numba passes in that thread when it started)


def describe(what: str) -> str:
    """Words for a status line about ``what`` while it is prepared: "compiling ..." once
    numba is really compiling it, "loading ... from the cache" before that."""
    ident, before = _baselines.get(what, (None, 0))
    if ident is not None and _passes.counts.get(ident, 0) > before:
        return f"compiling {what} ({_kept()})"
    return f"loading {what} from the cache"


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


def _say(text: str) -> None:
    log.info(text)


class _PassCounter(event.Listener):
    """Counts numba's compiler passes per thread: a pass runs only when machine code is
    really compiled, never when it is loaded from the cache."""

    def __init__(self):
        self.counts: dict = {}

    def on_start(self, ev):
        ident = threading.get_ident()
        self.counts[ident] = self.counts.get(ident, 0) + 1

    def on_end(self, ev):
        pass


_passes = _PassCounter()
event.register("numba:run_pass", _passes)


def compiler_passes() -> int:
    """How many numba compiler passes this thread has run (grows only when machine code is
    really compiled, never when it is loaded from the cache)."""
    return _passes.counts.get(threading.get_ident(), 0)


def _kept() -> str:
    """How long the compiled code is kept: said only when it is true."""
    if is_fallback():
        return "kept for this process only: the cache folder is not writable"
    return "first time only: kept in the cache"


@contextlib.contextmanager
def compiling(what: str):
    """Announce ``what`` (e.g. "kernels of this system") while the block compiles or loads it.

    Listeners hear "start" and "end" at once, and "compiling" when numba starts compiling
    (:func:`describe` then gives the words for a status line). The console hears, once, "compiling ..." when
    numba is really compiling and the block has run :data:`ANNOUNCE_AFTER` seconds, or
    "loading ... from the cache" when only loading has lasted :data:`LOAD_ANNOUNCE_AFTER`
    seconds; and the end of what it announced.
    """
    ident = threading.get_ident()
    passes_before = _passes.counts.get(ident, 0)
    with _lock:
        _active.append(what)
        _baselines[what] = (ident, passes_before)
    _notify("start", what)
    t0 = time.perf_counter()
    done = threading.Event()
    said: list[str] = []

    def watch():
        while not done.wait(0.2):
            elapsed = time.perf_counter() - t0
            compiled = _passes.counts.get(ident, 0) > passes_before
            if compiled and "told" not in said:
                said.append("told")
                _notify("compiling", what)
            if compiled and elapsed >= ANNOUNCE_AFTER and "compiling" not in said:
                said.append("compiling")
                _say(f"compiling {what} ({_kept()}) ...")
            elif not compiled and "loading" not in said and elapsed >= LOAD_ANNOUNCE_AFTER:
                said.append("loading")
                _say(f"loading {what} from the cache ...")

    watcher = threading.Thread(target=watch, daemon=True)
    watcher.start()
    try:
        yield
    finally:
        done.set()
        if _passes.counts.get(ident, 0) > passes_before and "told" not in said:
            said.append("told")             # a compilation quicker than the watcher's look
            _notify("compiling", what)
        with _lock:
            if what in _active:
                _active.remove(what)
            if what not in _active:
                _baselines.pop(what, None)
        if "compiling" in said or "loading" in said:
            verb = "compiled" if _passes.counts.get(ident, 0) > passes_before else "loaded"
            _say(f"{verb} {what} in {time.perf_counter() - t0:.1f} s")
        _notify("end", what)
