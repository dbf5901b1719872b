"""The ``[interferometer]`` table of the TOML config, read into a frozen InterferometerConfig."""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Mapping

from monitor.diagnostics.interferometer import EXACT_ABOVE
from monitor.errors import ConfigError, UsageError
from monitor.physics.constants import SPEED_OF_LIGHT
from monitor.units import UnitError
from monitor.config import config_quantity

__all__ = ["InterferometerConfig", "parse_interferometer", "interferometer_config", "parse_angle", "KEYS"]

KEYS = frozenset({
    "frequency", "wavelength", "path_length", "path_length_sigma", "passes", "phase_sign", "reference",
    "jump_threshold", "amplitude_min", "cutoff_margin", "phase_sigma", "iq_noise", "method", "exact_above",
    "phase_input", "discharge_column", "output", "on_doubt", "zero_samples", "nonpositive",
})

_ANGLE = re.compile(r"^\s*(?P<num>[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(?P<unit>rad|mrad|deg|°|)\s*$")
_ANGLE_UNITS = {"": 1.0, "rad": 1.0, "mrad": 1e-3, "deg": math.pi / 180.0, "°": math.pi / 180.0}


def parse_angle(text: str | float | int) -> tuple[float, float | None]:
    """Read ``0.35rad``, ``350mrad``, ``20deg``, ``1.2rad+-0.05rad``, ``1.2rad±2%`` or a bare number (rad).

    Returns (value in rad, absolute sigma in rad or None); raises UnitError naming the accepted units.
    """
    if isinstance(text, bool):
        raise UnitError(f"expected an angle, got {text!r}")
    if isinstance(text, (int, float)):
        return float(text), None
    s = str(text).strip()
    sigma: float | None = None
    for sep in ("+-", "±", "+/-"):
        if sep in s:
            s, sig_text = (part.strip() for part in s.split(sep, 1))
            value, _ = parse_angle(s)
            if sig_text.endswith("%"):
                try:
                    sigma = abs(value) * float(sig_text[:-1]) / 100.0
                except ValueError:
                    raise UnitError(f"cannot read uncertainty {sig_text!r}; write e.g. 5%") from None
            else:
                sigma, _ = parse_angle(sig_text)
            if not (math.isfinite(sigma) and sigma >= 0):
                raise UnitError(f"uncertainty {sig_text!r} must be finite and non-negative")
            return value, sigma
    m = _ANGLE.match(s)
    if not m:
        raise UnitError(f"cannot read {text!r} as an angle; accepted units: rad, mrad, deg")
    return float(m.group("num")) * _ANGLE_UNITS[m.group("unit")], None


@dataclass(frozen=True)
class InterferometerConfig:
    """An interferometer's set-up and analysis options, SI throughout (see the README's table).

    ``reference`` None means "take the zero from the discharge-off periods",
    a float is a fixed phase offset (rad). ``amplitude_min`` is absolute (I/Q
    units) unless ``amplitude_relative``, then a fraction of the mean amplitude
    of the last discharge-off period. ``phase_sigma`` None: estimated from the
    scatter of the off periods. ``zero_samples``: the zero (and the noise and
    amplitude references) are means over at most this many of the latest
    samples of an off period. ``floor_nonpositive``: a density at or below
    zero (noise around the zero between discharges) is reported as
    ``FLOOR`` m^-3, since the pipeline refuses a density that is not positive.
    """

    frequency: float
    path_length: float
    path_length_sigma: float = 0.0
    passes: int = 1
    phase_sign: float = 1.0
    reference: float | None = None
    jump_threshold: float = 0.5
    amplitude_min: float = 0.0
    amplitude_relative: bool = False
    cutoff_margin: float = 0.9
    phase_sigma: float | None = None
    iq_noise: float = 0.0
    method: str = "auto"
    exact_above: float = EXACT_ABOVE
    accumulated: bool = False
    discharge_column: str | None = None
    output: str = "ne"
    withhold_doubtful: bool = False
    zero_samples: int = 1000
    floor_nonpositive: bool = True

    @property
    def wavelength(self) -> float:
        return SPEED_OF_LIGHT / self.frequency


def interferometer_config(raw: Mapping[str, Any], path: str | Path | None = None) -> InterferometerConfig | None:
    """The ``[interferometer]`` table of a parsed config (``Config.raw``), or None when there is none."""
    table = raw.get("interferometer")
    if table is None:
        return None
    if not isinstance(table, Mapping):
        raise ConfigError(path, "interferometer", "expected a table [interferometer]")
    return parse_interferometer(table, path)


def parse_interferometer(table: Mapping[str, Any], path: str | Path | None = None) -> InterferometerConfig:
    """Check and convert the table; every error names the file and the key (ConfigError, exit 2)."""
    extra = sorted(set(table) - KEYS)
    if extra:
        raise ConfigError(path, f"interferometer.{extra[0]}", f"unknown key; accepted: {', '.join(sorted(KEYS))}")
    if ("frequency" in table) == ("wavelength" in table):
        raise ConfigError(path, "interferometer.frequency", "give the probing wave's frequency or its wavelength (one)")
    if "frequency" in table:
        frequency = _positive(table, "frequency", "frequency", path)
    else:
        frequency = SPEED_OF_LIGHT / _positive(table, "wavelength", "length", path)
    if "path_length" not in table:
        raise ConfigError(path, "interferometer.path_length", "required: the chord length through the plasma")
    length = _positive(table, "path_length", "length", path)
    kwargs: dict[str, Any] = {"frequency": frequency, "path_length": length}
    if "path_length_sigma" in table:
        kwargs["path_length_sigma"] = _fraction_or_value(table, "path_length_sigma", "length", length, path)
    kwargs["passes"] = _whole(table, "passes", 1, 1, 8, path)
    sign = table.get("phase_sign", 1)
    if isinstance(sign, bool) or sign not in (1, -1):
        raise ConfigError(path, "interferometer.phase_sign", f"must be 1 or -1, got {sign!r}")
    kwargs["phase_sign"] = float(sign)
    ref = table.get("reference", "off")
    if ref != "off":
        kwargs["reference"] = _angle(ref, path, "reference")
    kwargs["jump_threshold"] = _plain(table, "jump_threshold", 0.5, path, lo=0.05, hi=1.0)
    if "amplitude_min" in table:
        amp = table["amplitude_min"]
        if isinstance(amp, str) and amp.strip().endswith("%"):
            kwargs["amplitude_min"] = _percent(amp, path, "amplitude_min")
            kwargs["amplitude_relative"] = True
        else:
            kwargs["amplitude_min"] = _plain(table, "amplitude_min", 0.0, path, lo=0.0, hi=math.inf)
    kwargs["cutoff_margin"] = _plain(table, "cutoff_margin", 0.9, path, lo=0.01, hi=1.0)
    if "phase_sigma" in table:
        value = _angle(table["phase_sigma"], path, "phase_sigma")
        if value < 0:
            raise ConfigError(path, "interferometer.phase_sigma", "must not be negative")
        kwargs["phase_sigma"] = value
    kwargs["iq_noise"] = _plain(table, "iq_noise", 0.0, path, lo=0.0, hi=math.inf)
    kwargs["method"] = _choice(table, "method", ("auto", "linear", "exact"), path)
    kwargs["exact_above"] = _plain(table, "exact_above", EXACT_ABOVE, path, lo=0.0, hi=1.0)
    kwargs["accumulated"] = _choice(table, "phase_input", ("wrapped", "accumulated"), path) == "accumulated"
    for key in ("discharge_column", "output"):
        if key in table:
            value = table[key]
            if not isinstance(value, str) or not value.strip():
                raise ConfigError(path, f"interferometer.{key}", f"expected a column name, got {value!r}")
            kwargs[key] = value.strip()
    kwargs["zero_samples"] = _whole(table, "zero_samples", 1000, 1, 10_000_000, path)
    kwargs["floor_nonpositive"] = _choice(table, "nonpositive", ("floor", "keep"), path) == "floor"
    kwargs["withhold_doubtful"] = _choice(table, "on_doubt", ("keep", "withhold"), path) == "withhold"
    return InterferometerConfig(**kwargs)


def _positive(table: Mapping[str, Any], key: str, dimension: str, path: str | Path | None) -> float:
    value = config_quantity(table[key], dimension, path, f"interferometer.{key}")
    if not value > 0:
        raise ConfigError(path, f"interferometer.{key}", f"must be positive and finite, got {table[key]!r}")
    return value


def _fraction_or_value(table: Mapping[str, Any], key: str, dimension: str, of: float, path: str | Path | None) -> float:
    raw = table[key]
    if isinstance(raw, str) and raw.strip().endswith("%"):
        return _percent(raw, path, key) * of
    if raw == 0:
        return 0.0
    return _positive(table, key, dimension, path)


def _percent(raw: str, path: str | Path | None, key: str) -> float:
    try:
        pct = float(raw.strip()[:-1])
    except ValueError:
        raise ConfigError(path, f"interferometer.{key}", f"cannot read {raw!r} as a percentage") from None
    if not (math.isfinite(pct) and 0 <= pct <= 100):
        raise ConfigError(path, f"interferometer.{key}", f"must be from 0% to 100%, got {raw!r}")
    return pct / 100.0


def _angle(raw: Any, path: str | Path | None, key: str) -> float:
    try:
        value, sigma = parse_angle(raw)
    except UsageError as exc:
        raise ConfigError(path, f"interferometer.{key}", str(exc)) from None
    if sigma is not None or not math.isfinite(value):
        raise ConfigError(path, f"interferometer.{key}", f"expected one finite angle, got {raw!r}")
    return value


def _plain(table: Mapping[str, Any], key: str, default: float, path: str | Path | None, *, lo: float,
           hi: float) -> float:
    if key not in table:
        return default
    raw = table[key]
    if isinstance(raw, bool) or not isinstance(raw, (int, float)) or not (lo <= raw <= hi) or math.isnan(raw):
        raise ConfigError(path, f"interferometer.{key}", f"expected a number from {lo:g} to {hi:g}, got {raw!r}")
    return float(raw)


def _whole(table: Mapping[str, Any], key: str, default: int, lo: int, hi: int, path: str | Path | None) -> int:
    raw = table.get(key, default)
    if isinstance(raw, bool) or not isinstance(raw, int) or not lo <= raw <= hi:
        raise ConfigError(path, f"interferometer.{key}", f"expected a whole number from {lo} to {hi}, got {raw!r}")
    return raw


def _choice(table: Mapping[str, Any], key: str, choices: tuple[str, ...], path: str | Path | None) -> str:
    raw = table.get(key, choices[0])
    if raw not in choices:
        raise ConfigError(path, f"interferometer.{key}", f"expected one of {', '.join(choices)}, got {raw!r}")
    return str(raw)
