"""Every formula against PlasmaPy's formulary as an independent reference (test-only), minding its conventions."""

from __future__ import annotations

import math
import warnings

import astropy.units as u
import numpy as np
import pytest
from plasmapy.formulary import collisions as pp_collisions
from plasmapy.formulary import densities as pp_densities
from plasmapy.formulary import dimensionless as pp_dimensionless
from plasmapy.formulary import frequencies as pp_frequencies
from plasmapy.formulary import lengths as pp_lengths
from plasmapy.formulary import speeds as pp_speeds
from plasmapy.particles import CustomParticle

from monitor.model import Device
from monitor.physics import derive
from monitor.physics.collisions import coulomb_logarithm

NE = np.array([1e15, 5e16, 3e18, 1e20])     # m^-3
TE = np.array([0.8, 3.0, 6.0, 9.0])         # eV, below the 10 eV branch
TI = np.array([0.03, 0.05, 0.2, 1.0])       # eV
B = np.array([0.01, 0.05, 0.2, 1.5])        # T
A, Z = 39.948, 1.0
ION = CustomParticle(mass=A * u.u, Z=Z)     # exactly our ion: m_i = A u, charge Z e
RTOL = 1e-6                                 # same formula, same CODATA constants

DEVICE = Device(length=0.3, wave_frequency=2.45e9, ion_mass_u=A, ion_charge=Z)
DERIVED = derive({"ne": NE, "Te": TE, "Ti": TI, "B": B}, DEVICE)
V = DERIVED.values


def _si(q: u.Quantity, unit: u.UnitBase) -> np.ndarray:
    return np.asarray(q.to_value(unit), dtype=np.float64)


def test_debye_length_and_number() -> None:
    # PlasmaPy formulary: lengths.Debye_length, dimensionless.Debye_number
    np.testing.assert_allclose(V["debye_length"], _si(pp_lengths.Debye_length(TE * u.eV, NE * u.m**-3), u.m),
                               rtol=RTOL)
    np.testing.assert_allclose(V["debye_number"], _si(pp_dimensionless.Debye_number(TE * u.eV, NE * u.m**-3),
                                                      u.dimensionless_unscaled), rtol=RTOL)


def test_plasma_frequencies_are_angular() -> None:
    # PlasmaPy formulary: frequencies.plasma_frequency (angular, rad/s); ion density ne / Z
    np.testing.assert_allclose(V["electron_plasma_frequency"],
                               _si(pp_frequencies.plasma_frequency(NE * u.m**-3, "e-"), u.rad / u.s), rtol=RTOL)
    np.testing.assert_allclose(V["ion_plasma_frequency"],
                               _si(pp_frequencies.plasma_frequency(NE / Z * u.m**-3, ION), u.rad / u.s), rtol=RTOL)


def test_maxwellian_speeds() -> None:
    # PlasmaPy formulary: speeds.thermal_speed defaults to the most probable speed sqrt(2kT/m);
    # "mean_magnitude" is sqrt(8kT/(pi m)), "rms" in 3-D sqrt(3kT/m), "rms" in 1-D sqrt(kT/m)
    t = TE * u.eV
    np.testing.assert_allclose(V["electron_most_probable_speed"], _si(pp_speeds.thermal_speed(t, "e-"), u.m / u.s),
                               rtol=RTOL)
    np.testing.assert_allclose(V["electron_mean_speed"],
                               _si(pp_speeds.thermal_speed(t, "e-", method="mean_magnitude"), u.m / u.s), rtol=RTOL)
    np.testing.assert_allclose(V["electron_rms_speed"],
                               _si(pp_speeds.thermal_speed(t, "e-", method="rms"), u.m / u.s), rtol=RTOL)
    np.testing.assert_allclose(V["electron_thermal_speed"],
                               _si(pp_speeds.thermal_speed(t, "e-", method="rms", ndim=1), u.m / u.s), rtol=RTOL)


def test_cyclotron_frequencies_are_angular() -> None:
    # PlasmaPy formulary: frequencies.gyrofrequency (angular, unsigned by default)
    np.testing.assert_allclose(V["electron_cyclotron_frequency"],
                               _si(pp_frequencies.gyrofrequency(B * u.T, "e-"), u.rad / u.s), rtol=RTOL)
    np.testing.assert_allclose(V["ion_cyclotron_frequency"],
                               _si(pp_frequencies.gyrofrequency(B * u.T, ION), u.rad / u.s), rtol=RTOL)


def test_gyroradii() -> None:
    # PlasmaPy formulary: lengths.gyroradius uses the most probable speed sqrt(2kT/m) and is
    # relativistic by default; ours uses sqrt(kT/m), so pass relativistic=False and divide by sqrt(2)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        # one sample per call: its gyroradius does not take arrays of T
        r_e = np.array([pp_lengths.gyroradius(b * u.T, "e-", T=t * u.eV, relativistic=False).to_value(u.m)
                        for b, t in zip(B, TE)])
        r_i = np.array([pp_lengths.gyroradius(b * u.T, ION, T=t * u.eV, relativistic=False).to_value(u.m)
                        for b, t in zip(B, TI)])
    np.testing.assert_allclose(V["electron_gyroradius"], r_e / math.sqrt(2.0), rtol=RTOL)
    np.testing.assert_allclose(V["ion_gyroradius"], r_i / math.sqrt(2.0), rtol=RTOL)


def test_electron_beta() -> None:
    # PlasmaPy formulary: dimensionless.beta(T, n, B) = 2 mu0 n k T / B^2 for one species
    d = derive({"ne": NE, "Te": TE, "B": B}, DEVICE)
    np.testing.assert_allclose(d.values["plasma_beta"],
                               _si(pp_dimensionless.beta(TE * u.eV, NE * u.m**-3, B * u.T), u.dimensionless_unscaled),
                               rtol=RTOL)
    # with ions: the ion term is the same formula at Ti and ni = ne / Z
    both = (_si(pp_dimensionless.beta(TE * u.eV, NE * u.m**-3, B * u.T), u.dimensionless_unscaled)
            + _si(pp_dimensionless.beta(TI * u.eV, NE / Z * u.m**-3, B * u.T), u.dimensionless_unscaled))
    np.testing.assert_allclose(V["plasma_beta"], both, rtol=RTOL)


def test_cutoff_density_takes_angular_frequency() -> None:
    # PlasmaPy formulary: densities.critical_density(omega) takes the angular frequency 2 pi f
    f = 2.45e9
    expected = _si(pp_densities.critical_density(2 * math.pi * f * u.rad / u.s), u.m**-3)
    np.testing.assert_allclose(V["cutoff_density"], np.full(len(NE), expected), rtol=RTOL)
    np.testing.assert_allclose(V["cutoff_ratio"], NE / expected, rtol=RTOL)


def test_electron_ion_collision_rate_with_our_coulomb_logarithm() -> None:
    # PlasmaPy formulary: MaxwellianCollisionFrequencies.Maxwellian_avg_ei_collision_freq (Braginskii 1/tau_e,
    # the NRL nu_e). Its own Coulomb logarithm is not the NRL fit, so ours is passed explicitly. The NRL
    # coefficient 2.91e-6 has three figures: rtol 5e-3. Its field particle must be a named ion ("Ar+");
    # ions at Ti << Te add a negligible thermal speed.
    lnl = coulomb_logarithm(NE, TE, Z)
    expected = []
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for ne, te, ti, ln in zip(NE, TE, TI, lnl):       # one sample per object: it does not take arrays here
            pp = pp_collisions.MaxwellianCollisionFrequencies(
                "e-", "Ar+", T_a=te * u.eV, n_a=ne * u.m**-3, T_b=ti * u.eV, n_b=ne / Z * u.m**-3,
                Coulomb_log=ln * u.dimensionless_unscaled)
            expected.append(pp.Maxwellian_avg_ei_collision_freq.to_value(u.Hz))
    np.testing.assert_allclose(V["electron_ion_collision_frequency"], expected, rtol=5e-3)


@pytest.mark.parametrize("te", [0.5, 5.0])
def test_scalar_path_agrees_with_plasmapy(te: float) -> None:
    # PlasmaPy formulary: lengths.Debye_length on one sample (derive's pure-Python path)
    d = derive({"ne": 1e17, "Te": te}, Device())
    assert d.values["debye_length"][0] == pytest.approx(
        float(pp_lengths.Debye_length(te * u.eV, 1e17 * u.m**-3).to_value(u.m)), rel=RTOL)
