"""The safe expression parser: hostile input refused with a message naming the piece,
valid input read into the same sympy expression that sympy builds directly."""

import math

import mpmath
import pytest
import sympy as sp
from hypothesis import given, settings
from hypothesis import strategies as st

from phaselab.errors import ExpressionError
from phaselab.model.parser import MAX_DEPTH, MAX_LENGTH, parse_expression

x, y, q, p = sp.symbols("x y q p", real=True)
SYMS = {"x": x, "y": y, "q": q, "p": p}


def refused(text, **kw) -> str:
    with pytest.raises(ExpressionError) as info:
        parse_expression(text, **kw)
    return str(info.value)


# ------------------------------------------------------------------ hostile strings
@pytest.mark.parametrize("text, piece", [
    ("().__class__", "__class__"),
    ("().__class__.__bases__[0].__subclasses__()", "__subclasses__"),
    ("x.real", "x.real"),
    ("__import__('os')", "__import__"),
    ("__import__('os').system('true')", "Attribute"),
    ("open('/etc/passwd')", "open"),
    ("eval('1')", "eval"),
    ("x[0]", "Subscript"),
    ("lambda: 1", "Lambda"),
    ("(lambda x: x)(2)", "Lambda"),
    ("'abc'", "'abc'"),
    ("b'abc'", "b'abc'"),
    ("[z for z in range(9)]", "ListComp"),
    ("{z for z in y}", "SetComp"),
    ("(z for z in y)", "GeneratorExp"),
    ("f'{x}'", "JoinedStr"),
    ("sin(x=1)", "keyword"),
    ("sin(*x)", "starred"),
    ("foo(x)", "foo"),
    ("x if y else q", "IfExp"),
    ("x < y", "Compare"),
    ("x and y", "BoolOp"),
    ("(x := 3)", "NamedExpr"),
    ("x @ y", "MatMult"),
    ("x % 2", "Mod"),
    ("x // 2", "FloorDiv"),
    ("~x", "Invert"),
    ("not x", "Not"),
    ("(1, 2)", "Tuple"),
    ("{}", "Dict"),
    ("True", "True"),
    ("None", "None"),
    ("1j", "1j"),
    ("_x + 1", "_x"),
    ("sin", "sin"),
])
def test_hostile_string_refused_naming_the_piece(text, piece):
    assert piece in refused(text)


def test_statements_are_not_expressions():
    assert "cannot parse" in refused("import os")
    assert "cannot parse" in refused("x = 1")
    assert "cannot parse" in refused("x; y")


def test_very_long_input_refused():
    msg = refused("x+" * (MAX_LENGTH // 2) + "x")
    assert "characters long" in msg and str(MAX_LENGTH) in msg


def test_deep_nesting_refused():
    assert "nested" in refused("(" * 200 + "x" + ")" * 200)
    assert "nested" in refused("sin(" * 200 + "x" + ")" * 200)
    assert "nested" in refused("-" * 200 + "x")
    assert "nested" in refused("-" * 3000 + "x")
    assert "nested" in refused("2**" * 200 + "2")


@pytest.mark.parametrize("text", ["9**9**9", "2**10000", "x**(10**1000)", "(10**999)**(10**999)",
                                  "x**1e50", "x**-5000", "(3**900)**30"])
def test_huge_exponents_refused(text):
    assert "exponent too large" in refused(text)


@pytest.mark.parametrize("text, what", [("1/0", "undefined"), ("x/0", "undefined"), ("log(0)", "undefined"),
                                        ("1e400", "non-finite"), ("sqrt(-1)", "complex"),
                                        ("(-8)**(1/3)", "complex"), ("acosh(0)", "complex")])
def test_undefined_and_complex_values_refused(text, what):
    assert what in refused(text)


def test_wrong_argument_count_named():
    assert "sin" in refused("sin(x, y)")
    assert "atan2" in refused("atan2(x)")


def test_unknown_symbols_listed():
    msg = refused("x + zeta + omega", symbols=SYMS, allowed={"x"})
    assert "omega" in msg and "zeta" in msg


def test_empty_and_non_string_input():
    assert "empty" in refused("   ")
    assert "string" in refused(3.0)


# ------------------------------------------------------------------ valid expressions
# reference: the same expression built directly with sympy's own constructors
@pytest.mark.parametrize("text, expected", [
    ("p**2/2 - cos(q)", p**2 / 2 - sp.cos(q)),
    ("(x**2 + y**2)/2 + x**2*y - y**3/3", (x**2 + y**2) / 2 + x**2 * y - y**3 / 3),
    ("-x", -x),
    ("+x", x),
    ("2**-1", sp.Rational(1, 2)),
    ("2**3**2", sp.Integer(512)),
    ("x**(1/3)", x**sp.Rational(1, 3)),
    ("atan2(y, x) + abs(q)", sp.atan2(y, x) + sp.Abs(q)),
    ("exp(-x)*sinh(y)/cosh(y) + tanh(p)", sp.exp(-x) * sp.sinh(y) / sp.cosh(y) + sp.tanh(p)),
    ("sec(x) + csc(y) + cot(q)", sp.sec(x) + sp.csc(y) + sp.cot(q)),
    ("sqrt(x**2 + 1) + log(2)", sp.sqrt(x**2 + 1) + sp.log(2)),
    ("pi*x + E", sp.pi * x + sp.E),
    ("1.5e3*x", 1500 * x),
    ("a - b + c - d", sp.Symbol("a", real=True) - sp.Symbol("b", real=True)
     + sp.Symbol("c", real=True) - sp.Symbol("d", real=True)),
])
def test_valid_expressions_match_sympy(text, expected):
    got = parse_expression(text, symbols=SYMS)
    assert sp.simplify(got - expected) == 0


def test_float_literal_kept_at_full_precision():
    got = parse_expression("0.1*x", symbols=SYMS)
    assert float(got.coeff(x)) == 0.1


def test_long_sum_is_not_deep():
    # 300 terms is far past MAX_DEPTH levels of a left-leaning tree yet is one flat sum
    names = [f"c{i}" for i in range(300)]
    got = parse_expression("+".join(names))
    assert len(got.args) == 300 > MAX_DEPTH


def test_given_symbols_are_shared():
    got = parse_expression("x*y", symbols=SYMS)
    assert got.free_symbols == {x, y}


def test_new_names_are_real_symbols():
    got = parse_expression("zz")
    assert got.is_Symbol and got.is_real


# ------------------------------------------------------------------ property test
LEAVES = st.sampled_from([("x", x), ("y", y), ("2", sp.Integer(2)), ("3", sp.Integer(3)),
                          ("0.5", sp.Float(0.5)), ("pi", sp.pi)])
UNARY = {"sin": sp.sin, "cos": sp.cos, "exp": sp.exp, "atan": sp.atan, "-": lambda a: -a}
BINARY = {"+": lambda a, b: a + b, "-": lambda a, b: a - b, "*": lambda a, b: a * b}


def _extend(children):
    unary = st.tuples(st.sampled_from(sorted(UNARY)), children).map(
        lambda t: (f"-({t[1][0]})", -t[1][1]) if t[0] == "-"
        else (f"{t[0]}({t[1][0]})", UNARY[t[0]](t[1][1])))
    binary = st.tuples(st.sampled_from(sorted(BINARY)), children, children).map(
        lambda t: (f"({t[1][0]}) {t[0]} ({t[2][0]})", BINARY[t[0]](t[1][1], t[2][1])))
    return unary | binary


@settings(max_examples=60, deadline=None)
@given(st.recursive(LEAVES, _extend, max_leaves=12))
def test_random_expression_trees_read_as_sympy_builds_them(pair):
    text, expected = pair
    try:
        got = parse_expression(text, symbols={"x": x, "y": y})
    except ExpressionError as exc:
        # the only way these leaves and operations (at most 12 leaves of size <= pi) leave
        # the range of doubles is an exp of an exp (exp(exp(exp(2))) is about 10**702)
        assert "too large" in str(exc) and "exp(exp(" in text.replace(" ", ""), (text, exc)
        return
    # reference: sympy's own evaluation of the directly built expression at a point
    point = {x: sp.Float("0.37"), y: sp.Float("-1.21")}
    a, b = complex(got.evalf(subs=point)), complex(expected.evalf(subs=point))
    assert math.isclose(a.real, b.real, rel_tol=1e-12, abs_tol=1e-12)


# ------------------------------------------------------------------ size limits
from bounded import run_bounded  # noqa: E402  (a helper module beside the tests)

# short inputs whose numbers grow without bound when nothing stops them (each is well under
# MAX_LENGTH characters)
EXPENSIVE = {
    "constant power tower": "E**E**E**E**E",
    "product of big powers": "*".join(["(10**10)**1000"] * 333),
    "sum of rationals with 10^4-digit denominators":
        "+".join(f"1/((10**10)**1000+{k})" for k in range(200)),
    "10,001-digit integer": "(10**10)**1000",
    "tower of exponentials": "exp(exp(exp(exp(2))))",
}


@pytest.mark.parametrize("what", sorted(EXPENSIVE))
def test_expensive_numbers_are_refused_within_bounds(what):
    """Each input must be refused with an ExpressionError naming the problem, within 2 s of
    CPU and a few hundred MiB (the issue's bound), in a child process with hard limits."""
    text = EXPENSIVE[what]
    assert len(text) <= MAX_LENGTH
    out = run_bounded(f"""
        from phaselab.model.parser import parse_expression
        bounded(lambda: parse_expression({text!r}))
    """)
    assert out.finished, out
    assert out.error == "ExpressionError", out
    assert "too large" in out.message, out
    assert out.cpu < 2.0 and out.rss_mib < 400, out


def test_power_tower_as_a_number_is_refused_at_the_level_that_overflows():
    # E**E**E = exp(exp(e)) is about 3.8e6, so E**E**E**E = exp(3.8e6) is about 10**(1.65e6):
    # the first level beyond the limits (values from mpmath, reference library)
    assert float(mpmath.e ** mpmath.e ** mpmath.e) == pytest.approx(3814279.1, rel=1e-6)
    msg = refused("E**E**E**E**E")
    assert "E**E**E**E" in msg and "exponent too large" in msg
    assert parse_expression("E**E**E").is_number


@pytest.mark.parametrize("text", ["10**76", "x/10**76", "2**250", "10**74*x*10*10", "1/(10**40+1) + 1/(10**40+3)",
                                  "2*(x + 10**74)*10", "exp(173)", "pi**151", "tan(pi/2)", "1e76", "2.9e260",
                                  "(x**1000)**2", "(x**999*y)**3"])
def test_numbers_beyond_the_limits_are_refused(text):
    # the limits: exact numbers of at most 75 digits, constants below 1e75, exponents of at
    # most 1000 (e**173 is about 1.4e75 and pi**151 about 1.2e75, mpmath)
    msg = refused(text)
    assert "too large" in msg


@pytest.mark.parametrize("text", ["10**74", "x/10**74", "2**248", "x**1000", "x**-1000", "(x**10)**100",
                                  "exp(172)", "1e74*x", "sqrt(2)**248", "(10**10)**7"])
def test_numbers_within_the_limits_are_accepted(text):
    got = parse_expression(text, symbols=SYMS)
    # every exact number, and its fourth power (what differentiating twice can form), is a
    # finite double
    for number in got.atoms(sp.Rational):
        assert math.isfinite(float(number.p) ** 4) and math.isfinite(float(number.q) ** 4)


def test_large_float_literal_stays_a_float():
    """2.9e60 is read as the float it is, not as a 61-digit integer; the value of
    1e-300*tan(2.9e60) agrees with mpmath evaluating tan at the same binary64 number with
    60 digits (reference library)."""
    got = parse_expression("1e-300*tan(2.9e60)")
    assert not any(abs(n) > 2**53 for n in got.atoms(sp.Integer))
    with mpmath.workdps(60):
        reference = mpmath.mpf(1e-300) * mpmath.tan(mpmath.mpf(2.9e60))
    assert float(got) == pytest.approx(float(reference), rel=1e-12)
    assert parse_expression("2.0*x", symbols=SYMS) == 2 * x  # small whole floats stay exact
    assert "2.9e260" in refused("1e-300*tan(2.9e260)")


@pytest.mark.parametrize("text", ["atan2(0, acos(2))", "atan2(0, (-7.0)**(-35.5))", "exp(acos(2))",
                                  "x*log(-1)"])
def test_complex_constant_parts_are_refused(text):
    # acos(2) = i*acosh(2) and (-7)**-35.5 = 7**-35.5 * exp(-35.5 i pi) are not real
    # (mpmath, reference library); found by the fuzz in tests/model/test_fuzz_expressions.py
    assert not mpmath.isinf(mpmath.acos(2).imag) and mpmath.acos(2).imag != 0
    assert "complex" in refused(text, symbols=SYMS)
