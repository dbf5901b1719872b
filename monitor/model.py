"""Value types shared by the pipeline, the alarm engine and the sinks: device constants and processed frames."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Mapping

import numpy as np

__all__ = ["Device", "Frame", "Stats"]


@dataclass(frozen=True)
class Device:
    """Constants of the device and the gas, canonical units.

    ``length`` is the device scale L (m), None when not configured (then the
    quantities that need it are absent). ``ion_mass_u`` is the ion mass in
    atomic mass units (u), ``ion_charge`` Z, ``gas_temperature`` in K,
    ``wave_frequency`` the heating or probing wave in Hz (ordinary, not
    angular), ``sigma_en`` the electron-neutral momentum-transfer cross
    section in m^2.
    """

    length: float | None = None
    ion_mass_u: float = 39.948          # argon
    ion_charge: float = 1.0
    gas_temperature: float = 300.0
    wave_frequency: float | None = None
    sigma_en: float = 1.0e-19


@dataclass(frozen=True, eq=False)
class Frame:
    """One batch after the pipeline: aligned, validated and derived.

    ``t`` is data time (s). ``values`` maps every base key present (``ne``,
    ``Te``, ...) and every derived quantity name to a float64 array; NaN where
    missing or invalid. ``sigma`` maps the same names to standard
    uncertainties (absent key: no uncertainty known). ``valid`` is True where
    the sample passed validation and could be derived. ``warnings`` maps a
    warning code (e.g. ``coulomb_logarithm_small``) to a boolean mask of the
    samples it applies to. ``seq`` as in Batch. ``raw`` (added by the
    pipeline) maps each base key to the values as read, in canonical units,
    before the alignment hold (NaN where the reading did not carry the key):
    what a recorder writes so that a replay aligns exactly as the live run
    did. ``discharge`` (added by the pipeline) is True where the discharge
    is on by the one rule of ``monitor.alarms.discharge`` (the alarm engine's
    suppression, the shot splitter and the screen all read it); None in a
    frame built by hand. Frames from the pipeline hold accepted readings
    only; refused ones go to the sinks as Rejections.
    """

    source: str
    t: np.ndarray
    values: Mapping[str, np.ndarray]
    sigma: Mapping[str, np.ndarray] = field(default_factory=dict)
    valid: np.ndarray | None = None
    warnings: Mapping[str, np.ndarray] = field(default_factory=dict)
    seq: np.ndarray | None = None
    raw: Mapping[str, np.ndarray] = field(default_factory=dict)
    discharge: np.ndarray | None = None

    def __len__(self) -> int:
        return len(self.t)


@dataclass(frozen=True)
class Stats:
    """Rolling statistics of one quantity over the configured window (data time)."""

    n: int
    mean: float
    std: float
    min: float
    max: float
    slope: float          # per second, least-squares fit over the window; NaN if n < 2
