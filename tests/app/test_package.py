"""A normal install works: build the wheel, install it in a fresh virtual environment, serve the demo.

The wheel is installed without its dependencies into a new environment
whose only other packages are this environment's (a path file points at
them, without this checkout's editable install), and the demo is served
from an unrelated folder: the stylesheet and the sample series must come
from the package, and no generic top-level name (``app``, ``inference``)
may be installed.
"""

from __future__ import annotations

import os
import site
import subprocess
import sys
import time
import urllib.request
import venv
import zipfile

import pytest

from .browser.conftest import free_port

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
pytestmark = pytest.mark.slow


@pytest.fixture(scope="module")
def installed(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("package")
    out = subprocess.run([sys.executable, "-m", "pip", "wheel", "-q", "--no-deps", "-w", str(tmp / "dist"), ROOT],
                         capture_output=True, text=True, timeout=600)
    assert out.returncode == 0, out.stderr[-2000:]
    wheel = next((tmp / "dist").glob("bendline-*.whl"))
    env_dir = tmp / "env"
    venv.EnvBuilder(with_pip=False).create(env_dir)
    python = env_dir / "bin" / "python"
    target = subprocess.run([str(python), "-c", "import sysconfig; print(sysconfig.get_paths()['purelib'])"],
                            capture_output=True, text=True, check=True).stdout.strip()
    out = subprocess.run([sys.executable, "-m", "pip", "install", "-q", "--no-deps", "--target", target, str(wheel)],
                         capture_output=True, text=True, timeout=600)
    assert out.returncode == 0, out.stderr[-2000:]
    # the dependencies: this environment's site-packages, but not its .pth files (the editable install)
    with open(os.path.join(target, "zz_dependencies.pth"), "w") as fh:
        fh.write("\n".join(site.getsitepackages()) + "\n")
    return wheel, python, tmp


def test_the_wheel_holds_one_import_name_and_its_data(installed):
    wheel, _, _ = installed
    names = zipfile.ZipFile(wheel).namelist()
    tops = {n.split("/")[0] for n in names if not n.split("/")[0].endswith(".dist-info")}
    assert tops == {"bendline"}
    assert "bendline/assets/bendline.css" in names
    assert "bendline/sample_series/daily_admissions.csv" in names


def test_the_installed_package_serves_the_demo_from_anywhere(installed):
    _, python, tmp = installed
    elsewhere = tmp / "elsewhere"
    elsewhere.mkdir()
    probe = subprocess.run([str(python), "-c", "import bendline.app.cli, bendline.inference; import app"],
                           capture_output=True, text=True, cwd=elsewhere)
    assert "No module named 'app'" in probe.stderr  # the package is there; the generic name is not
    port = free_port()
    log = open(tmp / "serve.log", "wb")
    proc = subprocess.Popen([str(python), "-m", "bendline.app.cli", "serve", "--demo", "--port", str(port),
                             "--data-dir", str(tmp / "data")], cwd=elsewhere, stdout=log, stderr=subprocess.STDOUT,
                            start_new_session=True)
    try:
        page = None
        deadline = time.time() + 120
        while time.time() < deadline and page is None:
            if proc.poll() is not None:
                raise AssertionError((tmp / "serve.log").read_text())
            try:
                page = urllib.request.urlopen(f"http://127.0.0.1:{port}/", timeout=5).read().decode()
            except OSError:
                time.sleep(0.5)
        assert page is not None, (tmp / "serve.log").read_text()
        css = [line for line in page.split('"') if line.startswith("/assets/") and ".css" in line]
        assert css, "the page links no stylesheet"
        with urllib.request.urlopen(f"http://127.0.0.1:{port}{css[0]}", timeout=10) as r:
            assert r.status == 200 and b"--accent" in r.read()
        with urllib.request.urlopen(f"http://127.0.0.1:{port}/_dash-layout", timeout=10) as r:
            layout = r.read().decode()
        assert "daily_admissions.csv" in layout  # the sample list, and the demo series loaded
    finally:
        proc.terminate()
        proc.wait(timeout=20)
        log.close()
