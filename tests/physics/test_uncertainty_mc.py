"""First-order uncertainties against a numerical Jacobian (tight) and a Monte Carlo estimate (statistical)."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from monitor.model import Device
from monitor.physics import derive

# The references here are published methods, not numbers: the first-order law of propagation of
# uncertainty of the GUM (JCGM 100:2008, clause 5.1.2), evaluated with a central-difference Jacobian,
# and the Monte Carlo propagation of distributions of GUM Supplement 1 (JCGM 101:2008).
DEVICE = Device(length=0.3, wave_frequency=2.45e9)
DEVICE_KEYS = {"L": "length", "f": "wave_frequency", "Tgas": "gas_temperature", "sigma_en": "sigma_en"}
CASES = {
    # name: (inputs, device); Te kept well away from the 10 Z^2 eV branch of the Coulomb logarithm
    "low_branch": ({"ne": 5e16, "Te": 3.0, "Ti": 0.05, "B": 0.05, "p0": 2.0}, DEVICE),
    "high_branch": ({"ne": 2e18, "Te": 60.0, "Ti": 5.0, "B": 0.5, "p0": 0.05}, DEVICE),
    "doubly_charged": ({"ne": 1e18, "Te": 20.0, "Ti": 1.0, "B": 0.2, "p0": 0.5},
                       dataclasses.replace(DEVICE, ion_charge=2.0)),
    "collisions_balanced": ({"ne": 1e18, "Te": 2.0, "Ti": 0.05, "B": 0.1, "p0": 0.6}, DEVICE),
}
REL = {"ne": 0.02, "Te": 0.015, "Ti": 0.02, "B": 0.01, "p0": 0.02}
DEV_REL = {"L": 0.01, "f": 0.005, "Tgas": 0.02, "sigma_en": 0.03}


def _device_value(device: Device, key: str) -> float:
    return float(getattr(device, DEVICE_KEYS[key]))


@pytest.mark.parametrize("case", list(CASES))
def test_sigma_matches_a_numerical_jacobian(case: str) -> None:
    inputs, device = CASES[case]
    sigma = {k: REL[k] * v for k, v in inputs.items()}
    sigma |= {k: DEV_REL[k] * _device_value(device, k) for k in DEV_REL}
    d = derive(inputs, device, sigma)
    variance = {name: 0.0 for name in d.values}
    for key, s in sigma.items():
        h = 1e-6
        if key in inputs:
            x = inputs[key]
            up = derive(inputs | {key: x * (1 + h)}, device).values
            dn = derive(inputs | {key: x * (1 - h)}, device).values
        else:
            x = _device_value(device, key)
            field = DEVICE_KEYS[key]
            up = derive(inputs, dataclasses.replace(device, **{field: x * (1 + h)})).values
            dn = derive(inputs, dataclasses.replace(device, **{field: x * (1 - h)})).values
        for name in variance:
            slope = (up[name][0] - dn[name][0]) / (2 * h * x)
            variance[name] += (slope * s) ** 2
    assert set(d.sigma) == set(d.values)
    for name, var in variance.items():
        assert d.sigma[name][0] == pytest.approx(math.sqrt(var), rel=1e-5, abs=1e-300), name


@pytest.mark.parametrize("case", list(CASES))
def test_sigma_matches_monte_carlo(case: str) -> None:
    inputs, device = CASES[case]
    n = 200_000
    rng = np.random.default_rng(2026)
    sigma = {k: REL[k] * v for k, v in inputs.items()}
    draws = {k: rng.normal(v, sigma[k], n) for k, v in inputs.items()}
    mc = derive(draws, device)
    first = derive(inputs, device, sigma)
    assert mc.valid.all()
    for name, s in first.sigma.items():
        spread = float(np.std(mc.values[name], ddof=1))
        # statistical error of a std from 2e5 draws ~0.16 %; second-order terms at 1-2 % inputs are smaller
        assert s[0] == pytest.approx(spread, rel=0.02), name


def test_missing_sigma_counts_as_exact_and_sign_is_ignored() -> None:
    inputs = {"ne": 5e16, "Te": 3.0, "B": 0.05}
    only_ne = derive(inputs, DEVICE, {"ne": 5e15})
    assert "electron_thermal_speed" not in only_ne.sigma          # depends on Te alone
    assert "electron_cyclotron_frequency" not in only_ne.sigma    # depends on B alone
    # lambda_D ~ ne^(-1/2): relative sigma = 1/2 x relative sigma of ne (GUM, JCGM 100:2008, 5.1.2, for a
    # power law; the exponent from the NRL Plasma Formulary's lambda_D = 7.43e2 T^1/2 n^-1/2 cm)
    assert only_ne.sigma["debye_length"][0] == pytest.approx(0.5 * 0.1 * only_ne.values["debye_length"][0])
    negative = derive(inputs, DEVICE, {"ne": -5e15})
    assert negative.sigma["debye_length"][0] == only_ne.sigma["debye_length"][0]
    assert derive(inputs, DEVICE).sigma == {}


def test_gas_off_keeps_a_finite_sigma() -> None:
    # p0 = 0 +- 0.1 Pa: the first-order sigma comes from the slope at zero, not from a relative uncertainty
    inputs = {"ne": 5e16, "Te": 3.0, "B": 0.05, "p0": 0.0}
    d = derive(inputs, DEVICE, {"p0": 0.1, "Te": 0.3})
    up = derive(inputs | {"p0": 1e-9}, DEVICE).values
    for name in ("neutral_density", "ionization_fraction", "electron_neutral_collision_frequency",
                 "electron_mean_free_path", "collectivity", "hall_parameter"):
        assert np.isfinite(d.sigma[name][0]), name
    # sigma = |df/dp0| x sigma_p0 (GUM, JCGM 100:2008, 5.1.2), the slope taken as a one-sided difference at
    # p0 = 0 from our own derive (n0 = p0 / k Tgas is linear, so the difference is exact to rounding)
    slope_n0 = up["neutral_density"][0] / 1e-9
    assert d.sigma["neutral_density"][0] == pytest.approx(0.1 * slope_n0, rel=1e-9)
    slope_x = (1.0 - up["ionization_fraction"][0]) / 1e-9
    assert d.sigma["ionization_fraction"][0] == pytest.approx(0.1 * slope_x, rel=1e-5)
