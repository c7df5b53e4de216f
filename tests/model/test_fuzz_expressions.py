"""Fuzzing the way user text enters phaselab: generated expressions through the parser,
Hamiltonian construction (which forms and measures the kernels' derivatives), the
separability test and kernel source generation; the named cases of the security issue; every
accepted expression compiles and evaluates. The generators and the per-case checks (CPU and
memory watchdog) are in fuzz_cases.py; the heavy families are in test_fuzz_heavy.py.

The quick run tries a few hundred cases; the 10,000 expressions are marked slow.
"""

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from fuzz_cases import COMMON, check_case, compiles, expressions, heavy_expressions


@pytest.mark.filterwarnings("ignore:Generating overly large repr")
@settings(max_examples=300, **COMMON)
@given(expressions)
def test_generated_expressions_end_quickly_with_a_result_or_our_error(text):
    check_case(text)


@pytest.mark.slow
@pytest.mark.filterwarnings("ignore:Generating overly large repr")
@settings(max_examples=10_000, **COMMON)
@given(expressions)
def test_ten_thousand_generated_expressions(text):
    check_case(text)


@pytest.mark.parametrize("text", [
    # a product of 60 functions: 13 s for sympy to form its second derivatives; refused on
    # the estimate of their size (issue 24)
    "*".join(f"cos({k}*x+y)" for k in range(1, 60)),
    # a tower of reciprocal trigonometric functions: sympy's printer rewrote csc, sec and cot
    # through automatic evaluation (70 s of CPU); printed directly now (found by the fuzz)
    "csc(8*exp(E*exp(pi*csc(E*csc(pi*cot(pi*asinh(E*cot(E*x))))))))",
    "E**E**E**E**E",
    "(x+y+px+py+1)**1000",
    "*".join(["(10**10)**1000"] * 333),
    "+".join(f"1/((10**10)**1000+{k})" for k in range(200)),
    "1e-300*tan(2.9e260)*x",
    "exp(sin(exp(cos(exp(sin(exp(x)))))))",
    "(x+y)**1000*(px+py)**1000",
    # a number to a power of (integer - symbol): sympy's expand splits off the integer power
    # of a positive base and multiplies it out (found by the 10,000-case run)
    "(E+2854613895751621148672)**(1000000000000000-px)*(7+x)**2",
    # an integer to such a power: expand would compute 7**(10**15) exactly
    "-(7**(1000000000000000-px))*(x+py)",
    # functions twenty deep and a tower of symbolic powers (issue 24)
    "exp(x*exp(y*exp(px*exp(py*exp(x*exp(y*exp(px*exp(py*exp(x*exp(y*exp(px*exp(py*exp(x*exp(y*"
    "exp(px*exp(py*exp(x*exp(y*exp(px*exp(py*x))))))))))))))))))))",
    "(x+y+px+py+1)**(x+2*y+px+py)**(x+y+3*px+py)**(x+y+px+4*py)**(5*x+y+px+py)**(x+y)",
])
def test_the_families_of_the_issue(text):
    """The named inputs of the security issue, through the same property."""
    check_case(text)


@pytest.mark.filterwarnings("ignore:Generating overly large repr")
@settings(max_examples=12, **COMMON)
@given(st.one_of(expressions, heavy_expressions))
def test_accepted_expressions_compile(text):
    compiles(text)


@pytest.mark.parametrize("text", [
    "px**2/2 + x**(-12)",                       # 0.0**-12 raised ZeroDivisionError in the kernel
    "px**2/2 + py**2/2 - 1/sqrt((x-y)**2)",     # a collision at the origin
    "log(x)*py + atanh(y)",                     # -inf and inf at the origin
])
def test_singular_kernels_compile_and_evaluate(text):
    compiles(text)
