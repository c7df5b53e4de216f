"""Labelled datasets (``to_xarray()``) of the orbit results: trajectories, sections, chaos
indicators and seeds on an energy shell.

Dimensions are named after what they count (``orbit``, ``time``, ``crossing``, ``point``)
and ``state`` is labelled by the model's names; state components and the time carry the
model's declared units where it has them; the provenance of
:func:`phaselab.engine.provenance.provenance` and the CF attributes of
:func:`phaselab.engine.provenance.cf_dataset` are in the attributes.
"""

from __future__ import annotations

import numpy as np

from phaselab.engine import status as codes
from phaselab.engine.provenance import (cf_dataset, model_time_unit, netcdf_attrs, provenance, state_names,
                                        xarray_module)


def _status_words() -> str:
    return "; ".join(f"{k} {v}" for k, v in codes.STATUS.items())


def _state(system, width):
    return np.array(state_names(system, width) or [f"z{k}" for k in range(width)], dtype=object)


def _time_units(system) -> dict:
    unit = model_time_unit(provenance(system)) if system is not None else None
    return {"units": unit} if unit else {}


def trajectory_dataset(tr):
    """A :class:`~phaselab.orbits.trajectory.Trajectory` as a Dataset: ``states`` over
    (``orbit``, ``time``, ``state``), ``energy_error`` over (``orbit``, ``time``),
    ``status`` and ``escape_time`` over ``orbit``."""
    xr = xarray_module()
    width = tr.states.shape[-1]
    meta = provenance(tr.system, tr.params, method=tr.method, dt=float(tr.dt),
                      status_codes={str(k): v for k, v in codes.STATUS.items()})
    ds = xr.Dataset(
        data_vars={
            "states": (("orbit", "time", "state"), np.asarray(tr.states, dtype=float),
                       {"description": "state of each orbit at each sample time; NaN after it stopped"}),
            "energy_error": (("orbit", "time"), np.asarray(tr.energy_error, dtype=float),
                             {"description": "relative energy error (H(t) - H(0)) / max(|H(0)|, 1)",
                              "units": "1"}),
            "status": (("orbit",), np.asarray(tr.status, dtype=np.int32),
                       {"description": "why each orbit stopped: " + _status_words()}),
            "escape_time": (("orbit",), np.asarray(tr.escape_time, dtype=float),
                            {"description": "time at which a stopped orbit stopped", **_time_units(tr.system)}),
        },
        coords={"orbit": np.arange(tr.n_orbits), "time": np.asarray(tr.t, dtype=float),
                "state": _state(tr.system, width)},
        attrs=netcdf_attrs(meta))
    ds["time"].attrs.update({"description": "sample time", "axis": "T", **_time_units(tr.system)})
    return cf_dataset(ds, title=f"Trajectories of {meta['system'] or 'a model'}")


def chaos_dataset(ci):
    """A :class:`~phaselab.orbits.chaos.ChaosIndicators` as a Dataset: the four indicators,
    ``t_end`` and ``status`` over ``orbit``, the seeds over (``orbit``, ``state``) and, when
    kept, the running values over (``orbit``, ``record``) with the record times."""
    xr = xarray_module()
    meta = provenance(None, ci.params, method=ci.method, dt=float(ci.dt))
    describe = {"lyapunov": "largest Lyapunov exponent estimate", "megno": "MEGNO (mean exponential growth "
                "factor of nearby orbits)", "fli": "fast Lyapunov indicator", "sali": "smaller alignment index"}
    data = {name: (("orbit",), np.asarray(getattr(ci, name), dtype=float), {"description": text})
            for name, text in describe.items()}
    data["t_end"] = (("orbit",), np.asarray(ci.t_end, dtype=float), {"description": "time of the values"})
    data["status"] = (("orbit",), np.asarray(ci.status, dtype=np.int32),
                      {"description": "why each orbit stopped: " + _status_words()})
    data["seeds"] = (("orbit", "state"), np.asarray(ci.seeds, dtype=float), {"description": "initial states"})
    for name, values in (ci.history or {}).items():
        data[f"{name}_history"] = (("orbit", "record"), np.asarray(values, dtype=float),
                                   {"description": f"running value of {name}"})
    coords = {"orbit": np.arange(len(ci.status)), "record": np.asarray(ci.t, dtype=float)}
    ds = xr.Dataset(data_vars=data, coords=coords, attrs=netcdf_attrs(meta))
    ds["record"].attrs.update({"description": "time of each running value", "axis": "T"})
    return cf_dataset(ds, title="Chaos indicators")


def section_dataset(sec):
    """A :class:`~phaselab.orbits.section_result.Section` as a Dataset: ``points`` over
    (``orbit``, ``crossing``, ``state``), ``times`` over (``orbit``, ``crossing``),
    ``counts``, ``energy_error``, ``status`` over ``orbit`` and the seeds."""
    xr = xarray_module()
    points = np.asarray(sec.points, dtype=float)
    width = points.shape[-1]
    meta = provenance(sec.system, sec.params, plane=dict(sec.plane), energy=sec.energy,
                      method=sec.method, dt=float(sec.dt), axes=list(sec.axes))
    units = getattr(sec.system, "units", None) or {}
    ds = xr.Dataset(
        data_vars={
            "points": (("orbit", "crossing", "state"), points,
                       {"description": "full states at the crossings; NaN past an orbit's last crossing"}),
            "times": (("orbit", "crossing"), np.asarray(sec.times, dtype=float),
                      {"description": "time of each crossing", **_time_units(sec.system)}),
            "counts": (("orbit",), np.asarray(sec.counts, dtype=np.int32),
                       {"description": "number of crossings of each orbit"}),
            "energy_error": (("orbit",), np.asarray(sec.energy_error, dtype=float),
                             {"description": "worst relative energy error over the crossings", "units": "1"}),
            "status": (("orbit",), np.asarray(sec.status, dtype=np.int32),
                       {"description": "why each orbit stopped: " + _status_words()}),
            "seeds": (("orbit", "state"), np.asarray(sec.seeds, dtype=float), {"description": "initial states"}),
        },
        coords={"orbit": np.arange(points.shape[0]), "crossing": np.arange(points.shape[1]),
                "state": _state(sec.system, width)},
        attrs=netcdf_attrs(meta))
    shown = [str(n) for n in ds["state"].values[list(sec.axes)]]
    ds.attrs["shown"] = ", ".join(f"{n} [{units[n]}]" if n in units else n for n in shown)
    return cf_dataset(ds, title=f"Surface of section of {meta['system'] or 'a model'}")


def shell_seeds_dataset(seeds):
    """A :class:`~phaselab.orbits.seeds.ShellSeeds` as a Dataset: ``states`` over (``point``,
    ``state``), ``valid`` (1/0) and ``reason`` over ``point``."""
    xr = xarray_module()
    states = np.asarray(seeds.states, dtype=float)
    meta = provenance(seeds.system, seeds.params, energy=float(seeds.energy), plane=dict(seeds.plane),
                      solve_for=seeds.solve_for, free=list(seeds.free), sign=int(seeds.sign),
                      method=seeds.method)
    ds = xr.Dataset(
        data_vars={
            "states": (("point", "state"), states, {"description": "states on the energy shell; NaN where none"}),
            "valid": (("point",), np.asarray(seeds.valid, dtype=np.int8),
                      {"description": "1 where a state on the shell was found"}),
            "reason": (("point",), np.array([str(r) for r in seeds.reasons], dtype=object),
                       {"description": "why a point has no state on the shell"}),
        },
        coords={"point": np.arange(states.shape[0]), "state": _state(seeds.system, states.shape[1])},
        attrs=netcdf_attrs(meta))
    return cf_dataset(ds, title=f"Seeds on the energy shell H = {float(seeds.energy):g}")
