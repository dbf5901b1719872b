"""The stated physical range of every input and device constant, checked once where a value enters (calc, config)."""

from __future__ import annotations

import math
from dataclasses import dataclass

__all__ = ["Range", "RANGES", "DEVICE_FIELDS", "check_value", "out_of_range"]


@dataclass(frozen=True)
class Range:
    """Accepted values of one key, canonical units: ``low`` <= |value| (or value) <= ``high``.

    ``zero_ok`` lets exactly 0 through below ``low`` (a field switched off, no
    gas). ``signed`` checks |value| (a field may point either way).
    ``integer`` refuses fractions. ``why`` says where the bounds come from.
    """

    key: str
    low: float
    high: float
    unit: str
    why: str
    zero_ok: bool = False
    signed: bool = False
    integer: bool = False

    def describe(self) -> str:
        span = f"{self.low:g} to {self.high:g}{' ' + self.unit if self.unit else ''}"
        if self.signed:
            span = f"|value| {span}"
        extras = [e for e, on in (("or 0", self.zero_ok), ("a whole number", self.integer)) if on]
        return span + (f" ({', '.join(extras)})" if extras else "")


# Bounds are deliberately wide: beyond any laboratory plasma, so that only nonsense is
# refused (the formulas' own validity is flagged per sample by derive(), not refused here).
_R = (
    Range("ne", 1.0, 1e33, "m^-3", "intergalactic gas (~1 m^-3) to beyond solid density (1e33 m^-3)"),
    Range("Te", 1e-4, 1e7, "eV", "ultracold plasmas (~1 K) to 10 MeV"),
    Range("Ti", 1e-4, 1e7, "eV", "ultracold plasmas (~1 K) to 10 MeV"),
    Range("B", 1e-12, 1e4, "T", "a pT to 10 kT (beyond pulsed laboratory magnets)", zero_ok=True, signed=True),
    Range("p0", 1e-12, 1e7, "Pa", "ultra-high vacuum to 100 bar", zero_ok=True),
    Range("L", 1e-9, 1e9, "m", "a nanometre to a million kilometres"),
    Range("f", 1.0, 1e18, "Hz", "1 Hz to X-ray lasers"),
    Range("Tgas", 1.0, 1e5, "K", "1 K to fully dissociated hot gas"),
    Range("A", 5.4e-4, 1e4, "u", "a positron (5.49e-4 u) to heavy cluster ions"),
    Range("Z", 1.0, 118.0, "", "charge number of one ion species: 1 to fully stripped element 118",
          integer=True),
    Range("sigma_en", 1e-23, 1e-16, "m^2", "below the Ramsauer minimum to above alkali-atom cross sections"),
)
RANGES: dict[str, Range] = {r.key: r for r in _R}

# monitor.model.Device field -> the key of its range (for the config parser).
DEVICE_FIELDS: dict[str, str] = {
    "length": "L", "wave_frequency": "f", "gas_temperature": "Tgas",
    "ion_mass_u": "A", "ion_charge": "Z", "sigma_en": "sigma_en",
}


def out_of_range(key: str, value: float) -> bool:
    """True when ``value`` (canonical units) is outside the stated range of ``key`` (or not finite)."""
    r = RANGES[key]
    if not math.isfinite(value):
        return True
    if value == 0.0 and r.zero_ok:
        return False
    v = abs(value) if r.signed else value
    if not (r.low <= v <= r.high):
        return True
    return r.integer and value != math.floor(value)


def check_value(key: str, value: float) -> str | None:
    """None when ``value`` is inside the range of ``key``; otherwise the message to show.

    e.g. ``check_value("A", 1e-30)`` -> "A = 1e-30 u is outside its physical range
    5.4e-04 to 1e+04 u (a positron (5.49e-4 u) to heavy cluster ions)".
    """
    if not out_of_range(key, value):
        return None
    r = RANGES[key]
    unit = f" {r.unit}" if r.unit else ""
    return f"{key} = {value:g}{unit} is outside its physical range {r.describe()} ({r.why})"
