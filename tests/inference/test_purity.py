"""The engine stays pure: importing it pulls in no web, cache or queue library."""

from __future__ import annotations

import subprocess
import sys

FORBIDDEN = ("dash", "flask", "diskcache", "celery", "redis", "plotly", "werkzeug")


def test_inference_imports_no_web_cache_or_queue_modules():
    code = (
        "import sys, pkgutil, importlib, bendline.inference as inference\n"
        "for m in pkgutil.iter_modules(inference.__path__):\n"
        "    importlib.import_module('bendline.inference.' + m.name)\n"
        f"bad = sorted(k for k in sys.modules if k.split('.')[0] in {FORBIDDEN!r})\n"
        "print(','.join(bad))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "", f"inference pulled in: {out.stdout.strip()}"
