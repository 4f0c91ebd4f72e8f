"""``bendline serve --team``: the dashboard under gunicorn, several processes.

gunicorn is a production WSGI server for Unix with pre-forked worker
processes; each process builds the app (after the fork, so no Redis
connection or thread crosses a fork).
"""

from __future__ import annotations

import sys

from ..commands.common import EXIT_ERROR, EXIT_INPUT


def run_team_server(args):
    if not args.redis:
        sys.stderr.write("bendline serve --team: give the team's Redis with --redis redis://HOST:PORT/DB\n")
        return EXIT_INPUT
    from ..store.redis_store import RedisRunStore
    from .users import UserStore

    store = RedisRunStore(args.redis)
    if not store.ping():
        sys.stderr.write(f"bendline serve --team: cannot reach Redis at {store.safe_url}; is it running?\n")
        return EXIT_ERROR
    if not UserStore(args.redis).list():
        sys.stderr.write("bendline serve --team: no users yet; add one with "
                         f"'bendline users add NAME --admin --redis {store.safe_url}'\n")
    try:
        from gunicorn.app.base import BaseApplication
    except ImportError:
        sys.stderr.write("bendline serve --team needs gunicorn: pip install 'bendline[team]'\n")
        return EXIT_ERROR

    cookie_secure = not getattr(args, "insecure_cookies", False)

    class TeamServer(BaseApplication):
        def load_config(self):
            self.cfg.set("bind", f"{args.host}:{args.port}")
            self.cfg.set("workers", max(1, args.processes))
            self.cfg.set("threads", max(1, args.threads))
            self.cfg.set("worker_class", "gthread")
            self.cfg.set("timeout", 60)
            self.cfg.set("accesslog", None)
            self.cfg.set("proc_name", "bendline-team")

        def load(self):
            from .wsgi import build_team_app

            return build_team_app(args.redis, cookie_secure=cookie_secure,
                                  max_in_flight=args.max_in_flight).server

    sys.stderr.write(f"Bendline team server at http://{args.host}:{args.port}/ with {args.processes} "
                     f"processes; runs and users in {store.safe_url}\n")
    TeamServer().run()
    return 0
