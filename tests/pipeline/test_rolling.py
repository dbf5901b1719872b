"""Rolling statistics against numpy on the same window, chunk-size independence, bounded memory."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from monitor.config import parse_config
from monitor.pipeline import Pipeline
from monitor.pipeline.rolling import Rolling, Trail
from pipeline_helpers import make_batch, split


def reference(t: np.ndarray, x: np.ndarray, start: float) -> tuple[int, float, float, float, float, float]:
    sel = (t >= start) & np.isfinite(x)
    tt, xx = t[sel], x[sel]
    slope = np.polyfit(tt - tt.mean(), xx, 1)[0]
    return len(xx), xx.mean(), xx.std(), xx.min(), xx.max(), slope


def test_matches_numpy_on_the_same_window() -> None:
    rng = np.random.default_rng(7)
    t = 1.7e9 + np.cumsum(rng.uniform(1e-4, 2e-3, 20000))     # epoch-like times, irregular
    ne = 1e17 * (1 + 0.02 * (t - t[0])) + rng.normal(0, 1e14, len(t))
    ne[rng.random(len(t)) < 0.1] = np.nan                      # missing samples are left out
    r = Rolling(window=5.0, bins=100)
    for part in np.array_split(np.arange(len(t)), 37):
        r.add(t[part], {"ne": ne[part]})
    s = r.stats()["ne"]
    start = r.window_start()
    assert t[-1] - 5.0 <= start <= t[-1] - 5.0 + 0.05 + 1e-6
    n, mean, std, mn, mx, slope = reference(t, ne, start)
    assert s.n == n
    assert s.mean == pytest.approx(mean, rel=1e-12)
    assert s.std == pytest.approx(std, rel=1e-7)
    assert s.min == pytest.approx(mn, rel=1e-15) and s.max == pytest.approx(mx, rel=1e-15)
    assert s.slope == pytest.approx(slope, rel=1e-7)
    assert s.slope == pytest.approx(0.02e17, rel=0.05)          # the ramp put in


def test_slope_of_an_exact_ramp_and_small_windows() -> None:
    r = Rolling(window=1.0, bins=10)
    t = np.arange(0, 3, 0.001)
    r.add(t, {"x": 5.0 - 2.0 * t, "c": np.full(len(t), 4.0), "one": np.where(t > 2.9985, 1.0, np.nan)})
    s = r.stats()
    assert s["x"].slope == pytest.approx(-2.0, rel=1e-9)
    assert s["c"].std == 0.0 and s["c"].slope == pytest.approx(0.0, abs=1e-9)
    assert s["one"].n == 1 and np.isnan(s["one"].slope)


def test_old_buckets_leave_the_window() -> None:
    r = Rolling(window=1.0, bins=10)
    r.add(np.array([0.0, 0.05]), {"x": np.array([100.0, 100.0])})
    r.add(np.array([5.0, 5.01]), {"x": np.array([1.0, 3.0])})
    s = r.stats()["x"]
    assert s.n == 2 and s.mean == 2.0 and s.max == 3.0


def test_memory_is_bounded() -> None:
    r = Rolling(window=2.0, bins=40)
    names = ("a", "b")
    cells = None
    for k in range(50):
        t = k * 0.5 + np.arange(5000) * 1e-4
        r.add(t, {n: np.sin(t) for n in names})
        if cells is None:
            cells = r.memory_cells()
        assert r.memory_cells() == cells
    trail = Trail(("ne",), seconds=10, points=100)
    for k in range(50):
        t = k + np.arange(1000) * 1e-3
        trail.add(t, {"ne": t})
    tt, v = trail.arrays()
    assert len(tt) == 100 and np.all(np.diff(tt) > 0) and tt[-1] == pytest.approx(49.9, abs=0.002)
    np.testing.assert_array_equal(v["ne"], tt)


def stream(n: int = 6000):
    rng = np.random.default_rng(3)
    t = np.cumsum(rng.uniform(2e-4, 1e-3, n))
    ne = 1e17 * (1 + 0.5 * np.sin(t))
    te = np.where(rng.random(n) < 0.05, 3.0 + np.cos(t), np.nan)
    ne[rng.random(n) < 0.3] = np.nan
    ne[rng.random(n) < 0.01] = -1.0          # some refused readings
    seq = np.arange(n) + np.cumsum(rng.random(n) < 0.01)    # some gaps
    return make_batch(t, seq=seq, ne=ne, Te=te, p0=2.0, B=0.05)


CONFIG = parse_config({"device": {"length": 0.3}, "pipeline": {"window": 1.0, "bins": 20}}, None)


def run(batches):
    p = Pipeline(CONFIG)
    frames = [p.process(b) for b in batches]
    return p, frames


def cat(frames, key):
    return np.concatenate([f.values.get(key, np.full(len(f), np.nan)) for f in frames])


@settings(max_examples=25)
@given(st.lists(st.integers(min_value=1, max_value=5999), max_size=30, unique=True))
def test_same_readings_in_different_batches_give_the_same_results(cuts: list[int]) -> None:
    batch = stream()
    p1, f1 = run([batch])
    p2, f2 = run(split(batch, cuts))
    assert p1.counts()["probe"].accepted == p2.counts()["probe"].accepted
    assert p1.counts()["probe"].rejected == p2.counts()["probe"].rejected
    assert p1.counts()["probe"].lost == p2.counts()["probe"].lost > 0
    for key in ("ne", "Te", "debye_length", "electron_plasma_frequency"):
        np.testing.assert_array_equal(cat(f1, key), cat(f2, key))
    s1, s2 = p1.stats(), p2.stats()
    assert set(s1) == set(s2)
    for name in s1:
        a, b = s1[name], s2[name]
        assert a.n == b.n, name
        np.testing.assert_allclose([a.min, a.max], [b.min, b.max], rtol=1e-15, atol=0, err_msg=name)
        np.testing.assert_allclose([a.mean, a.std, a.slope], [b.mean, b.std, b.slope], rtol=1e-9, atol=0,
                                   err_msg=name)


def test_pipeline_memory_stays_bounded_over_a_long_run() -> None:
    from adapters.batch import Rejection
    p = Pipeline(parse_config({"pipeline": {"window": 1.0, "bins": 10, "keep_rejected": 50}}, None))
    sizes = []
    for k in range(300):
        t = k * 0.1 + np.arange(100) * 1e-3
        ne = np.full(100, 1e17)
        ne[::10] = -1.0                                   # refused readings, kept in a ring
        p.process(make_batch(t, seq=k * 100 + np.arange(100), ne=ne, Te=3.0))
        p.reject([Rejection("probe", "malformed", b"t=%d seq=x" % k, 0.0)])
        r = p.rolling("probe")
        c = p.ledger.of("probe")
        sizes.append((r.memory_cells(), len(p.rejected_samples), len(c.rate_buckets), len(c.refused_seqs)))
    assert len(set(s[0] for s in sizes[1:])) == 1
    assert max(s[1] for s in sizes) == 50
    assert max(s[2] for s in sizes) <= 21
    assert max(s[3] for s in sizes) == 0
    assert p.counts()["probe"].accepted == 300 * 90


@pytest.mark.parametrize("n", [500, 5000, 50_000])
def test_one_batch_longer_than_the_window(n: int) -> None:
    t = np.linspace(0.0, 30.0, n)
    x = np.sin(t) + 0.001 * t
    r = Rolling(window=4.0, bins=16)
    r.add(t, {"x": x})
    s = r.stats()["x"]
    k, mean, std, mn, mx, slope = reference(t, x, r.window_start())
    assert s.n == k
    assert s.mean == pytest.approx(mean, rel=1e-10, abs=1e-12)
    assert s.std == pytest.approx(std, rel=1e-9)
    assert s.slope == pytest.approx(slope, rel=1e-8)
    assert s.min == pytest.approx(mn, abs=1e-15) and s.max == pytest.approx(mx, abs=1e-15)
