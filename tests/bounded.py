"""Run a piece of test code in a child Python with hard limits on CPU time and memory.

The hostile inputs of the hardening tests are exactly the ones that hang or eat memory when
a guard is missing; running them in a child process keeps the test run itself safe (the
child is stopped by the kernel at the limit) and lets the test measure what the call cost.
"""

from __future__ import annotations

import json
import os
import resource
import subprocess
import sys
import textwrap

#: CPU seconds the child may use in all (interpreter start and imports included)
CPU_LIMIT = 30
#: address space of the child, bytes (imports of sympy and numpy take a few hundred MiB)
MEMORY_LIMIT = 2 * 1024**3

_HARNESS = """
import json, resource, sys, time, traceback
# the limits are set here, not in a preexec hook: a hook forces a plain fork, and the child
# would then report the test runner's own peak memory as its own
resource.setrlimit(resource.RLIMIT_CPU, ({cpu}, {cpu}))
resource.setrlimit(resource.RLIMIT_AS, ({memory}, {memory}))

def _report(**fields):
    sys.stdout.write("\\n@@RESULT@@" + json.dumps(fields) + "\\n")
    sys.stdout.flush()

def _peak_mib():
    # VmHWM is the peak of this program's own memory (it starts afresh at exec); ru_maxrss
    # also counts what the parent had when it forked the child
    try:
        with open("/proc/self/status") as fh:
            for line in fh:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1]) / 1024
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024

def bounded(call):
    before = resource.getrusage(resource.RUSAGE_SELF)
    start = time.process_time()
    error = message = None
    value = None
    try:
        value = call()
    except BaseException as exc:
        error, message = type(exc).__name__, str(exc)
        error_mro = [c.__name__ for c in type(exc).__mro__]
    else:
        error_mro = []
    cpu = time.process_time() - start
    after = resource.getrusage(resource.RUSAGE_SELF)
    _report(error=error, error_mro=error_mro, message=message, cpu=cpu,
            rss_mib=_peak_mib(), value=None if value is None else repr(value)[:2000])
"""


class Outcome:
    """What the child reported: ``error`` (exception class name or None), ``kinds`` (names of
    the exception's classes), ``message``, ``cpu`` (seconds spent in the call), ``rss_mib``
    (peak resident memory of the child, MiB), ``value`` (repr of the result), and the raw
    ``returncode``, ``stdout`` and ``stderr``."""

    def __init__(self, proc):
        self.returncode = proc.returncode
        self.stdout = proc.stdout
        self.stderr = proc.stderr
        marker = "@@RESULT@@"
        found = [line for line in proc.stdout.splitlines() if line.startswith(marker)]
        self.finished = bool(found)
        data = json.loads(found[-1][len(marker):]) if found else {}
        self.error = data.get("error")
        self.kinds = data.get("error_mro", [])
        self.message = data.get("message") or ""
        self.cpu = data.get("cpu", float("inf"))
        self.rss_mib = data.get("rss_mib", float("inf"))
        self.value = data.get("value")

    def __repr__(self):
        tail = self.stderr[-800:]
        return (f"Outcome(finished={self.finished}, error={self.error}, message={self.message[:300]!r}, "
                f"cpu={self.cpu}, rss_mib={self.rss_mib}, returncode={self.returncode}, stderr={tail!r})")


def run_bounded(code: str, cpu: int = CPU_LIMIT, memory: int = MEMORY_LIMIT) -> Outcome:
    """Run ``code`` (which calls ``bounded(lambda: ...)`` once) in a child interpreter.

    The child imports phaselab from the same place as this process (``PYTHONPATH`` is
    passed on), may use ``cpu`` CPU seconds and ``memory`` bytes of address space, and is
    killed by the kernel past either. Wall time is capped at four times the CPU limit.
    """
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join(p for p in sys.path if p)
    source = _HARNESS.replace("{cpu}", str(int(cpu))).replace("{memory}", str(int(memory))) + "\n" \
        + textwrap.dedent(code)
    proc = subprocess.run([sys.executable, "-c", source], capture_output=True, text=True, env=env,
                          timeout=4 * cpu)
    return Outcome(proc)
