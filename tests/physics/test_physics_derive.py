"""derive(): the contract (every quantity its inputs allow), both code paths, bad input and warnings."""

from __future__ import annotations

import importlib
import itertools
import math

import numpy as np
import pytest

from monitor.model import Device
from monitor.physics import REQUIRES, WARNINGS, derive
from monitor.physics import collisions, densities, dimensionless, frequencies, lengths, speeds
from monitor.quantities import DERIVED

derive_module = importlib.import_module("monitor.physics.derive")
N = 64
RNG = np.random.default_rng(7)
INPUTS = {
    "ne": RNG.uniform(1e15, 1e19, N), "Te": RNG.uniform(0.5, 9.0, N), "Ti": RNG.uniform(0.02, 0.5, N),
    "B": RNG.uniform(0.005, 0.2, N), "p0": RNG.uniform(0.1, 20.0, N),
}
SIGMA = {k: 0.05 * v for k, v in INPUTS.items()}
FULL = Device(length=0.3, wave_frequency=2.45e9)


def test_requires_covers_exactly_the_derived_names() -> None:
    assert set(REQUIRES) == {q.name for q in DERIVED}


@pytest.mark.parametrize("keys", [c for r in range(0, 6) for c in itertools.combinations(INPUTS, r)])
@pytest.mark.parametrize("device", [Device(), FULL], ids=["bare", "L+f"])
def test_every_quantity_its_inputs_allow(keys: tuple[str, ...], device: Device) -> None:
    d = derive({k: INPUTS[k] for k in keys}, device, {k: SIGMA[k] for k in keys})
    have = set(keys) | ({"L", "f"} if device.length else set())
    expected = {name for name, needs in REQUIRES.items() if set(needs) <= have}
    assert set(d.values) == expected
    for name, v in d.values.items():
        assert v.dtype == np.float64 and v.shape == ((N,) if keys else (1,)), name
        assert np.all(np.isfinite(v)), name
    # every quantity with an uncertain input has a sigma (cutoff_density depends on f alone)
    assert set(d.sigma) == expected - {"cutoff_density"}
    assert d.invalid == {}
    assert d.valid.all()


def test_electron_thermal_speed_is_the_handbook_convention() -> None:
    d = derive({"Te": 2.0}, Device())
    v = d.values
    from scipy import constants as sc   # CODATA via scipy.constants

    assert v["electron_thermal_speed"][0] == pytest.approx(math.sqrt(2.0 * sc.e / sc.m_e))
    assert v["electron_most_probable_speed"][0] == pytest.approx(math.sqrt(2) * v["electron_thermal_speed"][0])
    assert v["electron_rms_speed"][0] == pytest.approx(math.sqrt(3) * v["electron_thermal_speed"][0])
    assert v["electron_mean_speed"][0] == pytest.approx(math.sqrt(8 / math.pi) * v["electron_thermal_speed"][0])


def test_fused_core_agrees_with_the_per_kind_functions() -> None:
    d = derive(INPUTS, FULL)
    ne, te, ti, b, p0 = (INPUTS[k] for k in ("ne", "Te", "Ti", "B", "p0"))
    A, Z = FULL.ion_mass_u, FULL.ion_charge
    n0 = densities.neutral_density(p0, FULL.gas_temperature)
    lnl = collisions.coulomb_logarithm(ne, te, Z)
    nu_ei = collisions.electron_ion_collision_frequency(ne, te, lnl)
    nu_en = collisions.electron_neutral_collision_frequency(n0, te, FULL.sigma_en)
    nu = nu_ei + nu_en
    vt = speeds.thermal_speed(te)
    wpe = frequencies.electron_plasma_frequency(ne)
    wce = frequencies.electron_cyclotron_frequency(b)
    nc = densities.cutoff_density(FULL.wave_frequency)
    mfp = lengths.electron_mean_free_path(vt, nu)
    expected = {
        "debye_length": lengths.debye_length(ne, te), "debye_number": dimensionless.debye_number(ne, te),
        "debye_ratio": dimensionless.debye_ratio(0.3, ne, te), "electron_plasma_frequency": wpe,
        "ion_plasma_frequency": frequencies.ion_plasma_frequency(ne, A, Z),
        "electron_most_probable_speed": speeds.most_probable_speed(te), "electron_mean_speed": speeds.mean_speed(te),
        "electron_rms_speed": speeds.rms_speed(te), "electron_thermal_speed": vt, "coulomb_logarithm": lnl,
        "electron_ion_collision_frequency": nu_ei, "electron_neutral_collision_frequency": nu_en,
        "electron_mean_free_path": mfp, "knudsen_number": dimensionless.knudsen_number(mfp, 0.3),
        "neutral_density": n0, "ionization_fraction": dimensionless.ionization_fraction(ne, n0),
        "collectivity": dimensionless.collectivity(wpe, nu), "electron_cyclotron_frequency": wce,
        "ion_cyclotron_frequency": frequencies.ion_cyclotron_frequency(b, A, Z),
        "electron_gyroradius": lengths.electron_gyroradius(te, b), "ion_gyroradius": lengths.ion_gyroradius(ti, b, A, Z),
        "hall_parameter": dimensionless.hall_parameter(wce, nu),
        "plasma_beta": dimensionless.plasma_beta(ne, te, b, ti, Z), "cutoff_density": np.full(N, nc),
        "cutoff_ratio": dimensionless.cutoff_ratio(ne, nc),
    }
    assert set(expected) == set(d.values)
    for name, value in expected.items():
        np.testing.assert_allclose(d.values[name], value, rtol=1e-12, err_msg=name)


def test_scalar_and_vector_paths_agree(monkeypatch: pytest.MonkeyPatch) -> None:
    few = {k: v[:5] for k, v in INPUTS.items()}
    few["Te"] = np.array([0.7, 3.0, 15.0, 120.0, 4.0])          # both Coulomb branches
    sig = {k: v[:5] for k, v in SIGMA.items()} | {"L": 0.01, "f": 1e6, "Tgas": 5.0, "sigma_en": 2e-20}
    scalar = derive(few, FULL, sig)
    monkeypatch.setattr(derive_module, "SCALAR_MAX", 0)
    vector = derive(few, FULL, sig)
    assert set(scalar.values) == set(vector.values) and set(scalar.sigma) == set(vector.sigma)
    for name in scalar.values:
        np.testing.assert_allclose(scalar.values[name], vector.values[name], rtol=1e-13, err_msg=name)
    for name in scalar.sigma:
        np.testing.assert_allclose(scalar.sigma[name], vector.sigma[name], rtol=1e-12, err_msg=name)
    assert set(scalar.warnings) == set(vector.warnings)


BAD = [
    ("ne", math.nan, "ne_not_finite"), ("ne", math.inf, "ne_not_finite"), ("ne", 0.0, "ne_not_positive"),
    ("ne", -1e17, "ne_not_positive"), ("ne", 2e33, "ne_absurd"), ("Te", math.nan, "Te_not_finite"),
    ("Te", -3.0, "Te_not_positive"), ("Te", 0.0, "Te_not_positive"), ("Te", 5e7, "Te_absurd"),
    ("Ti", -0.1, "Ti_not_positive"), ("Ti", -math.inf, "Ti_not_finite"), ("B", math.nan, "B_not_finite"),
    ("p0", -2.0, "p0_negative"), ("p0", math.inf, "p0_not_finite"),
]


@pytest.mark.parametrize("n", [1, 3, 40])
@pytest.mark.parametrize(("key", "bad", "reason"), BAD)
def test_bad_input_gives_nan_and_a_reason(n: int, key: str, bad: float, reason: str) -> None:
    inputs = {k: v[:n].copy() for k, v in INPUTS.items()}
    inputs[key][0] = bad
    d = derive(inputs, FULL, {k: v[:n] for k, v in SIGMA.items()})
    assert list(d.invalid) == [reason]
    assert d.invalid[reason][0] and not d.invalid[reason][1:].any()
    assert not d.valid[0] and d.valid[1:].all()
    for name, needs in REQUIRES.items():
        if key in needs:
            assert math.isnan(d.values[name][0]), name
            assert np.all(np.isfinite(d.values[name][1:])), name
    assert np.isfinite(inputs[key][1:]).all()          # the caller's arrays are left alone
    assert inputs[key][0] == bad or math.isnan(bad)


def test_invalid_device_constants_are_reasons_not_exceptions() -> None:
    d = derive({"ne": 1e17, "Te": 3.0, "p0": 1.0}, Device(length=-1.0, ion_charge=0.0, gas_temperature=0.0))
    assert {"L_invalid", "Z_invalid", "Tgas_invalid"} <= set(d.invalid)
    assert math.isnan(d.values["debye_ratio"][0]) and math.isnan(d.values["neutral_density"][0])
    assert math.isfinite(d.values["debye_length"][0])


def test_warnings_travel_with_the_values() -> None:
    ne = np.array([1e33, 1e17, 1e17, 1e17])
    te = np.array([0.01, 2e5, 3.0, 1e-3])
    ti = np.array([0.01, 1.0, 0.03, 100.0])
    d = derive({"ne": ne, "Te": te, "Ti": ti, "B": 0.1}, Device())
    assert d.warnings["coulomb_logarithm_small"].tolist() == [True, False, False, True]
    assert d.warnings["relativistic_electrons"].tolist() == [False, True, False, False]
    assert d.warnings["coulomb_logarithm_cold_electrons"].tolist() == [False, False, False, True]
    assert "plasma_beta_electrons_only" not in d.warnings
    assert set(d.warnings) <= set(WARNINGS)
    assert np.all(np.isfinite(d.values["coulomb_logarithm"]))     # values kept, only flagged
    electrons_only = derive({"ne": ne, "Te": te, "B": 0.1}, Device())
    assert electrons_only.warnings["plasma_beta_electrons_only"].all()


def test_zero_field_and_zero_pressure_do_not_raise() -> None:
    for n in (1, 30):
        d = derive({"ne": np.full(n, 1e17), "Te": np.full(n, 3.0), "B": np.zeros(n), "p0": np.zeros(n)},
                   Device(), {"ne": np.full(n, 1e16), "B": np.full(n, 0.001), "p0": np.full(n, 0.1)})
        assert d.values["electron_gyroradius"][0] == math.inf
        assert d.values["hall_parameter"][0] == 0.0
        assert d.values["ionization_fraction"][0] == 1.0
        assert d.invalid == {}


def test_scalar_inputs_broadcast_against_arrays() -> None:
    d = derive({"ne": INPUTS["ne"], "Te": 3.0, "B": 0.05}, FULL, {"Te": 0.3})
    assert all(v.shape == (N,) for v in d.values.values())
    assert all(v.shape == (N,) for v in d.sigma.values())
    with pytest.raises(ValueError):
        derive({"ne": np.ones(3), "Te": np.ones(4)}, FULL)      # a programming error, not bad numbers


def test_chunked_batches_give_the_same_results(monkeypatch: pytest.MonkeyPatch) -> None:
    inputs = {k: v.copy() for k, v in INPUTS.items()}
    inputs["ne"][5] = -1.0                                     # a bad sample inside the second block
    inputs["Te"][40] = 2e5                                     # a warning inside the third block
    whole = derive(inputs, FULL, SIGMA)
    monkeypatch.setattr(derive_module, "CHUNK", 17)
    chunked = derive(inputs, FULL, SIGMA)
    assert set(chunked.values) == set(whole.values) and set(chunked.sigma) == set(whole.sigma)
    for name in whole.values:
        np.testing.assert_array_equal(chunked.values[name], whole.values[name])
    for name in whole.sigma:
        np.testing.assert_array_equal(chunked.sigma[name], whole.sigma[name])
    for masks_a, masks_b in ((whole.invalid, chunked.invalid), (whole.warnings, chunked.warnings)):
        assert set(masks_a) == set(masks_b)
        for code in masks_a:
            np.testing.assert_array_equal(masks_a[code], masks_b[code])
