"""Shared fixtures of the external-results tests: one reference cache for the session."""

from __future__ import annotations

import pytest


@pytest.fixture(scope="session")
def cache_dir(tmp_path_factory):
    """A reference cache shared by every test here (ladders and orbital signatures computed once)."""
    return tmp_path_factory.mktemp("external-cache")


@pytest.fixture(scope="session")
def cache(cache_dir):
    from benchsuite.chem.cache import DiskCache

    return DiskCache(cache_dir)


@pytest.fixture(scope="session")
def built(cache_dir):
    """``built(case, basis=None, **encoding)`` -> PreparedProblem, memoised for the session."""
    from benchsuite import api

    memo = {}

    def build(case: str, basis: str | None = None, **kw):
        key = (case, basis, tuple(sorted(kw.items())))
        if key not in memo:
            memo[key] = api.build_problem(case, basis, cache_dir=cache_dir, **kw)
        return memo[key]

    return build


@pytest.fixture(scope="session")
def token(cache):
    """``token(case, basis=None, encoding=Encoding())`` -> the problem's fingerprint token."""
    from benchsuite import api
    from benchsuite.methods.fingerprint import problem_fingerprint
    from benchsuite.methods.problem import Encoding

    def make(case: str, basis: str | None = None, encoding: Encoding = Encoding()) -> str:
        return problem_fingerprint(api.load_case(case), basis, encoding, cache).token

    return make
