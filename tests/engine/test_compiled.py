"""The compiled-loop contract: declarations of the loop files, the two forms of the loops
(generic, inlined) giving the same numbers, the background build, and the warm-up."""

import ast
import builtins
import json
import os
import subprocess
import sys
import textwrap

import numpy as np
import pytest

import phaselab
from phaselab.engine import status as codes
from phaselab.engine.compiled import LOOPS_DIR, MODULE_NAMES, closure, loop_file

LOOP_FILES = sorted(p.stem for p in LOOPS_DIR.glob("*.py") if not p.stem.startswith("_"))


def _free_names(func: ast.FunctionDef) -> set:
    """Names a function reads that it does not bind itself (arguments, assignments, loop
    targets, comprehension variables)."""
    bound = {a.arg for a in func.args.args + func.args.kwonlyargs}
    loaded = set()
    for node in ast.walk(func):
        if isinstance(node, ast.Name):
            (bound if isinstance(node.ctx, (ast.Store, ast.Del)) else loaded).add(node.id)
    return loaded - bound


@pytest.mark.parametrize("name", LOOP_FILES)
def test_loop_file_uses_only_what_it_declares(name):
    """Every name a loop file reads is its own, of a file it requires (transitively), of
    the assembled module's header (constants, kernel access, np, math), or a builtin."""
    lf = loop_file(name)
    allowed = set(MODULE_NAMES) | set(dir(builtins))
    for dep in closure(lf.requires):
        allowed |= set(dep.defines)
    allowed |= set(lf.defines)
    tree = ast.parse((LOOPS_DIR / f"{name}.py").read_text())
    module_assigned = {t.id for n in tree.body if isinstance(n, ast.Assign) for t in n.targets
                       if isinstance(t, ast.Name)}
    assert module_assigned <= {"REQUIRES", "PROVIDES", "ORBITS"}, "constants belong in engine/status.py"
    for node in tree.body:
        if isinstance(node, ast.FunctionDef):
            stray = _free_names(node) - allowed
            assert not stray, f"{name}.py: {node.name} uses undeclared names {sorted(stray)}"
    # what it provides it defines, and what it requires exists
    assert set(lf.provides) <= set(lf.defines)
    for dep in lf.requires:
        assert dep in LOOP_FILES


def test_status_codes_are_defined_once():
    """The loop files hold no numbers for status codes: they come from engine/status.py."""
    for name in LOOP_FILES:
        text = (LOOPS_DIR / f"{name}.py").read_text()
        for const in ("OK", "LEFT_BOX", "NOT_FINITE", "NOT_CONVERGED", "TIME_LIMIT"):
            assert f"{const} = " not in text
    assert len(set(codes.STATUS)) == len(codes.STATUS)
    assert all(isinstance(w, str) and w for w in codes.STATUS.values())


CHILD = textwrap.dedent("""
    import json, os, sys
    import numpy as np
    import phaselab
    H = phaselab.Hamiltonian("(px**2 + py**2)/2 + (x**2 + 1.3*y**2)/2 + 0.4*x**2*y", ["x", "y"],
                             ["px", "py"])
    seeds = phaselab.shell_seeds(H, {"y": np.linspace(-0.2, 0.2, 5), "py": 0.0}, energy=0.1,
                                 plane={"x": 0.0}, solve_for="px")
    sec = phaselab.section(H, seeds, 40, plane={"x": 0.0}, dt=0.05)
    ind = phaselab.chaos_indicators(H, seeds.valid_states(), 50.0, dt=0.05)
    print(json.dumps({"points": sec.points.tolist(), "megno": ind.megno.tolist()}))
""")


def _run_child(env):
    res = subprocess.run([sys.executable, "-c", CHILD], env=env, capture_output=True, text=True,
                         timeout=900)
    assert res.returncode == 0, res.stderr
    return json.loads(res.stdout.strip().splitlines()[-1])


@pytest.mark.slow
def test_generic_and_inlined_loops_agree_to_the_last_bit():
    """Both forms do the same floating-point operations in the same order: identical results
    (the inlined module is compiled here in the child process)."""
    generic = _run_child(dict(os.environ, PHASELAB_LOOPS="generic"))
    inlined = _run_child(dict(os.environ, PHASELAB_LOOPS="inlined"))
    assert np.array_equal(np.array(generic["points"]), np.array(inlined["points"]), equal_nan=True)
    assert generic["megno"] == inlined["megno"]


@pytest.mark.slow
def test_background_build_switches_to_the_inlined_module(tmp_path):
    """In ``auto`` the first call answers with the generic loops and starts a background
    build; once its marker lists the signature, the next call uses the inlined module."""
    from phaselab.engine import inlined_build as background
    from phaselab.engine.compiled import loops, ready_signatures

    H = phaselab.Hamiltonian("p**2/2 + q**2/2 + 0.1*q**4 + 0.0123*q**3", ["q"], ["p"])
    env_before = os.environ.get("PHASELAB_LOOPS")
    os.environ["PHASELAB_LOOPS"] = "auto"
    try:
        first = phaselab.trajectory(H, [[0.5, 0.0]], 5.0, dt=0.01)
        cs = loops(H)
        name = cs.inlined_name("composition")      # a separable H steps by compositions
        for thread in background._worker:
            thread.join(timeout=900)
        assert "run_orbits" in ready_signatures(name)
        second = phaselab.trajectory(H, [[0.5, 0.0]], 5.0, dt=0.01)
        assert "composition" in cs._inlined  # the inlined module answered
    finally:
        if env_before is None:
            os.environ.pop("PHASELAB_LOOPS", None)
        else:
            os.environ["PHASELAB_LOOPS"] = env_before
    np.testing.assert_array_equal(first.states, second.states)


_TWIN = r'''
import json, sys, time
import phaselab
from phaselab.codegen import compile_kernel
from phaselab.codegen.progress import compiler_passes
from phaselab.engine.compiled import loops
H = phaselab.Hamiltonian("p**2/2 + q**2/2 + 0.1*q**4 + 0.0321*q**3", ["q"], ["p"])
compile_kernel(H)
loops(H)
while time.time() < float(sys.argv[1]):
    time.sleep(0.01)
before = compiler_passes()
phaselab.trajectory(H, [[0.5, 0.0], [0.2, 0.1]], 1.0, dt=0.01)
print(json.dumps({"passes": compiler_passes() - before}))
'''


@pytest.mark.slow
def test_two_processes_starting_at_once_compile_a_loop_once(tmp_path):
    """Two processes (pytest-xdist workers, cluster workers) sharing an empty cache ask for the
    same loop at the same moment: the file lock lets one compile it, the other waits and
    loads it (numba runs no compiler pass in the second)."""
    env = dict(os.environ, PHASELAB_CACHE_DIR=str(tmp_path), PHASELAB_LOOPS="generic", PHASELAB_QUIET="1",
               PHASELAB_TEST_WARM="0")
    import time

    go = str(time.time() + 30.0)          # both have imported phaselab and built the kernel by then
    procs = [subprocess.Popen([sys.executable, "-c", _TWIN, go], env=env, stdout=subprocess.PIPE, text=True)
             for _ in range(2)]
    passes = sorted(json.loads(p.communicate(timeout=900)[0].strip().splitlines()[-1])["passes"] for p in procs)
    assert passes[0] == 0 and passes[1] > 0
