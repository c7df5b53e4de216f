"""The :class:`Equilibrium` result: a state where the vector field vanishes (or a map's fixed
point), its energy, eigenvalues and stability."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

@dataclass(repr=False, eq=False)
class Equilibrium:
    """An equilibrium of a flow (or a fixed point of a map).

    Attributes
    ----------
    state : ndarray, shape (2n,)
        ``(q1..qn, p1..pn)`` at the equilibrium.
    energy : float
        H at the equilibrium (NaN for a map).
    eigenvalues : ndarray of complex, shape (2n,)
        Of the linearised vector field ``J Hess H`` (flows) or of the map's Jacobian (maps),
        sorted by real then imaginary part.
    stability : str
        ``"elliptic"`` (flow: all purely imaginary and nonzero; map: all on the unit circle,
        none equal to 1), ``"hyperbolic"`` (flow: all with nonzero real part; map: all off the
        unit circle), a name of the mixed type built from its pairs, such as
        ``"saddle-centre"`` (one real pair, one imaginary pair) or ``"saddle-centre-centre"``,
        or ``"degenerate"`` (zero eigenvalues, eigenvalue 1 for maps, or repeated eigenvalues
        forming a Jordan block, where the linearisation does not decide). See
        :mod:`phaselab.structures.stability`.
    names : tuple of str
        The state variable names, for display.
    method : str
        ``"symbolic"`` or ``"newton"``: how it was found.
    residual : float
        max |grad H| (or of the wrapped map residual) at ``state``.
    free : tuple of str
        State variables along which the equilibrium extends (absent from H); held fixed.
    directions : ndarray, shape (m, 2n)
        Unit directions of straight lines of equilibria through ``state`` (a symmetry such
        as a translation); the reported state is the point of the line nearest the centre
        of the search box. Empty for an isolated equilibrium.
    system_name : str
        The name of the system it belongs to (for footers of figures).
    params : dict
        The parameter values in force where it was found.
    """

    state: np.ndarray
    energy: float
    eigenvalues: np.ndarray
    stability: str
    names: tuple = ()
    method: str = "newton"
    residual: float = 0.0
    free: tuple = field(default_factory=tuple)
    directions: np.ndarray = field(default_factory=lambda: np.zeros((0, 0)))
    system_name: str = ""
    params: dict = field(default_factory=dict)

    def to_xarray(self):
        """An ``xarray.Dataset`` with CF attributes: the state and the eigenvalues."""
        from phaselab.structures.labelled import equilibrium_dataset

        return equilibrium_dataset(self)

    def plot(self, **kwargs):
        """A matplotlib figure of the eigenvalues (with the unit circle of a map, the imaginary axis of a flow)."""
        from phaselab.export.result_figures import equilibrium_figure

        return equilibrium_figure(self, flow=bool(np.isfinite(self.energy)), **kwargs)

    def save(self, path, **kwargs):
        """Write .nc, .zarr, .svg, .pdf or .png (:data:`phaselab.export.SAVERS`); returns the path."""
        from phaselab.export import save

        return save(self, path, **kwargs)

    def __repr__(self) -> str:
        names = self.names or tuple(f"z{i}" for i in range(len(self.state)))
        where = ", ".join(f"{n}={_num(v)}" for n, v in zip(names, self.state))
        eig = ", ".join(_cnum(v) for v in self.eigenvalues)
        energy = "" if not np.isfinite(self.energy) else f"; H={_num(self.energy)}"
        free = f"; free along {', '.join(self.free)}" if self.free else ""
        if len(self.directions):
            free += f"; on {len(self.directions)}-dimensional line(s) of equilibria"
        return f"Equilibrium({self.stability} at {where}{energy}; eigenvalues [{eig}]{free})"


def _num(v: float) -> str:
    v = float(v)
    return "0" if abs(v) < 5e-13 else f"{v:.7g}"


def _cnum(v: complex) -> str:
    re, im = _num(v.real), _num(v.imag)
    if im == "0":
        return re
    if re == "0":
        return f"{im}j"
    return f"{re}{'+' if v.imag > 0 else ''}{im}j"
