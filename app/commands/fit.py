"""``bendline fit FILE``: one series, headless, to a JSON result."""

from __future__ import annotations

import sys
import time

from bendline.inference.errors import InputError
from bendline.inference.wording import fmt_rhat

from .common import EXIT_ERROR, EXIT_INPUT, EXIT_OK, EXIT_UNCONVERGED, emit_json
from .options import add_input_arguments, add_model_arguments, check_args, options_from_args


def register(sub):
    p = sub.add_parser(
        "fit",
        help="fit one series and write the JSON result",
        description="Fit the trend model to one count series (CSV) and write the JSON result.",
    )
    p.add_argument("file", metavar="FILE", help="CSV file with a date column and a count column")
    add_input_arguments(p)
    p.add_argument("--region", metavar="NAME", help="region to fit in a long-format file")
    add_model_arguments(p)
    p.add_argument("--compare-segments", action="store_true",
                   help="also compare 1..6 segments by PSIS-LOO and report their support")
    p.add_argument("--out", metavar="PATH", help="write the JSON result here (default stdout)")
    p.add_argument("--quiet", action="store_true", help="no progress on stderr")
    p.set_defaults(handler=run_fit)


class ProgressLine:
    """A one-line progress bar on stderr: phase, draws, R-hat, elapsed time.

    On a terminal it redraws in place; otherwise it prints a line at most
    every few seconds so logs stay short.
    """

    def __init__(self, stream=None, label=""):
        self.stream = stream or sys.stderr
        self.tty = hasattr(self.stream, "isatty") and self.stream.isatty()
        self.last = 0.0
        self.label = label

    def __call__(self, snap):
        now = time.monotonic()
        final = snap["phase"] == "done"
        if not self.tty and not final and now - self.last < 3.0:
            return
        self.last = now
        self.stream.write(("\r" if self.tty else "") + self.render(snap) + ("\n" if final or not self.tty else ""))
        self.stream.flush()

    def render(self, snap):
        phase = snap["phase"]
        d = snap.get("diagnostics") or {}
        rhat = d.get("rhat_max")
        ess = d.get("ess_bulk_min")
        if phase == "warmup" or phase == "init":
            done = snap["iteration"] / max(snap["warmup_iterations"], 1)
            what = "finding starting points" if phase == "init" else "warm-up"
        else:
            done = min(1.0, snap["draws_per_chain"] / max(snap["draws_requested"], 1))
            what = {"sampling": "sampling", "done": "done"}[phase]
        width = 24
        filled = int(round(width * min(done, 1.0)))
        bar = "#" * filled + "-" * (width - filled)
        parts = [f"{self.label}{what:<24s}[{bar}]", f"draws/chain {snap['draws_per_chain']:>5d}"]
        parts.append(f"R-hat {fmt_rhat(rhat)}" if rhat is not None else "R-hat   -  ")
        parts.append(f"ESS {ess:>6.0f}" if ess is not None else "ESS     -")
        parts.append(f"{snap['elapsed_seconds']:6.1f} s")
        return "  ".join(parts)


def run_fit(args):
    from bendline.inference.fitting import fit_result
    from bendline.inference.reader import read_series

    try:
        series = read_series(
            args.file,
            date_column=args.date_column,
            count_column=args.count_column,
            region=args.region,
            interval=args.interval,
        )
        given = check_args(args)
        options = options_from_args(args, series)
        support = averaged = None
        if args.compare_segments:
            from bendline.inference.compare import compare_segments

            progress = None if args.quiet else sys.stderr
            support, averaged = compare_segments(series, options, log=progress)
        progress = None if args.quiet else ProgressLine()
        # nobody watches the panels of a headless fit: snapshots carry counters only
        result, final = fit_result(series, dict(options, snapshot_summaries=False), on_snapshot=progress,
                                   segment_support=support, change_probability=averaged, given=given)
        result["spec"].pop("snapshot_summaries", None)
    except InputError as exc:
        sys.stderr.write(f"bendline fit: {exc}\n")
        return EXIT_INPUT
    except OSError as exc:
        sys.stderr.write(f"bendline fit: cannot read or write a file: {exc}\n")
        return EXIT_ERROR
    except MemoryError:
        sys.stderr.write("bendline fit: out of memory; try fewer chains or draws\n")
        return EXIT_ERROR
    if result is None:
        sys.stderr.write("bendline fit: stopped before any draws were made; nothing to write\n")
        return EXIT_ERROR
    try:
        emit_json(result, args.out)
    except OSError as exc:
        sys.stderr.write(f"bendline fit: cannot write the result to {args.out}: {exc}\n")
        return EXIT_ERROR
    return verdict_to_stderr(result, quiet=args.quiet)


def verdict_to_stderr(result, *, quiet=False, prog="bendline fit"):
    """Say the result's verdict, warnings and summary on stderr; return the exit status.

    0 when the result is reportable; 3 when the fit finished but its numbers
    must not be reported (the reasons are printed even with ``--quiet``).
    """
    from bendline.inference.wording import verdict_of

    diag = result["diagnostics"]
    ok, reasons = verdict_of(diag)
    notes = [w["message"] for w in diag.get("warnings") or [] if not w.get("blocking")]
    if not quiet:
        sys.stderr.write(f"{prog}: {result.get('summary_text', '')}\n")
        for note in notes:
            sys.stderr.write(f"{prog}: note: {note}\n")
    if ok:
        return EXIT_OK
    if not reasons:  # a result from before the verdict: only its convergence flag
        reasons = ["The chains did not converge "
                   f"(max R-hat {diag['rhat_max']}, min bulk ESS {diag['ess_bulk_min']}, "
                   f"min tail ESS {diag['ess_tail_min']}; needed {diag['criterion']})."]
    sys.stderr.write(f"{prog}: the result is not reportable and was written with diagnostics.reportable = "
                     "false; do not report its numbers. " + " ".join(reasons) + "\n")
    return EXIT_UNCONVERGED
