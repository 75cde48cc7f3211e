"""Streamlit entry point of the app: ``duality app`` (or ``streamlit run app/main.py``).

Options after ``--``: ``--scenario FILE`` opens that scenario instead of the default;
``--save-dir DIR`` is where edited scenarios are saved (default: ``scenarios/``).
"""
import argparse
import os
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # the project root: `app`

import streamlit as st  # noqa: E402

from app import views  # noqa: E402


def _options() -> None:
    parser = argparse.ArgumentParser(add_help=False)
    parser.add_argument("--scenario")
    parser.add_argument("--save-dir")
    known, _ = parser.parse_known_args(sys.argv[1:])
    if known.scenario:
        os.environ.setdefault("DUALITY_APP_SCENARIO", known.scenario)
    if known.save_dir:
        os.environ.setdefault("DUALITY_APP_SAVE_DIR", known.save_dir)


st.set_page_config(page_title="duality: primal and dual functions", layout="wide")
_options()
views.run()
