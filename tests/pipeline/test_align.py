"""Alignment: a 1 kHz density with a 20 Hz temperature, held for at most max age, across batch boundaries."""

from __future__ import annotations

import numpy as np
import pytest

from monitor.config import Config, parse_config
from monitor.pipeline import Pipeline
from monitor.pipeline.align import Aligner, Held, hold
from pipeline_helpers import make_batch, split


def mixed_stream(seconds: float = 2.0, te_gap: tuple[float, float] | None = None):
    """ne at 1 kHz and Te at 20 Hz as separate samples (rows), merged in time order."""
    t_ne = np.arange(int(seconds * 1000)) * 1e-3
    t_te = np.arange(int(seconds * 20)) * 0.05 + 0.0005      # Te arrives between density samples
    if te_gap is not None:
        t_te = t_te[(t_te < te_gap[0]) | (t_te >= te_gap[1])]
    t = np.concatenate([t_ne, t_te])
    order = np.argsort(t, kind="stable")
    ne = np.concatenate([1e17 * (1 + 0.1 * np.sin(t_ne)), np.full(len(t_te), np.nan)])[order]
    te = np.concatenate([np.full(len(t_ne), np.nan), 3.0 + 0.01 * np.arange(len(t_te))])[order]
    return make_batch(t[order], ne=ne, Te=te), t_te, 3.0 + 0.01 * np.arange(len(t_te))


def expected_hold(t: np.ndarray, t_src: np.ndarray, v_src: np.ndarray, max_age: float) -> np.ndarray:
    """Plain reference: the latest source value at or before t, if at most max_age old."""
    i = np.searchsorted(t_src, t, side="right") - 1
    out = np.where(i >= 0, v_src[np.maximum(i, 0)], np.nan)
    age = np.where(i >= 0, t - t_src[np.maximum(i, 0)], np.inf)
    return np.where(age <= max_age, out, np.nan)


def test_te_held_for_at_most_max_age_and_never_stale() -> None:
    config = parse_config({"sources": {"max_age": {"default": 0.01, "Te": 0.08}}}, None)
    batch, t_te, v_te = mixed_stream(2.0, te_gap=(0.6, 1.0))
    frame = Pipeline(config).process(batch)
    assert len(frame) == len(batch)
    want = expected_hold(frame.t, t_te, v_te, 0.08)
    np.testing.assert_array_equal(frame.values["Te"], want)
    # during the Te dropout, once 80 ms have passed, Te is missing and the sample is not derivable
    gap = (frame.t > 0.55 + 0.0005 + 0.08) & (frame.t < 1.0005)
    assert gap.sum() > 300
    assert np.isnan(frame.values["Te"][gap]).all()
    assert not frame.valid[gap].any()
    assert np.isnan(frame.values["debye_length"][gap]).all()
    # elsewhere every density sample is paired with a temperature no older than 80 ms
    ok = ~np.isnan(frame.values["ne"]) & ~gap & (frame.t > 0.0005)
    assert np.isfinite(frame.values["Te"][ok]).all()
    # ne is held 10 ms: Te rows (between ne samples) carry the previous density
    assert np.isfinite(frame.values["ne"][frame.t > 0.001]).all()
    # the raw values are the readings as they came, no hold
    assert np.isnan(frame.raw["Te"]).sum() == len(batch) - len(want[~np.isnan(frame.raw["Te"])])
    assert np.count_nonzero(~np.isnan(frame.raw["Te"])) == len(t_te)


def test_hold_expires_exactly_at_max_age() -> None:
    t = np.array([0.0, 0.1, 0.25, 0.2500001, 0.3])
    v = np.array([5.0, np.nan, np.nan, np.nan, 7.0])
    out, _, state = hold(t, v, None, 0.25, Held())
    np.testing.assert_array_equal(out, [5.0, 5.0, 5.0, np.nan, 7.0])
    assert state.t == 0.3 and state.value == 7.0


@pytest.mark.parametrize("cuts", [[1], [500, 501], [37, 1200, 1900], list(range(100, 2000, 100))])
def test_alignment_does_not_depend_on_batch_boundaries(cuts: list[int]) -> None:
    batch, _, _ = mixed_stream(1.0)
    whole = Pipeline(Config()).process(batch)
    p = Pipeline(Config())
    parts = [p.process(b) for b in split(batch, cuts)]
    te = np.concatenate([f.values["Te"] if "Te" in f.values else np.full(len(f), np.nan) for f in parts])
    ne = np.concatenate([f.values["ne"] for f in parts])
    np.testing.assert_array_equal(te, whole.values["Te"])
    np.testing.assert_array_equal(ne, whole.values["ne"])


def test_sigma_is_held_with_its_value() -> None:
    a = Aligner(default=1.0)
    t = np.array([0.0, 0.5, 1.2])
    v, s = a.align("x", t, {"Te": np.array([3.0, np.nan, np.nan])}, {"Te": np.array([0.2, np.nan, np.nan])})
    np.testing.assert_array_equal(v["Te"], [3.0, 3.0, np.nan])
    np.testing.assert_array_equal(s["Te"], [0.2, 0.2, np.nan])
    # the next batch, without Te at all, still holds it while young enough
    v2, _ = a.align("x", np.array([0.9]), {"ne": np.array([1e17])}, {})
    assert v2["Te"][0] == 3.0


def test_a_slow_auxiliary_channel_past_its_hold_leaves_readings_valid() -> None:
    n = 3000
    t = np.arange(n) * 1e-3
    p0 = np.where(np.arange(n) % 1000 == 0, 2.0, np.nan)          # 1 Hz pressure, held 0.25 s
    frame = Pipeline(parse_config({"device": {"length": 0.3}}, None)).process(
        make_batch(t, ne=1e17, Te=3.0, p0=p0))
    held = np.isfinite(frame.values["p0"])
    assert 0.2 < held.mean() < 0.3
    assert frame.valid.all()                                       # missing p0 is not a bad reading
    assert np.isfinite(frame.values["neutral_density"][held]).all()
    assert np.isnan(frame.values["neutral_density"][~held]).all()
    assert np.isfinite(frame.values["debye_length"]).all()
