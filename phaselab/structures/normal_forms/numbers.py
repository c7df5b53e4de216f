"""The two kinds of coefficient the normal form is computed with.

Exact work uses :class:`GaussianRational`, a complex number whose real and imaginary parts
are :class:`fractions.Fraction` (closed under + - * /, so rationals stay rationals through
the whole computation); floating work uses Python ``complex``. :class:`Arithmetic` gathers
what the polynomial code needs from either kind (zero, the unit i, conversion, the zero test).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from fractions import Fraction

import sympy as sp


class GaussianRational:
    """``(a + i b) / d`` with whole ``a``, ``b`` and ``d > 0`` in lowest terms (exact).

    Stored as three Python integers (one shared denominator) rather than two Fractions:
    a product costs four integer products and one gcd.
    """

    __slots__ = ("a", "b", "d")

    def __init__(self, re=0, im=0):
        re, im = Fraction(re), Fraction(im)
        d = re.denominator * im.denominator // math.gcd(re.denominator, im.denominator)
        self.a = re.numerator * (d // re.denominator)
        self.b = im.numerator * (d // im.denominator)
        self.d = d

    @classmethod
    def _raw(cls, a: int, b: int, d: int) -> "GaussianRational":
        g = math.gcd(math.gcd(a, b), d)
        out = object.__new__(cls)
        if g > 1:
            a, b, d = a // g, b // g, d // g
        out.a, out.b, out.d = a, b, d
        return out

    @staticmethod
    def _of(other) -> "GaussianRational":
        if isinstance(other, GaussianRational):
            return other
        if isinstance(other, int):
            return GaussianRational._raw(other, 0, 1)
        f = Fraction(other)
        return GaussianRational._raw(f.numerator, 0, f.denominator)

    @property
    def re(self) -> Fraction:
        return Fraction(self.a, self.d)

    @property
    def im(self) -> Fraction:
        return Fraction(self.b, self.d)

    def __add__(self, other):
        o = self._of(other)
        if self.d == o.d:
            return GaussianRational._raw(self.a + o.a, self.b + o.b, self.d)
        return GaussianRational._raw(self.a * o.d + o.a * self.d, self.b * o.d + o.b * self.d, self.d * o.d)

    __radd__ = __add__

    def __sub__(self, other):
        return self + (-self._of(other))

    def __rsub__(self, other):
        return self._of(other) - self

    def __neg__(self):
        out = object.__new__(GaussianRational)
        out.a, out.b, out.d = -self.a, -self.b, self.d
        return out

    def __mul__(self, other):
        o = self._of(other)
        return GaussianRational._raw(self.a * o.a - self.b * o.b, self.a * o.b + self.b * o.a, self.d * o.d)

    __rmul__ = __mul__

    def __truediv__(self, other):
        o = self._of(other)
        norm = o.a * o.a + o.b * o.b
        if norm == 0:
            raise ZeroDivisionError("division of a Gaussian rational by zero")
        # (a + ib)/d / ((c + ie)/f) = (a + ib)(c - ie) f / (d (c^2 + e^2))
        a = (self.a * o.a + self.b * o.b) * o.d
        b = (self.b * o.a - self.a * o.b) * o.d
        return GaussianRational._raw(a, b, self.d * norm)

    def __eq__(self, other):
        if not isinstance(other, (int, Fraction, GaussianRational)):
            return NotImplemented
        o = self._of(other)
        return self.a == o.a and self.b == o.b and self.d == o.d

    def __hash__(self):
        return hash((self.a, self.b, self.d))

    def __bool__(self):
        return bool(self.a) or bool(self.b)

    def __complex__(self):
        return complex(self.a / self.d, self.b / self.d)

    def conjugate(self) -> "GaussianRational":
        return GaussianRational._raw(self.a, -self.b, self.d)

    def __repr__(self):
        return f"GaussianRational({self.re}, {self.im})"


@dataclass(frozen=True)
class Arithmetic:
    """What the polynomial code needs of a kind of coefficient.

    Attributes
    ----------
    name : str
        ``"exact"`` (Gaussian rationals) or ``"float"`` (complex doubles).
    """

    name: str

    @property
    def exact(self) -> bool:
        return self.name == "exact"

    @property
    def zero(self):
        return GaussianRational(0, 0) if self.exact else 0j

    @property
    def unit(self):
        """The imaginary unit i."""
        return GaussianRational(0, 1) if self.exact else 1j

    def number(self, value):
        """A coefficient from a sympy number, a Fraction, an int or a float (exact mode takes
        rationals only)."""
        if not self.exact:
            return complex(value)
        if isinstance(value, GaussianRational):
            return value
        if isinstance(value, sp.Basic):
            re, im = value.as_real_imag()
            return GaussianRational(Fraction(int(re.p), int(re.q)), Fraction(int(im.p), int(im.q)))
        return GaussianRational(Fraction(value), 0)

    def to_sympy(self, value) -> sp.Expr:
        """The coefficient as a sympy number (``Rational`` parts when exact)."""
        if self.exact:
            re = sp.Rational(value.re.numerator, value.re.denominator)
            im = sp.Rational(value.im.numerator, value.im.denominator)
            return re + sp.I * im
        return sp.Float(value.real, 15) + sp.I * sp.Float(value.imag, 15)

    def real_part(self, value) -> sp.Expr:
        if self.exact:
            return sp.Rational(value.re.numerator, value.re.denominator)
        return sp.Float(complex(value).real, 15)

    def imag_part(self, value) -> sp.Expr:
        if self.exact:
            return sp.Rational(value.im.numerator, value.im.denominator)
        return sp.Float(complex(value).imag, 15)


EXACT = Arithmetic("exact")
FLOAT = Arithmetic("float")
