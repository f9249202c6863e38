"""Shared fixtures. Keep this file small: one fixture per shared need."""

from __future__ import annotations

import os
from collections.abc import Iterator

import pytest
from hypothesis import settings

from workbench.core.profiles import available_languages

# Property-test budgets (tests/test_properties.py): "ci" by default, a few tens of seconds;
# HYPOTHESIS_PROFILE=thorough runs at least 10,000 examples on demand. Tests that set their own
# max_examples keep it. No deadline: a first example pays for building lemma tables.
settings.register_profile("ci", max_examples=60, deadline=None, print_blob=True)
settings.register_profile("thorough", max_examples=10_000, deadline=None, print_blob=True)
settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE", "ci"))


@pytest.fixture(scope="session", autouse=True)
def _cache_dir(tmp_path_factory: pytest.TempPathFactory) -> Iterator[None]:
    """Lemma tables and simplemma tries are built into a temporary cache, never the user's.

    Session-scoped so each table is built once per test run, not once per test. A developer may
    name a folder to reuse between runs in ``TERMLOOM_TEST_CACHE_DIR`` (CI never sets it).
    """
    mp = pytest.MonkeyPatch()
    reuse = os.environ.get("TERMLOOM_TEST_CACHE_DIR")
    mp.setenv("TERMLOOM_CACHE_DIR", reuse or str(tmp_path_factory.mktemp("termloom-cache")))
    yield
    mp.undo()


@pytest.fixture(params=available_languages())
def lang(request: pytest.FixtureRequest) -> str:
    """Every language that has a profile folder in ``lang_profiles/``."""
    return request.param
