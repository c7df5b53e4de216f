"""Code generation: sympy expressions to numba-compiled kernels, cached on disk per system."""

from phaselab.codegen.kernels import CompiledSystem, compile_system

__all__ = ["CompiledSystem", "compile_system"]
