"""The draw-store contract, run against every implementation in the engine.

The app's run stores have their own contract tests (tests/app) built on the
same expectations.
"""

from __future__ import annotations

import numpy as np
import pytest

from bendline.inference.sinks import MemorySink

SINKS = [MemorySink]


@pytest.mark.parametrize("make", SINKS)
def test_append_and_read_back_in_order(make, rng):
    sink = make()
    sink.reset(3, ["a", "b"])
    blocks = [rng.normal(size=(3, k, 2)) for k in (5, 70, 1, 200)]
    for b in blocks:
        sink.append(b, b[..., 0])
    pos, lp = sink.read()
    np.testing.assert_array_equal(pos, np.concatenate(blocks, axis=1))
    np.testing.assert_array_equal(lp, np.concatenate(blocks, axis=1)[..., 0])
    assert sink.draws == 276
    assert sink.names == ("a", "b")


@pytest.mark.parametrize("make", SINKS)
def test_read_returns_copies(make, rng):
    sink = make()
    sink.reset(2, ["a"])
    sink.append(np.ones((2, 4, 1)), np.ones((2, 4)))
    pos, _ = sink.read()
    pos[:] = 7
    assert np.all(sink.read()[0] == 1)


@pytest.mark.parametrize("make", SINKS)
def test_reset_starts_over(make):
    sink = make()
    sink.reset(2, ["a"])
    sink.append(np.ones((2, 4, 1)), np.ones((2, 4)))
    sink.reset(4, ["a", "b", "c"])
    pos, lp = sink.read()
    assert pos.shape == (4, 0, 3) and lp.shape == (4, 0)
