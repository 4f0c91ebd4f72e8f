"""``bendline batch FILE --by COLUMN``: fit every region of a long-format file.

Each region is fitted with the same model flags as ``bendline fit``, either
locally in parallel worker processes or, with ``--redis URL``, as runs on the
team's workers. The output folder gets one JSON result per region
(``<region-slug>.json``, the document ``bendline fit`` writes) and
``summary.csv`` with one row per region.

A region that cannot be fitted (bad rows, too short) is reported in the
summary with its message and does not stop the others. Exit status: 0 when
every region converged; 3 when some finished unconverged or failed; 2 for bad
input (the file, the region column, the flags); 1 for anything else (an
output folder that cannot be written, team mode unavailable); 130 when
interrupted (the summary of the regions done so far is still written).
"""

from __future__ import annotations

import argparse
import csv
import os
import re
import sys
import time
import unicodedata

from bendline.inference.errors import InputError
from bendline.inference.wording import verdict_of

from .common import EXIT_ERROR, EXIT_INPUT, EXIT_OK, EXIT_UNCONVERGED, emit_json
from .options import add_input_arguments, add_model_arguments, check_args, options_from_args

#: Columns of summary.csv, in order.
SUMMARY_COLUMNS = (
    "region",
    "status",
    "converged",
    "reportable",
    "direction",
    "growth_pct_per_day_median",
    "growth_pct_per_day_q05",
    "growth_pct_per_day_q95",
    "growth_pct_per_week_median",
    "growth_pct_per_week_q05",
    "growth_pct_per_week_q95",
    "growth_rate_per_day_median",
    "growth_rate_per_day_q05",
    "growth_rate_per_day_q95",
    "doubling_time_days_median",
    "halving_time_days_median",
    "prob_growing",
    "latest_change_date_median",
    "rhat_max",
    "ess_min",
    "warnings",
    "message",
    "result_file",
)

_RESERVED_NAMES = frozenset(
    {"con", "prn", "aux", "nul"} | {f"com{i}" for i in range(1, 10)} | {f"lpt{i}" for i in range(1, 10)}
)
#: Seconds between status checks of the team's runs.
TEAM_POLL_SECONDS = 1.0
#: Say once that no run has started when all are still queued after this long.
TEAM_IDLE_WARNING_SECONDS = 60.0


def register(sub):
    """Add ``batch`` to the ``bendline`` subcommands."""
    p = sub.add_parser(
        "batch",
        help="fit every region of a long-format file",
        description="Fit the trend model to every region of a long-format CSV (one column names the "
                    "region) and write one JSON result per region and a summary.csv.",
    )
    p.add_argument("file", metavar="FILE", help="long-format CSV: a date, a count and a region column")
    p.add_argument("--by", required=True, metavar="COLUMN", help="the column naming the region")
    add_input_arguments(p)
    add_model_arguments(p)
    p.add_argument("--out-dir", metavar="DIR",
                   help="folder for the results (default: FILE's name with _fits, in the current folder)")
    p.add_argument("--workers", type=int, metavar="N",
                   help="regions fitted at once on this machine (default: one per core)")
    p.add_argument("--redis", metavar="URL",
                   help="fit on the team's workers through this Redis URL instead of locally")
    p.add_argument("--board", nargs="?", const="new", metavar="BOARD_ID",
                   help="with --redis: record the fits as a board that the team server shows at /board/<id> "
                        "(a new board; with BOARD_ID, the next release of that board)")
    p.add_argument("--quiet", action="store_true", help="no progress on stderr")
    p.set_defaults(handler=run_batch)


def run_batch(args):
    """Handler of ``bendline batch``; returns the exit status."""
    if args.workers is not None and args.workers < 1:
        sys.stderr.write(f"bendline batch: --workers must be at least 1, got {args.workers}\n")
        return EXIT_INPUT
    if args.board and not args.redis:
        sys.stderr.write("bendline batch: --board needs --redis: boards live on a team server, which shows "
                         "them at /board/<id>\n")
        return EXIT_INPUT
    try:
        given = check_options(args)
        order, regions, outcomes = read_regions(args)
    except InputError as exc:
        sys.stderr.write(f"bendline batch: {exc}\n")
        return EXIT_INPUT
    jobs = {}
    for region, series in regions.items():
        try:
            jobs[region] = (series, options_from_args(args, series))
        except InputError as exc:  # e.g. a --change-date outside this region's dates
            outcomes[region] = failed(f"region '{region}': {exc}")

    out_dir = args.out_dir or default_out_dir(args.file)
    try:
        os.makedirs(out_dir, exist_ok=True)
    except OSError as exc:
        sys.stderr.write(f"bendline batch: cannot create the output folder {out_dir}: {exc.strerror or exc}\n")
        return EXIT_ERROR

    if args.redis:
        service = team_service(args.redis)
        if isinstance(service, str):
            sys.stderr.write(f"bendline batch: {service}\n")
            return EXIT_ERROR
        if args.board:
            try:
                pending, board_id = board_release(args, service, given, outcomes)
            except InputError as exc:
                sys.stderr.write(f"bendline batch: {exc}\n")
                return EXIT_INPUT
            except KeyError:
                sys.stderr.write(f"bendline batch: there is no board {args.board!r} on this team server\n")
                return EXIT_INPUT
            sys.stderr.write(f"bendline batch: board {board_id}: the team server shows it at /board/{board_id}\n")
            fits = follow_on_team(pending, service)
        else:
            fits = fit_on_team(jobs, service, given=given)
    else:
        fits = fit_locally(jobs, args.workers, given)
    progress = RegionProgress(len(order), quiet=args.quiet)
    progress.update(len(outcomes))

    interrupted = False
    try:
        for region, outcome in fits:
            outcomes[region] = outcome
            progress.update(len(outcomes), region, outcome["status"])
    except KeyboardInterrupt:
        interrupted = True
        fits.close()
        for region in order:
            outcomes.setdefault(region, {"status": "stopped", "result": None,
                                         "message": "interrupted before this region finished"})
    except TeamQueueError as exc:
        sys.stderr.write(f"bendline batch: {exc}\n")
        return EXIT_ERROR
    try:
        rows = write_outputs(out_dir, order, outcomes)
    except OSError as exc:
        sys.stderr.write(f"bendline batch: cannot write the results to {out_dir}: {exc.strerror or exc}\n")
        return EXIT_ERROR
    return report(rows, out_dir, interrupted)


# --------------------------------------------------------------------------
# Input


def check_options(args):
    """Refuse bad model flags once, before any region is read (InputError); returns the options given."""
    from bendline.inference.options import engine_options
    from bendline.inference.series import Series
    from bendline.inference.spec import spec_from_options

    given = check_args(args)
    public = {k: v for k, v in given.items() if k != "change_date"}
    probe = Series.from_counts("2026-01-05", [1.0] * 400)  # any series: the change dates are checked per region
    spec_from_options(engine_options(public, probe))
    return given


def read_regions(args):
    """Every region's series, and a failure outcome for each region that cannot be read.

    Returns
    -------
    order : list of str
        The regions in order of first appearance in the file.
    regions : dict of str to Series
    outcomes : dict of str to outcome
        The regions whose rows cannot be read, as failures.

    Raises
    ------
    InputError
        When the file, the region column or every region cannot be read.
    """
    from bendline.inference.reader import list_regions, read_all_regions, read_series

    kw = {"date_column": args.date_column, "count_column": args.count_column, "interval": args.interval}
    try:
        regions = read_all_regions(args.file, region_column=args.by, **kw)
        return list(regions), regions, {}
    except InputError as exc:
        first = exc
    # one region's bad rows stop read_all_regions: read the regions one by one
    order = list_regions(args.file, region_column=args.by)
    regions, outcomes = {}, {}
    for region in order:
        try:
            regions[region] = read_series(args.file, region_column=args.by, region=region, **kw)
        except InputError as exc:
            outcomes[region] = failed(str(exc))
    if not regions:
        raise first
    return order, regions, outcomes


def default_out_dir(path):
    """``<file name without extension>_fits`` in the current folder."""
    stem = os.path.splitext(os.path.basename(os.path.normpath(path)))[0] or "batch"
    return f"{stem}_fits"


# --------------------------------------------------------------------------
# Fitting


def failed(message):
    """The outcome of a region that could not be fitted."""
    return {"status": "failed", "result": None, "message": message}


def fit_region(series_dict, options, given=None):
    """Fit one region in a worker process; returns its outcome (never raises).

    Parameters
    ----------
    series_dict : dict
        ``Series.to_dict()`` of the region.
    options : dict
        The engine's options.
    given : dict, optional
        The options as given on the command line (the result's ``spec``).

    Returns
    -------
    dict
        ``status``, ``result`` (the JSON result or None) and ``message``.
    """
    from bendline.inference.fitting import fit_result
    from bendline.inference.series import Series

    try:
        result, final = fit_result(Series.from_dict(series_dict), options, given=given)
    except InputError as exc:
        return failed(str(exc))
    except MemoryError:
        return failed("out of memory; try fewer chains or draws, or fewer workers")
    except Exception as exc:  # report it in the summary, keep the other regions going
        return failed(f"internal error ({type(exc).__name__}: {exc}); please report it")
    if result is None:
        return failed("stopped before any draws were made")
    status = result.get("status") or (final or {}).get("status") or "unconverged"
    return {"status": status, "result": result, "message": None}


def fit_locally(jobs, workers=None, given=None):
    """Fit the regions in parallel worker processes; yields (region, outcome) as each finishes."""
    import multiprocessing
    from concurrent.futures import ProcessPoolExecutor, as_completed
    from concurrent.futures.process import BrokenProcessPool

    if not jobs:
        return
    n = min(len(jobs), workers or os.cpu_count() or 1)
    pool = ProcessPoolExecutor(max_workers=n, mp_context=multiprocessing.get_context("spawn"))
    try:
        futures = {pool.submit(fit_region, series.to_dict(), options, given): region
                   for region, (series, options) in jobs.items()}
        for fut in as_completed(futures):
            try:
                outcome = fut.result()
            except BrokenProcessPool:
                outcome = failed("the worker process ended unexpectedly (out of memory or killed); "
                                 "try fewer workers")
            yield futures[fut], outcome
    finally:
        pool.shutdown(wait=False, cancel_futures=True)


class TeamQueueError(RuntimeError):
    """The team's queue could not take the runs."""


def team_service(url):
    """A run service on the team's Redis and Celery workers, or a message saying why not."""
    try:
        from ..runs import RunService
        from ..store.redis_store import RedisRunStore
        from ..team.tasks import CeleryExecutor
    except ImportError as exc:
        hint = ". Install Bendline with its team extras: pip install 'bendline[team]'" \
            if isinstance(exc, ModuleNotFoundError) else ""
        return f"team mode is not available: {exc}{hint}"
    try:
        store = RedisRunStore(url)
        reachable = store.ping()
    except ValueError as exc:  # a malformed URL; the store's message shows it redacted
        return f"cannot use the --redis URL: {exc}"
    except Exception as exc:  # its text may hold the URL's password: name the kind only
        return f"cannot use the team's Redis ({type(exc).__name__}); check the URL given with --redis"
    if not reachable:
        return f"cannot reach Redis at {getattr(store, 'safe_url', 'the --redis URL')}; is it running?"
    return RunService(store, CeleryExecutor(url))


def _owner():
    import getpass

    try:
        return getpass.getuser()
    except (KeyError, OSError):
        return "batch"


def board_release(args, service, given, outcomes):
    """Record the file as a board release on the team's store; returns ({region: run id}, board id).

    Regions the board could not fit are added to ``outcomes`` as failures.
    """
    from ..boards import BoardService

    with open(args.file, "rb") as fh:
        data = fh.read()
    label = os.path.basename(args.file)
    loader = {k: getattr(args, k) for k in ("date_column", "count_column", "interval") if getattr(args, k)}
    boards = BoardService(service)
    if args.board == "new":
        board = boards.create(data, label, args.by, given, owner=_owner(), loader=loader)
    else:
        board = boards.add_release(args.board, data, label, owner=_owner())
    pending = {}
    for row in board["releases"][-1]["series"]:
        if row["run_id"]:
            pending[row["name"]] = row["run_id"]
        else:
            outcomes[row["name"]] = failed(f"region '{row['name']}': {row['reason']}")
    return pending, board["id"]


def fit_on_team(jobs, service, *, poll_seconds=TEAM_POLL_SECONDS, sleep=time.sleep,
                clock=time.monotonic, log=sys.stderr, given=None):
    """Create one run per region on the team's workers and yield (region, outcome) as each finishes.

    Raises
    ------
    TeamQueueError
        When the queue cannot take a run (the runs already queued are stopped).
    """
    from ..runs import QueueUnavailable

    owner = _owner()
    pending = {}
    try:
        for region, (series, options) in jobs.items():
            try:
                pending[region] = service.submit(series, options, owner=owner, spec=given)["id"]
            except InputError as exc:
                yield region, failed(str(exc))
    except BaseException as exc:  # refused or interrupted: do not leave runs going on the team's workers
        for run_id in pending.values():
            _stop_quietly(service, run_id)
        if isinstance(exc, QueueUnavailable):
            raise TeamQueueError("the team's queue did not take the runs; check that Redis is up "
                                 "and try again") from None
        raise
    yield from follow_on_team(pending, service, poll_seconds=poll_seconds, sleep=sleep, clock=clock, log=log)


def _stop_quietly(service, run_id):
    try:
        service.stop(run_id)
    except Exception:  # noqa: BLE001 - stopping is best effort
        pass


def follow_on_team(pending, service, *, poll_seconds=TEAM_POLL_SECONDS, sleep=time.sleep,
                   clock=time.monotonic, log=sys.stderr):
    """Yield (region, outcome) as each of ``pending`` ({region: run id}) finishes on the team's workers."""
    from ..store import FINISHED

    pending = dict(pending)
    try:
        started, warned = clock(), False
        while pending:
            states = {}
            for region, run_id in list(pending.items()):
                try:
                    rec = service.get(run_id)
                except (ConnectionError, OSError) as exc:
                    raise TeamQueueError(f"lost the connection to the team's store ({type(exc).__name__}); "
                                         "the runs go on on the team's workers: see them in the dashboard"
                                         ) from None
                states[region] = rec["status"] if rec else None
                if rec is None:
                    del pending[region]
                    yield region, failed("the run disappeared from the team's store")
                elif rec["status"] in FINISHED:
                    del pending[region]
                    yield region, {"status": rec["status"], "result": service.result(run_id),
                                   "message": rec.get("reason")}
            if not pending:
                break
            if not warned and clock() - started > TEAM_IDLE_WARNING_SECONDS and \
                    all(s == "queued" for s in states.values()):
                warned = True
                log.write("\nbendline batch: no run has started yet; are the team's workers running "
                          "(bendline worker --redis URL)?\n")
            sleep(poll_seconds)
    finally:  # interrupted or refused: do not leave runs going on the team's workers
        for run_id in pending.values():
            _stop_quietly(service, run_id)


# --------------------------------------------------------------------------
# Output


def write_outputs(out_dir, order, outcomes):
    """Write each region's JSON result and summary.csv; returns the summary rows."""
    taken, rows = set(), []
    for region in order:
        outcome = outcomes[region]
        result_file = None
        if outcome.get("result") is not None:
            result_file = region_slug(region, taken) + ".json"
            emit_json(outcome["result"], os.path.join(out_dir, result_file))
        rows.append(summary_row(region, outcome, result_file))
    write_summary(os.path.join(out_dir, "summary.csv"), rows)
    return rows


def summary_row(region, outcome, result_file=None):
    """One summary.csv row (a dict keyed by :data:`SUMMARY_COLUMNS`)."""
    result = outcome.get("result")
    row = dict.fromkeys(SUMMARY_COLUMNS)
    row.update(region=region, status=outcome["status"], message=outcome.get("message"),
               result_file=result_file)
    if result is None:
        return row
    diag = result.get("diagnostics") or {}
    current = result.get("current") or {}
    rate = current.get("growth_rate_per_day") or {}
    ess = [v for v in (diag.get("ess_bulk_min"), diag.get("ess_tail_min")) if v is not None]
    cps = result.get("changepoints") or []
    day, week = current.get("growth_pct_per_day") or {}, current.get("growth_pct_per_week") or {}
    row.update(
        converged=bool(diag.get("converged")),
        reportable=verdict_of(diag)[0],
        direction=current.get("direction"),
        growth_pct_per_day_median=day.get("median"), growth_pct_per_day_q05=day.get("q05"),
        growth_pct_per_day_q95=day.get("q95"), growth_pct_per_week_median=week.get("median"),
        growth_pct_per_week_q05=week.get("q05"), growth_pct_per_week_q95=week.get("q95"),
        warnings=" | ".join(f"{w.get('kind')}: {w.get('message')}" for w in diag.get("warnings") or []) or None,
        growth_rate_per_day_median=rate.get("median"),
        growth_rate_per_day_q05=rate.get("q05"),
        growth_rate_per_day_q95=rate.get("q95"),
        doubling_time_days_median=(current.get("doubling_time_days") or {}).get("median"),
        halving_time_days_median=(current.get("halving_time_days") or {}).get("median"),
        prob_growing=current.get("prob_growing"),
        latest_change_date_median=cps[-1].get("median_date") if cps else None,
        rhat_max=diag.get("rhat_max"),
        ess_min=min(ess) if ess else None,
    )
    if not row["reportable"] and not row["message"]:
        reasons = verdict_of(diag)[1]
        why = reasons[0] if reasons else (f"did not converge (max R-hat {diag.get('rhat_max')}, min ESS "
                                          f"{row['ess_min']}; needed {diag.get('criterion')})")
        row["message"] = f"not reportable: {why} Do not report this region's estimates."
    return row


def _cell(value):
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (int, float)):
        return value
    return neutralise(str(value))


def neutralise(cell):
    """The reports' CSV-injection rule (:func:`app.reports.tables.neutralise`), imported on first use.

    The reports package pulls in Dash, which ``bendline fit`` and ``--help``
    never need; importing it here keeps them quick.
    """
    from ..reports.tables import neutralise as _neutralise

    return _neutralise(cell)


def write_summary(path, rows):
    """Write summary.csv (UTF-8 with a byte-order mark, so spreadsheets read accents)."""
    tmp = f"{path}.tmp"
    with open(tmp, "w", encoding="utf-8-sig", newline="") as fh:
        writer = csv.writer(fh)
        writer.writerow(SUMMARY_COLUMNS)
        for row in rows:
            writer.writerow([_cell(row[c]) for c in SUMMARY_COLUMNS])
    os.replace(tmp, path)


def region_slug(name, taken):
    """A file-name-safe slug for a region, unique within ``taken`` (which it extends)."""
    ascii_name = unicodedata.normalize("NFKD", str(name)).encode("ascii", "ignore").decode()
    base = re.sub(r"[^a-z0-9]+", "-", ascii_name.lower()).strip("-")[:60].strip("-") or "region"
    if base in _RESERVED_NAMES:
        base += "-region"
    slug, k = base, 2
    while slug in taken:
        slug, k = f"{base}-{k}", k + 1
    taken.add(slug)
    return slug


class RegionProgress:
    """``n/N regions done`` on stderr: redrawn in place on a terminal, a line each otherwise."""

    def __init__(self, total, stream=None, quiet=False):
        self.total = total
        self.stream = stream or sys.stderr
        self.quiet = quiet
        self.tty = hasattr(self.stream, "isatty") and self.stream.isatty()

    def update(self, done, region=None, status=None):
        if self.quiet:
            return
        width = 24
        filled = int(round(width * done / max(self.total, 1)))
        line = f"[{'#' * filled}{'-' * (width - filled)}] {done}/{self.total} regions done"
        if region is not None:
            line += f" ({region}: {status})"
        if self.tty:
            self.stream.write("\r" + line.ljust(100)[:100] + ("\n" if done >= self.total else ""))
        else:
            self.stream.write(line + "\n")
        self.stream.flush()


def report(rows, out_dir, interrupted=False):
    """The closing line on stderr and the exit status."""
    counts = {}
    for row in rows:
        key = "reportable" if row["reportable"] else ("not reportable" if row["status"] != "failed" else "failed")
        counts[key] = counts.get(key, 0) + 1
    parts = ", ".join(f"{n} {what}" for what, n in sorted(counts.items()))
    sys.stderr.write(f"bendline batch: {len(rows)} regions: {parts}; results in {out_dir} "
                     f"(summary.csv)\n")
    if interrupted:
        sys.stderr.write("bendline batch: interrupted\n")
        return 130
    if all(row["reportable"] for row in rows):
        return EXIT_OK
    sys.stderr.write("bendline batch: some regions are not reportable or could not be fitted; "
                     "their estimates should not be reported (see the message column)\n")
    return EXIT_UNCONVERGED
