"""A large batch (a receiver catching up) is processed in slices of MAX_ROWS: the same readings, counts and
values as in one piece, with the derivation's temporaries bounded by the slice."""

from __future__ import annotations

import numpy as np

from monitor.config import Config
from monitor.pipeline import Pipeline
from monitor.pipeline.pipeline import MAX_ROWS
from pipeline_helpers import make_batch


def test_a_batch_larger_than_a_slice_gives_the_same_frames() -> None:
    # no outside reference: 2.5 slices of this test's own readings, with a gap and a refused value
    n = int(MAX_ROWS * 2.5)
    t = np.arange(n) * 1e-5
    seq = np.arange(n)
    seq[n // 2:] += 3                                  # three readings lost in the middle
    ne = np.full(n, 5e16)
    ne[n - 10] = -1.0                                  # one refused
    whole = Pipeline(Config()).process_batch(make_batch(t, seq=seq, ne=ne, Te=3.0))
    assert len(whole.parts) == 3 and max(len(p.frame) for p in whole.parts) <= MAX_ROWS
    frame = whole.frame()
    ref = Pipeline(Config())
    pieces = [ref.process(make_batch(t[a:a + 1000], seq=seq[a:a + 1000], ne=ne[a:a + 1000], Te=3.0))
              for a in range(0, n, 1000)]
    np.testing.assert_array_equal(frame.t, np.concatenate([p.t for p in pieces]))
    np.testing.assert_array_equal(frame.values["debye_length"], np.concatenate([p.values["debye_length"] for p in pieces]))
    c = Pipeline(Config())
    c.process_batch(make_batch(t, seq=seq, ne=ne, Te=3.0))
    counts = c.counts()["probe"]
    assert counts.accepted == n - 1 and dict(counts.rejected) == {"ne_not_positive": 1} and counts.lost == 3
