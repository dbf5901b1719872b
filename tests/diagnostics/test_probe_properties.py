"""Properties of the single-probe analysis on our own forward model: ideal recovery, current scaling, bias shift.

The model is the textbook OML cylinder (Hutchinson, Principles of Plasma
Diagnostics, 2nd ed., ch. 3; Merlino, Am. J. Phys. 75, 1078 (2007)), so these
check self-consistency; the outside check is test_probe_langmuir.py.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.optimize import brentq

from monitor.diagnostics.probe import analyse_sweeps
from monitor.diagnostics.probe_model import bias_grid, noisy, single_probe_current
from monitor.diagnostics.probe_spec import ProbeSpec
from monitor.physics.constants import ELEMENTARY_CHARGE, EPSILON_0

plasma = st.tuples(st.floats(14.0, 19.0), st.floats(0.5, 20.0), st.floats(-20.0, 20.0), st.integers(200, 800))


def _spec(ne: float, te: float, size: float = 0.2) -> ProbeSpec:
    debye = float(np.sqrt(EPSILON_0 * te / (ELEMENTARY_CHARGE * ne)))
    return ProbeSpec(geometry="cylinder", radius=size * debye, length=0.005)   # OML holds


@settings(max_examples=30)
@given(plasma)
def test_noise_free_ideal_sweep_recovers_its_inputs(p: tuple[float, float, float, int]) -> None:
    lg, te, vp, n = p
    ne = 10.0 ** lg
    spec = _spec(ne, te)
    V = bias_grid(vp, te, n)
    I = single_probe_current(V, ne, te, vp, spec)
    res = analyse_sweeps(V, I, spec)
    assert res.quality[0] != "rejected", res.reason[0]
    vf_true = brentq(lambda v: float(single_probe_current(np.array([[v]]), ne, te, vp, spec)[0, 0]),
                     vp - 15 * te, vp)
    assert res["Te"][0] == pytest.approx(te, rel=0.02)
    assert res["ne"][0] == pytest.approx(ne, rel=0.15)         # Vp found up to ~0.1 Te low (smoothing)
    assert res["ni"][0] == pytest.approx(ne, rel=0.10)
    assert res["Vf"][0] == pytest.approx(vf_true, abs=0.02 * te)
    assert res["Vp"][0] == pytest.approx(vp, abs=0.25 * te)
    assert res.method[0] == "oml"


def _noisy_block(seed: int) -> tuple[ProbeSpec, np.ndarray, np.ndarray]:
    ne, te, vp = 2e16, 3.0, 4.0
    spec = _spec(ne, te, 0.01)       # r_p / lambda_D stays below 1 (OML) for every density scaling tried
    V = bias_grid(np.full(6, vp), np.full(6, te), 400)
    I0 = single_probe_current(V, ne, te, vp, spec)
    return spec, V, noisy(I0, 0.01, 0.01 * abs(float(I0[0, 0])), seed)


@settings(max_examples=25)
@given(st.floats(1e-3, 1e3), st.integers(0, 2**16))
def test_scaling_the_current_scales_densities_and_leaves_the_rest(k: float, seed: int) -> None:
    spec, V, I = _noisy_block(seed)
    a, b = analyse_sweeps(V, I, spec), analyse_sweeps(V, k * I, spec)
    np.testing.assert_array_equal(a.quality, b.quality)
    for key in ("ne", "ni", "I_sat", "sigma_ne", "sigma_ni", "sigma_I_sat"):
        np.testing.assert_allclose(b[key], k * a[key], rtol=1e-7)
    for key in ("Te", "Vf", "Vp", "sigma_Te", "sigma_Vf", "sigma_Vp"):
        np.testing.assert_allclose(b[key], a[key], rtol=1e-7)


@settings(max_examples=25)
@given(st.floats(-200.0, 200.0), st.integers(0, 2**16))
def test_shifting_the_bias_shifts_vf_and_vp_only(c: float, seed: int) -> None:
    spec, V, I = _noisy_block(seed)
    a, b = analyse_sweeps(V, I, spec), analyse_sweeps(V + c, I, spec)
    np.testing.assert_array_equal(a.quality, b.quality)
    for key in ("Vf", "Vp"):
        np.testing.assert_allclose(b[key], a[key] + c, rtol=0, atol=1e-6)
    for key in ("Te", "ne", "ni", "I_sat", "sigma_Te", "sigma_ne", "sigma_Vf", "sigma_Vp"):
        np.testing.assert_allclose(b[key], a[key], rtol=1e-6)


def test_sigmas_describe_the_scatter_over_repeated_sweeps() -> None:
    """Standard uncertainties against the spread of 300 noisy sweeps of one plasma (GUM: a standard
    uncertainty is the standard deviation of the result's distribution). Te's and Vf's sigma from the
    fit must be within a factor 2 of the scatter; ne's also holds a stated systematic part (the plasma
    potential's smoothing), so it must cover the error in at least 90 % of sweeps."""
    ne, te, vp = 5e16, 4.0, 3.0
    spec = _spec(ne, te)
    V = bias_grid(np.full(300, vp), np.full(300, te), 500)
    I0 = single_probe_current(V, ne, te, vp, spec)
    res = analyse_sweeps(V, noisy(I0, 0.01, 0.01 * abs(float(I0[0, 0])), 11), spec)
    for key in ("Te", "Vf"):
        ratio = np.std(res[key]) / np.median(res[f"sigma_{key}"])
        assert 0.5 < ratio < 2.0, (key, ratio)
    assert np.mean(np.abs(res["ne"] - ne) <= 2.0 * res["sigma_ne"]) >= 0.9


@settings(max_examples=40)
@given(st.integers(1, 6), st.integers(2, 40), st.integers(0, 2**16))
def test_column_bands_hold_every_point_in_bounds(rows: int, n: int, seed: int) -> None:
    """probe_fits.Columns (one binary search over the rows laid end to end) against brute force."""
    from monitor.diagnostics.probe_fits import Columns

    rng = np.random.default_rng(seed)
    V = np.cumsum(rng.uniform(0.01, 2.0, (rows, n)), axis=1) + rng.uniform(-50, 50, (rows, 1))
    lo, hi = rng.uniform(-60, 60, rows), rng.uniform(-60, 100, rows)
    lo[rng.random(rows) < 0.2] = np.nan
    got = Columns(V).band(lo, hi)
    inside = (V >= np.where(np.isnan(lo), np.inf, lo)[:, None]) & (V <= hi[:, None])
    cols = np.flatnonzero(inside.any(axis=0))
    if len(cols):
        assert got.start <= cols[0] and cols[-1] < got.stop
    below = (V < np.where(np.isnan(lo), np.inf, lo)[:, None]).sum(axis=1)
    assert got.start == below.min()
