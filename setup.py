"""Build-time part of the packaging (everything else is in pyproject.toml).

The determinant-space kernel (benchsuite/methods/_determinant_kernel.c) is compiled into the package
when a C compiler is present.  ``optional=True``: without one the install still succeeds, and
benchsuite then compiles the kernel at first use or, failing that too, warns once and runs the NumPy
loops (see benchsuite/methods/determinant.py:kernel_backend).  The library is loaded with ctypes, not
imported, so it needs no Python module initialisation.
"""

from setuptools import Extension, setup

setup(ext_modules=[Extension("benchsuite.methods._determinant_kernel",
                             sources=["benchsuite/methods/_determinant_kernel.c"],
                             extra_compile_args=["-O2", "-std=c99"], optional=True)])
