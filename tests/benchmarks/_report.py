"""Headline ratios of the benchmark scripts: one printed line beside its goal, and one
JSON line per ratio (``{"bench": …, "name": …, "value": …, "goal": …, "met": …}``) so
that a regression is easy to find with ``grep '^{"bench"'`` over saved runs."""
from __future__ import annotations

import json
import math

_LINES: list[dict] = []


def headline(bench: str, name: str, value: float, goal: float, *, at_most: bool,
             unit: str = "x", note: str = "") -> bool:
    """Print ``name: value (goal <= / >= goal) MET|MISSED [note]`` and remember the
    JSON line; returns whether the goal is met (NaN: not measured, MISSED)."""
    met = bool(math.isfinite(value) and (value <= goal if at_most else value >= goal))
    sign = "<=" if at_most else ">="
    shown = f"{value:.3g}{unit}" if math.isfinite(value) else "not measured"
    print(f"  {name}: {shown}  (goal {sign} {goal:g}{unit}) {'MET' if met else 'MISSED'}"
          + (f"  [{note}]" if note else ""))
    _LINES.append({"bench": bench, "name": name,
                   "value": value if math.isfinite(value) else None,
                   "goal": goal, "goal_is": "max" if at_most else "min", "unit": unit,
                   "met": met, **({"note": note} if note else {})})
    return met


def emit() -> None:
    """Print the JSON lines of every headline so far (one per ratio)."""
    if _LINES:
        print()
        print("# machine-readable headlines (one JSON object per line)")
        for d in _LINES:
            print(json.dumps(d, ensure_ascii=False))
        _LINES.clear()
