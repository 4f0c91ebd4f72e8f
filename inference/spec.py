"""What to fit and how: the model with its priors, and the run settings.

Everything is validated here, once, where it enters (CLI flags, API payloads,
dashboard controls all pass through :func:`spec_from_options`). Messages name
the option, the value received and what was expected.

Names follow the command line (``segments``, ``family``, ``weekday``,
``drop_last``, ...) so the same dictionary works for the CLI, the JSON API and
the JSON result's ``spec`` block.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, replace

from .errors import InputError

FAMILIES = ("poisson", "negbin")
MAX_SEGMENTS = 12


@dataclass(frozen=True)
class ChangepointPrior:
    """The analyst's tentative change date for one knot.

    Attributes
    ----------
    day : float
        Centre, in days from the series start (day 0).
    spread_days : float
        Standard deviation of the Normal prior on the knot, in days.
    """

    day: float
    spread_days: float = 14.0


@dataclass(frozen=True)
class ModelSpec:
    """The model and its priors.

    Attributes
    ----------
    segments : int
        K, the number of exponential segments (K - 1 change dates).
    family : {"poisson", "negbin"}
        Observation model. Negative binomial has variance ``mu + mu**2 / phi``.
    weekday : bool or None
        Multiplicative day-of-week reporting effect. None means "on for daily
        series, off for weekly" (:func:`inference.defaults.resolve`).
    jumps : bool
        Allow a jump in level at each change date.
    flat_segments : bool
        Level shifts only: each segment is flat (no growth) and the level
        jumps at each change date, the step model of an interrupted time
        series (a change of case definition, testing policy or law). Implies
        the jumps; the growth-rate prior does not apply.
    drop_last : int
        Leave the last L intervals out of the likelihood (incomplete reports).
    completeness : tuple of float
        Alternatively, the fraction of the final count already reported, for
        the last value first, then the one before, ...; each in (0, 1].
    min_segment_days : float or None
        Minimum segment length in days; None chooses it for the series (14
        days for daily series, 28 for weekly, shorter when the series is too
        short for the segments asked: :mod:`inference.defaults`).
    growth_rate_prior_pct_per_day : float or None
        Growth rates rarely exceed this many percent per day: the prior on each
        segment's rate is Normal(0, s^2) with ``1.96 s = ln(1 + pct/100)``.
        None chooses it for the series (20, wider for a series that rises or
        falls faster: :mod:`inference.defaults`).
    changepoint_priors : tuple of ChangepointPrior
        Empty for a uniform prior over ordered change dates, else one entry per
        change date (K - 1), in date order.
    level_prior_centre : float or None
        Centre of the Normal prior on the log level at the series start (log
        of a count per interval); None centres it on the log of the mean of
        the first observed values plus 0.5.
    level_prior_sd : float
        Sd of that prior.
    jump_prior_sd : float
        Sd of the Normal prior on each log-level jump.
    weekday_prior_sd : float
        Sd of the Normal prior on each day-of-week log-effect.
    dispersion_prior_scale : float
        Scale of the half-normal prior on ``1 / sqrt(phi)``; mode at 0 (Poisson).
    """

    segments: int = 3
    family: str = "negbin"
    weekday: bool | None = None
    jumps: bool = False
    flat_segments: bool = False
    drop_last: int = 0
    completeness: tuple = ()
    min_segment_days: float | None = None
    growth_rate_prior_pct_per_day: float | None = None
    changepoint_priors: tuple = ()
    level_prior_centre: float | None = None
    level_prior_sd: float = 2.0
    jump_prior_sd: float = 1.0
    weekday_prior_sd: float = 0.3
    dispersion_prior_scale: float = 1.0

    def __post_init__(self):
        _check_int("segments", self.segments, 1, MAX_SEGMENTS)
        if self.family not in FAMILIES:
            raise InputError(
                f"expected one of {', '.join(FAMILIES)}, got {self.family!r}", column="family"
            )
        if self.weekday not in (None, True, False):
            raise InputError(f"expected true or false, got {self.weekday!r}", column="weekday")
        for name in ("jumps", "flat_segments"):
            if getattr(self, name) not in (True, False):
                raise InputError(f"expected true or false, got {getattr(self, name)!r}", column=name)
        _check_int("drop_last", self.drop_last, 0, 10_000)
        comp = tuple(float(c) for c in self.completeness)
        for i, c in enumerate(comp):
            if not (0 < c <= 1):
                raise InputError(
                    f"entry {i + 1} is {c}; each fraction must be in (0, 1]",
                    column="completeness",
                )
        object.__setattr__(self, "completeness", comp)
        if self.drop_last and comp:
            raise InputError(
                "give either drop_last or completeness fractions, not both", column="completeness"
            )
        if self.min_segment_days is not None:
            _check_float("min_segment_days", self.min_segment_days, 1.0, 1e5)
        if self.growth_rate_prior_pct_per_day is not None:
            _check_float("growth_rate_prior_pct_per_day", self.growth_rate_prior_pct_per_day, 0.01, 10_000)
        if self.level_prior_centre is not None:
            _check_float("level_prior_centre", self.level_prior_centre, -50, 50)
        for name in ("level_prior_sd", "jump_prior_sd", "weekday_prior_sd", "dispersion_prior_scale"):
            _check_float(name, getattr(self, name), 1e-3, 100)
        cps = tuple(
            cp if isinstance(cp, ChangepointPrior) else ChangepointPrior(**dict(cp))
            for cp in self.changepoint_priors
        )
        if cps and len(cps) != self.segments - 1:
            raise InputError(
                f"{len(cps)} tentative change dates given for {self.segments} segments; "
                f"expected {self.segments - 1} (one fewer than the segments) or none",
                column="changepoint_priors",
            )
        for i, cp in enumerate(cps):
            _check_float(f"change date {i + 1} day", cp.day, -1e6, 1e6)
            _check_float(f"change date {i + 1} spread_days", cp.spread_days, 0.1, 1e5)
        days = [cp.day for cp in cps]
        if days != sorted(days):
            raise InputError(
                "tentative change dates must be in date order", column="changepoint_priors"
            )
        object.__setattr__(self, "changepoint_priors", cps)

    @property
    def growth_rate_prior_sd_per_day(self):
        """Sd of the Normal prior on each segment's growth rate, per day (resolved specs)."""
        if self.growth_rate_prior_pct_per_day is None:
            raise ValueError("the growth-rate prior is chosen for a series: resolve the spec first")
        return math.log1p(self.growth_rate_prior_pct_per_day / 100.0) / 1.96

    def to_dict(self):
        d = asdict(self)
        d["completeness"] = list(self.completeness)
        d["changepoint_priors"] = [asdict(cp) for cp in self.changepoint_priors]
        return d


@dataclass(frozen=True)
class RunSettings:
    """How to sample and what to report.

    Attributes
    ----------
    chains : int
        Chains advanced together.
    draws : int
        Posterior draws per chain to keep, at least; sampling goes on past this
        until the convergence criterion holds (or the time budget ends).
    max_draws : int or None
        Cap on draws per chain (None: 20 times ``draws``, at least 4000).
        Setting it equal to ``draws`` gives runs of fixed length.
    warmup : int or None
        Warm-up iterations; None picks a default from the problem size.
    seed : int
        Seed of the run's random generator.
    thin : int
        Keep every ``thin``-th sampling iteration as a draw (1 keeps all).
        Thinning lowers storage for long runs; it never improves the
        estimates per iteration (Link & Eaton 2012). With a high ``draws``
        floor it also gives a run of a known, large amount of work (the
        tests use it to hold a fit open on any machine).
    max_seconds : float
        Time budget for sampling; the run stops unconverged past it.
    snapshot_every : int
        Iterations between convergence checks (each yields a snapshot).
    snapshot_seconds : float
        Between checks, yield a lighter snapshot (diagnostics carried over)
        when this much time has passed; 0 turns that off.
    snapshot_summaries : bool
        Put bands, segments, change dates and checks in snapshots (for a
        watcher); a headless fit needs only the counters and diagnostics.
    gi_mean_days, gi_sd_days : float or None
        Generation interval (gamma; sd 0 means fixed) for reproduction numbers.
    horizon : int
        Intervals to project past the last date if the last trend continues.
    """

    chains: int = 8
    draws: int = 250
    max_draws: int | None = None
    warmup: int | None = None
    seed: int = 1
    thin: int = 1
    max_seconds: float = 600.0
    snapshot_every: int = 50
    snapshot_seconds: float = 0.3
    snapshot_summaries: bool = True
    gi_mean_days: float | None = None
    gi_sd_days: float | None = None
    horizon: int = 14

    def __post_init__(self):
        _check_int("chains", self.chains, 2, 256)
        _check_int("draws", self.draws, 10, 1_000_000)
        if self.max_draws is not None:
            _check_int("max_draws", self.max_draws, self.draws, 10_000_000)
        if self.warmup is not None:
            _check_int("warmup", self.warmup, 20, 100_000)
        _check_int("seed", self.seed, 0, 2**63 - 1)
        _check_int("thin", self.thin, 1, 10_000)
        _check_float("max_seconds", self.max_seconds, 0.1, 7 * 86400)
        _check_int("snapshot_every", self.snapshot_every, 1, 100_000)
        _check_float("snapshot_seconds", self.snapshot_seconds, 0.0, 3600)
        _check_int("horizon", self.horizon, 0, 365)
        if (self.gi_mean_days is None) != (self.gi_sd_days is None):
            raise InputError(
                "give both the generation interval's mean and sd (days), or neither",
                column="gi_mean" if self.gi_mean_days is None else "gi_sd",
            )
        if self.gi_mean_days is not None:
            _check_float("gi_mean", self.gi_mean_days, 0.1, 365)
            _check_float("gi_sd", self.gi_sd_days, 0.0, 365)

    def to_dict(self):
        return asdict(self)


# Option names as the CLI and API give them -> (target, field)
_MODEL_KEYS = {f for f in ModelSpec.__dataclass_fields__}
_RUN_KEYS = {f for f in RunSettings.__dataclass_fields__}
_ALIASES = {"gi_mean": "gi_mean_days", "gi_sd": "gi_sd_days"}


def spec_from_options(options):
    """Validate a flat dictionary of options into a model spec and run settings.

    Parameters
    ----------
    options : dict
        Keys as the ``fit`` flags name them (``segments``, ``family``,
        ``weekday``, ``jumps``, ``drop_last``, ``chains``, ``draws``, ``seed``,
        ``gi_mean``, ``gi_sd``, ``horizon``, ...). Unknown keys are refused.

    Returns
    -------
    (ModelSpec, RunSettings)

    Raises
    ------
    InputError
        Naming the option and the value.
    """
    if not isinstance(options, dict):
        raise InputError(f"the spec must be a JSON object, got {type(options).__name__}")
    model, run = {}, {}
    for key, value in options.items():
        name = _ALIASES.get(key, key)
        if name in _MODEL_KEYS:
            model[name] = value
        elif name in _RUN_KEYS:
            run[name] = value
        elif key in ("interval", "date_column", "count_column", "region"):
            continue  # read by the loader, not the model
        else:
            known = sorted((_MODEL_KEYS | _RUN_KEYS | set(_ALIASES)) - set(_ALIASES.values()))
            raise InputError(
                f"unknown option {key!r}; known options are {', '.join(known)}", column=key
            )
    if "changepoint_priors" in model:
        cps = model["changepoint_priors"]
        if not isinstance(cps, (list, tuple)):
            raise InputError("expected a list of {day, spread_days}", column="changepoint_priors")
        model["changepoint_priors"] = tuple(_changepoint(i, cp) for i, cp in enumerate(cps))
    if "completeness" in model:
        model["completeness"] = tuple(model["completeness"] or ())
    for name in ("segments", "drop_last"):
        if name in model:
            model[name] = _as_int(name, model[name])
    for name in ("chains", "draws", "max_draws", "seed", "thin", "horizon", "snapshot_every", "warmup"):
        if name in run and run[name] is not None:
            run[name] = _as_int(name, run[name])
    for name in ("weekday", "jumps", "flat_segments"):
        if name in model and model[name] is not None:
            model[name] = _as_bool(name, model[name])
    if "snapshot_summaries" in run:
        run["snapshot_summaries"] = _as_bool("snapshot_summaries", run["snapshot_summaries"])
    return ModelSpec(**model), RunSettings(**run)


def options_from_spec(model, run):
    """The flat options dictionary (inverse of :func:`spec_from_options`)."""
    d = model.to_dict()
    r = run.to_dict()
    r["gi_mean"] = r.pop("gi_mean_days")
    r["gi_sd"] = r.pop("gi_sd_days")
    d.update(r)
    return d


def _changepoint(i, cp):
    if isinstance(cp, ChangepointPrior):
        return cp
    if not isinstance(cp, dict) or "day" not in cp:
        raise InputError(
            f"entry {i + 1} must be an object with 'day' and optionally 'spread_days', got {cp!r}",
            column="changepoint_priors",
        )
    unknown = set(cp) - {"day", "spread_days"}
    if unknown:
        raise InputError(
            f"entry {i + 1} has unknown keys {sorted(unknown)}", column="changepoint_priors"
        )
    try:
        return ChangepointPrior(float(cp["day"]), float(cp.get("spread_days", 14.0)))
    except (TypeError, ValueError):
        raise InputError(f"entry {i + 1} must hold numbers, got {cp!r}", column="changepoint_priors") from None


def _as_int(name, value):
    if isinstance(value, bool):
        raise InputError(f"expected a whole number, got {value!r}", column=name)
    if isinstance(value, float) and value.is_integer():
        return int(value)
    if isinstance(value, str) and value.strip().lstrip("-").isdigit():
        return int(value)
    if isinstance(value, int):
        return value
    raise InputError(f"expected a whole number, got {value!r}", column=name)


def _as_bool(name, value):
    if isinstance(value, bool):
        return value
    if isinstance(value, str) and value.lower() in ("true", "yes", "1", "on"):
        return True
    if isinstance(value, str) and value.lower() in ("false", "no", "0", "off"):
        return False
    if isinstance(value, int) and value in (0, 1):
        return bool(value)
    raise InputError(f"expected true or false, got {value!r}", column=name)


def _check_int(name, value, lo, hi):
    if isinstance(value, bool) or not isinstance(value, int):
        raise InputError(f"expected a whole number, got {value!r}", column=name)
    if not (lo <= value <= hi):
        raise InputError(f"expected a whole number from {lo} to {hi}, got {value}", column=name)


def _check_float(name, value, lo, hi):
    if isinstance(value, bool):
        raise InputError(f"expected a number, got {value!r}", column=name)
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"expected a number, got {value!r}", column=name) from None
    if not math.isfinite(v) or not (lo <= v <= hi):
        raise InputError(f"expected a number from {lo:g} to {hi:g}, got {value!r}", column=name)
