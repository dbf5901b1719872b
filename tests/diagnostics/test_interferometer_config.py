"""The [interferometer] table: units, defaults, and errors that name the file and the key."""

from __future__ import annotations

import math
from pathlib import Path

import pytest
import scipy.constants as sc

from monitor.config import load_config
from monitor.diagnostics.interferometer_config import interferometer_config, parse_angle, parse_interferometer
from monitor.errors import ConfigError, UsageError


def write(tmp_path: Path, body: str) -> Path:
    p = tmp_path / "interf.toml"
    p.write_text(body, encoding="utf-8")
    return p


def test_full_table_read_from_a_file_in_canonical_units(tmp_path: Path) -> None:
    p = write(tmp_path, """
[interferometer]
wavelength = "3mm"
path_length = "20cm"
path_length_sigma = "1%"
passes = 2
phase_sign = -1
reference = "20deg"
jump_threshold = 0.4
amplitude_min = "30%"
cutoff_margin = 0.8
phase_sigma = "5mrad"
iq_noise = 0.01
method = "exact"
exact_above = 0.1
phase_input = "accumulated"
discharge_column = "rf_on"
output = "ne"
on_doubt = "withhold"
zero_samples = 500
""")
    cfg = load_config(p)
    ic = interferometer_config(cfg.raw, cfg.path)
    assert ic is not None
    assert ic.frequency == pytest.approx(sc.c / 3e-3, rel=1e-12)        # c from CODATA via scipy.constants
    assert ic.path_length == pytest.approx(0.2) and ic.path_length_sigma == pytest.approx(0.002)
    assert ic.passes == 2 and ic.phase_sign == -1.0 and ic.reference == pytest.approx(math.radians(20))
    assert ic.jump_threshold == 0.4 and ic.amplitude_relative and ic.amplitude_min == pytest.approx(0.3)
    assert ic.phase_sigma == pytest.approx(5e-3) and ic.method == "exact" and ic.accumulated
    assert ic.discharge_column == "rf_on" and ic.withhold_doubtful and ic.zero_samples == 500


def test_defaults_and_no_table() -> None:
    assert interferometer_config({}) is None
    ic = parse_interferometer({"frequency": "60GHz", "path_length": 0.3})
    assert ic.frequency == 60e9 and ic.passes == 1 and ic.reference is None and ic.method == "auto"
    assert ic.phase_sigma is None and not ic.amplitude_relative and ic.discharge_column is None
    assert ic.wavelength == pytest.approx(sc.c / 60e9)


@pytest.mark.parametrize("body, key", [
    ('frequency = "60GHz"\npath_length = 0.3\ncolour = 1', "interferometer.colour"),
    ('frequency = "60GHz"\nwavelength = "5mm"\npath_length = 0.3', "interferometer.frequency"),
    ('path_length = 0.3', "interferometer.frequency"),
    ('frequency = "60GHz"', "interferometer.path_length"),
    ('frequency = "60 furlongs"\npath_length = 0.3', "interferometer.frequency"),
    ('frequency = "60GHz"\npath_length = -0.3', "interferometer.path_length"),
    ('frequency = "60GHz"\npath_length = 0.3\nphase_sign = 2', "interferometer.phase_sign"),
    ('frequency = "60GHz"\npath_length = 0.3\nreference = "on"', "interferometer.reference"),
    ('frequency = "60GHz"\npath_length = 0.3\npasses = 0', "interferometer.passes"),
    ('frequency = "60GHz"\npath_length = 0.3\njump_threshold = 3', "interferometer.jump_threshold"),
    ('frequency = "60GHz"\npath_length = 0.3\namplitude_min = "150%"', "interferometer.amplitude_min"),
    ('frequency = "60GHz"\npath_length = 0.3\nmethod = "fast"', "interferometer.method"),
    ('frequency = "60GHz"\npath_length = 0.3\ndischarge_column = ""', "interferometer.discharge_column"),
    ('frequency = "60GHz"\npath_length = 0.3\nphase_sigma = "-1rad"', "interferometer.phase_sigma"),
])
def test_errors_name_the_file_and_the_key(tmp_path: Path, body: str, key: str) -> None:
    p = write(tmp_path, "[interferometer]\n" + body + "\n")
    cfg = load_config(p)
    with pytest.raises(ConfigError) as err:
        interferometer_config(cfg.raw, cfg.path)
    assert err.value.key == key and err.value.path == str(p)
    assert str(p) in str(err.value) and key in str(err.value)


def test_not_a_table(tmp_path: Path) -> None:
    with pytest.raises(ConfigError) as err:
        interferometer_config({"interferometer": 3}, tmp_path / "x.toml")
    assert err.value.key == "interferometer"


def test_angles() -> None:
    assert parse_angle("0.35rad") == (0.35, None)
    assert parse_angle("350mrad")[0] == pytest.approx(0.35)
    assert parse_angle("180deg")[0] == pytest.approx(math.pi)
    assert parse_angle(1.5) == (1.5, None)
    value, sigma = parse_angle("2rad+-0.1rad")
    assert (value, sigma) == (2.0, pytest.approx(0.1))
    assert parse_angle("2rad±5%")[1] == pytest.approx(0.1)
    for bad in ("2 furlongs", "rad", "1rad+-x", "1rad+--1rad", True):
        with pytest.raises(UsageError):
            parse_angle(bad)  # type: ignore[arg-type]
