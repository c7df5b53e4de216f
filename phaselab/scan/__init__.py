"""Scans: grids of initial conditions or parameters, run in chunks on the local cores or on
a Dask client (``client=...``), with a progress bar when they take a while, resumable
through a Zarr store (``store=...``), and labelled as ``xarray`` datasets
(``result.to_xarray()``, ``result.save(path)``). Frequency maps are in
:mod:`phaselab.scan.frequency_map` (imported on use: they bring the spectral analysis)."""

from phaselab.scan.chaos_maps import ChaosMap, chaos_map
from phaselab.scan.escape import Aperture, EscapeMap, escape_map
from phaselab.scan.grids import StateGrid, shell_grid, state_grid
from phaselab.scan.parameters import ParameterScan, parameter_scan
from phaselab.scan.runner import run_batches

__all__ = ["ChaosMap", "ParameterScan", "StateGrid", "EscapeMap", "Aperture", "chaos_map", "parameter_scan",
           "escape_map", "shell_grid", "state_grid", "run_batches"]
