"""Dashboard callbacks: plain functions, registered on an app by :func:`register`.

Each module keeps its callback bodies as module-level functions (testable
without a browser) and a ``register(app)`` that wires them to components.
"""

from __future__ import annotations


def register(app):
    from . import changes, exports, loading, panels, running, segments, stale

    loading.register(app)
    changes.register(app)
    running.register(app)
    panels.register(app)
    exports.register(app)
    segments.register(app)
    stale.register(app)
