"""Number and unit formatting for the screen: SI or the trade's practical units, value with uncertainty."""

from __future__ import annotations

import math
import time
from dataclasses import dataclass

from monitor.physics.constants import EV_IN_K

__all__ = ["UNIT_SYSTEMS", "Shown", "show", "fmt_number", "fmt_value", "fmt_duration", "fmt_age", "fmt_data_time"]

# One electronvolt of temperature is e/k = 11604.518... K (monitor.physics.constants.EV_IN_K).
# One torr is 101325/760 Pa (definition).
_PA_PER_MTORR = 101325.0 / 760.0 * 1e-3

UNIT_SYSTEMS = ("practical", "SI")


@dataclass(frozen=True)
class Shown:
    """A value converted for display: the factor applied and the unit printed."""

    factor: float
    unit: str


_PREFIXES = ((1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, ""), (1e-3, "m"), (1e-6, "µ"), (1e-9, "n"))


def _prefixed(value: float, base: str) -> Shown:
    """Pick an SI prefix so that the shown number lies in [1, 1000)."""
    a = abs(value)
    if not math.isfinite(a) or a == 0.0:
        return Shown(1.0, base)
    for scale, prefix in _PREFIXES:
        if a >= scale:
            return Shown(1.0 / scale, prefix + base)
    return Shown(1e9, "n" + base)


def show(unit: str, value: float, system: str, *, key: str = "") -> Shown:
    """How to print ``value`` given in canonical ``unit`` (monitor.quantities) in ``system``.

    Practical: densities in cm^-3, temperatures in eV, fields in gauss,
    pressures in mTorr, angular frequencies as ordinary frequencies with a
    prefix (Hz, kHz, MHz, GHz), lengths with a prefix (mm, µm). SI: the
    canonical SI unit, temperatures in kelvin.
    """
    practical = system == "practical"
    if unit == "m^-3":
        return Shown(1e-6, "cm⁻³") if practical else Shown(1.0, "m⁻³")
    if unit == "eV":
        return Shown(1.0, "eV") if practical else Shown(EV_IN_K, "K")
    if unit == "T":
        return Shown(1e4, "G") if practical else Shown(1.0, "T")
    if unit == "Pa":
        return Shown(1.0 / _PA_PER_MTORR, "mTorr") if practical else Shown(1.0, "Pa")
    if unit == "rad/s":
        if not practical:
            return Shown(1.0, "rad/s")
        hz = value / (2.0 * math.pi)
        p = _prefixed(hz, "Hz")
        return Shown(p.factor / (2.0 * math.pi), p.unit)
    if unit == "m":
        return _prefixed(value, "m") if practical else Shown(1.0, "m")
    if unit == "m/s":
        return Shown(1e-3, "km/s") if practical else Shown(1.0, "m/s")
    if unit == "1/s":
        return Shown(1.0, "s⁻¹")
    if unit == "1":
        return Shown(1.0, "")
    return Shown(1.0, unit)


def fmt_number(x: float | None, digits: int = 3) -> str:
    """Three significant digits; exponent form outside [0.01, 10000)."""
    if x is None or not math.isfinite(x):
        return "—" if x is None or math.isnan(x) else ("+∞" if x > 0 else "−∞")
    a = abs(x)
    if a == 0.0:
        return "0"
    if 0.01 <= a < 1e4:
        decimals = max(0, digits - 1 - int(math.floor(math.log10(a))))
        return f"{x:.{decimals}f}"
    mant, exp = f"{x:.{digits - 1}e}".split("e")
    return f"{mant}e{int(exp)}"


def fmt_value(value: float | None, sigma: float | None, unit: str, system: str) -> tuple[str, str, str]:
    """(number, uncertainty, unit) ready for three columns: ``3.10e11``, ``±4%``, ``cm⁻³``."""
    if value is None or not math.isfinite(value):
        return ("—", "", show(unit, 1.0, system).unit)
    s = show(unit, value, system)
    number = fmt_number(value * s.factor)
    if sigma is None or not math.isfinite(sigma):
        unc = ""
    elif value != 0.0:
        rel = abs(sigma / value) * 100.0
        unc = f"±{rel:.0f}%" if rel >= 10 else f"±{rel:.1f}%"
    else:
        unc = "±" + fmt_number(sigma * s.factor, 2)
    return (number, unc, s.unit)


def fmt_duration(seconds: float | None) -> str:
    """``42 s``, ``3.5 min``, ``2.0 h``; a dash for None."""
    if seconds is None or not math.isfinite(seconds):
        return "—"
    s = abs(seconds)
    sign = "−" if seconds < 0 else ""
    if s < 60:
        return f"{sign}{s:.0f} s" if s >= 10 else f"{sign}{s:.1f} s"
    if s < 3600:
        return f"{sign}{s / 60:.1f} min"
    return f"{sign}{s / 3600:.1f} h"


def fmt_age(age: float | None) -> str:
    """Age of the last reading: ``0.1 s``, ``12 s``, ``never``."""
    return "never" if age is None else fmt_duration(max(0.0, age))


def fmt_data_time(t: float | None) -> str:
    """Data time: a clock time (local, tenths) when it looks like seconds since the epoch, else seconds."""
    if t is None or not math.isfinite(t):
        return "—"
    if t > 1e8:
        whole = time.localtime(t)
        return time.strftime("%H:%M:%S", whole) + f".{int((t % 1.0) * 10)}"
    return f"{t:.2f} s"
