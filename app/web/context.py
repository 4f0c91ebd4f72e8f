"""What callbacks reach the server's services through (no module globals).

The app factory puts an :class:`AppServices` into the Flask config; callbacks
read it with :func:`services` while handling a request.
"""

from __future__ import annotations

import base64
import hashlib
import os
from dataclasses import dataclass, field

from flask import current_app, g

from bendline.inference.errors import InputError
from bendline.inference.series import Series

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
SAMPLES_DIR = os.path.join(ROOT, "sample_series")


@dataclass
class AppServices:
    """The server side of the dashboard.

    Attributes
    ----------
    runs : RunService
    store : RunStore
    team : bool
        Team mode (sign-in, shared runs, owner rules).
    samples_dir : str
    max_upload_bytes : int
    allowed_hosts : frozenset of str, optional
        Host names the server answers (:mod:`app.web.security`); None: any.
    """

    runs: object
    store: object
    team: bool = False
    samples_dir: str = SAMPLES_DIR
    max_upload_bytes: int = 20 * 1024 * 1024
    allowed_hosts: frozenset | None = None
    extra: dict = field(default_factory=dict)


def services():
    """The running app's :class:`AppServices`."""
    return current_app.config["BENDLINE"]


def current_user():
    """(name, is_admin) of the signed-in user; ("local", True) outside team mode."""
    user = getattr(g, "bendline_user", None)
    if user is None:
        return "local", True
    return user["name"], bool(user.get("admin"))


def sample_list(samples_dir):
    """[(file name, label)] of the sample CSVs, with the scenario from each JSON."""
    out = []
    if not os.path.isdir(samples_dir):
        return out
    for name in sorted(os.listdir(samples_dir)):
        if name.endswith(".csv"):
            label = name[:-4].replace("_", " ")
            out.append((name, label))
    return out


def decode_upload(contents, max_bytes):
    """Bytes of a dcc.Upload value ("data:...;base64,....")."""
    if not isinstance(contents, str) or "," not in contents:
        raise InputError("the upload was empty")
    b64 = contents.split(",", 1)[1]
    if len(b64) * 3 // 4 > max_bytes:
        raise InputError(f"the file is larger than the {max_bytes // (1024 * 1024)} MB upload limit")
    try:
        return base64.b64decode(b64, validate=False)
    except (ValueError, TypeError):
        raise InputError("the upload could not be decoded; try choosing the file again") from None


def put_series(store, series, *, raw_key=None, regions=(), region=None, label=""):
    """Keep a loaded series server-side; returns its upload key."""
    key = hashlib.sha256((series.content_hash() + (region or "") + label).encode()).hexdigest()[:24]
    store.put_upload(key, {"series": series.to_dict(), "raw_key": raw_key, "regions": list(regions),
                           "region": region, "label": label})
    return key


def get_series(store, key):
    """(Series, upload record) for an upload key, or (None, None)."""
    if not key or not isinstance(key, str) or len(key) > 64:
        return None, None
    rec = store.get_upload(key)
    if rec is None:
        return None, None
    return Series.from_dict(rec["series"]), rec


def store_guarded(fn, n_outputs, message_slots):
    """Wrap a callback so an unreachable run store gives a message, not a 500.

    Parameters
    ----------
    fn : callable
        The callback body.
    n_outputs : int
        How many outputs it returns (1 means a bare value).
    message_slots : dict of int -> str or callable
        Output positions to fill when the store is down: a fixed value, or a
        function of the error message.
    """
    import functools

    from dash import no_update

    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        try:
            return fn(*args, **kwargs)
        except ConnectionError as exc:
            text = "The run store and queue are unavailable. Nothing already saved is lost; this page retries by itself."
            out = [no_update] * n_outputs
            for i, value in message_slots.items():
                out[i] = value(text) if callable(value) else value
            return out[0] if n_outputs == 1 else out

    return wrapper
