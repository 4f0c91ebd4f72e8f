"""Dashboard benchmark: time from Fit to the first band, and the update rate while sampling.

Starts ``bendline serve --demo`` on a free port, opens it in headless Chromium
(Debian's, through Playwright), clicks Fit on the reference-sized sample
series and prints, from one session:

* seconds from the click to the first trend band drawn in the browser
  (target <= 1 s);
* panel updates per second while the run samples, counted as Plotly redraws
  of the main chart over a 10 s window (target >= 2 per s), and how far the
  page's main thread fell behind (the worst delay of a 100 ms timer).

Usage:  python bench/dashboard.py [--repeats N]
"""

from __future__ import annotations

import argparse
import os
import statistics
import sys
import tempfile
import time

ROOT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..")
sys.path.insert(0, ROOT)

from tests.app.browser.conftest import CHROME_ARGS, CHROMIUM, Server  # noqa: E402

HOOK = """
() => {
  const gd = document.querySelector('#main-chart .js-plotly-plot');
  window.__redraws = 0; window.__lag = 0;
  gd.on('plotly_afterplot', () => { window.__redraws += 1; });
  let last = performance.now();
  setInterval(() => { const now = performance.now(); window.__lag = Math.max(window.__lag, now - last - 100); last = now; }, 100);
}
"""
BAND = """
() => { const gd = document.querySelector('#main-chart .js-plotly-plot');
  if (!gd || !gd.data) return 0;
  const t = gd.data.find(t => t.name && t.name.includes('credible interval'));
  return t ? (t.y || []).filter(v => v !== null).length : 0; }
"""


def one_session(browser):
    with tempfile.TemporaryDirectory() as tmp:
        srv = Server(tmp, "--demo").start()
        try:
            page = browser.new_page(viewport={"width": 1280, "height": 900})
            page.goto(srv.url)
            page.wait_for_selector("#main-chart .main-svg", timeout=60000)
            page.wait_for_function("() => document.querySelector('#series-info').innerText.includes('273')")
            time.sleep(1.0)
            page.fill("#draws", "20000")  # keep it sampling while we count
            page.press("#draws", "Enter")
            time.sleep(0.5)
            page.evaluate(HOOK)
            t0 = time.perf_counter()
            page.click("#fit-button")
            page.wait_for_function(BAND, timeout=30000, polling=20)
            first_band = time.perf_counter() - t0
            page.wait_for_function("() => document.querySelector('#progress').innerText.startsWith('Sampling')",
                                   timeout=60000)
            page.evaluate("() => { window.__redraws = 0; window.__lag = 0; }")
            time.sleep(10.0)
            redraws, lag = page.evaluate("() => [window.__redraws, window.__lag]")
            page.click("#stop-button")
            page.close()
            return {"first_band": first_band, "updates_per_s": redraws / 10.0, "worst_lag_ms": lag}
        finally:
            srv.stop()


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeats", type=int, default=3)
    args = ap.parse_args()
    from playwright.sync_api import sync_playwright

    rows = []
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path=CHROMIUM, args=CHROME_ARGS, headless=True)
        for _ in range(args.repeats):
            rows.append(one_session(browser))
        browser.close()
    med = {k: statistics.median(r[k] for r in rows) for k in rows[0]}
    print(f"Dashboard benchmark, {args.repeats} sessions, medians (this machine, {os.cpu_count()} cores)")
    print(f"  Fit click to first band drawn: {med['first_band']:.2f} s (target <= 1 s)")
    print(f"  main-chart updates while sampling: {med['updates_per_s']:.1f} per s (target >= 2)")
    print(f"  worst main-thread delay of a 100 ms timer: {med['worst_lag_ms']:.0f} ms")
    for r in rows:
        print(f"    session: first band {r['first_band']:.2f} s, {r['updates_per_s']:.1f} updates/s, "
              f"lag {r['worst_lag_ms']:.0f} ms")


if __name__ == "__main__":
    main()
