"""Orbits the engine produces: trajectories, surfaces of section, seeds on an energy shell, chaos indicators."""
