"""Validation: every refused reading counted by reason and kept; time and seq order; seq gaps counted as lost."""

from __future__ import annotations

import numpy as np
import pytest

from monitor.config import Config
from monitor.pipeline import Pipeline
from pipeline_helpers import make_batch, split


def run(*batches):
    p = Pipeline(Config())
    frames = [p.process(b) for b in batches]
    return p, frames


def test_bad_values_rejected_by_reason_and_kept_as_lines() -> None:
    ne = [1e17, np.nan, np.inf, 0.0, -1e16, 2e33, 1e17, 1e17, 1e17]
    te = [3.0, 3.0, 3.0, 3.0, 3.0, 3.0, -2.0, 2e7, np.nan]
    b = make_batch(np.arange(9) * 0.01, ne=ne, Te=te, B=[0.0, -0.1, 0, 0, 0, 0, 0, 0, 0])
    p = Pipeline(Config())
    processed = p.process_batch(b)
    frame = processed.frame()
    c = p.counts()["probe"]
    assert c.accepted == 3          # rows 0, 1 (Te only + B), 8 (ne only)
    assert dict(c.rejected) == {"ne_not_finite": 1, "ne_not_positive": 2, "ne_absurd": 1,
                                "Te_not_positive": 1, "Te_absurd": 1}
    np.testing.assert_array_equal(frame.t, [0.0, 0.01, 0.08])
    rej = processed.rejections               # returned with the frames that were accepted
    assert [r.reason for r in rej] == ["ne_not_finite", "ne_not_positive", "ne_not_positive", "ne_absurd",
                                       "Te_not_positive", "Te_absurd"]
    assert rej[1].raw == b"t=0.03 ne=0.0 Te=3.0 B=0.0"
    assert rej[0].raw == b"t=0.02 ne=inf Te=3.0 B=0.0"
    assert all(r.source == "probe" for r in rej)
    assert len(p.rejected_samples) == 6              # and kept in the ring


def test_empty_rows_and_bad_times() -> None:
    b = make_batch([0.0, np.nan, 0.2, 0.1, 0.2, 0.3], ne=[1e17, 1e17, 1e17, 1e17, 1e17, np.nan])
    p, (frame,) = run(b)
    c = p.counts()["probe"]
    assert dict(c.rejected) == {"time_not_finite": 1, "time_backwards": 1, "no_channels": 1}
    np.testing.assert_array_equal(frame.t, [0.0, 0.2, 0.2])     # equal times are not backwards
    # time order is kept across batches too
    p.process(make_batch([0.15, 0.25], ne=[1e17, 1e17]))
    assert p.counts()["probe"].rejected["time_backwards"] == 2


def test_seq_duplicates_backwards_and_gaps() -> None:
    b1 = make_batch(np.arange(6) * 0.01, seq=[10, 11, 11, 14, 12, 15], ne=[1e17] * 6)
    b2 = make_batch(0.1 + np.arange(3) * 0.01, seq=[15, 20, 21], ne=[1e17] * 3)
    p, (f1, f2) = run(b1, b2)
    c = p.counts()["probe"]
    assert dict(c.rejected) == {"seq_duplicate": 2, "seq_backwards": 1}
    assert c.lost == 2 + 4          # 12, 13 missing before 14 (12 arrived late: refused); 16..19
    np.testing.assert_array_equal(f1.seq, [10, 11, 14, 15])
    np.testing.assert_array_equal(f2.seq, [20, 21])
    assert c.accepted == 6


def test_first_seq_sets_the_baseline() -> None:
    p, _ = run(make_batch([0.0, 0.1], seq=[5000, 5001], ne=[1e17, 1e17]))
    assert p.counts()["probe"].lost == 0


def test_restarted_publisher_starts_over() -> None:
    b1 = make_batch(np.arange(1500) * 1e-3, seq=np.arange(1500), ne=1e17)
    b2 = make_batch(np.arange(10) * 1e-3, seq=np.arange(10), ne=1e17)     # time and seq begin again
    p, (_, f2) = run(b1, b2)
    c = p.counts()["probe"]
    assert len(f2) == 10 and c.accepted == 1510 and c.lost == 0 and not c.rejected
    assert p.restarts()["probe"] == 1


def test_adapter_rejections_are_counted_too() -> None:
    from adapters.batch import Rejection
    p = Pipeline(Config())
    p.reject([Rejection("probe", "malformed", b"ne=abc", 0.0), Rejection("probe", "malformed", b"??", 0.0),
              Rejection("probe", "oversized", b"x" * 10, 0.0)])
    assert dict(p.counts()["probe"].rejected) == {"malformed": 2, "oversized": 1}
    assert len(p.rejected_samples) == 3


@pytest.mark.parametrize("key, bad", [("Ti", 0.0), ("p0", -1.0), ("B", 2e4), ("Ti", np.inf)])
def test_other_base_keys(key: str, bad: float) -> None:
    p, (frame,) = run(make_batch([0.0, 0.1], ne=[1e17, 1e17], **{key: [1.0, bad]}))
    assert len(frame) == 1 and sum(p.counts()["probe"].rejected.values()) == 1


def test_a_refused_line_with_a_seq_is_rejected_not_lost() -> None:
    from adapters.batch import Rejection
    p = Pipeline(Config())
    p.process(make_batch([0.0, 0.1], seq=[1, 2], ne=[1e17, 1e17]))
    p.reject([Rejection("probe", "malformed", b"t=0.2 seq=3 ne=??", 0.0, seq_first=3, seq_last=3),
              Rejection("probe", "bad_json", b'{"t": 0.3, "seq": 4, "ne": }', 0.0, seq_first=4, seq_last=4),
              Rejection("probe", "malformed", b"no seq here", 0.0)])
    p.process(make_batch([0.5, 0.6], seq=[6, 7], ne=[1e17, 1e17]))     # 3, 4 refused; 5 really lost
    c = p.counts()["probe"]
    assert c.lost == 1 and sum(c.rejected.values()) == 3 and c.accepted == 4
    # a later gap that covers an already settled seq number counts in full
    p.process(make_batch([0.9], seq=[10], ne=[1e17]))
    assert p.counts()["probe"].lost == 3


from hypothesis import given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402

_VALUES = st.sampled_from([1e17, 2.5, 0.0, -1.0, np.nan, np.inf, -np.inf, 1e40, 5e6, 3e7])


@settings(max_examples=200)
@given(st.lists(st.tuples(st.floats(-1.0, 5.0) | st.just(float("nan")), st.integers(1, 60), _VALUES, _VALUES),
                min_size=1, max_size=60),
       st.integers(1, 59))
def test_every_reading_is_accepted_or_rejected_once(rows, cut) -> None:
    # seq from 1: a fall back to 0 would be a restarted publisher (tested above), which starts over
    t = np.array([r[0] for r in rows])
    seq = np.array([r[1] for r in rows])
    ne = np.array([r[2] for r in rows])
    te = np.array([r[3] for r in rows])
    p = Pipeline(Config())
    batch = make_batch(t, seq=seq, ne=ne, Te=te)
    done = [p.process_batch(b) for b in (split(batch, [cut]) if cut < len(rows) else [batch])]
    frames = [d.frame() for d in done]
    c = p.counts()["probe"]
    assert c.accepted + sum(c.rejected.values()) == len(rows)
    assert c.accepted == sum(len(f) for f in frames)
    assert sum(len(d.rejections) for d in done) == sum(c.rejected.values())
    ok_t = np.concatenate([f.t for f in frames])
    assert np.all(np.diff(ok_t) >= 0) and np.isfinite(ok_t).all()
    ok_seq = np.concatenate([f.seq for f in frames])
    assert np.all(np.diff(ok_seq) > 0)
    raw = np.concatenate([f.raw["ne"] for f in frames]) if all("ne" in f.raw for f in frames) else None
    if raw is not None:
        shown = raw[~np.isnan(raw)]
        assert np.all((shown > 0) & (shown <= 1e33))
    # lost never exceeds the span of seq numbers seen
    assert p.restarts()["probe"] == 0
    assert 0 <= c.lost <= int(seq.max() - seq.min())
