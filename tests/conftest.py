"""Test-wide settings.

Property tests (hypothesis) run derandomised by default, so a run on a fresh machine
explores exactly the examples CI explores and a failure always reproduces.  For a
wider search set ``HYPOTHESIS_PROFILE=explore`` (random examples, more of them).
"""
from __future__ import annotations

import os

from hypothesis import settings

settings.register_profile("repeatable", derandomize=True, deadline=None)
settings.register_profile("explore", derandomize=False, deadline=None, max_examples=500)
settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE", "repeatable"))
