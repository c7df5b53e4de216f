"""Building a system's inlined loop module in the background.

The generic loops answer at once; the faster inlined module of a system (its kernels
compiled into the loops, see :mod:`phaselab.compute.compiled`) is compiled meanwhile by a
separate, low-priority Python process, one build at a time, so the notebook stays
responsive. When the child finishes it lists the compiled signatures in
``<module>.ready.json`` in the kernel cache, and the next call in any process switches to
the inlined module. A build that fails leaves the generic loops in use, which are correct,
only slower for small kernels.

Run as ``python -m phaselab.compute.background JOB`` by :func:`request_build` only.
"""

from __future__ import annotations

import json
import os
import pickle
import queue
import subprocess
import sys
import tempfile
import threading
from pathlib import Path

BUILD_TIMEOUT = 1800.0
"""Seconds after which a background build is abandoned."""

_jobs: "queue.Queue" = queue.Queue()
_worker: list[threading.Thread] = []
_pending: dict = {}
_lock = threading.Lock()


def request_build(system, files: tuple, name: str, entry: str, signature: tuple) -> None:
    """Queue the compilation of ``entry`` with ``signature`` in the inlined module ``name``
    of ``system`` (loop files ``files``). Requests for the same module are merged."""
    with _lock:
        job = _pending.get(name)
        if job is None:
            job = {"system": system, "files": files, "name": name, "entries": {}}
            _pending[name] = job
            _jobs.put(name)
        job["entries"].setdefault(entry, []).append(signature)
        if not _worker or not _worker[0].is_alive():
            thread = threading.Thread(target=_run_queue, name="phaselab-inlined-builds", daemon=True)
            _worker[:] = [thread]
            thread.start()


def pending() -> list[str]:
    """Names of inlined modules queued or being built by this process."""
    with _lock:
        return list(_pending)


def _run_queue() -> None:
    while True:
        try:
            name = _jobs.get(timeout=5.0)
        except queue.Empty:
            return
        with _lock:
            job = _pending.get(name)
        if job is None:
            continue
        try:
            _build_in_child(job)
        finally:
            with _lock:
                _pending.pop(name, None)


def _build_in_child(job: dict) -> None:
    from phaselab.codegen.cache import cache_dir

    folder = cache_dir()
    try:
        payload = pickle.dumps({k: job[k] for k in ("system", "files", "name", "entries")})
    except Exception:  # a system that cannot travel: stay on the generic loops
        return
    fd, path = tempfile.mkstemp(dir=folder, prefix=".build-", suffix=".pickle")
    with os.fdopen(fd, "wb") as fh:
        fh.write(payload)
    env = dict(os.environ, PHASELAB_CACHE_DIR=str(folder), PHASELAB_LOOPS="generic",
               PHASELAB_QUIET="1")
    try:
        subprocess.run([sys.executable, "-m", "phaselab.compute.background", path], env=env,
                       stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, timeout=BUILD_TIMEOUT,
                       start_new_session=True, check=False)
    except (OSError, subprocess.TimeoutExpired):
        pass
    finally:
        try:
            os.unlink(path)
        except OSError:
            pass


def build(job: dict) -> dict:
    """Generate the inlined module of ``job`` and compile its entry points (in this process).

    Returns
    -------
    dict
        Entry point -> list of compiled signature texts, also merged into the module's
        ``.ready.json`` marker.
    """
    from phaselab.codegen.cache import cache_dir, load_module
    from phaselab.codegen.kernels import compile_kernel, ensure_code
    from phaselab.compute.compiled import closure, inlined_source, ready_signatures

    system = job["system"]
    files = closure(job["files"])
    kernel = compile_kernel(system)
    module = load_module(job["name"], lambda: inlined_source(ensure_code(kernel, system), files))
    done = {}
    for entry, signatures in job["entries"].items():
        for sig in signatures:
            getattr(module, entry).compile(sig)
            done.setdefault(entry, []).append(str(sig))
    marker = ready_signatures(job["name"])
    for entry, sigs in done.items():
        known = marker.setdefault(entry, [])
        known += [s for s in sigs if s not in known]
    folder = cache_dir()
    target = Path(folder) / f"{job['name']}.ready.json"
    fd, tmp = tempfile.mkstemp(dir=folder, prefix=".ready-", suffix=".tmp")
    with os.fdopen(fd, "w") as fh:
        json.dump(marker, fh)
    os.replace(tmp, target)
    return done


def main(argv=None) -> int:
    args = sys.argv[1:] if argv is None else argv
    if len(args) != 1:
        print("usage: python -m phaselab.compute.background JOB", file=sys.stderr)
        return 2
    try:
        os.nice(10)
    except (OSError, AttributeError):
        pass
    with open(args[0], "rb") as fh:
        job = pickle.load(fh)  # written by request_build of the parent process, in the private cache
    build(job)
    return 0


if __name__ == "__main__":
    sys.exit(main())
