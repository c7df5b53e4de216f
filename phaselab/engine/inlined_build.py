"""Building a system's inlined loop module in the background.

The generic loops answer at once; the faster inlined module of a system (its kernels
compiled into the loops, see :mod:`phaselab.engine.compiled`) is compiled meanwhile by a
separate, low-priority Python process, one build at a time, so the notebook stays
responsive. Builds still queued when the process exits are handed to a detached child, so
a short script's successor finds them done. When the child finishes it lists the compiled signatures in
``<module>.ready.json`` in the kernel cache, and the next call in any process switches to
the inlined module. A build that fails leaves the generic loops in use, which are correct,
only slower for small kernels.

Job files are ``.build-<pid>-<random>.pickle`` in the kernel cache, named by the process
that holds them: the writer until a build child claims the file by renaming it to its own
number. A job whose holder was killed (its file left behind) is removed by the next build
request once its process is gone and it is older than :data:`STALE_SECONDS`. A process
whose cache is a private temporary folder (see :mod:`phaselab.codegen.cache`) builds
nothing in the background: that folder is removed at exit, and a build child still
running would write into it again.

Run as ``python -m phaselab.engine.inlined_build JOB`` by :func:`request_build` only.
"""

from __future__ import annotations

import atexit
import json
import os
import pickle
import re
import subprocess
import sys
import tempfile
import threading
from pathlib import Path

from phaselab.base.atomic import atomic_path, remove_stale
from phaselab.codegen.cache import cache_dir, is_fallback, load_module
from phaselab.codegen.kernels import compile_kernel, ensure_code
from phaselab.engine.loop_source import DEFAULT_FAMILY, closure, inlined_source

BUILD_TIMEOUT = 1800.0
"""Seconds after which a background build is abandoned."""
STALE_SECONDS = 600.0
"""A job file left by a killed process is removed once it is this old (and its process gone)."""
_JOB_NAME = re.compile(r"^\.build-(\d+)-[^/]*\.pickle$")
_LEFT_BEHIND = re.compile(r"^\.(?:build-(\d+)-[^/]*\.pickle|ready-(\d+)-[^/]*\.tmp)$")

_pending: list = []          # jobs not started yet, in order
_worker: list = []
_lock = threading.Lock()
_exit_hook: list = []


_ready_seen: dict = {}


def ready_signatures(name: str) -> dict:
    """Entry point -> list of signature texts compiled for the inlined module ``name`` (read
    from the marker file the background build writes; re-read only when it changes)."""
    path = cache_dir() / f"{name}.ready.json"
    try:
        stamp = path.stat().st_mtime_ns
    except OSError:
        return {}
    seen = _ready_seen.get(name)
    if seen is not None and seen[0] == stamp:
        return seen[1]
    try:
        data = json.loads(path.read_text())
    except (OSError, ValueError):
        data = {}
    _ready_seen[name] = (stamp, data)
    return data


def request_build(system, files: tuple, name: str, entry: str, signature: tuple,
                  family: str = DEFAULT_FAMILY) -> None:
    """Queue the compilation of ``entry`` with ``signature`` in the inlined module ``name``
    of ``system`` (loop files ``files``, stepper family ``family``). Requests for a module not
    yet started are merged; jobs still queued when the process exits are handed to one
    detached child process."""
    with _lock:
        job = next((j for j in _pending if j["name"] == name), None)
        if job is None:
            job = {"system": system, "files": files, "family": family, "name": name, "entries": {}}
            _pending.append(job)
        sigs = job["entries"].setdefault(entry, [])
        if signature not in sigs:
            sigs.append(signature)
        if not _worker or not _worker[0].is_alive():
            thread = threading.Thread(target=_run_queue, name="phaselab-inlined-builds", daemon=True)
            _worker[:] = [thread]
            thread.start()
        if not _exit_hook:
            atexit.register(_hand_over)
            _exit_hook.append(True)


def pending() -> list[str]:
    """Names of inlined modules queued by this process and not started yet."""
    with _lock:
        return [j["name"] for j in _pending]


def _run_queue() -> None:
    while True:
        with _lock:
            if not _pending:
                return
            job = _pending.pop(0)
        path = _write_job(job)
        if path is not None:
            _spawn([path], wait=True)


def _write_job(job: dict):

    folder = cache_dir()
    if is_fallback():
        return None
    remove_stale_jobs(folder)
    try:
        payload = pickle.dumps({k: job[k] for k in ("system", "files", "family", "name", "entries")})
    except Exception:  # a system that cannot travel: it stays on the generic loops
        return None
    fd, path = tempfile.mkstemp(dir=folder, prefix=f".build-{os.getpid()}-", suffix=".pickle")
    with os.fdopen(fd, "wb") as fh:
        fh.write(payload)
    return path


def remove_stale_jobs(folder) -> int:
    """Remove job files (and half-written ``.ready-<pid>-*.tmp`` markers) of killed processes
    from the cache ``folder`` (see the module docstring); returns how many. Never raises."""
    return remove_stale(folder, _LEFT_BEHIND, STALE_SECONDS)


def _claim(path: str):
    """Rename the job file ``path`` to this process's number (see the module docstring);
    None when it is gone."""
    old = Path(path)
    match = _JOB_NAME.match(old.name)
    rest = old.name[len(f".build-{match.group(1)}-"):] if match else old.name
    new = old.with_name(f".build-{os.getpid()}-{rest}")
    try:
        os.replace(old, new)
        os.utime(new)
    except OSError:
        return None
    return new


def _spawn(paths: list, wait: bool) -> None:

    env = dict(os.environ, PHASELAB_CACHE_DIR=str(cache_dir()), PHASELAB_LOOPS="generic",
               PHASELAB_QUIET="1")
    command = [sys.executable, "-m", "phaselab.engine.inlined_build", *paths]
    try:
        if wait:
            subprocess.run(command, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                           timeout=BUILD_TIMEOUT, start_new_session=True, check=False)
        else:
            subprocess.Popen(command, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                             start_new_session=True)
    except (OSError, subprocess.TimeoutExpired):
        pass


def _hand_over() -> None:
    """At exit: jobs not started yet go to one detached child, so the next process finds them."""
    with _lock:
        jobs = list(_pending)
        _pending.clear()
    paths = [p for p in (_write_job(j) for j in jobs) if p is not None]
    if paths:
        _spawn(paths, wait=False)


def build(job: dict) -> dict:
    """Generate the inlined module of ``job`` and compile its entry points (in this process).

    Returns
    -------
    dict
        Entry point -> list of compiled signature texts, also merged into the module's
        ``.ready.json`` marker.
    """
    system = job["system"]
    files = closure(job["files"])
    kernel = compile_kernel(system)
    family = job.get("family", DEFAULT_FAMILY)
    module = load_module(job["name"], lambda: inlined_source(ensure_code(kernel, system), files, family))
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
    with atomic_path(target) as tmp:
        tmp.write_text(json.dumps(marker))
    return done


def main(argv=None) -> int:
    args = sys.argv[1:] if argv is None else argv
    if not args:
        print("usage: python -m phaselab.engine.inlined_build JOB [JOB ...]", file=sys.stderr)
        return 2
    try:
        os.nice(10)
    except (OSError, AttributeError):
        pass
    for path in args:
        path = _claim(path)
        if path is None:
            continue
        try:
            with open(path, "rb") as fh:
                job = pickle.load(fh)  # written by this package into the private kernel cache
            build(job)
        except Exception:  # one failed build leaves that module on the generic loops
            pass
        finally:
            try:
                os.unlink(path)
            except OSError:
                pass
    return 0


if __name__ == "__main__":
    sys.exit(main())
