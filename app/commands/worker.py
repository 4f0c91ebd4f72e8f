"""``bendline worker --redis URL``: a Celery worker that runs the team's fits."""

from __future__ import annotations

import os
import socket
import sys

from .common import EXIT_ERROR


def register(sub):
    p = sub.add_parser("worker", help="run fits for a team server (Celery worker)",
                       description="Start a Celery worker that runs the team's fits.")
    p.add_argument("--redis", required=True, metavar="URL", help="the team's Redis URL (redis://HOST:PORT/DB)")
    p.add_argument("--concurrency", type=int, default=max(1, (os.cpu_count() or 2) // 1),
                   help="fits run at once by this worker (default: one per core)")
    p.add_argument("--name", default=None, help="worker name (default bendline@HOST-PID)")
    p.add_argument("--loglevel", default="WARNING", help="Celery log level (default WARNING)")
    p.set_defaults(handler=run_worker)


def run_worker(args):
    from ..store.redis_store import RedisRunStore
    from ..team.tasks import make_celery, start_announcer

    store = RedisRunStore(args.redis)
    if not store.ping():
        sys.stderr.write(f"bendline worker: cannot reach Redis at {store.safe_url}; is it running?\n")
        return EXIT_ERROR
    name = args.name or f"bendline@{socket.gethostname()}-{os.getpid()}"
    stop = start_announcer(store, name, args.concurrency)
    app = make_celery(args.redis)
    sys.stderr.write(f"bendline worker {name}: {args.concurrency} fit(s) at a time from {store.safe_url}\n")
    try:
        app.worker_main(["worker", f"--loglevel={args.loglevel}", f"--concurrency={args.concurrency}",
                         "--pool=prefork", "-n", name, "--without-gossip", "--without-mingle",
                         "--without-heartbeat"])
    finally:
        stop.set()
    return 0
