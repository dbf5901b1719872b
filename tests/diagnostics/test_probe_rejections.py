"""Malformed and unanalysable sweeps are rejected with their reason token; doubtful ones keep their values."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from monitor.diagnostics.probe import analyse_sweeps
from monitor.diagnostics.probe_model import bias_grid, noisy, single_probe_current
from monitor.diagnostics.probe_quality import ANALYSIS_FAILURES, MALFORMED
from monitor.diagnostics.probe_spec import ProbeSpec

SPEC = ProbeSpec(radius=5e-5, length=5e-3)


def _good(n: int = 6, points: int = 300) -> tuple[np.ndarray, np.ndarray]:
    V = bias_grid(np.full(n, 5.0), np.full(n, 3.0), points)
    I0 = single_probe_current(V, 1e16, 3.0, 5.0, SPEC)
    return V, noisy(I0, 0.01, 0.01 * abs(float(I0[0, 0])), 3)


def _damage(kind: str) -> tuple[np.ndarray, np.ndarray]:
    V, I = _good()
    if kind == "not_finite":
        I[1, 100] = np.nan
        V[2, 7] = np.inf
    elif kind == "repeated_bias":
        V[1, 50] = V[1, 49]
    elif kind == "non_monotonic_bias":
        V[1, 50], V[1, 51] = V[1, 51], V[1, 50]
    elif kind == "saturated_rail":
        I[1, -5:] = I[1, -6]                # the amplifier clipped: the last points all at one value
    elif kind == "no_floating_potential":
        I[1] = np.abs(I[1]) + 1e-6          # never negative: no ion branch crossing
    elif kind == "no_plasma_potential":
        V, I = V[:, :200], I[:, :200]       # the sweep stops below Vp: dI/dV peaks at the edge
    elif kind == "no_ion_branch":
        V, I = V[:, 120:], I[:, 120:]       # starts just below Vf
    return V, I


@pytest.mark.parametrize("reason", ["not_finite", "repeated_bias", "non_monotonic_bias", "saturated_rail",
                                    "no_floating_potential", "no_plasma_potential", "no_ion_branch"])
def test_each_damage_is_rejected_with_its_reason(reason: str) -> None:
    V, I = _damage(reason)
    res = analyse_sweeps(V, I, SPEC)
    rows = [1, 2] if reason == "not_finite" else [1]
    if reason in ("no_plasma_potential", "no_ion_branch"):
        rows = list(range(len(res)))
    for k in range(len(res)):
        if k in rows:
            assert res.quality[k] == "rejected" and res.reason[k] == reason
            assert all(np.isnan(res[key][k]) for key in ("Te", "ne", "ni", "Vf", "Vp", "I_sat"))
        else:
            assert res.quality[k] != "rejected", res.reason[k]
    assert reason in MALFORMED + ANALYSIS_FAILURES


def test_too_few_points_and_mismatched_lengths() -> None:
    V, I = _good(points=300)
    short = analyse_sweeps(V[:, :12], I[:, :12], SPEC)
    assert set(short.reason) == {"too_few_points"}
    mismatch = analyse_sweeps(V, I[:, :-1], SPEC)
    assert set(mismatch.reason) == {"length_mismatch"} and len(mismatch) == len(V)


def test_a_downward_sweep_is_turned_round() -> None:
    V, I = _good()
    up, down = analyse_sweeps(V, I, SPEC), analyse_sweeps(V[:, ::-1], I[:, ::-1], SPEC)
    for key in ("Te", "ne", "Vf", "Vp"):
        np.testing.assert_allclose(down[key], up[key], rtol=1e-12)


def test_current_sign_flips_an_instrument_reporting_the_other_way() -> None:
    V, I = _good()
    plain = analyse_sweeps(V, I, SPEC)
    flipped = analyse_sweeps(V, -I, ProbeSpec(radius=5e-5, length=5e-3, current_sign=-1.0))
    np.testing.assert_allclose(flipped["Te"], plain["Te"], rtol=1e-12)


def test_a_two_temperature_plasma_is_doubtful_not_exponential() -> None:
    """A second, hot electron group (10 % at 5 Te) bends ln Ie: flagged, values kept (common practice:
    a bi-Maxwellian shows two slopes in the retarding region)."""
    V = bias_grid(np.full(4, 5.0), np.full(4, 2.0), 500, below=25.0)
    cold = single_probe_current(V, 1e16, 2.0, 5.0, SPEC)
    hot = single_probe_current(V, 1e15, 10.0, 5.0, SPEC, model="oml")
    res = analyse_sweeps(V, noisy(cold + hot, 0.003, 1e-9, 1), SPEC)
    assert set(res.quality) == {"doubtful"}
    assert all("not_exponential" in r for r in res.reason)
    assert np.isfinite(res["Te"]).all()


@settings(max_examples=60)
@given(st.integers(0, 5), st.integers(1, 80), st.sampled_from(["single", "double"]), st.integers(0, 2**16),
       st.sampled_from(["noise", "steps", "nan", "huge"]))
def test_any_input_gets_a_verdict_and_nothing_raises(rows: int, n: int, kind: str, seed: int, flavour: str) -> None:
    rng = np.random.default_rng(seed)
    V = np.sort(rng.uniform(-50, 50, (rows, n)), axis=1)
    I = rng.normal(0, 1e-3, (rows, n))
    if flavour == "steps":
        I = np.round(I, 3)
    elif flavour == "nan":
        I[rng.random((rows, n)) < 0.05] = np.nan
    elif flavour == "huge":
        I *= 1e300
    spec = ProbeSpec(kind=kind, radius=5e-5, length=5e-3)
    res = analyse_sweeps(V, I, spec)
    assert len(res) == rows
    assert set(res.quality) <= {"accepted", "doubtful", "rejected"}
    for k in range(rows):
        assert (res.quality[k] == "rejected") == (res.reason[k] in MALFORMED + ANALYSIS_FAILURES)


@pytest.mark.parametrize("kind", ["single", "double"])
def test_pure_noise_is_never_accepted(kind: str) -> None:
    """Sweeps of white noise alone (no plasma) must not pass as readings."""
    rng = np.random.default_rng(0)
    V = np.tile(np.linspace(-50, 50, 300), (400, 1))
    res = analyse_sweeps(V, rng.normal(0, 1e-3, V.shape), ProbeSpec(kind=kind, radius=5e-5, length=5e-3))
    assert "accepted" not in set(res.quality)
    assert np.mean(res.quality == "rejected") > 0.95
