"""Small stand-alone HTML pages the server answers with (no such run, no result yet).

Plain HTML with inline styles and no scripts, so they need nothing from
elsewhere and never show a traceback.
"""

from __future__ import annotations

import html

from flask import Response

_PAGE = """<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8"><title>{title} · Bendline</title>
<meta name="viewport" content="width=device-width, initial-scale=1">
<style>
body {{ font-family: system-ui, -apple-system, "Segoe UI", Roboto, Arial, sans-serif; color: #15202b;
  margin: 0; background: #fff; }}
main {{ max-width: 720px; margin: 12vh auto; padding: 24px 28px; border-top: 5px solid #0b5394;
  border: 1px solid #d5dbe1; border-top-width: 5px; border-radius: 6px; }}
h1 {{ font-size: 28px; margin: 0 0 10px; }}
p {{ font-size: 18px; line-height: 1.45; }}
a {{ color: #0b5394; font-weight: 600; }}
</style></head>
<body><main role="main"><h1>{title}</h1><p>{message}</p><p><a href="/">Open the dashboard</a></p></main></body></html>
"""

NO_SUCH_RUN = ("There is no run with this id. Check the link, or open the run from the dashboard's "
               "run list.")


def message_page(title, message, status=404):
    """A short HTML page with a title, one message and a link to the dashboard.

    Parameters
    ----------
    title, message : str
        Plain text (escaped here).
    status : int
        HTTP status.

    Returns
    -------
    flask.Response
    """
    body = _PAGE.format(title=html.escape(title), message=html.escape(message))
    resp = Response(body, status=status, mimetype="text/html")
    resp.headers["Cache-Control"] = "no-store"
    resp.headers["X-Content-Type-Options"] = "nosniff"
    return resp
