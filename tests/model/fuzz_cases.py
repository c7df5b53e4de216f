"""The generators and the per-case checks of the expression fuzz (used by
test_fuzz_expressions.py and test_fuzz_heavy.py).

Fuzzing the way user text enters phaselab: generated expressions through the parser,
Hamiltonian construction, the separability test and kernel source generation.

The generator favours the inputs that are expensive when a guard is missing: huge integers
and rationals, floats at the ends of the double range, power towers of numbers and
constants, high powers of long sums, and nested functions, mixed with ordinary terms. Every
case must end within 2 s of CPU time with a result or with phaselab's own error (a
:class:`~phaselab.errors.PhaselabError`); anything else is a failure. The bound is on CPU
time, measured around each case, so that a busy machine does not fail the test; hypothesis's
wall-clock deadline stays as a generous backstop.

Deep towers of functions (``exp(x*exp(y*...))`` up to 25 deep), sums raised to symbolic
powers and long products of functions are families of their own (``heavy_expressions``,
``long_product``): refused when the model is made or done within 5 s of CPU. ``compiles``
compiles the kernels of an accepted expression and evaluates them, including at the origin
where many are singular (inf or nan, never an exception).
"""

from __future__ import annotations

import contextlib
import faulthandler
import os
import signal
import sys
import threading
import time
from datetime import timedelta

from hypothesis import HealthCheck
from hypothesis import strategies as st

from phaselab import Hamiltonian
from phaselab.errors import ModelError, PhaselabError
from phaselab.model.parser import FUNCTIONS, MAX_LENGTH

COORDS, MOMENTA = ["x", "y"], ["px", "py"]
NAMES = COORDS + MOMENTA

# ------------------------------------------------------------------ the generator
small_int = st.integers(min_value=0, max_value=12).map(str)
big_int = st.one_of(
    st.integers(min_value=10**15, max_value=10**40).map(str),
    st.integers(min_value=250, max_value=320).map(lambda n: "9" * n),  # around the digit limit
    st.sampled_from(["10**299", "10**300", "2**996", "2**1000", "(10**10)**1000", "7**355"]),
)
floats = st.one_of(
    st.floats(min_value=-1e3, max_value=1e3, allow_nan=False, allow_infinity=False).map(repr),
    st.sampled_from(["2.9e260", "1e-300", "1e305", "1.7976931348623157e308", "5e-324", "1e22",
                     "9007199254740993.0", "0.1"]),
)
constants = st.sampled_from(["pi", "E"])
names = st.sampled_from(NAMES)
leaf = st.one_of(names, names, small_int, big_int, floats, constants)


def _wrap(text: str) -> str:
    return f"({text})"


def _tower(parts) -> str:
    return "**".join(parts)


power_tower = st.lists(st.sampled_from(["E", "pi", "2", "10", "1.5", "x", "px", "3", "(1/2)", "0.9"]),
                       min_size=2, max_size=6).map(_tower)
long_sum = st.lists(names | small_int, min_size=2, max_size=12).map(lambda ts: "+".join(ts))
high_power = st.tuples(long_sum, st.integers(min_value=2, max_value=2000)).map(
    lambda t: f"({t[0]})**{t[1]}")
big_product = st.tuples(big_int, st.integers(min_value=2, max_value=60)).map(
    lambda t: "*".join([_wrap(t[0])] * t[1]))
rational_sum = st.tuples(st.integers(min_value=1, max_value=200), st.integers(min_value=1, max_value=1000)).map(
    lambda t: "+".join(f"1/((10**10)**{t[1]}+{k})" for k in range(t[0])))
unary_fn = sorted(set(FUNCTIONS) - {"atan2"})


def _nest(children):
    call = st.tuples(st.sampled_from(unary_fn), children).map(lambda t: f"{t[0]}({t[1]})")
    atan2 = st.tuples(children, children).map(lambda t: f"atan2({t[0]}, {t[1]})")
    binary = st.tuples(children, st.sampled_from(["+", "-", "*", "/", "**"]), children).map(
        lambda t: f"{_wrap(t[0])}{t[1]}{_wrap(t[2])}")
    negate = children.map(lambda c: f"-{_wrap(c)}")
    return call | atan2 | binary | negate


nested = st.recursive(leaf | power_tower, _nest, max_leaves=16)


def _deep(parts) -> str:
    """``f1(a1*f2(a2*...f_k(x)))``: functions nested up to 25 deep, each argument scaled by a
    name or a number (the towers whose derivatives grow far beyond the input)."""
    fns, factors = parts
    text = "x"
    for fn, factor in zip(fns, factors):
        text = f"{fn}({factor}*{text})"
    return text


deep_tower = st.tuples(st.lists(st.sampled_from(unary_fn + ["exp"] * 8), min_size=2, max_size=25),
                       st.lists(names | constants | small_int, min_size=25, max_size=25)).map(_deep)
symbolic_power = st.one_of(
    # sums raised to sums, towers of them, and products of such powers
    st.lists(long_sum, min_size=2, max_size=8).map(lambda ts: "**".join(_wrap(t) for t in ts)),
    st.tuples(long_sum, nested).map(lambda t: f"({t[0]})**({t[1]})"),
    st.lists(st.tuples(long_sum, long_sum), min_size=1, max_size=6).map(
        lambda ps: "*".join(f"({a})**({b})" for a, b in ps)),
)
#: products of many distinct functions: a product of N factors has second derivatives of
#: about N**3 nodes, which sympy takes far longer to form than the product takes to write
long_product = st.tuples(st.integers(min_value=10, max_value=90), st.sampled_from(unary_fn),
                         names, names).map(
    lambda t: "*".join(f"{t[1]}({k}*{t[2]}+{t[3]})" for k in range(1, t[0])))
heavy = st.one_of(deep_tower, symbolic_power,
                  st.tuples(deep_tower, symbolic_power).map(lambda t: f"{_wrap(t[0])}+{_wrap(t[1])}"))
families = st.one_of(nested, power_tower, high_power, big_product, rational_sum,
                     st.tuples(nested, high_power).map(lambda t: f"{_wrap(t[0])}*{t[1]}"),
                     st.tuples(nested, power_tower).map(lambda t: f"{_wrap(t[0])}+{t[1]}"))
expressions = families.filter(lambda text: len(text) <= MAX_LENGTH)
heavy_expressions = heavy.filter(lambda text: len(text) <= MAX_LENGTH)


# ------------------------------------------------------------------ the property
#: CPU seconds one case may take
CASE_CPU_SECONDS = 2.0
#: CPU seconds a deep tower or symbolic power may take (refused or finished)
HEAVY_CPU_SECONDS = 5.0
#: memory one case may add (MiB) before the watchdog stops it, and past which the whole run
#: is ended with the case's text rather than left to the machine's out-of-memory killer
SOFT_MIB, HARD_MIB = 1500, 3000
#: CPU seconds after which the watchdog stops a case that is still running, and after which
#: it ends the run (a case stuck in one long C call cannot be interrupted)
STOP_CPU_SECONDS, HARD_CPU_SECONDS = 20.0, 120.0
#: wall-clock seconds after which a case that holds the interpreter ends the run
HARD_WALL_SECONDS = 180


def _rss_mib() -> float:
    with open("/proc/self/statm") as fh:
        return int(fh.read().split()[1]) * os.sysconf("SC_PAGE_SIZE") / 2**20


class _CaseTooBig(BaseException):
    """Raised in the main thread by the watchdog; a BaseException, so that no ``except
    Exception`` on the way (in sympy or in phaselab) can swallow it."""


@contextlib.contextmanager
def watchdog(text: str):
    """Stop a runaway case with a failure that names it, instead of letting it eat the machine.

    A thread samples this process's memory and CPU time; past the soft limits it signals the
    main thread (whose handler raises a failure as soon as Python code runs again), past the
    hard memory limit it prints the case and ends the process.
    """
    if threading.current_thread() is not threading.main_thread() or not os.path.exists("/proc/self/statm"):
        yield
        return
    done = threading.Event()
    base, start = _rss_mib(), time.process_time()
    reason: list[str] = []

    def on_signal(signum, frame):
        raise _CaseTooBig(f"{reason[0]} for {text[:200]!r}")

    def watch():
        signalled = -1.0
        while not done.wait(0.05):
            grown, spent = _rss_mib() - base, time.process_time() - start
            if grown > HARD_MIB or spent > HARD_CPU_SECONDS:
                sys.stderr.write(f"\nfuzz case used {grown:.0f} MiB more and {spent:.0f} s of CPU: "
                                 f"{text[:300]!r}\n")
                sys.stderr.flush()
                os._exit(70)
            if (grown > SOFT_MIB or spent > STOP_CPU_SECONDS) and spent - signalled > 1.0:
                if not reason:
                    reason.append(f"{grown:.0f} MiB more memory" if grown > SOFT_MIB else f"{spent:.0f} s of CPU")
                signalled = spent  # again every CPU second until the case stops
                os.kill(os.getpid(), signal.SIGUSR1)

    previous = signal.signal(signal.SIGUSR1, on_signal)
    thread = threading.Thread(target=watch, daemon=True)
    thread.start()
    # a case stuck in one long C call holds the interpreter: neither the thread nor the
    # signal handler can run, but faulthandler's own timer still ends the run with a traceback
    faulthandler.dump_traceback_later(HARD_WALL_SECONDS, exit=True)
    try:
        yield
    finally:
        faulthandler.cancel_dump_traceback_later()
        done.set()
        thread.join()
        signal.signal(signal.SIGUSR1, previous)


def check_case(text: str, seconds: float = CASE_CPU_SECONDS) -> None:
    from phaselab.codegen.kernels import kernel_code, kernel_source

    start = time.process_time()
    with watchdog(text):
        try:
            H = Hamiltonian(text, COORDS, MOMENTA)
            H.is_separable
            kernel_source(kernel_code(H))
        except PhaselabError:
            pass  # phaselab's own refusal, with a message: fine
    spent = time.process_time() - start
    assert spent < seconds, f"{spent:.2f} s of CPU for {text[:200]!r}"


COMMON = dict(deadline=timedelta(seconds=30), derandomize=True, database=None,
               suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much,
                                      HealthCheck.data_too_large])


# ------------------------------------------------------------------ every accepted expression compiles
#: states where the compiled kernels are evaluated: a generic one and the origin (where
#: negative powers and logarithms are singular: the values may be inf or nan, never an error)
STATES = ([0.3, -0.2, 0.1, 0.4], [0.0, 0.0, 0.0, 0.0])


def compiles(text: str) -> None:
    """An expression the model accepts compiles into kernels that evaluate without raising
    (values may be inf or nan at singular states); anything else is refused with phaselab's
    own error when the model is made (its kernels' derivatives are formed and measured
    then, model/derivatives.py)."""
    import numpy as np

    from phaselab.codegen import compile_kernel

    with watchdog(text):
        try:
            H = Hamiltonian(text, COORDS, MOMENTA)
        except PhaselabError:
            return
        try:
            kernel = compile_kernel(H)
        except ModelError as exc:
            # the one refusal left to kernel generation: a printed kernel the compiler still
            # cannot type (said in phaselab's words, never numba's error); sizes and
            # functions were refused when the model was made
            assert "cannot be compiled to numeric code" in str(exc), str(exc)
            return
        for z in STATES:
            for name in ("hamiltonian", "vector_field", "jacobian", "hess_pp", "hess_qq"):
                kernel.call(name, np.array(z), H.param_values())

