"""Real-browser fixtures: a Bendline server in a subprocess and a Chromium page.

Chromium is Debian's (/usr/bin/chromium, installed by .ci/run) driven by
Playwright; the flags keep it off the network this machine does not have.
Every page records console errors, and each test ends by asserting there
were none.
"""

from __future__ import annotations

import os
import shutil
import signal
import socket
import subprocess
import sys
import time
import urllib.request

import pytest

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__)))))
CHROMIUM = shutil.which("chromium") or "/usr/bin/chromium"
CHROME_ARGS = ["--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage", "--disable-background-networking",
               "--disable-component-update", "--disable-sync", "--disable-quic", "--no-first-run"]


def free_port():
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


class Server:
    """``bendline serve`` on a free port with its own data folder."""

    def __init__(self, data_dir, *args):
        self.data_dir = str(data_dir)
        self.args = args
        self.port = free_port()
        self.proc = None

    @property
    def url(self):
        return f"http://127.0.0.1:{self.port}"

    def start(self, timeout=60):
        env = dict(os.environ, PYTHONPATH=ROOT)
        self.log = open(os.path.join(self.data_dir, f"server-{self.port}.log"), "ab")
        self.proc = subprocess.Popen(
            [sys.executable, "-m", "bendline.app.cli", "serve", "--port", str(self.port), "--data-dir", self.data_dir,
             *self.args],
            cwd=ROOT, env=env, stdout=self.log, stderr=subprocess.STDOUT, start_new_session=True,
        )
        deadline = time.time() + timeout
        while time.time() < deadline:
            if self.proc.poll() is not None:
                raise RuntimeError(f"server exited with {self.proc.returncode}")
            try:
                urllib.request.urlopen(self.url + "/", timeout=2).read()
                return self
            except OSError:
                time.sleep(0.3)
        raise RuntimeError("server did not start in time")

    def stop(self):
        if self.proc and self.proc.poll() is None:
            os.killpg(self.proc.pid, signal.SIGTERM)
            try:
                self.proc.wait(timeout=15)
            except subprocess.TimeoutExpired:
                os.killpg(self.proc.pid, signal.SIGKILL)
                self.proc.wait(timeout=5)
        if getattr(self, "log", None):
            self.log.close()


@pytest.fixture
def server(tmp_path):
    data = tmp_path / "data"
    data.mkdir()
    srv = Server(data).start()
    yield srv
    srv.stop()


@pytest.fixture(scope="session")
def browser(playwright_driver):
    b = playwright_driver.chromium.launch(executable_path=CHROMIUM, args=CHROME_ARGS, headless=True)
    yield b
    b.close()


@pytest.fixture
def page(browser):
    context = browser.new_context(viewport={"width": 1280, "height": 900}, accept_downloads=True)
    pg = context.new_page()
    pg.set_default_timeout(30000)
    errors = []
    pg.on("console", lambda m: errors.append(m.text) if m.type == "error" else None)
    pg.on("pageerror", lambda e: errors.append(str(e)))
    pg.console_errors = errors
    yield pg
    context.close()


def wait_for_graph(page, selector="#main-chart"):
    """Plotly's first render is slow on a loaded machine: wait for the SVG."""
    page.wait_for_selector(f"{selector} .main-svg", timeout=60000)


def graph_data(page, selector="#main-chart"):
    """The figure's traces as the browser holds them."""
    return page.evaluate(
        "(sel) => { const gd = document.querySelector(sel + ' .js-plotly-plot');"
        " return gd && gd.data ? gd.data.map(t => ({name: t.name, n: (t.y || []).length,"
        " nonnull: (t.y || []).filter(v => v !== null).length})) : null; }",
        selector,
    )


def hold_fit_open(page):
    """Set the controls so the next Fit keeps sampling until the test stops it.

    100,000 kept draws per chain, each the last of 100 iterations (ten
    million iterations per chain): far more work than any test waits for on
    any machine of this kind, while a draw is still kept every few tenths of
    a second, so a stop leaves draws to show. The test stops the run itself.
    """
    if not page.evaluate("document.querySelector('#advanced-sampler').open"):
        page.click("#advanced-sampler > summary")  # the sampler's settings sit in a fold
    page.fill("#draws", "100000")
    page.press("#draws", "Enter")
    page.fill("#thin", "100")
    page.press("#thin", "Enter")
