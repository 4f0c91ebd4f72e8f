"""Separated modes of a change date's posterior.

On real series a change date is often "around X or around Y" (a change year
near 1890 or near 1930). A median between two modes describes neither, so
each mode is reported with its own median, 90% interval and probability.

The draws' density is estimated by a histogram smoothed with a Gaussian
kernel (bandwidth half of Silverman's rule of thumb, Silverman 1986,
"Density estimation for statistics and data analysis", eq. 3.31, and at
least one interval); its local maxima are modes, and two neighbouring maxima count as
separated when the density between them falls below half of the lower
maximum. Modes holding less than 5% of the draws are merged into a
neighbour. The thresholds are ours (common practice, no source).
"""

from __future__ import annotations

import numpy as np

#: A valley below this share of the lower of two peaks separates them (half:
#: a sharp change date beside a spread-out "spare" one is two answers).
VALLEY = 0.5
#: Modes with less than this share of the draws are merged into a neighbour.
MIN_MASS = 0.05
#: Factor of the bandwidth rule: half of Silverman's 0.9, which smooths a
#: sharp mode beside a broad one into a single hump.
BANDWIDTH = 0.45
#: Fewer draws than this: no attempt to find modes.
MIN_DRAWS = 200


def find_modes(x, min_width):
    """Split draws of one change date into separated modes.

    Parameters
    ----------
    x : numpy.ndarray, shape (S,)
        Draws (days from the series start).
    min_width : float
        The smallest bandwidth, in the draws' units (one interval).

    Returns
    -------
    list of numpy.ndarray of bool
        One mask over ``x`` per mode, in increasing order of position; a
        single all-true mask when the posterior has one mode.
    """
    x = np.asarray(x, dtype=float)
    everything = [np.ones(x.size, dtype=bool)]
    if x.size < MIN_DRAWS:
        return everything
    lo, hi = float(x.min()), float(x.max())
    if hi - lo < 4 * min_width:
        return everything
    q25, q75 = np.quantile(x, [0.25, 0.75])
    spread = min(float(x.std()), (q75 - q25) / 1.34) or float(x.std())
    bw = max(BANDWIDTH * spread * x.size ** -0.2, min_width)
    step = bw / 4
    edges = np.arange(lo - 3 * bw, hi + 3 * bw + step, step)
    hist, _ = np.histogram(x, bins=edges)
    k = np.arange(-12, 13) * step
    kernel = np.exp(-0.5 * (k / bw) ** 2)
    dens = np.convolve(hist, kernel / kernel.sum(), mode="same")
    centres = 0.5 * (edges[:-1] + edges[1:])
    peaks = [i for i in range(1, dens.size - 1) if dens[i] > dens[i - 1] and dens[i] >= dens[i + 1]]
    if len(peaks) < 2:
        return everything
    # keep separated peaks: merge a peak into the previous one when the valley is shallow
    kept = [peaks[0]]
    cuts = []
    for p in peaks[1:]:
        prev = kept[-1]
        valley = prev + int(np.argmin(dens[prev:p + 1]))
        if dens[valley] < VALLEY * min(dens[prev], dens[p]):
            kept.append(p)
            cuts.append(centres[valley])
        elif dens[p] > dens[prev]:
            kept[-1] = p
    if not cuts:
        return everything
    bounds = [-np.inf, *cuts, np.inf]
    masks = [(x > bounds[i]) & (x <= bounds[i + 1]) for i in range(len(bounds) - 1)]
    # merge light modes into their heavier neighbour
    while len(masks) > 1:
        mass = [m.mean() for m in masks]
        i = int(np.argmin(mass))
        if mass[i] >= MIN_MASS:
            break
        j = i - 1 if i == len(masks) - 1 or (i > 0 and mass[i - 1] >= mass[i + 1]) else i + 1
        masks[j] = masks[j] | masks[i]
        del masks[i]
    return masks
