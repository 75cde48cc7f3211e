"""Test-wide settings.

Property tests (hypothesis) run derandomised by default, so a run on a fresh machine
explores exactly the examples CI explores and a failure always reproduces.  For a
wider search set ``HYPOTHESIS_PROFILE=explore`` (random examples, more of them).

Fixtures shared by every test module live here (``rng``); fixtures of the app's tests are
in ``tests/webapp/conftest.py``.
"""
from __future__ import annotations

import os

import numpy as np
import pytest
from hypothesis import settings

settings.register_profile("repeatable", derandomize=True, deadline=None)
settings.register_profile("explore", derandomize=False, deadline=None, max_examples=500)
settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE", "repeatable"))


#: Seed of the shared random generator: every test draws the same numbers on every machine.
SEED = 20261205


@pytest.fixture
def rng() -> np.random.Generator:
    """A numpy random generator with a fixed seed, fresh for each test (so a test's draws do
    not depend on which tests ran before it)."""
    return np.random.default_rng(SEED)
