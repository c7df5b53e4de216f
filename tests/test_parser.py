"""The safe expression parser: hostile input refused with a message naming the piece,
valid input read into the same sympy expression that sympy builds directly."""

import math

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
                                  "x**1e300", "x**-5000", "(3**900)**30"])
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
    got = parse_expression(text, symbols={"x": x, "y": y})
    # reference: sympy's own evaluation of the directly built expression at a point
    point = {x: sp.Float("0.37"), y: sp.Float("-1.21")}
    a, b = complex(got.evalf(subs=point)), complex(expected.evalf(subs=point))
    assert math.isclose(a.real, b.real, rel_tol=1e-12, abs_tol=1e-12)
