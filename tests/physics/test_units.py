"""monitor.units: every accepted unit, the uncertainty forms, clear errors, and round trips."""

from __future__ import annotations

import math

import pytest
import scipy.constants as sc
from hypothesis import given
from hypothesis import strategies as st

from monitor.errors import UsageError
from monitor.units import DIMENSIONS, UnitError, parse_value, unit_scale

# unit factors are common practice (SI brochure definitions): 1 G = 1e-4 T, 1 mbar = 100 Pa,
# 1 /cc = 1 cm^-3 = 1e6 m^-3, 1 Torr = 101325/760 Pa
CASES = [
    ("5e16m^-3", "density", 5e16), ("5e16m-3", "density", 5e16), ("5e10cm^-3", "density", 5e16),
    ("5e10cm-3", "density", 5e16), ("5e10/cc", "density", 5e16), ("5e16", "density", 5e16),
    ("3eV", "temperature", 3.0), ("2keV", "temperature", 2000.0), ("3", "temperature", 3.0),
    ("0.05T", "field", 0.05), ("50mT", "field", 0.05), ("500G", "field", 0.05), ("0.5kG", "field", 0.05),
    ("2Pa", "pressure", 2.0), ("2000mPa", "pressure", 2.0), ("0.02mbar", "pressure", 2.0),
    ("0.3m", "length", 0.3), ("30cm", "length", 0.3), ("300mm", "length", 0.3),
    ("2.45GHz", "frequency", 2.45e9), ("13.56MHz", "frequency", 13.56e6), ("400kHz", "frequency", 4e5),
    ("50Hz", "frequency", 50.0), ("1e-19m^2", "area", 1e-19), ("1e-15cm^2", "area", 1e-19),
    ("3 eV", "temperature", 3.0),
]


@pytest.mark.parametrize(("text", "dimension", "expected"), CASES)
def test_accepted_units(text: str, dimension: str, expected: float) -> None:
    value, sigma = parse_value(text, dimension)
    assert value == pytest.approx(expected, rel=1e-12)
    assert sigma is None


def test_kelvin_and_torr() -> None:
    # CODATA via scipy.constants: k / e, eV per kelvin
    assert parse_value("11604.518K", "temperature")[0] == pytest.approx(
        11604.518 * sc.k / sc.e, rel=1e-12)
    # common practice: 1 Torr = 101325/760 Pa = 133.322 Pa (scipy.constants.torr)
    assert parse_value("1Torr", "pressure")[0] == pytest.approx(sc.torr, rel=1e-12)
    assert parse_value("15mTorr", "pressure")[0] == pytest.approx(0.015 * sc.torr, rel=1e-12)
    # the gas temperature is canonical in K: eV converts the other way
    assert parse_value("0.025eV", "temperature_gas")[0] == pytest.approx(0.025 * sc.e / sc.k, rel=1e-12)
    assert parse_value("300", "temperature_gas")[0] == 300.0


@pytest.mark.parametrize(("text", "value", "sigma"), [
    ("3eV+-0.5eV", 3.0, 0.5), ("3eV±0.5", 3.0, 0.5), ("3eV±20%", 3.0, 0.6), ("3eV+-20%", 3.0, 0.6),
    ("3eV ± 500meV", 3.0, 0.5), ("2keV±100eV", 2000.0, 100.0), ("3eV+/-0.5eV", 3.0, 0.5),
])
def test_uncertainty_forms(text: str, value: float, sigma: float) -> None:
    v, s = parse_value(text, "temperature")
    assert v == pytest.approx(value) and s == pytest.approx(sigma)


def test_density_uncertainty_in_other_units() -> None:
    v, s = parse_value("5e10cm-3±1e10cm-3", "density")
    assert v == pytest.approx(5e16) and s == pytest.approx(1e16)


@pytest.mark.parametrize(("text", "dimension"), [
    ("3furlong", "temperature"), ("abc", "density"), ("3eV±-1", "temperature"), ("3eV±x%", "temperature"),
    ("5T", "density"), ("", "field"), ("3eV±", "temperature"),
])
def test_bad_values_are_clear_errors(text: str, dimension: str) -> None:
    with pytest.raises(UnitError) as info:
        parse_value(text, dimension)
    assert isinstance(info.value, UsageError) and isinstance(info.value, ValueError)
    assert str(info.value)


def test_error_names_the_accepted_units() -> None:
    with pytest.raises(UnitError, match="m\\^-3.*cm-3.*/cc"):
        parse_value("5e16furlongs", "density")


# the dimensionless "1" is a canonical name only: written after a number it would read as a digit
units = [(dim, unit) for dim, (_, table) in DIMENSIONS.items() for unit in table if unit and dim != "dimensionless"]


@given(st.sampled_from(units), st.floats(1e-30, 1e30))
def test_round_trip_through_any_unit(dim_unit: tuple[str, str], x: float) -> None:
    dim, unit = dim_unit
    value, _ = parse_value(f"{x!r}{unit}", dim)
    assert value / unit_scale(unit, dim) == pytest.approx(x, rel=1e-12)


@given(st.sampled_from(units), st.floats(1e-20, 1e20), st.floats(0.0, 100.0))
def test_percent_uncertainty_round_trip(dim_unit: tuple[str, str], x: float, pct: float) -> None:
    dim, unit = dim_unit
    value, sigma = parse_value(f"{x!r}{unit}±{pct!r}%", dim)
    assert sigma is not None and math.isfinite(sigma)
    assert sigma == pytest.approx(abs(value) * pct / 100.0, rel=1e-12, abs=1e-300)
