"""Model and run flags shared by ``fit`` and ``batch``, and their translation
into the engine's options dictionary (the same names the JSON API takes)."""

from __future__ import annotations

import numpy as np

from inference.errors import InputError


def add_input_arguments(p):
    """Flags that say how to read the file."""
    p.add_argument("--date-column", metavar="NAME", help="column holding the dates")
    p.add_argument("--count-column", metavar="NAME", help="column holding the counts")
    p.add_argument("--interval", choices=("day", "week"), help="force daily or weekly (default: detect)")


def add_model_arguments(p):
    """Flags that set the model, its priors and the sampler."""
    p.add_argument("--segments", type=int, default=3, metavar="K", help="number of segments (default 3)")
    p.add_argument("--family", choices=("poisson", "negbin"), default="negbin",
                   help="observation model (default negbin)")
    wd = p.add_mutually_exclusive_group()
    wd.add_argument("--weekday", dest="weekday", action="store_true", default=None,
                    help="fit a day-of-week reporting effect (default: on for daily series)")
    wd.add_argument("--no-weekday", dest="weekday", action="store_false")
    p.add_argument("--jumps", action="store_true", help="allow a level jump at each change date")
    p.add_argument("--drop-last", type=int, default=0, metavar="L",
                   help="leave the last L values out as incomplete")
    p.add_argument("--completeness", metavar="F,F,...",
                   help="fractions already reported for the last values, latest first (e.g. 0.5,0.8,0.95)")
    p.add_argument("--min-segment-days", type=float, metavar="DAYS",
                   help="minimum segment length (default 14 days daily, 28 weekly; shorter when the series "
                        "is too short for the segments asked)")
    p.add_argument("--growth-prior-pct", type=float, metavar="PCT",
                   help="growth rates rarely exceed this many %% per day (default: 20, wider for a series "
                        "that changes faster)")
    p.add_argument("--change-date", action="append", default=[], metavar="DATE[:SPREAD]",
                   help="tentative change date with spread in days (default 14); repeat, one per change date")
    p.add_argument("--gi-mean", type=float, metavar="DAYS", help="generation interval mean, days")
    p.add_argument("--gi-sd", type=float, metavar="DAYS", help="generation interval sd, days (0 = fixed)")
    p.add_argument("--horizon", type=int, default=14, metavar="H",
                   help="intervals to project if the last trend continues (default 14)")
    p.add_argument("--chains", type=int, default=8, metavar="C", help="chains (default 8)")
    p.add_argument("--draws", type=int, default=250, metavar="D",
                   help="draws per chain, at least (default 250; sampling goes on until converged)")
    p.add_argument("--max-draws", type=int, metavar="D",
                   help="stop at this many draws per chain even if not converged (default: 20 x draws, at least 4000)")
    p.add_argument("--thin", type=int, default=1, metavar="K",
                   help="keep every K-th draw (default 1: keep all)")
    p.add_argument("--seed", type=int, default=1, metavar="S", help="random seed (default 1)")
    p.add_argument("--max-seconds", type=float, default=600.0, metavar="SEC",
                   help="time budget for one fit (default 600)")


def options_from_args(args, series):
    """The engine's options dictionary from parsed flags.

    Tentative change dates are turned into days from the series start here,
    where the series is known.
    """
    opts = {
        "segments": args.segments,
        "family": args.family,
        "weekday": args.weekday,
        "jumps": bool(args.jumps),
        "drop_last": args.drop_last,
        "horizon": args.horizon,
        "chains": args.chains,
        "draws": args.draws,
        "seed": args.seed,
        "thin": args.thin,
        "max_seconds": args.max_seconds,
    }
    if args.max_draws is not None:
        opts["max_draws"] = args.max_draws
    if args.min_segment_days is not None:
        opts["min_segment_days"] = args.min_segment_days
    if args.growth_prior_pct is not None:
        opts["growth_rate_prior_pct_per_day"] = args.growth_prior_pct
    if args.completeness:
        try:
            opts["completeness"] = [float(x) for x in args.completeness.split(",") if x.strip()]
        except ValueError:
            raise InputError(
                f"expected comma-separated fractions such as 0.5,0.8,0.95, got {args.completeness!r}",
                column="--completeness",
            ) from None
    if args.gi_mean is not None or args.gi_sd is not None:
        opts["gi_mean"] = args.gi_mean
        opts["gi_sd"] = args.gi_sd
    if args.change_date:
        opts["changepoint_priors"] = [parse_change_date(s, series) for s in args.change_date]
    return opts


def parse_change_date(text, series):
    """``DATE[:SPREAD]`` -> {"day": days from the series start, "spread_days": SPREAD}."""
    date_part, _, spread_part = text.partition(":")
    try:
        date = np.datetime64(date_part.strip(), "D")
    except ValueError:
        raise InputError(
            f"expected a date like 2026-03-14 or 2026-03-14:10 (date and spread in days), got {text!r}",
            column="--change-date",
        ) from None
    spread = 14.0
    if spread_part:
        try:
            spread = float(spread_part)
        except ValueError:
            raise InputError(f"the spread after ':' must be a number of days, got {spread_part!r}",
                             column="--change-date") from None
    day = float((date - series.start) / np.timedelta64(1, "D"))
    if not (0 <= day <= (series.end - series.start) / np.timedelta64(1, "D")):
        raise InputError(
            f"tentative change date {date} is outside the series ({series.start} to {series.end})",
            column="--change-date",
        )
    return {"day": day, "spread_days": spread}
