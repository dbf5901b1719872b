"""Interferometer physics against outside references: CODATA's r_e, the NRL cutoff density, the handbook coefficient, GUM propagation."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.constants as sc

from monitor.diagnostics.interferometer import (
    CLASSICAL_ELECTRON_RADIUS, EXACT_ABOVE, density_from_phase_exact, line_averaged_density,
    line_density_from_phase_reading, line_integral_from_phase, phase_shift_exact, phase_shift_linear,
)
from monitor.physics.densities import cutoff_density

F = 100e9                   # Hz
LAM = sc.c / F


def test_classical_electron_radius_is_codata() -> None:
    # CODATA via scipy.constants: "classical electron radius" (2.8179403205e-15 m in CODATA 2022)
    assert CLASSICAL_ELECTRON_RADIUS == pytest.approx(sc.physical_constants["classical electron radius"][0], rel=1e-9)


def test_linear_relation_is_r_e_lambda_times_the_line_integral() -> None:
    nl = np.array([1e16, 3.3e17, 2e19])
    # phase = r_e lambda integral(ne dl), r_e from CODATA via scipy.constants (Hutchinson, Principles of
    # Plasma Diagnostics, ch. 4: the phase of a wave far below cutoff)
    r_e = sc.physical_constants["classical electron radius"][0]
    np.testing.assert_allclose(phase_shift_linear(nl, LAM), r_e * LAM * nl, rtol=1e-9)
    # the handbook's practical coefficient, from memory: phi = 2.82e-15 m x lambda x integral(ne dl)
    np.testing.assert_allclose(phase_shift_linear(nl, LAM) / (LAM * nl), 2.82e-15, rtol=2e-3)
    np.testing.assert_allclose(line_integral_from_phase(phase_shift_linear(nl, LAM), LAM), nl, rtol=1e-12)
    np.testing.assert_allclose(line_integral_from_phase(phase_shift_linear(nl, LAM), LAM, passes=2), nl / 2, rtol=1e-12)


def test_cutoff_density_against_the_nrl_formulary() -> None:
    # NRL Plasma Formulary: f_pe = 8.98e3 sqrt(ne / cm^-3) Hz, so n_c = (f / 8.98e3)^2 cm^-3
    for f in (2.45e9, 28e9, 100e9, 300e9):
        nrl = (f / 8.98e3) ** 2 * 1e6
        assert float(cutoff_density(f)) == pytest.approx(nrl, rel=2e-3)


def test_exact_form_at_cutoff_gives_omega_over_c_per_unit_length() -> None:
    # at ne = n_c the refractive index is 0, so the phase lag per unit length is the vacuum wavenumber
    # omega / c (NRL Plasma Formulary: the ordinary wave's N^2 = 1 - omega_pe^2 / omega^2); c from CODATA
    for f, length in ((2.45e9, 0.3), (100e9, 0.4)):
        nc = float(cutoff_density(f))
        assert float(phase_shift_exact(nc, f, length)) / length == pytest.approx(2 * math.pi * f / sc.c, rel=1e-12)
        assert math.isnan(float(phase_shift_exact(1.01 * nc, f, length)))


def test_exact_form_tends_to_the_linear_one_far_below_cutoff() -> None:
    nc = float(cutoff_density(F))
    n = np.array([1e-6, 1e-4]) * nc
    # 1 - sqrt(1 - r) = r/2 + r^2/8 + r^3/16 + ..., so the ratio to the linear phase is 1 + r/4 + r^2/8
    # (a Taylor series); the exact form's cancellation at r = 1e-6 costs about 1e-10
    r = n / nc
    ratio = phase_shift_exact(n, F, 0.3) / phase_shift_linear(n * 0.3, LAM)
    np.testing.assert_allclose(ratio, 1 + r / 4 + r * r / 8, rtol=1e-8)


def test_exact_inverse_round_trip_up_to_cutoff() -> None:
    nc = float(cutoff_density(F))
    n = np.linspace(0.0, 1.0, 101) * nc
    np.testing.assert_allclose(density_from_phase_exact(phase_shift_exact(n, F, 0.4), F, 0.4), n, rtol=1e-9,
                               atol=1e-9 * nc)
    est = line_averaged_density(phase_shift_exact(n, F, 0.4), F, 0.2, passes=2, method="exact")
    np.testing.assert_allclose(est.density, n, rtol=1e-9, atol=1e-9 * nc)
    assert est.exact.all()
    beyond = line_averaged_density(np.array([1.01 * 2 * math.pi * F / sc.c * 0.4]), F, 0.2, passes=2)
    assert np.isnan(beyond.density[0]) and np.isnan(beyond.sigma[0])


def test_profile_round_trip_recovers_the_line_average_within_noise() -> None:
    # a parabolic profile on a 0.3 m chord: line integral by the trapezoidal rule, phase by the linear
    # relation (checked above against CODATA), then our inversion with phase noise
    x = np.linspace(-0.15, 0.15, 2001)
    peak = np.array([1e17, 5e17, 1e18])[:, None]
    profile = peak * (1 - (x / 0.15) ** 2)
    nl = np.trapezoid(profile, x, axis=1)
    truth = nl / 0.3
    rng = np.random.default_rng(5)
    sigma_phi = 0.02
    phi = phase_shift_linear(nl, LAM)[:, None] + sigma_phi * rng.standard_normal((3, 4000))
    est = line_averaged_density(phi, F, 0.3, method="linear", phase_sigma=sigma_phi)
    mean = est.density.mean(axis=1)
    stated = est.sigma[:, 0]
    assert np.all(np.abs(mean - truth) < 4 * stated / math.sqrt(4000))
    np.testing.assert_allclose(est.density.std(axis=1), stated, rtol=0.05)
    np.testing.assert_allclose(truth, 2 * peak[:, 0] / 3, rtol=1e-6)      # a parabola's mean is 2/3 of its peak


@pytest.mark.parametrize("method, ratio", [("linear", 0.01), ("exact", 0.6)])
def test_uncertainty_is_the_gum_first_order_law_checked_by_monte_carlo(method: str, ratio: float) -> None:
    # GUM (JCGM 100:2008) law of propagation of uncertainty, checked by a Monte Carlo draw (JCGM 101)
    nc = float(cutoff_density(F))
    phi0 = float(phase_shift_exact(ratio * nc, F, 0.4))
    s_phi, length, s_len = 0.05, 0.2, 0.002
    rng = np.random.default_rng(7)
    phis = phi0 + s_phi * rng.standard_normal(200_000)
    lens = length + s_len * rng.standard_normal(200_000)
    k0 = 2 * math.pi * F / sc.c
    xs = phis / (k0 * 2 * lens)
    draws = 2 * nc * xs if method == "linear" else nc * xs * (2 - xs)
    est = line_averaged_density(np.array([phi0]), F, length, passes=2, phase_sigma=s_phi,
                                path_length_sigma=s_len, method=method)
    assert float(est.sigma[0]) == pytest.approx(float(draws.std()), rel=0.02)


def test_auto_takes_the_exact_form_near_cutoff_and_reports_it() -> None:
    nc = float(cutoff_density(F))
    k0l = 2 * math.pi * F / sc.c * 0.4
    low = 0.5 * EXACT_ABOVE * 0.9 * k0l           # linear estimate at 0.9 x exact_above of n_c
    high = 0.5 * EXACT_ABOVE * 1.1 * k0l
    est = line_averaged_density(np.array([low, high]), F, 0.4)
    assert est.exact.tolist() == [False, True]
    assert est.density[0] == pytest.approx(0.9 * EXACT_ABOVE * nc, rel=1e-12)
    # the linear relation is within 1 % of the exact one below the switch
    exact_low = float(density_from_phase_exact(low, F, 0.4))
    assert abs(est.density[0] / exact_low - 1) < 0.01
    with pytest.raises(ValueError):
        line_averaged_density(np.array([low]), F, 0.4, method="guess")


def test_phase_reading_for_calc() -> None:
    r = line_density_from_phase_reading(2.0, 100e9, 0.2, passes=2, phase_sigma=0.01, path_length_sigma=0.002)
    r_e = sc.physical_constants["classical electron radius"][0]     # CODATA via scipy.constants
    expected = 2.0 / (r_e * LAM * 2 * 0.2)
    assert r.method == "linear" and r.density == pytest.approx(expected, rel=1e-9)
    assert r.line_integral == pytest.approx(expected * 0.2, rel=1e-9)
    assert r.sigma == pytest.approx(expected * math.hypot(0.01 / 2.0, 0.002 / 0.2), rel=1e-9)
    near = line_density_from_phase_reading(0.5 * 2 * math.pi * 2.45e9 / sc.c * 0.3, 2.45e9, 0.3)
    assert near.method == "exact" and near.cutoff_ratio == pytest.approx(0.75, rel=1e-9)
    with pytest.raises(ValueError):
        line_density_from_phase_reading(1.0, 0.0, 0.3)


def test_calc_keys_give_the_line_averaged_density_and_refuse_what_is_missing() -> None:
    from monitor.diagnostics.interferometer_calc import density_from_calc_keys, describe
    from monitor.errors import UsageError

    r = density_from_calc_keys({"phase": "2rad±0.02rad", "Lpath": "20cm±2mm", "passes": "2"}, 100e9, 1e8)
    r_e = sc.physical_constants["classical electron radius"][0]          # CODATA via scipy.constants
    n = 2.0 / (r_e * LAM * 2 * 0.2)
    assert r.density == pytest.approx(n, rel=1e-9) and r.method == "linear"
    assert r.sigma == pytest.approx(n * math.sqrt(0.01**2 + 0.01**2 + 1e-3**2), rel=1e-9)   # GUM, relative terms
    assert "linear relation" in describe(r)
    deg = density_from_calc_keys({"phase": "114.59deg", "Lpath": "0.2m", "passes": "2"}, 100e9)
    assert deg.density == pytest.approx(n, rel=1e-4)
    exact = density_from_calc_keys({"phase": "2rad", "Lpath": "0.2m", "method": "exact"}, 100e9)
    assert exact.method == "exact" and math.isnan(exact.sigma)          # no uncertainty given: unknown
    for texts, f, words in (({"phase": "2rad"}, 100e9, "Lpath"), ({"phase": "2rad", "Lpath": "0.2m"}, None, "f="),
                            ({"Lpath": "0.2m"}, 100e9, "phase="), ({"phase": "2rad", "Lpath": "0.2m", "passes": "x"},
                                                                  100e9, "passes"),
                            ({"phase": "2 furlongs", "Lpath": "0.2m"}, 100e9, "angle"),
                            ({"phase": "2rad", "Lpath": "0.2m", "method": "guess"}, 100e9, "method"),
                            ({"phase": "900rad", "Lpath": "0.2m", "passes": "2"}, 100e9, "cutoff")):
        with pytest.raises(UsageError, match=words):
            density_from_calc_keys(texts, f)
