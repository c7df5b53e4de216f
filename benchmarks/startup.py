"""Start-up costs: importing phaselab, and the first compiled kernel call cold and warm.

Run:  python benchmarks/startup.py [--repeat N]

1. ``import phaselab`` in a fresh Python process (target: under 1 s), and which heavy
   modules that import pulled in (the widget layer must not be among them).
2. Time to the first ``vector_field`` result for the Henon-Heiles system (and, for a
   larger case, the 16-site FPUT chain) in a fresh
   process with an empty kernel cache (cold: sympy derivatives, source generation, numba
   compilation), and again in a second process sharing that cache (warm: the generated file
   and numba's machine code are loaded from disk).

Each figure is the median over ``--repeat`` fresh processes; the cold and warm runs are
measured side by side in the same run of this script.
"""

from __future__ import annotations

import argparse
import json
import statistics
import subprocess
import sys
import tempfile
import time

IMPORT_CHILD = """
import sys, time, json
t0 = time.perf_counter()
import phaselab
dt = time.perf_counter() - t0
heavy = [m for m in ("numba", "bokeh", "ipywidgets", "matplotlib", "scipy", "sympy", "dask")
         if m in sys.modules]
print(json.dumps({"seconds": dt, "heavy": heavy}))
"""

BASELINE_CHILD = """
import time, json
t0 = time.perf_counter()
import numpy, sympy
print(json.dumps({"seconds": time.perf_counter() - t0}))
"""

KERNEL_CHILD = """
import time
t0 = time.perf_counter()
import json, sys
import numpy as np
from phaselab import models
from phaselab.codegen import compile_system
H = getattr(models, sys.argv[1])()
c = compile_system(H)
t1 = time.perf_counter()
n = len(H.state_symbols)
out = np.empty(n)
c.vector_field(np.full(n, 0.1), H.param_values(), out)
t2 = time.perf_counter()
st = c.vector_field.stats
print(json.dumps({"total": t2 - t0, "build": t1 - t0, "first_call": t2 - t1,
                  "cache_hits": sum(st.cache_hits.values()), "cache_misses": sum(st.cache_misses.values())}))
"""


def run_child(code: str, env: dict | None = None, *argv: str) -> tuple[dict, float]:
    import os

    full_env = dict(os.environ, **(env or {}))
    t0 = time.perf_counter()
    res = subprocess.run([sys.executable, "-c", code, *argv], capture_output=True, text=True, env=full_env,
                         timeout=600)
    wall = time.perf_counter() - t0
    if res.returncode != 0:
        raise SystemExit(f"child failed:\n{res.stderr}")
    return json.loads(res.stdout.strip().splitlines()[-1]), wall


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=3, help="fresh processes per figure (default 3)")
    args = parser.parse_args()

    imports = [run_child(IMPORT_CHILD) for _ in range(args.repeat)]
    t_import = statistics.median(r["seconds"] for r, _ in imports)
    w_import = statistics.median(w for _, w in imports)
    heavy = imports[-1][0]["heavy"]
    base = statistics.median(run_child(BASELINE_CHILD)[0]["seconds"] for _ in range(args.repeat))
    print(f"import phaselab: {t_import:.3f} s inside the process, {w_import:.3f} s process wall time "
          f"(target < 1 s: {'met' if t_import < 1.0 else 'NOT met'})")
    print(f"  heavy modules loaded by the import: {', '.join(heavy) or 'none'}")
    print(f"  baseline 'import numpy, sympy' alone: {base:.3f} s; phaselab / baseline = {t_import / base:.2f}")
    widget = [m for m in heavy if m in ("bokeh", "ipywidgets")]
    print(f"  widget layer imported: {'YES: ' + ', '.join(widget) if widget else 'no'}")

    for model in ("henon_heiles", "fput_chain"):
        cold, warm = [], []
        for _ in range(args.repeat):
            with tempfile.TemporaryDirectory() as cache:
                env = {"PHASELAB_CACHE_DIR": cache}
                cold.append(run_child(KERNEL_CHILD, env, model))
                warm.append(run_child(KERNEL_CHILD, env, model))

        def med(rows, key):
            return statistics.median(r[key] for r, _ in rows)

        print(f"{model}: time from process start to the first vector_field result (median of "
              f"{args.repeat} fresh processes):")
        for label, rows in (("cold (empty cache)", cold), ("warm (second process)", warm)):
            print(f"  {label:22s} total {med(rows, 'total'):6.3f} s = build {med(rows, 'build'):6.3f} s "
                  f"+ first call {med(rows, 'first_call'):6.3f} s; process wall "
                  f"{statistics.median(w for _, w in rows):6.3f} s; numba cache hits "
                  f"{rows[-1][0]['cache_hits']}, misses {rows[-1][0]['cache_misses']}")
        print(f"  cold / warm ratio: {med(cold, 'total') / med(warm, 'total'):.1f}x")


if __name__ == "__main__":
    main()
