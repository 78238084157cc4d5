"""Build-time part of the packaging (everything else is in pyproject.toml).

The determinant-space kernel (benchsuite/methods/_determinant_kernel.c) is compiled into the package
when a C compiler is present.  ``optional=True``: without one the install still succeeds, and
benchsuite then compiles the kernel at first use or, failing that too, warns once and runs the NumPy
loops (see benchsuite/methods/determinant.py:kernel_backend).  The library is loaded with ctypes, not
imported, so it needs no Python module initialisation; it embeds the SHA-256 of its source, so that an
edited source is never run through a stale build.
"""

import hashlib
from pathlib import Path

from setuptools import Extension, setup

SOURCE = "benchsuite/methods/_determinant_kernel.c"
SOURCE_SHA256 = hashlib.sha256((Path(__file__).parent / SOURCE).read_bytes()).hexdigest()

setup(ext_modules=[Extension("benchsuite.methods._determinant_kernel", sources=[SOURCE],
                             define_macros=[("BS_SOURCE_SHA256", f'"{SOURCE_SHA256}"')],
                             extra_compile_args=["-O2", "-std=c99"], optional=True)])
