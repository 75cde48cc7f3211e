"""Shared pieces of the app tests: the project root on sys.path (the app is a folder of
the checkout, not an installed package) and a fresh AppTest per test."""
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
if str(ROOT) not in sys.path:  # `app` is a folder of the checkout, not an installed package
    sys.path.insert(0, str(ROOT))

MAIN = ROOT / "app" / "main.py"
SCENARIOS = ROOT / "scenarios"


@pytest.fixture
def app(tmp_path, monkeypatch):
    """The page, run once on the default scenario, saving into a temporary folder."""
    from streamlit.testing.v1 import AppTest

    monkeypatch.setenv("DUALITY_APP_SAVE_DIR", str(tmp_path))
    monkeypatch.delenv("DUALITY_APP_SCENARIO", raising=False)
    at = AppTest.from_file(str(MAIN), default_timeout=180)
    at.run()
    assert not at.exception, [e.value for e in at.exception]
    return at
