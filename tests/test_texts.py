"""The caution is written once (``duality.texts.CAUTION``) and every place that shows it
uses those words.  Common practice, no source."""
from __future__ import annotations

import re
from pathlib import Path

from click.testing import CliRunner

import duality
from duality.cli import main
from duality.texts import CAUTION

ROOT = Path(__file__).resolve().parents[1]


def _flat(text: str) -> str:
    """Markdown or docstring text with line breaks and quote marks folded to spaces."""
    return re.sub(r"\s+", " ", re.sub(r"^\s*>\s?", "", text, flags=re.M))


def test_caution_is_one_line_of_plain_text():
    assert "\n" not in CAUTION and CAUTION.endswith(".")
    assert "assumed functional form" in CAUTION and "parameter values" in CAUTION


def test_documents_use_the_one_wording():
    for path in (ROOT / "README.md", ROOT / "scenarios" / "README.md"):
        assert CAUTION in _flat(path.read_text(encoding="utf-8")), path
    assert CAUTION in _flat(duality.__doc__)


def test_front_ends_show_the_one_wording():
    out = CliRunner().invoke(main, ["derive", "--budget", "0.5"]).output
    assert f"Caution: {CAUTION}" in out
    code = duality.apply.export.export(duality.technology("x1^0.5*x2^0.5", ["x1", "x2"]),
                                       "python")
    assert CAUTION in code
