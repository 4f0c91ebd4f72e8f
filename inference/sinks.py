"""Where raw draws go while a run samples.

One small contract, several stores: ``reset(chains, names)`` starts a run,
``append(positions, log_density)`` adds a block of iterations, ``read()``
returns everything so far. The driver only ever appends; readers (the
summaries, a second process watching the run) only read. The memory sink
serves tests and the CLI; the app's run stores implement the same contract.
"""

from __future__ import annotations

import numpy as np


class MemorySink:
    """Keeps draws in memory, growing by doubling.

    Draws are unconstrained positions, shape (chains, draws, dim), with their
    log densities (chains, draws).
    """

    def __init__(self):
        self._pos = None
        self._lp = None
        self._count = 0
        self.names = ()

    def reset(self, chains, names):
        """Start a new run with ``chains`` chains of ``len(names)`` coordinates."""
        self.names = tuple(names)
        self._pos = np.empty((chains, 64, len(self.names)))
        self._lp = np.empty((chains, 64))
        self._count = 0

    def append(self, positions, log_density):
        """Add a block of iterations.

        Parameters
        ----------
        positions : numpy.ndarray, shape (chains, k, dim)
        log_density : numpy.ndarray, shape (chains, k)
        """
        positions = np.asarray(positions, dtype=float)
        k = positions.shape[1]
        need = self._count + k
        if need > self._pos.shape[1]:
            size = max(need, 2 * self._pos.shape[1])
            pos = np.empty((self._pos.shape[0], size, self._pos.shape[2]))
            lp = np.empty((self._pos.shape[0], size))
            pos[:, : self._count] = self._pos[:, : self._count]
            lp[:, : self._count] = self._lp[:, : self._count]
            self._pos, self._lp = pos, lp
        self._pos[:, self._count : need] = positions
        self._lp[:, self._count : need] = log_density
        self._count = need

    def read(self):
        """All draws so far: (positions (chains, draws, dim), log_density (chains, draws)).

        The arrays are copies; the caller may keep them.
        """
        if self._pos is None:
            return np.empty((0, 0, 0)), np.empty((0, 0))
        return self._pos[:, : self._count].copy(), self._lp[:, : self._count].copy()

    @property
    def draws(self):
        """Draws per chain so far."""
        return self._count
