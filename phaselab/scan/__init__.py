"""Scans: grids of initial conditions or parameters, run on the local cores or on a Dask
client (``client=...``)."""

from phaselab.scan.grids import (ChaosMap, ParameterScan, StateGrid, chaos_map, parameter_scan,
                                 shell_grid, state_grid)
from phaselab.scan.runner import run_batches

__all__ = ["ChaosMap", "ParameterScan", "StateGrid", "chaos_map", "parameter_scan", "shell_grid",
           "state_grid", "run_batches"]
