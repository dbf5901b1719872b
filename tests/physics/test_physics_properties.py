"""Hypothesis properties: scaling laws, both code paths, and no input (finite or not) ever raises."""

from __future__ import annotations

import importlib
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra import numpy as hnp

from monitor.model import Device
from monitor.physics import INPUT_KEYS, derive

derive_module = importlib.import_module("monitor.physics.derive")
DEVICE = Device(length=0.3, wave_frequency=2.45e9)

density = st.floats(1e8, 1e30)          # times factor stays under the 1e33 m^-3 limit
temperature = st.floats(0.01, 1e4)      # times factor stays under the 1e7 eV limit
factor = st.floats(0.01, 100.0)


# The scaling laws checked here are those of the NRL Plasma Formulary's practical formulas:
# lambda_D = 7.43e2 Te^1/2 ne^-1/2 cm, omega_pe = 5.64e4 ne^1/2 rad/s, omega_ce = 1.76e7 B rad/s,
# r_e = 2.38 Te^1/2 / B cm.
@given(ne=density, te=temperature, k=factor)
def test_debye_length_scales_as_sqrt_t_over_n(ne: float, te: float, k: float) -> None:
    base = derive({"ne": ne, "Te": te}, DEVICE).values["debye_length"][0]
    assert derive({"ne": ne * k, "Te": te}, DEVICE).values["debye_length"][0] == pytest.approx(base / math.sqrt(k),
                                                                                                  rel=1e-12)
    assert derive({"ne": ne, "Te": te * k}, DEVICE).values["debye_length"][0] == pytest.approx(base * math.sqrt(k),
                                                                                                  rel=1e-12)


@given(ne=st.lists(density, min_size=1, max_size=40), k=factor)
def test_plasma_frequency_scales_as_sqrt_n(ne: list[float], k: float) -> None:
    arr = np.array(ne)
    base = derive({"ne": arr}, DEVICE).values["electron_plasma_frequency"]
    np.testing.assert_allclose(derive({"ne": arr * k}, DEVICE).values["electron_plasma_frequency"],
                               base * math.sqrt(k), rtol=1e-12)


@given(ne=density, te=temperature, b=st.floats(1e-4, 50.0), k=factor)
def test_gyroradius_and_cyclotron_scale_with_field(ne: float, te: float, b: float, k: float) -> None:
    v1 = derive({"ne": ne, "Te": te, "B": b}, DEVICE).values
    v2 = derive({"ne": ne, "Te": te, "B": b * k}, DEVICE).values
    assert v2["electron_gyroradius"][0] == pytest.approx(v1["electron_gyroradius"][0] / k, rel=1e-12)
    assert v2["electron_cyclotron_frequency"][0] == pytest.approx(v1["electron_cyclotron_frequency"][0] * k, rel=1e-12)
    assert v2["plasma_beta"][0] == pytest.approx(v1["plasma_beta"][0] / k**2, rel=1e-12)


any_float = st.floats(allow_nan=True, allow_infinity=True)
maybe = st.one_of(st.none(), any_float)


@settings(max_examples=300)
@given(values=st.fixed_dictionaries({k: maybe for k in INPUT_KEYS}),
       sigmas=st.fixed_dictionaries({k: maybe for k in INPUT_KEYS}),
       length=st.one_of(st.none(), any_float), freq=st.one_of(st.none(), any_float),
       a=any_float, z=any_float, tgas=any_float, sigma_en=any_float)
def test_no_scalar_input_raises(values: dict, sigmas: dict, length, freq, a, z, tgas, sigma_en) -> None:
    device = Device(length=length, wave_frequency=freq, ion_mass_u=a, ion_charge=z, gas_temperature=tgas,
                    sigma_en=sigma_en)
    inputs = {k: v for k, v in values.items() if v is not None}
    d = derive(inputs, device, {k: s for k, s in sigmas.items() if s is not None})
    for arr in list(d.values.values()) + list(d.sigma.values()):
        assert arr.shape == (1,) and arr.dtype == np.float64
    for mask in list(d.invalid.values()) + list(d.warnings.values()):
        assert mask.shape == (1,) and mask.dtype == bool
    for key, v in inputs.items():
        meaningless = not math.isfinite(v) or (key in ("ne", "Te", "Ti") and (v <= 0 or v > 1e7 and key != "ne")) \
            or (key == "ne" and v > 1e33) or (key == "p0" and v < 0)
        assert meaningless == any(r.startswith(key + "_") for r in d.invalid), (key, v, d.invalid)


@settings(max_examples=150)
@given(n=st.integers(1, 30), data=st.data())
def test_no_array_input_raises_and_paths_agree(n: int, data: st.DataObject) -> None:
    arrays = {k: data.draw(hnp.arrays(np.float64, n, elements=any_float), label=k) for k in INPUT_KEYS}
    sig = {k: data.draw(hnp.arrays(np.float64, n, elements=st.floats(0, 1e30)), label="s" + k) for k in INPUT_KEYS}
    d = derive(arrays, DEVICE, sig)
    assert all(v.shape == (n,) for v in d.values.values())
    old = derive_module.SCALAR_MAX
    try:
        derive_module.SCALAR_MAX = 0
        vec = derive(arrays, DEVICE, sig)
    finally:
        derive_module.SCALAR_MAX = old
    assert set(vec.invalid) == set(d.invalid)
    for reason in d.invalid:
        np.testing.assert_array_equal(vec.invalid[reason], d.invalid[reason])
    for name in d.values:
        np.testing.assert_allclose(vec.values[name], d.values[name], rtol=1e-12, equal_nan=True, err_msg=name)
