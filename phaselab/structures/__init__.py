"""Phase-space structure found from orbits: stability, equilibria, level sets, return maps, periodic orbits, manifolds, families, torus breakup, normal forms."""
