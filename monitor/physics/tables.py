"""What each derived quantity needs, what each warning derive() raises means, and which quantities it concerns."""

from __future__ import annotations

from typing import Iterable, Mapping

import numpy as np

from monitor.physics.nonlinear import NONLINEAR, RHO_MAX

__all__ = ["INPUT_KEYS", "REQUIRES", "WARNINGS", "AFFECTS", "WITHHELD", "warning_text", "flags_of",
           "sample_flags", "sample_withheld"]

INPUT_KEYS = ("ne", "Te", "Ti", "B", "p0")
# What each derived quantity needs: input keys plus device constants L and f
# (A, Z, Tgas and sigma_en always have device defaults).
REQUIRES: dict[str, tuple[str, ...]] = {
    "debye_length": ("ne", "Te"), "debye_number": ("ne", "Te"), "debye_ratio": ("ne", "Te", "L"),
    "electron_plasma_frequency": ("ne",), "ion_plasma_frequency": ("ne",),
    "electron_most_probable_speed": ("Te",), "electron_mean_speed": ("Te",), "electron_rms_speed": ("Te",),
    "electron_thermal_speed": ("Te",), "coulomb_logarithm": ("ne", "Te"),
    "electron_ion_collision_frequency": ("ne", "Te"), "electron_neutral_collision_frequency": ("p0", "Te"),
    "electron_mean_free_path": ("ne", "Te"), "knudsen_number": ("ne", "Te", "L"),
    "neutral_density": ("p0",), "ionization_fraction": ("ne", "p0"), "collectivity": ("ne", "Te"),
    "electron_cyclotron_frequency": ("B",), "ion_cyclotron_frequency": ("B",),
    "electron_gyroradius": ("Te", "B"), "ion_gyroradius": ("Ti", "B"), "hall_parameter": ("ne", "Te", "B"),
    "plasma_beta": ("ne", "Te", "B"), "cutoff_density": ("f",), "cutoff_ratio": ("ne", "f"),
}
# Warning codes derive() may raise, with what they mean for the operator. Each
# criterion's source is named beside its test in monitor/physics/validity.py.
WARNINGS: dict[str, str] = {
    "coulomb_logarithm_small": "lnLambda < 2: the Coulomb logarithm is outside its validity; collision rates "
                               "and what is built on them are withheld (strongly coupled)",
    "coulomb_logarithm_cold_electrons": "Te < Ti me/mi: below the range of the Coulomb logarithm formula",
    "electrons_strongly_coupled": "electron coupling parameter Gamma_e >= 1 (strongly coupled electrons: "
                                  "Debye shielding and the collision formulas do not hold)",
    "ions_strongly_coupled": "ion coupling parameter Gamma_i = Z^2 e^2/(4 pi eps0 a_i k Ti) >= 1 "
                             "(strongly coupled ions)",
    "electrons_degenerate": "Te below the electron Fermi energy: degenerate electrons, Maxwellian formulas "
                            "(speeds, Debye length, collision rates, pressure) do not hold",
    "relativistic_electrons": "kTe >= 1 % of me c^2 (~5.1 keV): relativistic electrons, non-relativistic "
                              "formulas are off by a percent or more",
    "speed_above_light": "kTe >= me c^2 / 3 (~170 keV): the non-relativistic Maxwellian speeds reach c; "
                         "speeds and what is built on them are withheld",
    "plasma_beta_electrons_only": "plasma_beta counts the electron pressure only (Ti not given)",
    NONLINEAR: f"linear uncertainty not trustworthy: the second-order term exceeds {RHO_MAX:g} of the "
               "first-order sigma (use a Monte Carlo interval)",
}
# The quantities each warning concerns (for per-quantity flags; NONLINEAR codes carry their own name).
_COLLISIONAL = ("electron_ion_collision_frequency", "electron_mean_free_path", "knudsen_number",
                "collectivity", "hall_parameter")
_SPEEDS = ("electron_most_probable_speed", "electron_mean_speed", "electron_rms_speed", "electron_thermal_speed")
_ON_SPEEDS = (*_SPEEDS, "electron_gyroradius", "electron_neutral_collision_frequency",
              "electron_mean_free_path", "knudsen_number", "collectivity", "hall_parameter")
AFFECTS: dict[str, tuple[str, ...]] = {
    "coulomb_logarithm_small": ("coulomb_logarithm", *_COLLISIONAL),
    "coulomb_logarithm_cold_electrons": ("coulomb_logarithm", *_COLLISIONAL),
    "electrons_strongly_coupled": ("coulomb_logarithm", "debye_length", "debye_number", "debye_ratio",
                                   *_COLLISIONAL),
    "ions_strongly_coupled": (),
    "electrons_degenerate": ("debye_length", "debye_number", "debye_ratio", "coulomb_logarithm", *_ON_SPEEDS,
                             "plasma_beta"),
    "relativistic_electrons": ("electron_plasma_frequency", "electron_cyclotron_frequency", *_ON_SPEEDS,
                               "electron_ion_collision_frequency"),
    "speed_above_light": _ON_SPEEDS,
    "plasma_beta_electrons_only": ("plasma_beta",),
}
# Warnings under which derive() withholds (NaN) the values it names in AFFECTS, with the
# short reason the criteria print ("not judged: ...").
WITHHELD: dict[str, tuple[tuple[str, ...], str]] = {
    "coulomb_logarithm_small": (_COLLISIONAL, "strongly coupled (lnLambda < 2)"),
    "speed_above_light": (_ON_SPEEDS, "relativistic electrons (Maxwellian speeds reach c)"),
}


def warning_text(code: str) -> str:
    """The operator's sentence for a warning code (per-quantity NONLINEAR codes included)."""
    base, _, name = code.partition(":")
    text = WARNINGS.get(base, code)
    return f"{name}: {text}" if name else text


def flags_of(name: str, codes: Iterable[str]) -> list[str]:
    """The warning codes among ``codes`` that concern quantity ``name`` (NONLINEAR shortened to its base)."""
    out = []
    for code in codes:
        base, _, q = code.partition(":")
        if (q == name) if q else name in AFFECTS.get(code, ()):
            out.append(base)
    return out



def sample_flags(warnings: Mapping[str, np.ndarray], i: int) -> list[str]:
    """The warning codes raised on sample ``i``."""
    return [code for code, mask in warnings.items() if len(mask) > i and bool(mask[i])]


def sample_withheld(warnings: Mapping[str, np.ndarray], values: Mapping[str, np.ndarray], i: int) -> dict[str, str]:
    """Quantity -> short reason, for the values derive() withheld (NaN) on sample ``i`` (see WITHHELD)."""
    out: dict[str, str] = {}
    for code in sample_flags(warnings, i):
        if code in WITHHELD:
            names, why = WITHHELD[code]
            for name in names:
                v = values.get(name)
                if v is not None and not np.isfinite(v[i]) and name not in out:
                    out[name] = why
    return out
