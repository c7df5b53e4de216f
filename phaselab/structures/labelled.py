"""Labelled datasets (``to_xarray()``) of the structure results that had none: an equilibrium,
a level set and Greene's residues of a torus breakup. CF attributes from
:func:`phaselab.engine.provenance.cf_dataset`.
"""

from __future__ import annotations

import numpy as np

from phaselab.engine.provenance import cf_dataset, netcdf_attrs, provenance, xarray_module


def equilibrium_dataset(eq):
    """An :class:`~phaselab.structures.equilibria.Equilibrium` as a Dataset: ``state`` values
    over ``state``, eigenvalues (real and imaginary parts) over ``eigenvalue``; energy,
    stability, method and residual in the attributes."""
    xr = xarray_module()
    state = np.asarray(eq.state, dtype=float)
    names = list(eq.names) or [f"z{k}" for k in range(len(state))]
    ev = np.asarray(eq.eigenvalues, dtype=complex)
    meta = provenance(None, None, energy=float(eq.energy), stability=eq.stability, method=eq.method,
                      residual=float(eq.residual), free=list(eq.free))
    ds = xr.Dataset(
        data_vars={
            "equilibrium": (("state",), state, {"description": "state at the equilibrium"}),
            "eigenvalue_real": (("eigenvalue",), ev.real, {"description": "real part of the eigenvalues "
                                                                          "of the linearisation"}),
            "eigenvalue_imag": (("eigenvalue",), ev.imag, {"description": "imaginary part of the eigenvalues "
                                                                          "of the linearisation"}),
        },
        coords={"state": np.array(names, dtype=object), "eigenvalue": np.arange(len(ev))},
        attrs=netcdf_attrs(meta))
    return cf_dataset(ds, title=f"{eq.stability} equilibrium")


def level_set_dataset(ls):
    """A :class:`~phaselab.structures.levels.LevelSet` as a Dataset: ``values`` over the two
    shown variables (vertical first, as in a picture) with their grid values as coordinates;
    the levels over ``level``."""
    xr = xarray_module()
    xn, yn = (str(getattr(a, "name", a)) for a in ls.axes)
    meta = provenance(None, ls.params, plane=dict(ls.plane), eliminated=list(ls.eliminated))
    ds = xr.Dataset(
        data_vars={
            "values": ((yn, xn), np.asarray(ls.values, dtype=float),
                       {"description": ls.description or "H on the grid"}),
            "levels": (("level",), np.asarray(ls.levels, dtype=float), {"description": "the levels drawn"}),
        },
        coords={xn: np.asarray(ls.x, dtype=float), yn: np.asarray(ls.y, dtype=float)},
        attrs=netcdf_attrs(meta))
    ds[xn].attrs.update({"description": f"grid values of {xn}", "axis": "X"})
    ds[yn].attrs.update({"description": f"grid values of {yn}", "axis": "Y"})
    return cf_dataset(ds, title="Level set")


def breakup_dataset(tb):
    """A :class:`~phaselab.structures.breakup.TorusBreakup` as a Dataset: ``residue`` over
    (``convergent``, the parameter, ``line``), ``critical`` over ``convergent`` (labelled
    ``m/Q``); rotation number, estimate and threshold in the attributes."""
    xr = xarray_module()
    name = str(tb.parameter)
    meta = provenance(None, tb.params, rotation_number=float(tb.rotation_number), parameter=name,
                      estimate=float(tb.estimate), threshold=float(tb.threshold))
    ds = xr.Dataset(
        data_vars={
            "residue": (("convergent", name, "line"), np.asarray(tb.residues, dtype=float),
                        {"description": "Greene's residue of the symmetric orbits on the two lines of "
                                        "the reversor's fixed set"}),
            "critical": (("convergent",), np.asarray(tb.critical, dtype=float),
                         {"description": f"value of {name} where the residues reach the threshold"}),
        },
        coords={"convergent": np.array([str(c) for c in tb.convergents], dtype=object),
                name: np.asarray(tb.values, dtype=float), "line": np.arange(2)},
        attrs=netcdf_attrs(meta))
    return cf_dataset(ds, title=f"Torus breakup at rotation number {float(tb.rotation_number):.10g}")
