"""Browser benchmark of the app on every demo scenario, in Debian's chromium.

Run:  python tests/benchmarks/bench_app.py [--edits K] [--visits V] [--only NAME ...]

For each demo scenario the app server is started as ``duality app`` does (fresh process,
that scenario opened) and Playwright, driving headless chromium, measures:

* first render, cold: the first visitor after the server starts — from navigation until
  the model, the dual functions with their LaTeX and the baseline values are on screen
  and the page script has finished;
* first render, warm: later visitors (new browser contexts), same end point;
* parameter edit: from pressing Enter in the box of the scenario's first parameter until
  a value on the page has changed and the page script has finished, over K edits;
* Checks view: from choosing it until its table is on screen.

Goals (issue 14): first render <= 2.5 s (cold and warm), every parameter edit <= 0.3 s on
every demo scenario, Checks view <= 2 s.  Medians are printed beside each goal (the
machine may be shared; a median is what to compare).  This is a script, not a test:
nothing here is asserted.
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

IDLE = "!document.querySelector('[data-testid=\"stStatusWidget\"]')"
READY = ("() => document.querySelectorAll('.katex').length >= 2 && "
         "document.querySelectorAll('[data-testid=\"stMetricValue\"]').length >= 1 && "
         + IDLE + " && document.querySelector('.stApp[data-test-script-state=\"notRunning\"]')")
VALUES = ("() => Array.from(document.querySelectorAll('[data-testid=\"stMetricValue\"]'))"
          ".map(m => m.innerText).join('|')")


def _page(browser):
    ctx = browser.new_context(viewport={"width": 1366, "height": 768})
    return ctx, ctx.new_page()


def first_render(browser, url: str) -> float:
    ctx, page = _page(browser)
    t0 = time.perf_counter()
    page.goto(url)
    page.wait_for_function(READY, timeout=120_000, polling=20)
    dt = time.perf_counter() - t0
    ctx.close()
    return dt


def edits(browser, url: str, name: str, value: float, k: int) -> list[float]:
    ctx, page = _page(browser)
    page.goto(url)
    page.wait_for_function(READY, timeout=120_000)
    box = page.get_by_role("spinbutton", name=name, exact=True)
    out = []
    for i in range(k):
        old = page.evaluate(VALUES)
        box.fill(f"{value * (1 + 0.02 * (i + 1)):.6g}")
        t0 = time.perf_counter()
        box.press("Enter")
        page.wait_for_function(
            "(old) => { const now = Array.from(document.querySelectorAll("
            "'[data-testid=\"stMetricValue\"]')).map(m => m.innerText).join('|');"
            " return now !== old && " + IDLE + " && document.querySelector("
            "'.stApp[data-test-script-state=\"notRunning\"]'); }",
            arg=old, timeout=60_000, polling=10)
        out.append(time.perf_counter() - t0)
    ctx.close()
    return out


def checks_view(browser, url: str) -> float:
    ctx, page = _page(browser)
    page.goto(url)
    page.wait_for_function(READY, timeout=120_000)
    t0 = time.perf_counter()
    page.get_by_role("radio", name="Checks", exact=True).click()
    page.wait_for_function(
        "() => document.querySelector('[data-testid=\"stDataFrame\"]') && " + IDLE
        + " && document.querySelector('.stApp[data-test-script-state=\"notRunning\"]')",
        timeout=120_000, polling=20)
    dt = time.perf_counter() - t0
    ctx.close()
    return dt


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--edits", type=int, default=5)
    ap.add_argument("--visits", type=int, default=3)
    ap.add_argument("--only", nargs="*", default=None, help="scenario file names")
    args = ap.parse_args()
    from playwright.sync_api import sync_playwright

    from duality.apply import scenario as sc

    files = sorted((ROOT / "scenarios").glob("*.toml"))
    if args.only:
        files = [f for f in files if f.name in args.only]
    rows = []
    with sync_playwright() as p:
        browser = launch(p)
        try:
            for path in files:
                params = sc.load(path).build_model().params
                with tempfile.TemporaryDirectory() as save:
                    proc, url = start_server(Path(save), scenario=path)
                    try:
                        cold = first_render(browser, url)
                        warm = [first_render(browser, url) for _ in range(args.visits)]
                        ed = (edits(browser, url, params[0].name, params[0].value,
                                    args.edits) if params else [])
                        chk = checks_view(browser, url)
                    finally:
                        proc.terminate()
                        proc.wait(10)
                rows.append((path.stem, cold, statistics.median(warm),
                             statistics.median(ed) if ed else None,
                             max(ed) if ed else None, chk))
        finally:
            browser.close()
    print(f"{'scenario':36} {'cold':>6} {'warm':>6} {'edit med':>9} {'edit max':>9} "
          f"{'checks':>7}   (seconds)")
    for name, cold, warm, med, worst, chk in rows:
        e1 = "     —" if med is None else f"{med:9.3f}"
        e2 = "     —" if worst is None else f"{worst:9.3f}"
        print(f"{name:36} {cold:6.2f} {warm:6.2f} {e1} {e2} {chk:7.2f}")
    print("goals: first render cold and warm <= 2.5 s; parameter edit <= 0.3 s (median); "
          "Checks view <= 2 s")
    meds = [r[3] for r in rows if r[3] is not None]
    if rows:
        print(f"worst medians: cold {max(r[1] for r in rows):.2f} s (goal 2.5), warm "
              f"{max(r[2] for r in rows):.2f} s (goal 2.5), edit "
              f"{max(meds) if meds else float('nan'):.3f} s (goal 0.3), checks "
              f"{max(r[5] for r in rows):.2f} s (goal 2)")


if __name__ == "__main__":
    main()
