"""The compiled determinant kernel against its NumPy twin (pytest-benchmark, one ratio from one run).

Run with ``pytest tests/methods/test_kernel_speed.py -m speed --benchmark-enable``.  The anchor is
the NumPy loops of the same ExponentialProduct (the fallback path without a C compiler); the ratio is
quoted as ``determinant.NUMPY_SLOWDOWN`` in the fallback warning and in the README.
"""

from __future__ import annotations

import math
import time

import numpy as np
import pytest

from benchsuite.methods.determinant import NUMPY_SLOWDOWN, kernel_backend
from tests.methods.dense_route import random_angles, uccsd_objects

pytestmark = pytest.mark.speed


def _best_of(fn, rounds: int) -> float:
    best = math.inf
    for _ in range(rounds):
        start = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - start)
    return best


def test_compiled_state_is_much_faster_than_numpy_loops(benchmark):
    """State of the LiH/STO-3G UCCSD product (92 factors): C timed by the benchmark, NumPy here."""
    if benchmark.disabled:
        pytest.skip("a ratio needs timings (--benchmark-enable)")
    if kernel_backend() != "c":
        pytest.skip("no compiled kernel here")
    _, _, _, fast, _ = uccsd_objects("lih", backend="c")
    _, _, _, slow, _ = uccsd_objects("lih", backend="numpy")
    theta = random_angles(fast.n_parameters, seed=4)
    assert np.max(np.abs(fast.state(theta) - slow.state(theta))) < 1e-13
    numpy_s = _best_of(lambda: slow.state(theta), rounds=30)
    benchmark(fast.state, theta)
    ratio = numpy_s / float(benchmark.stats.stats.min)
    benchmark.extra_info.update(numpy_s=numpy_s, ratio=ratio)
    print(f"\nLiH UCCSD state: NumPy {numpy_s * 1e3:.3f} ms, C {benchmark.stats.stats.min * 1e6:.1f} us, "
          f"ratio {ratio:.1f}")
    assert ratio >= NUMPY_SLOWDOWN / 3            # the quoted figure, with room for a loaded machine
