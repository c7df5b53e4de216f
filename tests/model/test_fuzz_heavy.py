"""The heavy families of the expression fuzz: functions nested up to 25 deep, sums raised to
symbolic powers and long products of functions, refused when the model is made or done
within 5 s of CPU; and 80 accepted expressions compiled and evaluated. The generators and
the per-case checks are in fuzz_cases.py.
"""

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from fuzz_cases import (COMMON, HEAVY_CPU_SECONDS, MAX_LENGTH, check_case, compiles, expressions,
                        heavy_expressions, long_product)


@pytest.mark.filterwarnings("ignore:Generating overly large repr")
@settings(max_examples=25, **COMMON)
@given(heavy_expressions)
def test_deep_towers_and_symbolic_powers_are_refused_or_quick(text):
    """Functions nested up to 25 deep and sums raised to symbolic powers: refused when the
    model is made or done (separability, printed kernels) within 5 s of CPU."""
    check_case(text, HEAVY_CPU_SECONDS)


@pytest.mark.slow
@pytest.mark.filterwarnings("ignore:Generating overly large repr")
@settings(max_examples=250, **COMMON)
@given(heavy_expressions)
def test_many_deep_towers_and_symbolic_powers(text):
    check_case(text, HEAVY_CPU_SECONDS)


@pytest.mark.slow
@pytest.mark.filterwarnings("ignore:Generating overly large repr")
@settings(max_examples=40, **COMMON)
@given(long_product.filter(lambda text: len(text) <= MAX_LENGTH))
def test_long_products_of_functions_are_refused_or_quick(text):
    """Products of 10 to 90 functions: refused on the estimate of their derivatives' size,
    or formed, measured and refused, or accepted, within 5 s of CPU."""
    check_case(text, HEAVY_CPU_SECONDS)


@pytest.mark.slow
@pytest.mark.filterwarnings("ignore:Generating overly large repr")
@settings(max_examples=80, **COMMON)      # each example compiles a kernel (about a second)
@given(st.one_of(expressions, heavy_expressions))
def test_many_accepted_expressions_compile(text):
    compiles(text)

