"""When the sampler does what: warm-up windows and length, relocation rate, checks, step shrinks.

Plain rules with their measured constants, kept apart from the loop that
follows them (:mod:`inference.driver`).
"""

from __future__ import annotations

from .snapshots import ESS_MIN, RHAT_MAX
from .verdict import DIVERGENCE_SHARE

#: Iterations between change-date relocations (:mod:`inference.relocate`) in
#: warm-up, and in sampling when warm-up saw change dates move far (separated
#: modes) or not. A relocation costs about as much as a few HMC iterations;
#: where the posterior has one mode it is insurance, where it has several it
#: is what mixes them. Measured in bench/engine.py.
RELOCATE_WARMUP = 6
RELOCATE_MULTIMODAL = 1
RELOCATE_UNIMODAL = 25
#: Share of relocations in warm-up that moved a change date more than a tenth
#: of the series, above which sampling relocates often (common practice, no
#: source; measured: 0.1-0.3% on single-mode posteriors, 5-30% on posteriors
#: with separated change-date modes).
FAR_MOVES_MULTIMODAL = 0.01
#: ... and at least this many far moves: with about a hundred relocations in
#: the second half of warm-up, one stray far move on the single-mode
#: reference problem crossed 1% and made sampling relocate every iteration
#: (five times the run's time; measured with seed 12).
FAR_MOVES_MIN = 4
#: When sampling shows divergent transitions beyond the share the verdict
#: tolerates (:data:`inference.verdict.DIVERGENCE_SHARE`, and at least
#: :data:`SHRINK_MIN_DIVERGENCES`), the step size is multiplied by
#: :data:`STEP_SHRINK`, the draws so far are discarded (they count as warm-up)
#: and sampling starts again, at most :data:`MAX_STEP_SHRINKS` times; every
#: kept draw then comes from one fixed kernel. Measured on an invented region
#: whose spare change date reaches the series end: step 0.52 gave 31
#: divergences in 3,200 draws, 0.31-0.37 gave none (common practice, as in
#: raising a target acceptance after divergences; the factor is ours).
STEP_SHRINK = 0.7
MAX_STEP_SHRINKS = 2
SHRINK_MIN_DIVERGENCES = 2

def warmup_schedule(n):
    """Window plan for ``n`` warm-up iterations.

    Returns
    -------
    list of (kind, length)
        ``("fast", k)`` adapts the step size only; ``("slow", k)`` also
        re-estimates the preconditioner at its end. Lengths sum to ``n``.
    """
    first = max(5, int(0.15 * n))
    last = max(5, int(0.1 * n))
    middle = n - first - last
    windows = [("fast", first)]
    size = max(5, middle // 7)  # 1 + 2 + 4 units
    left = middle
    while left > 0:
        k = size if left - size >= 2 * size else left
        windows.append(("slow", k))
        left -= k
        size *= 2
    windows.append(("fast", last))
    return windows


def default_warmup(model):
    """Warm-up length by problem size (common practice, no source).

    The start search hands warm-up a good point and preconditioner, and the
    preconditioner is estimated from all chains pooled, so a short warm-up
    suffices: 100 iterations plus 3 per coordinate (about 150 for K = 4 with
    weekday effects). Measured by bench/engine.py: longer warm-ups did not
    shorten the time to convergence.
    """
    return int(min(400, 100 + 3 * model.dim))


def separated_modes(far_moves, moves):
    """True when relocations moved change dates far often enough to show separated modes."""
    far = far_moves / moves if moves else 0.0
    return far >= FAR_MOVES_MULTIMODAL and far_moves >= FAR_MOVES_MIN


def relocate_every(far_moves, moves):
    """Sampling iterations between relocations, from the far moves seen late in warm-up."""
    return RELOCATE_MULTIMODAL if separated_modes(far_moves, moves) else RELOCATE_UNIMODAL


def metric_kind(far_moves, moves):
    """Which preconditioner a slow warm-up window ends with, from the far moves seen so far.

    ``"covariance"`` (the pooled positions' covariance, Stan's choice) where
    the change dates show one mode; ``"fisher"`` (the scores' second
    moment, :func:`inference.hmc.fisher_chol`) where relocations moved
    them between separated modes: there the positions' spread overstates
    every direction that is tight within a mode and forces tiny steps, and
    the local curvature does not. Measured (one sitting, 3-5 seeds): the
    reference problem (one mode) reached the criterion in a median of 376
    draws a chain with the covariance and 814 with the scores;
    daily_admissions.csv with K = 4 (separated modes) in 800 with the scores
    and 3,200 with the covariance (4,036 and one of three unconverged with
    each chain's own spread).
    """
    return "fisher" if separated_modes(far_moves, moves) else "covariance"


def too_many_divergences(divergences, transitions):
    """True when sampling's divergent transitions are beyond what the verdict tolerates."""
    return divergences >= SHRINK_MIN_DIVERGENCES and divergences > DIVERGENCE_SHARE * transitions


def next_check_gap(n_draws, diag, settings):
    """Draws until the next convergence check, projected from this one.

    Under convergence R-hat - 1 falls and ESS grows about in proportion to
    the draws, so the draws still needed are projected from how far each
    is from its threshold; the gap is at least ``snapshot_every`` and at most
    the draws so far (a doubling), so an unconverged run is still checked
    often enough.
    """
    rh = diag["rhat_max"]
    ess = min(diag["ess_bulk_min"] or 0.0, diag["ess_tail_min"] or 0.0)
    factor = max(
        (rh - 1.0) / (0.9 * (RHAT_MAX - 1.0)) if rh is not None else 2.0,
        1.05 * ESS_MIN / max(ess, 1.0),
        settings.draws / n_draws,
    )
    gap = int(round(n_draws * (factor - 1.0)))
    return int(min(max(gap, settings.snapshot_every), n_draws))
