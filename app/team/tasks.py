"""Fits as Celery tasks: a stable task name whose only argument is the run id.

The series, options and seed are read from the run store (Redis) by the
worker; no request headers, cookies or credentials ever enter the queue.
Workers announce themselves in the store every few seconds with their code
version, so the web server can say when no worker is connected or when
versions differ.
"""

from __future__ import annotations

import os
import socket
import threading

from celery import Celery

from ..execute import execute_run
from ..version import CODE_VERSION

TASK_NAME = "bendline.fit"
WORKER_BEAT = 10.0  # seconds between worker presence records
WORKER_TTL = 30  # a worker silent this long is gone


def make_celery(redis_url):
    """The Celery app for a Redis URL (broker; results are kept in the run store)."""
    app = Celery("bendline", broker=redis_url)
    app.conf.update(
        task_serializer="json",
        accept_content=["json"],
        task_ignore_result=True,
        task_acks_late=False,  # a killed worker's run is failed by its heartbeat, not redelivered
        worker_prefetch_multiplier=1,
        # Fits are long: a worker whose processes are all busy must not hold
        # the next run back from an idle worker. With early acks, prefetch 1
        # still let a busy worker reserve one more message (a queued run
        # waited while another worker sat idle: seen as a flaky fault test).
        worker_disable_prefetch=True,
        broker_connection_retry_on_startup=True,
        broker_connection_timeout=3,
        # a crashed worker's reserved, unstarted tasks return to the queue after this long
        broker_transport_options={"socket_timeout": 3, "socket_connect_timeout": 3, "visibility_timeout": 120},
        task_publish_retry=False,
        worker_hijack_root_logger=False,
        worker_send_task_events=False,
    )

    @app.task(name=TASK_NAME)
    def fit_task(run_id):
        if not isinstance(run_id, str):
            return "refused"
        return execute_run(redis_url, run_id)

    return app


class CeleryExecutor:
    """Hands run ids to Celery workers through Redis."""

    def __init__(self, redis_url, celery_app=None):
        self.redis_url = redis_url
        self.celery = celery_app or make_celery(redis_url)

    def submit(self, run_id):
        self.celery.send_task(TASK_NAME, args=[run_id])


def announce_worker(store, name, concurrency, stop_event):
    """Record this worker's presence and version every few seconds until stopped."""
    info = {"name": name, "version": CODE_VERSION, "concurrency": concurrency, "pid": os.getpid(),
            "host": socket.gethostname()}
    while not stop_event.is_set():
        try:
            store.register_worker(name, info, WORKER_TTL)
        except ConnectionError:
            pass  # Redis away for a moment: try again at the next beat
        stop_event.wait(WORKER_BEAT)


def start_announcer(store, name, concurrency):
    stop = threading.Event()
    t = threading.Thread(target=announce_worker, args=(store, name, concurrency, stop), daemon=True)
    t.start()
    return stop
