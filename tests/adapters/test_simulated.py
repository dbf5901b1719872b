"""The simulated discharge: determinism, chunk independence, the documented levels and times, pacing."""

from __future__ import annotations

import time

import numpy as np
import pytest

from adapters import scenarios as sc
from adapters.base import FatalSourceError, LinkState
from adapters.simulated import SCENARIOS, SimSource, generate, generate_samples, scenario_length


def _at(b, key: str, t0: float, t1: float) -> np.ndarray:
    m = (b.t >= t0) & (b.t < t1)
    v = b.columns[key][m]
    return v[np.isfinite(v)]


def test_same_seed_same_numbers_other_seed_other_numbers() -> None:
    a = generate("demo", seed=5, rate=500.0)
    b = generate("demo", seed=5, rate=500.0)
    c = generate("demo", seed=6, rate=500.0)
    assert all(np.array_equal(a.columns[k], b.columns[k], equal_nan=True) for k in a.columns)
    assert not np.array_equal(a.columns["ne"], c.columns["ne"])


@pytest.mark.parametrize("rate", [1000.0, 333.0, 20.0, 7.0])
def test_any_chunking_gives_the_same_samples(rate: float) -> None:
    n = scenario_length("dropout", rate)
    whole = generate_samples("dropout", 1, rate, 0, n)
    cuts = [0, *sorted(np.random.default_rng(0).integers(0, n, 15).tolist()), n]
    parts = [generate_samples("dropout", 1, rate, a, b) for a, b in zip(cuts, cuts[1:])]
    for k in whole.columns:
        assert np.array_equal(np.concatenate([p.columns[k] for p in parts]), whole.columns[k], equal_nan=True)
    assert np.array_equal(np.concatenate([p.seq for p in parts]), np.arange(n))


def test_channel_rates_and_nan_where_no_new_value() -> None:
    b = generate("steady", rate=1000.0, t0=0.0, t1=10.0)
    assert len(b) == 10_000 and b.seq.tolist() == list(range(10_000))
    assert np.isfinite(b.columns["ne"]).all()
    counts = {k: int(np.isfinite(b.columns[k]).sum()) for k in ("Te", "B", "p0")}
    assert counts == {"Te": 200, "B": 100, "p0": 50}           # 20 Hz, 10 Hz, 5 Hz over 10 s
    te_idx = np.flatnonzero(np.isfinite(b.columns["Te"]))
    assert np.all(np.diff(te_idx) == 50)


def test_steady_levels() -> None:
    b = generate("steady", seed=2, rate=1000.0)
    assert b.t[-1] < 60.0 <= b.t[-1] + 1e-3
    assert np.mean(b.columns["ne"]) == pytest.approx(sc.NE_STEADY, rel=0.002)
    assert np.std(b.columns["ne"]) / sc.NE_STEADY == pytest.approx(sc.NOISE["ne"], rel=0.05)
    assert np.nanmean(b.columns["Te"]) == pytest.approx(sc.TE_STEADY, rel=0.01)
    assert np.nanmean(b.columns["p0"]) == pytest.approx(sc.P0, rel=0.005)
    assert np.nanmean(b.columns["B"]) == pytest.approx(sc.B, rel=0.005)


@pytest.mark.parametrize("name, checks", [
    ("excursion", [(0.0, 1.0, sc.NE_OFF, sc.TE_OFF), (6.0, 20.0, sc.NE_STEADY, sc.TE_STEADY),
                   (23.0, 27.0, sc.NE_EXCURSION, sc.TE_EXCURSION), (31.0, 40.0, sc.NE_STEADY, sc.TE_STEADY),
                   (43.0, 45.0, sc.NE_OFF, sc.TE_OFF)]),
    ("demo", [(0.0, 2.0, sc.NE_OFF, sc.TE_OFF), (9.0, 25.0, sc.NE_STEADY, sc.TE_STEADY),
              (28.0, 33.0, sc.NE_EXCURSION, sc.TE_EXCURSION), (38.0, 52.0, sc.NE_STEADY, sc.TE_STEADY),
              (56.0, 60.0, sc.NE_OFF, sc.TE_OFF)]),
])
def test_documented_phases(name: str, checks) -> None:
    b = generate(name, seed=0, rate=1000.0)
    assert len(b) == round(SCENARIOS[name].duration * 1000)
    for t0, t1, ne, te in checks:
        assert np.median(_at(b, "ne", t0, t1)) == pytest.approx(ne, rel=0.01), (t0, t1)
        assert np.median(_at(b, "Te", t0, t1)) == pytest.approx(te, rel=0.03), (t0, t1)


def test_excursion_crosses_typical_limits_and_recovers_smoothly() -> None:
    b = generate("excursion", rate=200.0)
    ne = b.columns["ne"]
    above = b.t[ne > 1.5e17]                   # e.g. an envelope limit at 3x steady
    assert 21.0 < above[0] < 23.0 and 27.0 < above[-1] < 29.5
    assert np.max(np.abs(np.diff(np.log(ne)))) < 0.2      # no jumps beyond noise between samples


def test_dropout_probe_silent_then_garbage() -> None:
    b = generate("dropout", rate=1000.0)
    assert _at(b, "Te", 10.0, 13.0).size == 0                        # silent: no Te samples at all
    garbage = _at(b, "Te", 13.0, 15.0)
    assert garbage.size == 40 and set(garbage.tolist()) == set(sc.TE_GARBAGE)
    assert np.median(_at(b, "Te", 15.0, 30.0)) == pytest.approx(sc.TE_STEADY, rel=0.03)
    assert np.isfinite(b.columns["ne"]).all()


def test_loop_repeats_the_levels_with_fresh_noise() -> None:
    n = scenario_length("demo", 100.0)
    b = generate_samples("demo", 0, 100.0, 0, 2 * n, loop=True)
    assert len(b) == 2 * n and b.t[-1] == pytest.approx((2 * n - 1) / 100.0)
    first, second = b.columns["ne"][:n], b.columns["ne"][n:]
    assert np.median(second[1000:2000]) == pytest.approx(np.median(first[1000:2000]), rel=0.01)   # steady 10-20 s
    assert not np.array_equal(first, second)
    assert len(generate_samples("demo", 0, 100.0, 0, 2 * n)) == n   # without loop it ends


def test_simsource_as_fast_as_possible_ends() -> None:
    s = SimSource("dropout", rate=1000.0, speed=None, epoch=100.0)
    s.open()
    got, deadline = [], time.monotonic() + 20
    while s.status().state is not LinkState.ENDED and time.monotonic() < deadline:
        got.extend(s.poll(0.1).batches)
    assert sum(len(b) for b in got) == 30_000 and s.status().state is LinkState.ENDED
    seq = np.concatenate([b.seq for b in got])
    assert np.array_equal(seq, np.arange(30_000))
    assert got[0].t[0] == 100.0 and got[-1].t[-1] == pytest.approx(100.0 + 29.999)
    assert s.poll(0.01).batches == []


def test_simsource_paced_by_the_wall_clock() -> None:
    s = SimSource("steady", rate=1000.0, speed=1.0, loop=True)
    s.open()
    start = time.monotonic()
    n = 0
    while time.monotonic() - start < 0.5:
        n += sum(len(b) for b in s.poll(0.05).batches)
    elapsed = time.monotonic() - start
    assert 0.5 * elapsed * 1000 < n <= elapsed * 1000 + 1
    s.close()
    assert s.status().state is LinkState.ENDED


def test_simsource_duration_and_bad_arguments() -> None:
    s = SimSource("steady", rate=100.0, speed=None, duration=2.5)
    s.open()
    n = 0
    while s.status().state is LinkState.CONNECTED:
        n += sum(len(b) for b in s.poll(0.1).batches)
    assert n == 250
    with pytest.raises(FatalSourceError, match="unknown scenario"):
        SimSource("nonesuch")
    with pytest.raises(FatalSourceError):
        SimSource("steady", rate=-1)
    with pytest.raises(FatalSourceError):
        SimSource("steady", speed=0)
