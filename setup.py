"""The compiled loops of the selection correction (cosmogrow/selection/_kernels.c).

Everything else about the package is in pyproject.toml. The extension is optional: without a C
compiler the install still succeeds and the selection correction runs on numpy alone (slower, same
results; `cosmogrow.selection.kernels.AVAILABLE` tells which).
"""

from setuptools import Extension, setup

setup(ext_modules=[Extension(
    "cosmogrow.selection._kernels", sources=["cosmogrow/selection/_kernels.c"], optional=True,
    # -ffp-contract=off: no fused multiply-adds, so every instruction set rounds as numpy does;
    # errno and trapping off (no value changes) let the compiler vectorise sqrt and comparisons
    extra_compile_args=["-O3", "-ffp-contract=off", "-fno-math-errno", "-fno-trapping-math"])])
