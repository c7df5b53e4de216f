"""A worker process of :func:`phaselab.engine.warm.warm`: runs warm-up paths named on its input.

Started by :mod:`phaselab.engine.warm` as ``python -m phaselab.engine.warm_worker`` (a fresh
interpreter: nothing of the caller's process, script or threads is copied or run again). It
reads one path name per line from standard input and answers each with one line of JSON on
standard output, ``{"name": ..., "seconds": ..., "passes": ...}``, or ``{"name": ...,
"error": ...}`` when the path raised (the caller then runs that path itself, so the error
reaches the user in full). Whatever a path prints goes to standard error, with the compile
news. An empty line or the end of the input ends the worker.
"""

from __future__ import annotations

import json
import sys

from phaselab.engine.warm import run_path


def serve(requests, replies) -> None:
    """Answer every path name read from ``requests`` on ``replies`` (see the module docstring)."""
    for line in requests:
        name = line.strip()
        if not name:
            return
        real_stdout, sys.stdout = sys.stdout, sys.stderr
        try:
            seconds, passes = run_path(name)
            answer = {"name": name, "seconds": seconds, "passes": passes}
        except Exception as exc:  # reported, and run again by the caller, which raises it
            answer = {"name": name, "error": f"{type(exc).__name__}: {exc}"}
        finally:
            sys.stdout = real_stdout
        replies.write(json.dumps(answer) + "\n")
        replies.flush()


if __name__ == "__main__":
    serve(sys.stdin, sys.stdout)
