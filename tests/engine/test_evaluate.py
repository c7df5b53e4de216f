"""LoopSet.evaluate (engine/compiled.py): a few points through the kernel called from Python,
many through the compiled batch evaluator; both give the same numbers."""

import numpy as np

from phaselab.engine.compiled import SMALL_BATCH, loops
from phaselab.engine.loop_source import FAMILIES, family_kind, generic_source, closure


def _hh_field(Z):
    """Henon-Heiles' vector field (dH/dp, -dH/dq) written out by hand from
    H = (px^2 + py^2)/2 + (x^2 + y^2)/2 + x^2 y - y^3/3 (derivation, by hand)."""
    x, y, px, py = Z.T
    return np.stack([px, py, -(x + 2 * x * y), -(y + x * x - y * y)], axis=1)


def test_few_and_many_points_agree_to_the_last_bit(henon_heiles):
    rng = np.random.default_rng(7)
    Z = rng.uniform(-0.4, 0.4, size=(SMALL_BATCH + 6, 4))
    prm = np.zeros(0)
    cs = loops(henon_heiles)
    many = cs.evaluate("vector_field", Z, prm)             # compiled batch evaluator
    few = cs.evaluate("vector_field", Z[:5], prm)          # kernel called row by row
    np.testing.assert_array_equal(few, many[:5])
    np.testing.assert_allclose(few, _hh_field(Z[:5]), rtol=1e-14, atol=1e-15)
    for name in ("hamiltonian", "jacobian", "grad_q", "grad_p"):
        np.testing.assert_array_equal(cs.evaluate(name, Z[:3], prm), cs.evaluate(name, Z, prm)[:3])


def test_every_module_names_its_family_kind():
    """The constant that lets numba drop the other families' branches is the family's own kind."""
    files = closure(["sections"])
    for kind, family in FAMILIES.items():
        assert family_kind(family) == kind
        assert f"\nFAMILY_KIND = {kind!r}\n" in generic_source(files, family)
