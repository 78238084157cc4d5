"""Shared fixtures of the API and plugin tests: one reference cache for the session."""

from __future__ import annotations

import pytest


@pytest.fixture(scope="session")
def cache_dir(tmp_path_factory):
    """A reference cache shared by every test here (ladders computed once)."""
    return tmp_path_factory.mktemp("api-cache")


@pytest.fixture(scope="session")
def built(cache_dir):
    """``built(case, **encoding)`` -> PreparedProblem, memoised for the session."""
    from benchsuite import api

    memo = {}

    def build(case: str, **kw):
        key = (case, tuple(sorted(kw.items())))
        if key not in memo:
            memo[key] = api.build_problem(case, cache_dir=cache_dir, **kw)
        return memo[key]

    return build
