"""Run the explorer's computations off the kernel's event loop.

A click, a drag or a slider move asks for a computation. :class:`JobRunner` runs it in one
worker thread (the compiled kernels release the GIL, so the kernel keeps answering widget
messages meanwhile) and hands the result back to the thread that owns the widgets: the
kernel's asyncio loop when there is one, otherwise the caller of :meth:`JobRunner.flush`.

Requests carry a key. A newer request under the same key replaces one that has not started
yet, so a drag that sends fifty positions computes only the ones the worker can keep up
with (the newest wins), and a slider moved quickly recomputes only for where it stopped.
"""

from __future__ import annotations

import asyncio
import threading
import time
import traceback
from dataclasses import dataclass, field
from typing import Any, Callable


@dataclass
class Outcome:
    """The result of a job: ``value`` on success, else ``error`` (the exception raised)."""

    value: Any = None
    error: BaseException | None = None
    detail: str = ""
    seconds: float = 0.0


@dataclass(order=True)
class _Job:
    not_before: float
    serial: int
    key: str = field(compare=False)
    compute: Callable[[], Any] = field(compare=False)
    deliver: Callable[[Outcome], None] = field(compare=False)
    loop: Any = field(compare=False, default=None)


def _run(compute) -> Outcome:
    start = time.perf_counter()
    try:
        value = compute()
    except BaseException as exc:  # handed to the widget, which shows a message
        return Outcome(error=exc, detail=traceback.format_exc(), seconds=time.perf_counter() - start)
    return Outcome(value=value, seconds=time.perf_counter() - start)


def current_loop():
    try:
        return asyncio.get_running_loop()
    except RuntimeError:
        return None


def call_later(loop, delay: float, fn: Callable[[], None]) -> None:
    """Call ``fn()`` after ``delay`` seconds on ``loop`` (the kernel's event loop) when it
    runs; at once without one (scripts and tests)."""
    if loop is not None and not loop.is_closed() and loop.is_running():
        loop.call_later(delay, fn)
    else:
        fn()


def wait_all(runners, timeout: float = 60.0) -> bool:
    """Block until none of ``runners`` has a request waiting or running (a result delivered
    by one may ask another for more); ``False`` on timeout. For scripts and tests."""
    end = time.monotonic() + timeout
    while True:
        if not all(r.wait(max(end - time.monotonic(), 0.0)) for r in runners):
            return False
        if not any(r.busy for r in runners):
            return True


class JobRunner:
    """A single worker thread with keyed, newest-wins requests.

    Parameters
    ----------
    background : bool
        ``True`` computes in the worker thread; ``False`` computes and delivers at once in
        the calling thread (scripts, tests and benchmarks that want a direct answer).
    """

    def __init__(self, background: bool = True):
        self.background = bool(background)
        self._cond = threading.Condition()
        self._pending: dict[str, _Job] = {}
        self._running = 0
        self._delivered: list[tuple[Callable, Outcome]] = []
        self._posted: list[Callable[[], None]] = []   # handed to a loop, not yet applied
        self._serial = 0
        self._thread: threading.Thread | None = None
        self._closed = False

    # --------------------------------------------------------------------- requests
    def submit(self, key: str, compute: Callable[[], Any], deliver: Callable[[Outcome], None],
               delay: float = 0.0) -> None:
        """Ask for ``compute()``; ``deliver(outcome)`` runs on the widgets' thread afterwards.

        Parameters
        ----------
        key : str
            Requests under one key replace each other while waiting.
        delay : float
            Seconds to wait before starting (debouncing a stream of drag positions).
        """
        if not self.background:
            deliver(_run(compute))
            return
        with self._cond:
            if self._closed:
                return
            self._serial += 1
            self._pending[key] = _Job(time.monotonic() + max(delay, 0.0), self._serial, key,
                                      compute, deliver, current_loop())
            if self._thread is None or not self._thread.is_alive():
                self._thread = threading.Thread(target=self._work, name="phaselab-explorer",
                                                daemon=True)
                self._thread.start()
            self._cond.notify_all()

    def submit_inline(self, compute: Callable[[], Any], deliver: Callable[[Outcome], None]) -> None:
        """Compute and deliver at once in the calling thread (for work known to be short)."""
        deliver(_run(compute))

    def call_soon(self, fn: Callable[[], None], loop=None) -> None:
        """Run ``fn()`` on the widgets' thread: through ``loop`` (from any thread) when it
        runs, else at the next :meth:`flush` or :meth:`wait` (scripts and tests)."""
        if loop is not None and not loop.is_closed() and loop.is_running():
            try:
                loop.call_soon_threadsafe(fn)
                return
            except RuntimeError:
                pass
        if not self.background and threading.current_thread() is threading.main_thread():
            fn()
            return
        with self._cond:
            self._delivered.append((lambda _outcome: fn(), Outcome()))
            self._cond.notify_all()

    def cancel(self, key: str | None = None) -> None:
        """Drop waiting requests (all of them, or those under ``key``)."""
        with self._cond:
            if key is None:
                self._pending.clear()
            else:
                self._pending.pop(key, None)

    @property
    def busy(self) -> bool:
        with self._cond:
            return bool(self._pending) or self._running > 0

    # --------------------------------------------------------------------- worker side
    def _work(self) -> None:
        while True:
            with self._cond:
                while True:
                    if self._closed:
                        return
                    if self._pending:
                        job = min(self._pending.values())
                        wait = job.not_before - time.monotonic()
                        if wait <= 0:
                            del self._pending[job.key]
                            self._running += 1
                            break
                        self._cond.wait(wait)
                    else:
                        self._cond.wait(5.0)
                        if not self._pending:
                            self._thread = None
                            return
            outcome = _run(job.compute)
            self._post(job, outcome)

    def _post(self, job: _Job, outcome: Outcome) -> None:
        loop = job.loop
        if loop is not None and not loop.is_closed():
            def apply():
                with self._cond:   # once: by the loop, or by wait() blocking the loop's thread
                    if apply not in self._posted:
                        return
                    self._posted.remove(apply)
                try:
                    job.deliver(outcome)
                finally:
                    self._finish()
            with self._cond:
                self._posted.append(apply)
            try:
                loop.call_soon_threadsafe(apply)
                return
            except RuntimeError:  # loop closed meanwhile
                with self._cond:
                    self._posted.remove(apply)
        with self._cond:
            self._delivered.append((job.deliver, outcome))
            self._running -= 1
            self._cond.notify_all()

    def _finish(self) -> None:
        with self._cond:
            self._running -= 1
            self._cond.notify_all()

    # --------------------------------------------------------------------- waiting
    def flush(self) -> int:
        """Deliver results that came back without an event loop to carry them; returns how many."""
        with self._cond:
            items, self._delivered = self._delivered, []
        for deliver, outcome in items:
            deliver(outcome)
        return len(items)

    def wait(self, timeout: float = 30.0) -> bool:
        """Block until no request is waiting or running, delivering results; ``False`` on timeout.

        Meant for scripts and tests. Called on the thread of a running event loop (a
        notebook cell), it blocks that loop: the results addressed to it are delivered here
        instead (else they would wait for the loop, and this for them, until the timeout).
        """
        end = time.monotonic() + timeout
        on_loop = current_loop() is not None
        while True:
            self.flush()
            if on_loop:
                with self._cond:
                    posted = list(self._posted)
                for apply in posted:
                    apply()
            with self._cond:
                idle = not self._pending and self._running == 0 and not self._delivered
                if idle:
                    return True
                left = end - time.monotonic()
                if left <= 0:
                    return False
                self._cond.wait(min(left, 0.05))

    def close(self) -> None:
        with self._cond:
            self._closed = True
            self._pending.clear()
            self._cond.notify_all()
