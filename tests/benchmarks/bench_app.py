"""Browser benchmark of the app: first render and a parameter edit, in Debian's chromium.

Run:  python tests/benchmarks/bench_app.py [--edits K] [--visits V]

Starts the app server as ``duality app`` does (fresh process, default scenario), then
with Playwright driving headless chromium measures:

* first render, cold: the first visitor after the server starts (the server imports the
  engine for this visitor) — from navigation until the model, every dual function with
  its LaTeX and the baseline values are on screen;
* first render, warm: later visitors (new browser contexts), same end point;
* parameter edit: from pressing Enter in the parameter box until the new value of the
  cost function is on screen and the page script has finished, over K edits.

Goals (issue 6): first render <= 4 s, a parameter edit <= 0.6 s on this machine.  This is
a script, not a test: nothing here is asserted.
"""
from __future__ import annotations

import argparse
import statistics
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT / "tests" / "webapp"))

from test_browser import launch, start_server  # noqa: E402

READY = ("() => document.querySelectorAll('.katex').length >= 8 && "
         "document.querySelectorAll('[data-testid=\"stMetricValue\"]').length >= 2 && "
         "!document.querySelector('[data-testid=\"stStatusWidget\"]')")


def first_render(browser, url: str) -> float:
    ctx = browser.new_context(viewport={"width": 1400, "height": 1000})
    page = ctx.new_page()
    t0 = time.perf_counter()
    page.goto(url)
    page.wait_for_function(READY, timeout=120_000, polling=20)
    dt = time.perf_counter() - t0
    ctx.close()
    return dt


def edits(browser, url: str, k: int) -> list[float]:
    ctx = browser.new_context(viewport={"width": 1400, "height": 1000})
    page = ctx.new_page()
    page.goto(url)
    page.wait_for_function(READY, timeout=120_000)
    box = page.get_by_role("spinbutton", name="A", exact=True)
    out = []
    for i in range(k):
        old = page.locator('[data-testid="stMetricValue"]').first.inner_text()
        box.fill(f"{1.5 + 0.1 * (i + 1):.1f}")
        t0 = time.perf_counter()
        box.press("Enter")
        page.wait_for_function(
            "(old) => { const m = document.querySelector('[data-testid=\"stMetricValue\"]');"
            " return m && m.innerText !== old && "
            "!document.querySelector('[data-testid=\"stStatusWidget\"]'); }",
            arg=old, timeout=60_000, polling=10)
        out.append(time.perf_counter() - t0)
    ctx.close()
    return out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--edits", type=int, default=10)
    ap.add_argument("--visits", type=int, default=5)
    args = ap.parse_args()
    from playwright.sync_api import sync_playwright

    with tempfile.TemporaryDirectory() as save, sync_playwright() as p:
        browser = launch(p)
        proc, url = start_server(Path(save))
        try:
            cold = first_render(browser, url)
            warm = [first_render(browser, url) for _ in range(args.visits)]
            ed = edits(browser, url, args.edits)
        finally:
            proc.terminate()
            proc.wait(10)
            browser.close()
    print(f"first render, cold server (first visitor): {cold:6.2f} s   goal <= 4 s")
    print(f"first render, later visitors (median of {len(warm)}): "
          f"{statistics.median(warm):6.2f} s   (min {min(warm):.2f}, max {max(warm):.2f})")
    print(f"parameter edit (median of {len(ed)}): {statistics.median(ed):6.3f} s   "
          f"(min {min(ed):.3f}, max {max(ed):.3f})   goal <= 0.6 s")


if __name__ == "__main__":
    main()
