"""Every formula against the NRL Plasma Formulary's practical formulas at their printed three figures."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.constants as sc

from monitor.physics import collisions, dimensionless, frequencies, lengths, speeds

RTOL = 5e-3                                   # the formulary prints three figures
NE_CM = np.array([1e8, 3e10, 5e12, 2e15])     # cm^-3
TE = np.array([0.5, 3.0, 7.0, 9.5])           # eV, all below the 10 eV branch for Z = 1
B_G = np.array([10.0, 500.0, 875.0, 2e4])     # gauss
MU_AR = 39.948 * sc.atomic_mass / sc.proton_mass   # NRL mu = m_i / m_p (CODATA via scipy.constants)


def test_debye_length() -> None:
    # NRL Plasma Formulary: lambda_D = 7.43e2 Te^1/2 ne^-1/2 cm
    expected_m = 7.43e2 * np.sqrt(TE / NE_CM) * 1e-2
    np.testing.assert_allclose(lengths.debye_length(NE_CM * 1e6, TE), expected_m, rtol=RTOL)


def test_electron_plasma_frequency() -> None:
    # NRL Plasma Formulary: omega_pe = 5.64e4 ne^1/2 rad/s
    np.testing.assert_allclose(frequencies.electron_plasma_frequency(NE_CM * 1e6), 5.64e4 * np.sqrt(NE_CM), rtol=RTOL)


def test_debye_number() -> None:
    # NRL Plasma Formulary: N_D = (4 pi / 3) n lambda_D^3 = 1.72e9 T^3/2 n^-1/2
    np.testing.assert_allclose(dimensionless.debye_number(NE_CM * 1e6, TE), 1.72e9 * TE**1.5 / np.sqrt(NE_CM),
                               rtol=RTOL)


def test_electron_cyclotron_frequency() -> None:
    # NRL Plasma Formulary: omega_ce = 1.76e7 B rad/s, B in gauss
    np.testing.assert_allclose(frequencies.electron_cyclotron_frequency(B_G * 1e-4), 1.76e7 * B_G, rtol=RTOL)


def test_electron_gyroradius() -> None:
    # NRL Plasma Formulary: r_e = 2.38 Te^1/2 B^-1 cm, B in gauss
    np.testing.assert_allclose(lengths.electron_gyroradius(TE, B_G * 1e-4), 2.38 * np.sqrt(TE) / B_G * 1e-2,
                               rtol=RTOL)


def test_electron_thermal_speed() -> None:
    # NRL Plasma Formulary: v_Te = (k Te / me)^1/2 = 4.19e7 Te^1/2 cm/s
    np.testing.assert_allclose(speeds.thermal_speed(TE), 4.19e7 * np.sqrt(TE) * 1e-2, rtol=RTOL)


def test_ion_frequencies_and_gyroradius() -> None:
    z = 1.0
    ti = np.array([0.03, 0.1, 1.0, 5.0])
    ni_cm = NE_CM / z
    # NRL Plasma Formulary: omega_ci = 9.58e3 Z mu^-1 B rad/s
    np.testing.assert_allclose(frequencies.ion_cyclotron_frequency(B_G * 1e-4, 39.948, z),
                               9.58e3 * z / MU_AR * B_G, rtol=RTOL)
    # NRL Plasma Formulary: omega_pi = 1.32e3 Z mu^-1/2 ni^1/2 rad/s
    np.testing.assert_allclose(frequencies.ion_plasma_frequency(NE_CM * 1e6, 39.948, z),
                               1.32e3 * z / math.sqrt(MU_AR) * np.sqrt(ni_cm), rtol=RTOL)
    # NRL Plasma Formulary: r_i = 1.02e2 mu^1/2 Z^-1 Ti^1/2 B^-1 cm
    np.testing.assert_allclose(lengths.ion_gyroradius(ti, B_G * 1e-4, 39.948, z),
                               1.02e2 * math.sqrt(MU_AR) / z * np.sqrt(ti) / B_G * 1e-2, rtol=RTOL)


def test_ion_plasma_frequency_doubly_charged() -> None:
    # NRL Plasma Formulary: omega_pi = 1.32e3 Z mu^-1/2 ni^1/2 rad/s with ni = ne / Z
    z = 2.0
    np.testing.assert_allclose(frequencies.ion_plasma_frequency(NE_CM * 1e6, 39.948, z),
                               1.32e3 * z / math.sqrt(MU_AR) * np.sqrt(NE_CM / z), rtol=RTOL)


def test_plasma_beta() -> None:
    # NRL Plasma Formulary: beta = 8 pi n k T / B^2 = 4.03e-11 n T B^-2 (n cm^-3, T eV, B gauss)
    np.testing.assert_allclose(dimensionless.plasma_beta(NE_CM * 1e6, TE, B_G * 1e-4),
                               4.03e-11 * NE_CM * TE / B_G**2, rtol=RTOL)


def test_coulomb_logarithm_both_branches() -> None:
    # NRL Plasma Formulary, electron-ion: 23 - ln(ne^1/2 Z Te^-3/2) for Te < 10 Z^2 eV,
    # 24 - ln(ne^1/2 Te^-1) above; ne in cm^-3
    ne_cm = np.array([1e10, 1e10, 1e14, 1e14])
    te = np.array([2.0, 50.0, 9.0, 1e3])
    expected = np.where(te < 10.0, 23.0 - np.log(np.sqrt(ne_cm) * te**-1.5), 24.0 - np.log(np.sqrt(ne_cm) / te))
    np.testing.assert_allclose(collisions.coulomb_logarithm(ne_cm * 1e6, te), expected, rtol=1e-12)
    # ne = 1e10 cm^-3, Te = 2 eV: 23 - ln(1e5 * 2^-1.5) = 12.527, worked by hand from the NRL formula
    assert float(collisions.coulomb_logarithm(1e16, 2.0)) == pytest.approx(12.527, abs=2e-3)
    # Z = 3: the branch moves to 90 eV and ln Z enters below it
    z = 3.0
    assert float(collisions.coulomb_logarithm(1e16, 50.0, z)) == pytest.approx(
        23.0 - math.log(1e5 * z * 50.0**-1.5), rel=1e-12)
    assert float(collisions.coulomb_logarithm(1e16, 200.0, z)) == pytest.approx(
        24.0 - math.log(1e5 / 200.0), rel=1e-12)


def test_electron_collision_rate() -> None:
    # NRL Plasma Formulary: nu_e = 2.91e-6 ne lnLambda Te^-3/2 s^-1 (ne in cm^-3)
    lnl = np.array([10.0, 12.0, 8.0, 15.0])
    np.testing.assert_allclose(collisions.electron_ion_collision_frequency(NE_CM * 1e6, TE, lnl),
                               2.91e-6 * NE_CM * lnl * TE**-1.5, rtol=1e-12)


def test_cutoff_density_for_245_ghz() -> None:
    # NRL Plasma Formulary: omega_pe = 5.64e4 ne^1/2 rad/s, so n_c = (2 pi f / 5.64e4)^2 cm^-3
    from monitor.physics import densities

    f = 2.45e9
    assert float(densities.cutoff_density(f)) == pytest.approx((2 * math.pi * f / 5.64e4) ** 2 * 1e6, rel=2 * RTOL)
    # common practice: the 2.45 GHz cutoff is about 7.4e16 m^-3
    assert float(densities.cutoff_density(f)) == pytest.approx(7.4e16, rel=1e-2)
