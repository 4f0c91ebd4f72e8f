"""``bendline serve``: the dashboard, on a laptop or (with --team) a team server."""

from __future__ import annotations

import os
import sys

from .common import EXIT_ERROR, EXIT_INPUT

DEFAULT_SAMPLE = "daily_admissions.csv"


def register(sub):
    p = sub.add_parser("serve", help="start the dashboard",
                       description="Start the Bendline dashboard (default http://127.0.0.1:8050).")
    p.add_argument("--demo", action="store_true", help="open with a sample series loaded")
    p.add_argument("--host", default="127.0.0.1", help="address to listen on (default 127.0.0.1)")
    p.add_argument("--port", type=int, default=8050, help="port (default 8050)")
    p.add_argument("--data-dir", metavar="DIR",
                   help="folder for the run store (default: the user's data folder)")
    p.add_argument("--workers", type=int, default=2, help="fits run at once in local mode (default 2)")
    p.add_argument("--team", action="store_true", help="team mode: sign-in, shared runs, Celery workers")
    p.add_argument("--redis", metavar="URL", help="Redis URL for team mode (broker and run store)")
    p.add_argument("--threads", type=int, default=8, help="web server threads (default 8)")
    p.add_argument("--processes", type=int, default=2, help="web server processes in team mode (default 2)")
    p.add_argument("--max-in-flight", type=int, default=3,
                   help="team mode: runs one user may have queued or running at once (default 3)")
    p.add_argument("--insecure-cookies", action="store_true",
                   help="team mode: allow the session cookie over plain HTTP (test setups only)")
    p.set_defaults(handler=run_serve)


def default_data_dir():
    import platformdirs

    return os.path.join(platformdirs.user_data_dir("bendline", appauthor=False), "runs")


def build_local_app(data_dir, *, workers=2, demo=False, warm=True, host="127.0.0.1"):
    """The local-mode Dash app with its store, worker pool and run service.

    It answers requests addressed to ``host`` and the loopback names only,
    unless it listens on every address (``0.0.0.0`` or ``::``).
    """
    from ..executors import LocalExecutor
    from ..runs import RunService
    from ..store.disk import DiskRunStore
    from ..web import create_app
    from ..web.context import AppServices

    store = DiskRunStore(data_dir)
    executor = LocalExecutor(store, workers=workers)
    runs = RunService(store, executor)
    runs.fail_orphans()
    if warm:
        executor.warm_up()
    from ..web.security import LOOPBACK

    allowed = None if host in ("0.0.0.0", "::", "") else frozenset(LOOPBACK | {host.lower()})
    services = AppServices(runs=runs, store=store, allowed_hosts=allowed)
    app = create_app(services, demo_sample=DEFAULT_SAMPLE if demo else None)
    from ..api import register_api

    register_api(app.server)
    return app, executor


def run_serve(args):
    if args.team:
        from ..team.serve import run_team_server

        return run_team_server(args)
    data_dir = args.data_dir or default_data_dir()
    try:
        app, executor = build_local_app(data_dir, workers=args.workers, demo=args.demo, host=args.host)
    except OSError as exc:
        sys.stderr.write(f"bendline serve: cannot use the data folder {data_dir}: {exc}\n")
        return EXIT_INPUT
    from waitress import serve

    sys.stderr.write(f"Bendline is running at http://{args.host}:{args.port}/  (runs kept in {data_dir}; "
                     "Ctrl-C to stop)\n")
    try:
        serve(app.server, host=args.host, port=args.port, threads=args.threads, ident="bendline",
              _quiet=True)
    except OSError as exc:
        sys.stderr.write(f"bendline serve: cannot listen on {args.host}:{args.port}: {exc}\n")
        return EXIT_ERROR
    finally:
        executor.shutdown()
    return 0
