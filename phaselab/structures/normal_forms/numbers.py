"""The two kinds of coefficient the normal form is computed with.

Exact work uses :class:`GaussianRational`, a complex number whose real and imaginary parts
are :class:`fractions.Fraction` (closed under + - * /, so rationals stay rationals through
the whole computation); floating work uses Python ``complex``. :class:`Arithmetic` gathers
what the polynomial code needs from either kind (zero, the unit i, conversion, the zero test).
"""

from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction

import sympy as sp


class GaussianRational:
    """``re + i im`` with rational ``re`` and ``im`` (exact)."""

    __slots__ = ("re", "im")

    def __init__(self, re=0, im=0):
        self.re = re if isinstance(re, Fraction) else Fraction(re)
        self.im = im if isinstance(im, Fraction) else Fraction(im)

    @staticmethod
    def _of(other) -> "GaussianRational":
        if isinstance(other, GaussianRational):
            return other
        return GaussianRational(Fraction(other), 0)

    def __add__(self, other):
        o = self._of(other)
        return GaussianRational(self.re + o.re, self.im + o.im)

    __radd__ = __add__

    def __sub__(self, other):
        o = self._of(other)
        return GaussianRational(self.re - o.re, self.im - o.im)

    def __rsub__(self, other):
        return self._of(other) - self

    def __neg__(self):
        return GaussianRational(-self.re, -self.im)

    def __mul__(self, other):
        if isinstance(other, GaussianRational):
            return GaussianRational(self.re * other.re - self.im * other.im,
                                    self.re * other.im + self.im * other.re)
        f = Fraction(other)
        return GaussianRational(self.re * f, self.im * f)

    __rmul__ = __mul__

    def __truediv__(self, other):
        o = self._of(other)
        den = o.re * o.re + o.im * o.im
        if den == 0:
            raise ZeroDivisionError("division of a Gaussian rational by zero")
        return GaussianRational((self.re * o.re + self.im * o.im) / den,
                                (self.im * o.re - self.re * o.im) / den)

    def __eq__(self, other):
        o = self._of(other) if isinstance(other, (int, Fraction, GaussianRational)) else None
        return o is not None and self.re == o.re and self.im == o.im

    def __hash__(self):
        return hash((self.re, self.im))

    def __bool__(self):
        return bool(self.re) or bool(self.im)

    def __complex__(self):
        return complex(float(self.re), float(self.im))

    def conjugate(self) -> "GaussianRational":
        return GaussianRational(self.re, -self.im)

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
