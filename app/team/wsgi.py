"""The team server's WSGI application: Redis store, Celery executor, sign-in.

Built once per web-server process (gunicorn forks several); each process
runs a small maintenance thread that marks runs of dead workers failed and
starts held runs.
"""

from __future__ import annotations

import threading

#: Seconds between maintenance passes (reaping dead runs, starting held runs,
#: finishing comparisons). Held runs (over a user's in-flight limit, e.g. a
#: board's series) start only on a pass, so a long period throttles a board:
#: measured with bench/board.py, 12 series on 2 workers took 66 s at limit 3
#: against 54 s at limit 12 with a 10 s period.
MAINTAIN_EVERY = 3.0


def build_team_app(redis_url, *, cookie_secure=True, max_in_flight=3, maintain=True):
    """The Dash app for team mode.

    Parameters
    ----------
    redis_url : str
    cookie_secure : bool
    max_in_flight : int
        Runs one user may have queued or running at once.
    maintain : bool
        Start the maintenance thread.
    """
    from ..api import register_api
    from ..runs import RunService
    from ..store.redis_store import RedisRunStore
    from ..web import create_app
    from ..web.context import AppServices
    from .auth import install
    from .tasks import CeleryExecutor
    from .users import UserStore

    store = RedisRunStore(redis_url)
    runs = RunService(store, CeleryExecutor(redis_url), max_in_flight=max_in_flight)
    services = AppServices(runs=runs, store=store, team=True)
    app = create_app(services)
    install(app.server, UserStore(redis_url), cookie_secure=cookie_secure)
    register_api(app.server)
    if maintain:
        stop = threading.Event()
        threading.Thread(target=_maintain, args=(runs, stop), daemon=True).start()
        services.extra["stop_maintenance"] = stop
    return app


def _maintain(runs, stop):
    while not stop.wait(MAINTAIN_EVERY):
        try:
            runs.maintain()
        except ConnectionError:
            runs.store_unreachable()  # Redis away: the workers get a heartbeat period after it returns
