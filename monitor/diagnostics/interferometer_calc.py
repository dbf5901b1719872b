"""`regime calc` keys of an interferometer (phase=, Lpath=, passes=, method=) turned into a line-averaged density."""

from __future__ import annotations

import math
from typing import Mapping

from monitor.diagnostics.interferometer import PhaseReading, line_density_from_phase_reading
from monitor.diagnostics.interferometer_config import parse_angle
from monitor.errors import UsageError
from monitor.units import parse_value

__all__ = ["CALC_KEYS", "density_from_calc_keys", "describe"]

CALC_KEYS: dict[str, str] = {
    "phase": "interferometer phase shift (rad, mrad, deg), with f= and Lpath=: the line-averaged ne",
    "Lpath": "interferometer chord length through the plasma (m, cm, mm)",
    "passes": "times the beam crosses the chord, default 1 (2 for a double pass)",
    "method": "phase to density: auto (default), linear or exact",
}


def density_from_calc_keys(texts: Mapping[str, str], frequency: float | None,
                           frequency_sigma: float | None = None) -> PhaseReading:
    """The line-averaged density of ``phase=`` with ``Lpath=`` (and ``passes=``, ``method=``) at wave frequency
    ``frequency`` (Hz, calc's ``f=``); UsageError naming what is missing or wrong.

    The uncertainty combines those of the phase and the path length (see
    ``line_averaged_density``) and, when ``f`` carries one, n sigma_f / f in
    quadrature (first order: n is proportional to f in the linear relation);
    NaN (unknown) when none of the three carries an uncertainty.
    """
    unknown = sorted(set(texts) - set(CALC_KEYS))
    if unknown:
        raise UsageError(f"unknown interferometer key {unknown[0]!r}; keys: {', '.join(CALC_KEYS)}")
    if "phase" not in texts:
        raise UsageError("Lpath=, passes= and method= go with phase=, e.g. phase=2.1rad f=100GHz Lpath=0.2m")
    if frequency is None:
        raise UsageError("phase= needs the probing wave's frequency f=, e.g. f=100GHz")
    if "Lpath" not in texts:
        raise UsageError("phase= needs the chord length Lpath=, e.g. Lpath=0.2m")
    phase, phase_sigma = parse_angle(texts["phase"])
    path, path_sigma = parse_value(texts["Lpath"], "length")
    if not (math.isfinite(phase) and math.isfinite(path) and path > 0):
        raise UsageError(f"phase must be finite and Lpath finite and > 0, got {texts['phase']!r}, {texts['Lpath']!r}")
    passes_text = texts.get("passes", "1").strip()
    if not passes_text.isdigit() or not 1 <= int(passes_text) <= 8:
        raise UsageError(f"passes must be a whole number from 1 to 8, got {passes_text!r}")
    method = texts.get("method", "auto").strip()
    if method not in ("auto", "linear", "exact"):
        raise UsageError(f"method must be auto, linear or exact, got {method!r}")
    reading = line_density_from_phase_reading(phase, frequency, path, int(passes_text), phase_sigma=phase_sigma,
                                              path_length_sigma=path_sigma, method=method)
    if not math.isfinite(reading.density):
        raise UsageError(f"phase={texts['phase']} is beyond what a wave at f={frequency:g} Hz can gain over "
                         f"{int(passes_text)} x {path:g} m: the density would be above its cutoff "
                         f"({reading.cutoff_density:.3g} m^-3)")
    if phase_sigma is None and path_sigma is None and not frequency_sigma:
        total = math.nan                       # no uncertainty stated: unknown, not zero
    else:
        total = math.hypot(reading.sigma, reading.density * (frequency_sigma or 0.0) / frequency)
    return PhaseReading(reading.density, total, reading.method, reading.line_integral,
                        reading.cutoff_density, reading.cutoff_ratio)


def describe(reading: PhaseReading) -> str:
    """One line for calc's text output: where ne came from."""
    form = "the linear relation phi = r_e lambda integral(ne dl)" if reading.method == "linear" else \
        "the exact cold-plasma form (uniform chord), near cutoff"
    return (f"ne from phase: line-averaged, {form}; line integral {reading.line_integral:.4g} m^-2, "
            f"{reading.cutoff_ratio:.3g} of the cutoff density {reading.cutoff_density:.3g} m^-3")
