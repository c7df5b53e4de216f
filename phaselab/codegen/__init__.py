"""Code generation: sympy expressions to compiled kernels, cached on disk per system."""

from phaselab.codegen.kernels import KERNELS, CompiledKernel, compile_kernel, kernel_code

__all__ = ["KERNELS", "CompiledKernel", "compile_kernel", "kernel_code"]
