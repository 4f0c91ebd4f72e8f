"""Float32 special functions for the sampler's fast gradient.

The digamma series here replaces ``scipy.special.digamma`` in the fast
gradient (:meth:`inference.model.TrendModel.grad`), where only a
deterministic approximation is needed (the accept step uses the exact
density).
"""

from __future__ import annotations

import numpy as np


def psi_minus_log(x):
    """digamma(x) - log(x) for x > 0 in float32, by the asymptotic series.

    ``psi(x) ~ log x - 1/(2x) - 1/(12x^2) + 1/(120x^4) - 1/(252x^6)``
    (Abramowitz & Stegun 6.3.18), accurate to ~1e-9 for x >= 6; smaller x
    are shifted up with ``psi(x) = psi(x + 1) - 1/x`` (A&S 6.3.5).
    """
    x = x.astype(np.float32, copy=False)
    if float(x.min()) >= 6.0:
        return psi_minus_log_large(x)
    shift = np.zeros_like(x)
    xs = x.copy()
    for _ in range(6):
        low = xs < 6
        shift -= np.where(low, 1.0 / xs, 0)
        xs = np.where(low, xs + 1, xs)
    return psi_minus_log_large(xs) + np.log(xs / x) + shift


def psi_minus_log_large(x):
    inv = np.float32(1) / x
    inv2 = inv * inv
    return -0.5 * inv - inv2 * (np.float32(1 / 12) - inv2 * (np.float32(1 / 120) - inv2 * np.float32(1 / 252)))
