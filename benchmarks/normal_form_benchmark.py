"""Normal form speed: time against order, with the size of the result.

Run:  python benchmarks/normal_form_benchmark.py [--max-order-2 N] [--max-order-3 N]

Two invented polynomial Hamiltonians with every cubic and quartic monomial present (small
rational coefficients from a fixed rule) and non-resonant linear frequencies:

* 2 degrees of freedom, omega = (1, 7/5): no resonance below degree 12, so Birkhoff's form
  exists to order 11 (target: order 8 under 5 s);
* 3 degrees of freedom, omega = (1, 7/5, 11/7) (target: order 6 under 20 s).

Each is normalised in exact (rational) and floating arithmetic at orders 4, 5, ...; a row
gives the time, the number of normal-form terms, the number of generator monomials and of
monomials in the change of variables (both directions, all 2n components).
"""

from __future__ import annotations

import argparse
import itertools
import time

import sympy as sp

import phaselab
from phaselab.structures.normal_forms.compute import normal_form


def invented(dof: int, omegas: list) -> phaselab.Hamiltonian:
    q = sp.symbols(f"q1:{dof + 1}", real=True)
    p = sp.symbols(f"p1:{dof + 1}", real=True)
    z = q + p
    H = sum((pk**2 + w**2 * qk**2) / 2 for qk, pk, w in zip(q, p, omegas))
    count = 0
    for degree in (3, 4):
        for combo in itertools.combinations_with_replacement(range(2 * dof), degree):
            count += 1
            coeff = sp.Rational((count * 7 + 3) % 11 - 5, 10 * degree)
            H += coeff * sp.Mul(*[z[i] for i in combo])
    return phaselab.Hamiltonian(H, q, p, name=f"invented {dof}-dof polynomial")


def row(system, order: int, arithmetic: str) -> str:
    t = time.perf_counter()
    nf = normal_form(system, [0] * (2 * system.dof), order, arithmetic=arithmetic)
    elapsed = time.perf_counter() - t
    change = nf.transformation_terms
    return (f"  order {order:2d}  {arithmetic:5s}  {elapsed:8.3f} s   {len(nf.terms):4d} terms   "
            f"{change:6d} monomials in the change of variables   smallest divisor "
            f"{min(nf.small_divisors.values()):.3g}"), elapsed


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--max-order-2", type=int, default=10)
    parser.add_argument("--max-order-3", type=int, default=6)
    args = parser.parse_args()
    cases = [(invented(2, [1, sp.Rational(7, 5)]), args.max_order_2, 8, 5.0),
             (invented(3, [1, sp.Rational(7, 5), sp.Rational(11, 7)]), args.max_order_3, 6, 20.0)]
    for system, top, target_order, target in cases:
        print(f"{system.name}: {len(sp.Add.make_args(system.expr))} terms in H")
        for order in range(4, top + 1):
            for arithmetic in ("exact", "float"):
                text, elapsed = row(system, order, arithmetic)
                flag = ""
                if order == target_order:
                    flag = f"   target {target:.0f} s: {'met' if elapsed < target else 'MISSED'}"
                print(text + flag, flush=True)


if __name__ == "__main__":
    main()
