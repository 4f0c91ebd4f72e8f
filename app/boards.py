"""Boards: every series of a long-format file fitted at once, release after release.

A board is a record of kind ``board`` in the run store (so it has an owner,
the same access rules and the same store as runs). It holds the shared
choices (``by``: the column naming the series; ``spec``: the public
options) and a list of **releases**, one per file loaded. Each release lists
its series; each series points at an ordinary run (kind ``fit``) queued on
the executor like any other, or carries the reason it could not be fitted.
Refitting one series from the dashboard adds a run to that series' history
in the latest release (:meth:`BoardService.attach_refit`).

:func:`board_view` turns a board into what every view reads (the page, the
API, the briefing view, the report and the CSV): one row per series with the
current growth, direction, doubling or halving time, P(growing), latest
change date, verdict and warnings, and what changed since the previous
release: direction then and now, a change date that is new, the growth
estimate then and now, and how much the previous release's trend at its
last date was revised by the new data.
"""

from __future__ import annotations

import hashlib

from bendline.inference.errors import InputError

from .runs import FINISHED, new_run_id, now_iso

#: Columns of the board table (CSV and views), in order.
COLUMNS = (
    "series", "status", "reportable", "direction", "growth_pct_median", "growth_pct_q05", "growth_pct_q95",
    "growth_unit", "doubling_time_days", "halving_time_days", "prob_growing", "latest_change_date",
    "latest_change_q05", "latest_change_q95", "direction_before", "growth_pct_before", "new_change_date",
    "revision_pct", "attention", "warnings", "reason", "run_id",
)
#: What needs a look first: a direction that turned since the previous
#: release, a change date outside every 90% interval of the previous
#: release's change dates, a growing series; then the rest.
ATTENTION_ORDER = ("turned", "new change date", "growing", "")


def read_series_of_file(data, label, by, loader=None):
    """Every series of a long-format file, and a reason for each that cannot be read.

    Parameters
    ----------
    data : bytes
    label : str
        The file's name for messages.
    by : str or None
        Column naming the series (found by name when None).
    loader : dict, optional
        ``date_column``, ``count_column``, ``interval``.

    Returns
    -------
    order : list of str
    series : dict of str to Series
    refused : dict of str to str
        Series whose rows cannot be read, with the reason.

    Raises
    ------
    InputError
        When the file or its series column cannot be read, or no series can.
    """
    from bendline.inference.reader import list_regions, read_all_regions, read_series

    kw = dict(loader or {})
    try:
        series = read_all_regions(data, region_column=by, name=label, **kw)
        return list(series), series, {}
    except InputError as exc:
        first = exc
    order = list_regions(data, region_column=by, name=label)
    if not order:
        raise first
    series, refused = {}, {}
    for name in order:
        try:
            series[name] = read_series(data, region_column=by, region=name, name=label, **kw)
        except InputError as exc:
            refused[name] = str(exc)
    if not series:
        raise first
    return order, series, refused


class BoardService:
    """Create boards, add releases, refit series; on top of a :class:`app.runs.RunService`."""

    def __init__(self, runs):
        self.runs = runs
        self.store = runs.store

    def create(self, data, label, by, spec, *, owner="local", loader=None):
        """A new board with its first release; returns the board record.

        Raises
        ------
        InputError
            When the file cannot be read or the options are refused for every series.
        """
        board_id = new_run_id()
        record = {
            "id": board_id, "kind": "board", "owner": owner, "created_at": now_iso(),
            "created_ts": self.runs.clock(), "series_name": label, "by": by, "spec": dict(spec),
            "loader": dict(loader or {}), "segments": spec.get("segments"), "status": "running",
            "reason": None, "releases": [],
        }
        release = self._fit_release(data, label, record, owner)  # raises before anything is stored
        record["releases"] = [release]
        record["by"] = release.pop("by")
        self.store.create_run(record, {})
        return record

    def add_release(self, board_id, data, label, *, owner="local"):
        """Load the next release of the data into a board; every series is fitted again."""
        board = self.get(board_id)
        if board is None:
            raise KeyError(board_id)
        release = self._fit_release(data, label, board, owner)
        release.pop("by")
        with self.store.lock(f"board:{board_id}"):
            board = self.get(board_id)
            release["index"] = len(board["releases"])
            return self.store.update_run(board_id, releases=board["releases"] + [release], status="running")

    def _fit_release(self, data, label, board, owner):
        from bendline.inference.options import check_public, engine_options
        from bendline.inference.reader import series_column

        loader = board.get("loader") or {}
        # the column is guessed once (or checked when given), then kept for every release
        given = board.get("by")
        if given is not None:
            from bendline.inference.reader import read_table

            columns = [str(c) for c in read_table(data, name=label)[0].columns]
            if given not in columns:
                raise InputError(f"there is no column {given!r} to name the series; the columns are "
                                 f"{', '.join(map(repr, columns))}", column="by", value=given)
        by = series_column(data, region_column=given, name=label)
        if by is None:
            raise InputError(f"{label} has no column naming the series (a column such as region, district "
                             "or group); choose the column that names them", column="by")
        order, series, refused = read_series_of_file(data, label, by, loader)
        spec = check_public(board["spec"])
        rows = []
        for name in order:
            if name in refused:
                rows.append({"name": name, "run_id": None, "reason": refused[name], "history": []})
                continue
            try:
                options = engine_options(spec, series[name])
                rec = self.runs.submit(series[name], options, owner=owner, spec=spec, kind="fit",
                                       parent=board["id"])
            except InputError as exc:  # e.g. a series too short for K: the others proceed
                rows.append({"name": name, "run_id": None, "reason": str(exc), "history": []})
                continue
            rows.append({"name": name, "run_id": rec["id"], "reason": None, "history": [rec["id"]]})
        if all(r["run_id"] is None for r in rows):
            raise InputError("no series of this file could be fitted: " + "; ".join(
                f"{r['name']}: {r['reason']}" for r in rows[:3]), column="segments")
        return {"index": 0, "created": now_iso(), "file_name": label,
                "data_hash": hashlib.sha256(data).hexdigest()[:16], "series": rows, "by": by}

    def get(self, board_id):
        rec = self.runs.get(board_id)
        return rec if rec is not None and rec.get("kind") == "board" else None

    def owned(self, board_id, user, admin, what):
        """The board when ``user`` may change it (its owner or an admin).

        Raises
        ------
        KeyError
            No such board.
        PermissionError
            Someone else's board; the message says what only they may ``what``.
        """
        board = self.get(board_id)
        if board is None:
            raise KeyError(board_id)
        if board.get("owner") != user and not admin:
            raise PermissionError(f"only the board's owner or an admin can {what}")
        return board

    def attach_refit(self, board_id, name, run_id):
        """Make ``run_id`` the current run of series ``name`` in the board's latest release."""
        with self.store.lock(f"board:{board_id}"):
            board = self.get(board_id)
            if board is None:
                return None
            releases = board["releases"]
            for row in releases[-1]["series"]:
                if row["name"] == name:
                    row["history"] = row.get("history", []) + [run_id]
                    row["run_id"], row["reason"] = run_id, None
                    return self.store.update_run(board_id, releases=releases, status="running")
        return None

    def refit(self, board_id, names=None, spec=None, *, owner="local"):
        """Fit series of the latest release again; returns {name: new run id or the reason it was refused}.

        ``names`` defaults to every series whose run failed, was stopped or
        deleted; ``spec`` (public options) overrides the board's choices for
        these runs only (e.g. a larger time budget).
        """
        from bendline.inference.options import check_public, engine_options

        board = self.get(board_id)
        if board is None:
            raise KeyError(board_id)
        merged = check_public({**board["spec"], **(spec or {})})
        rows = board["releases"][-1]["series"]
        if names is None:
            names = [r["name"] for r in rows if self._needs_refit(r)]
        known = {r["name"]: r for r in rows}
        unknown = [n for n in names if n not in known]
        if unknown:
            raise InputError(f"no series {unknown[0]!r} in this board's latest release", column="series")
        out = {}
        for name in names:
            row = known[name]
            source = next((rid for rid in reversed(row.get("history", [])) if self.runs.series(rid) is not None), None)
            if source is None:
                out[name] = row.get("reason") or "its data are not kept; load a new release instead"
                continue
            series = self.runs.series(source)
            try:
                rec = self.runs.submit(series, engine_options(merged, series), owner=owner, spec=merged,
                                       kind="fit", parent=board_id)
            except InputError as exc:
                out[name] = str(exc)
                continue
            self.attach_refit(board_id, name, rec["id"])
            out[name] = rec["id"]
        return out

    def _needs_refit(self, row):
        if row.get("run_id") is None:
            return False  # refused at load: fitting it again would be refused again
        rec = self.runs.get(row["run_id"])
        return rec is None or rec["status"] in ("failed", "stopped")

    def board_of(self, run_id):
        """(board id, series name, series hash) when ``run_id`` is a series' run in a board's latest release."""
        rec = self.runs.get(run_id)
        board = self.get(rec.get("parent")) if rec is not None and rec.get("parent") else None
        if board is None or not board.get("releases"):
            return None
        for row in board["releases"][-1]["series"]:
            if run_id in row.get("history", []):
                return board["id"], row["name"], rec.get("series_hash")
        return None

    def list(self, limit=200):
        return [r for r in self.store.list_runs(10_000) if r.get("kind") == "board"][:limit]


# ---------------------------------------------------------------------------
# The view every shell reads


def _q(block, key):
    return (block or {}).get(key)


def _series_row(name, entry, runs):
    """One row of a release: the run's state and headline numbers."""
    row = dict.fromkeys(COLUMNS)
    row.update(series=name, run_id=entry.get("run_id"), reason=entry.get("reason"))
    if entry.get("run_id") is None:
        row.update(status="refused", reportable=False)
        return row, None
    rec = runs.get(entry["run_id"])
    if rec is None:
        row.update(status="deleted", reportable=False, reason="the run was deleted")
        return row, None
    row.update(status=rec["status"], reason=rec.get("reason") or row["reason"])
    result = runs.result(entry["run_id"]) if rec["status"] in FINISHED else None
    if result is None:
        row["reportable"] = False if rec["status"] in FINISHED else None
        return row, None
    diag = result.get("diagnostics") or {}
    current = result.get("current") or {}
    weekly = (result.get("series") or {}).get("interval_days", 1) == 7
    pct = current.get("growth_pct_per_week" if weekly else "growth_pct_per_day") or {}
    cps = result.get("changepoints") or []
    row.update(
        reportable=bool(diag.get("reportable")),
        direction=current.get("direction"),
        growth_pct_median=pct.get("median"), growth_pct_q05=pct.get("q05"), growth_pct_q95=pct.get("q95"),
        growth_unit="week" if weekly else "day",
        doubling_time_days=_q(current.get("doubling_time_days"), "median"),
        halving_time_days=_q(current.get("halving_time_days"), "median"),
        prob_growing=current.get("prob_growing"),
        latest_change_date=cps[-1].get("median_date") if cps else None,
        latest_change_q05=cps[-1].get("q05_date") if cps else None,
        latest_change_q95=cps[-1].get("q95_date") if cps else None,
        warnings=" | ".join(w.get("message", "") for w in diag.get("warnings") or []) or None,
    )
    return row, result


def _trend_at(result, date):
    """The trend's median on ``date`` (ISO), or None when the band does not reach it."""
    band = (result or {}).get("band") or {}
    try:
        i = band["dates"].index(date)
    except (KeyError, ValueError):
        return None
    return band["trend_q50"][i]


def _changes(row, result, before_row, before_result):
    """What moved since the previous release, written into ``row``."""
    if before_row is None:
        return
    row["direction_before"] = before_row.get("direction")
    row["growth_pct_before"] = before_row.get("growth_pct_median")
    if result is None or before_result is None:
        return
    old = [(o.get("q05_date"), o.get("q95_date")) for o in before_result.get("changepoints") or []]
    for cp in result.get("changepoints") or []:
        date = cp.get("median_date")
        if date and not any(lo and hi and lo <= date <= hi for lo, hi in old):
            row["new_change_date"] = date  # the latest one that is new
    last = ((before_result.get("band") or {}).get("dates") or [None])[-1]
    then, now = _trend_at(before_result, last), _trend_at(result, last)
    if then and now:
        row["revision_pct"] = round(100.0 * (now / then - 1.0), 1)


def _attention(row):
    if row["status"] in ("refused", "failed", "deleted") or row["reportable"] is False:
        return ""
    if row["direction_before"] and row["direction"] and row["direction_before"] != row["direction"]:
        return "turned"
    if row["new_change_date"]:
        return "new change date"
    if row["direction"] == "growing":
        return "growing"
    return ""


def board_view(board, runs, *, with_results=False):
    """The board as every view reads it.

    Returns
    -------
    dict
        ``id``, ``status`` (running until every series of the latest release
        has ended), ``by``, ``spec``, ``releases``: each with ``index``,
        ``created``, ``file_name``, ``data_hash`` and ``rows`` (dicts keyed by
        :data:`COLUMNS`; for releases after the first, the ``*_before`` and
        change columns compare with the release before). With
        ``with_results``, ``results`` maps run ids of the latest release to
        their JSON results (for small charts and reports).
    """
    releases, previous, previous_results = [], {}, {}
    results = {}
    for rel in board.get("releases", []):
        rows, this_results = [], {}
        for entry in rel["series"]:
            row, result = _series_row(entry["name"], entry, runs)
            before = previous.get(entry["name"])
            _changes(row, result, before, previous_results.get(entry["name"]))
            row["attention"] = _attention(row)
            rows.append(row)
            this_results[entry["name"]] = result
        releases.append({k: rel.get(k) for k in ("index", "created", "file_name", "data_hash")} | {"rows": rows})
        previous = {r["series"]: r for r in rows}
        previous_results = this_results
        results = this_results
    latest = releases[-1]["rows"] if releases else []
    running = any(r["status"] in ("queued", "running") for r in latest)
    view = {"id": board["id"], "name": board.get("series_name"), "owner": board.get("owner"),
            "created_at": board.get("created_at"), "status": "running" if running else "finished",
            "by": board.get("by"), "spec": board.get("spec"), "releases": releases}
    if with_results:
        view["results"] = {r["run_id"]: results.get(r["series"]) for r in latest if r["run_id"]}
    return view


def ranked(rows):
    """Rows in the order an analyst reads them: reportable first by attention, then growth; the rest set apart.

    Returns
    -------
    (list of dict, list of dict)
        Reportable rows ranked (turned, new change date, growing, then by
        growth, fastest first), and the others (not reportable, refused,
        failed or still running), by name.
    """
    good = [r for r in rows if r["reportable"]]
    rest = [r for r in rows if not r["reportable"]]
    good.sort(key=lambda r: (ATTENTION_ORDER.index(r["attention"] or ""),
                             -(r["growth_pct_median"] if r["growth_pct_median"] is not None else -1e9)))
    rest.sort(key=lambda r: str(r["series"]))
    return good, rest


def api_view(view):
    """``GET /api/v1/boards/{id}``: the releases with each series' headline and its changes."""
    out = {"id": view["id"], "status": view["status"], "by": view["by"], "spec": view["spec"], "releases": []}
    for rel in view["releases"]:
        series = []
        for r in rel["rows"]:
            unit = r["growth_unit"] or "day"
            growth = None if r["growth_pct_median"] is None else {
                "median": r["growth_pct_median"], "q05": r["growth_pct_q05"], "q95": r["growth_pct_q95"]}
            series.append({
                "name": r["series"], "run_id": r["run_id"], "status": r["status"], "reportable": r["reportable"],
                "warnings": r["warnings"].split(" | ") if r["warnings"] else [], "reason": r["reason"],
                "current": {"direction": r["direction"], f"growth_pct_per_{unit}": growth,
                            "prob_growing": r["prob_growing"], "doubling_time_days": r["doubling_time_days"],
                            "halving_time_days": r["halving_time_days"]},
                "latest_change_date": None if r["latest_change_date"] is None else {
                    "median": r["latest_change_date"], "q05": r["latest_change_q05"],
                    "q95": r["latest_change_q95"]},
                "changes_since_previous": None if rel["index"] == 0 else {
                    "direction_before": r["direction_before"], "new_change_date": r["new_change_date"],
                    f"growth_pct_per_{unit}_before": r["growth_pct_before"],
                    "trend_revision_pct": r["revision_pct"]},
                "attention": r["attention"] or None,
            })
        out["releases"].append({"index": rel["index"], "created": rel["created"], "file_name": rel["file_name"],
                                "data_hash": rel["data_hash"], "series": series})
    return out


def board_csv(view):
    """The latest release's table as CSV, every text cell neutralised (the reports' one rule)."""
    import csv
    import io

    from .reports.tables import neutralise

    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\r\n")
    writer.writerow(("release",) + COLUMNS)
    rel = view["releases"][-1] if view["releases"] else {"index": 0, "rows": []}
    good, rest = ranked(rel["rows"])
    for r in good + rest:
        writer.writerow([rel["index"]] + ["" if r[c] is None else neutralise(r[c]) for c in COLUMNS])
    return buf.getvalue()
