"""Bendline's application shell: command line, dashboard, run stores, executors.

Modules here import nothing heavy at import time (workers import them too);
the Dash app is built by :func:`app.web.create_app`.
"""
