"""The code version workers and the web server compare before running a fit."""

from __future__ import annotations

import hashlib
import os

from bendline.inference import SCHEMA_VERSION

_ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def _engine_digest():
    """Hash of the engine's source files: a worker with other engine code differs."""
    h = hashlib.sha256()
    folder = os.path.join(_ROOT, "inference")
    for name in sorted(os.listdir(folder)):
        if name.endswith(".py"):
            with open(os.path.join(folder, name), "rb") as fh:
                h.update(name.encode())
                h.update(fh.read())
    return h.hexdigest()[:12]


CODE_VERSION = f"0.1.0+s{SCHEMA_VERSION}.{_engine_digest()}"
