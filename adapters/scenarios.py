"""Named simulated-discharge scenarios of our own: phase tables with the levels and times they follow.

Every scenario is an invented argon RF discharge in a 30 cm chamber. The
levels below are the *noise-free targets*; the generator adds Gaussian noise
and attaches to every sample the standard uncertainty its instrument would
report (see "Instruments and their uncertainties" below).

Common levels (all scenarios):

==================  ===========  ==========================================
level               value        meaning
==================  ===========  ==========================================
NE_OFF              2.0e14 m^-3  no discharge (below the 1e15 m^-3 on-threshold)
NE_STEADY           5.0e16 m^-3  the steady discharge
NE_EXCURSION        3.0e17 m^-3  the density excursion peak (6x steady)
TE_OFF              0.5 eV       probe reading with no discharge
TE_STEADY           3.0 eV       the steady discharge
TE_EXCURSION        2.2 eV       cooler during the density excursion
P0                  2.0 Pa       argon fill pressure, constant
B                   0.010 T      weak axial field of a confinement coil, constant
==================  ===========  ==========================================

Sample rates: ``ne`` at the generator's rate (default 1000 Hz); ``Te`` at
20 Hz, ``B`` at 10 Hz, ``p0`` at 5 Hz (never faster than ``rate``), each as
its own sample with NaN in the other columns' slots where they have no new
value. A phase moves from the previous phase's end levels to its own levels
with a smooth step over its ``ramp`` seconds, then holds.

Scenario timelines (seconds from scenario start; ``end`` is its length):

* ``steady`` (60 s): the steady discharge from t = 0 to 60.
* ``excursion`` (45 s): off 0-1; ramp-up 1-5 (to steady); steady 5-20;
  rise 20-23 (ne to 3.0e17, Te to 2.2 eV); hold 23-27; recovery 27-30 (back
  to steady); steady 30-40; shutdown 40-43 (to off); off 43-45.
* ``dropout`` (30 s): steady 0-10; the Te probe falls silent 10-13 (no Te
  samples at all: Te goes stale); 13-15 it sends garbage (cycling
  -1.5 eV, 0.0 eV, 4.0e4 eV); 15-30 steady again. ne, p0, B stay steady.
* ``demo`` (60 s, loops in the demo): off 0-2; ramp-up 2-8; steady 8-25;
  rise 25-28 (to 3.0e17 m^-3, 2.2 eV); hold 28-33; recovery 33-37; steady
  37-52; shutdown 52-56; off 56-60.

Instruments and their uncertainties (``Scenario.instruments``; every
scenario here uses ``PROBE_SET``). Each channel has two relative standard
uncertainties: ``random``, the sample-to-sample scatter, which is exactly
the Gaussian noise the generator adds; and ``calibration``, the systematic
part (probe area and sheath model, gauge or sensor calibration) that is the
same for every sample of a run. The generator does *not* realise the
calibration part: the simulated instruments read the scenario levels without
bias, as a perfectly calibrated instrument would, because a per-run offset
would move the documented levels and the demo's envelope margins. Every
sample carries ``sigma = |reading| * sqrt(random^2 + calibration^2)``, the
combined standard uncertainty a real instrument would state (GUM-style
quadrature sum, common practice). So the scatter of a steady run matches
``random``; the stated sigma is larger, by design.

=======  ================================  ======  ===========  ========
channel  instrument                        random  calibration  sigma
=======  ================================  ======  ===========  ========
ne       Langmuir probe, ion saturation    2 %     20 %         20.1 %
Te       Langmuir probe, I-V slope         3 %     10 %         10.4 %
p0       capacitance diaphragm gauge       0.5 %   0.5 %        0.71 %
B        Hall probe                        0.2 %   1 %          1.02 %
=======  ================================  ======  ===========  ========

Sources of the sizes: from memory, absolute densities from a single
Langmuir probe are commonly quoted to 20-50 % (collection area, sheath
expansion, the Bohm-flux coefficient) and its Te to 10-20 %; we take the low
ends. From memory, capacitance diaphragm gauges are specified to 0.25-0.5 %
of reading and calibrated Hall probes to about 1 % of reading. The random
parts are the simulator's noise levels (kept from before sigma was added).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

__all__ = [
    "NE_OFF", "NE_STEADY", "NE_EXCURSION", "TE_OFF", "TE_STEADY", "TE_EXCURSION", "P0", "B",
    "NOISE", "CHANNEL_RATES", "Phase", "Scenario", "SCENARIOS",
    "Instrument", "Instruments", "PROBE_SET",
]

NE_OFF = 2.0e14
NE_STEADY = 5.0e16
NE_EXCURSION = 3.0e17
TE_OFF = 0.5
TE_STEADY = 3.0
TE_EXCURSION = 2.2
P0 = 2.0
B = 0.010
CHANNEL_RATES = {"Te": 20.0, "B": 10.0, "p0": 5.0}             # Hz; ne runs at the generator's rate
TE_GARBAGE = (-1.5, 0.0, 4.0e4)                                # eV, cycled while the probe misbehaves


@dataclass(frozen=True)
class Instrument:
    """What one simulated instrument reports, as relative standard uncertainties of its reading."""

    name: str
    random: float          # sample-to-sample scatter: the noise the generator adds
    calibration: float     # systematic, the same for a whole run; stated, not realised by the generator

    @property
    def sigma_rel(self) -> float:
        """The combined relative standard uncertainty every sample carries (quadrature sum)."""
        return math.hypot(self.random, self.calibration)


@dataclass(frozen=True)
class Instruments:
    """The instrument behind each simulated channel."""

    ne: Instrument
    Te: Instrument
    p0: Instrument
    B: Instrument

    def of(self, channel: str) -> Instrument:
        return getattr(self, channel)


# Sizes: see the module docstring ("from memory" for the calibration parts).
PROBE_SET = Instruments(
    ne=Instrument("Langmuir probe, ion saturation current", random=0.02, calibration=0.20),
    Te=Instrument("Langmuir probe, I-V slope", random=0.03, calibration=0.10),
    p0=Instrument("capacitance diaphragm gauge", random=0.005, calibration=0.005),
    B=Instrument("Hall probe", random=0.002, calibration=0.01),
)
# relative standard deviation of the noise of PROBE_SET (the random parts)
NOISE = {ch: PROBE_SET.of(ch).random for ch in ("ne", "Te", "p0", "B")}


@dataclass(frozen=True)
class Phase:
    """A stretch of a scenario: reach these levels over ``ramp`` s, hold until ``end``."""

    name: str
    end: float
    ne: float
    Te: float
    ramp: float = 0.0
    probe: str = "ok"          # ok | silent (no Te samples) | garbage (TE_GARBAGE values)


@dataclass(frozen=True)
class Scenario:
    name: str
    phases: tuple[Phase, ...]
    start_ne: float
    start_Te: float
    description: str
    instruments: Instruments = PROBE_SET

    @property
    def duration(self) -> float:
        return self.phases[-1].end


def _steady(name: str, end: float, ramp: float = 0.0) -> Phase:
    return Phase(name, end, NE_STEADY, TE_STEADY, ramp)


SCENARIOS: dict[str, Scenario] = {
    "steady": Scenario("steady", (_steady("steady", 60.0),), NE_STEADY, TE_STEADY,
                       "steady argon RF discharge, 5e16 m^-3, 3 eV, 2 Pa, 60 s", PROBE_SET),
    "excursion": Scenario("excursion", (
        Phase("off", 1.0, NE_OFF, TE_OFF),
        _steady("ramp-up", 5.0, ramp=4.0),
        _steady("steady", 20.0),
        Phase("rise", 23.0, NE_EXCURSION, TE_EXCURSION, ramp=3.0),
        Phase("hold", 27.0, NE_EXCURSION, TE_EXCURSION),
        _steady("recovery", 30.0, ramp=3.0),
        _steady("steady", 40.0),
        Phase("shutdown", 43.0, NE_OFF, TE_OFF, ramp=3.0),
        Phase("off", 45.0, NE_OFF, TE_OFF),
    ), NE_OFF, TE_OFF, "ramp-up, steady, density excursion to 3e17 m^-3, recovery, shutdown; 45 s", PROBE_SET),
    "dropout": Scenario("dropout", (
        _steady("steady", 10.0),
        Phase("probe silent", 13.0, NE_STEADY, TE_STEADY, probe="silent"),
        Phase("probe garbage", 15.0, NE_STEADY, TE_STEADY, probe="garbage"),
        _steady("steady", 30.0),
    ), NE_STEADY, TE_STEADY, "steady discharge; Te probe silent 10-13 s, garbage 13-15 s; 30 s", PROBE_SET),
    "demo": Scenario("demo", (
        Phase("off", 2.0, NE_OFF, TE_OFF),
        _steady("ramp-up", 8.0, ramp=6.0),
        _steady("steady", 25.0),
        Phase("rise", 28.0, NE_EXCURSION, TE_EXCURSION, ramp=3.0),
        Phase("hold", 33.0, NE_EXCURSION, TE_EXCURSION),
        _steady("recovery", 37.0, ramp=4.0),
        _steady("steady", 52.0),
        Phase("shutdown", 56.0, NE_OFF, TE_OFF, ramp=4.0),
        Phase("off", 60.0, NE_OFF, TE_OFF),
    ), NE_OFF, TE_OFF, "60 s loop: ramp-up, steady, excursion to 3e17 m^-3, recovery, shutdown", PROBE_SET),
}
