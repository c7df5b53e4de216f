"""The kernels' derivatives are formed and checked when a model is made
(phaselab/model/derivatives.py), and the code generator prints exactly those."""

import time

import pytest
import sympy as sp

import phaselab
from phaselab import Hamiltonian, SymplecticMap
from phaselab.codegen.kernels import kernel_code, kernel_source
from phaselab.errors import ModelError
from phaselab.model.limits import derivative_size_bound, tree_size


def test_derivatives_past_the_budget_are_refused_when_the_model_is_made():
    """A Hamiltonian whose second derivatives hold more than the budget's nodes: refused by
    the constructor, with the message saying which derivatives are too large."""
    text = "px**2/2 + py**2/2 + " + "*".join(f"cos({k}*x + y)" for k in range(1, 25))
    with pytest.raises(ModelError, match="second derivatives of the Hamiltonian (would )?hold "):
        Hamiltonian(text, ["x", "y"], ["px", "py"])


def test_a_product_far_past_the_budget_is_refused_before_its_derivatives_are_formed():
    """A product of 60 cosines (714 characters): forming its second derivatives takes sympy
    about 13 s; it is refused on the size of its first derivatives or on the estimate of its
    second (model/limits.py derivative_size_bound), without forming them."""
    text = "px**2/2 + py**2/2 + " + "*".join(f"cos({k}*x + y)" for k in range(1, 60))
    start = time.process_time()
    with pytest.raises(ModelError, match="(estimated before forming them|first derivatives)"):
        Hamiltonian(text, ["x", "y"], ["px", "py"])
    assert time.process_time() - start < 5.0


@pytest.mark.parametrize("expr", ["cos(3*x + y)*exp(x*y)*(x + y + 1)**7", "asin(x*y/(1 + x**2))*sqrt(1 + x**2 + y**4)",
                                  "exp(x*exp(y*exp(x*exp(y*x))))", "(x + y + 1)**(x + 2*y)"])
def test_the_size_estimate_is_not_below_the_formed_derivative(expr):
    """The estimate counts what the product, power and chain rules write (common practice of
    symbolic differentiation); sympy's formed derivative is no larger."""
    x, y = sp.symbols("x y", real=True)
    e = sp.sympify(expr, locals={"x": x, "y": y})
    for first in (x, y):
        d = sp.diff(e, first)
        assert tree_size(d) <= derivative_size_bound(e, first, limit=10**7)
        for second in (x, y):
            assert tree_size(sp.diff(d, second)) <= derivative_size_bound(d, second, limit=10**7)


def test_a_function_without_numeric_code_is_refused_when_the_model_is_made():
    q, p = sp.symbols("q p", real=True)
    with pytest.raises(ModelError, match="gamma"):
        Hamiltonian(p**2 / 2 + sp.gamma(1 + q**2), [q], [p])


def test_a_map_past_the_budget_is_refused_when_it_is_made():
    """A kick that is a product of 300 sines: the map's Jacobian is past the budget."""
    q, p = sp.symbols("q p", real=True)
    kick = sp.Mul(*[sp.sin(k * q + 1) for k in range(1, 300)])
    with pytest.raises(ModelError, match="too large"):
        SymplecticMap([(p, p + kick), (q, q + p)], [q], [p])


def test_kernel_generation_does_not_differentiate_again(monkeypatch):
    """kernel_code prints the derivatives formed by the constructor: with sympy's diff
    disabled afterwards, the printed kernels are the same text."""
    H = Hamiltonian("(px**2 + py**2)/2 + (x**2 + y**2)/2 + a*x**2*y - y**3/3", ["x", "y"], ["px", "py"],
                    params={"a": 1.0})
    before = kernel_source(kernel_code(H))

    def refuse(*args, **kwargs):
        raise AssertionError("differentiated again")

    monkeypatch.setattr(sp, "diff", refuse)
    monkeypatch.setattr(sp.Expr, "diff", refuse)
    assert kernel_source(kernel_code(H)) == before


def test_the_jacobian_kernel_is_the_hessian_of_h():
    """The formed Jacobian of the vector field equals sympy's hessian of H, up to the symplectic
    signs: d(qdot)/dp = d2H/dp2 and d(pdot)/dq = -d2H/dq2 (Hamilton's equations)."""
    H = phaselab.models.henon_heiles()
    d = H.kernel_derivatives
    ren = d.renamed
    s = [ren[x] for x in H.state_symbols]
    Hr = H.expr.xreplace(ren)
    hess = sp.hessian(Hr, s)
    jac, _ = d.groups["jacobian"]
    n = 2
    for i in range(n):
        for j in range(2 * n):
            assert sp.simplify(jac[i * 4 + j] - hess[n + i, j]) == 0        # qdot_i = dH/dp_i
            assert sp.simplify(jac[(n + i) * 4 + j] + hess[i, j]) == 0      # pdot_i = -dH/dq_i


def test_a_driven_system_forms_those_of_its_extended_form_once():
    D = phaselab.models.driven_pendulum()
    assert D.extended() is D.extended()
    assert "jacobian" in D.extended().kernel_derivatives.groups
    with pytest.raises(ModelError, match="extended"):
        D.kernel_derivatives


def test_a_symbolic_model_with_an_undefined_function_is_made_and_refused_at_compile():
    r, p = sp.symbols("r p", real=True)
    H = Hamiltonian(p**2 / 2 + sp.Function("V")(r), [r], [p])
    assert H.equations()
    with pytest.raises(ModelError, match="`V`"):
        kernel_code(H)
