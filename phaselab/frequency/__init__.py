"""Frequency analysis: Laskar's spectral method, frequencies and rotation numbers of orbits, their diffusion."""
