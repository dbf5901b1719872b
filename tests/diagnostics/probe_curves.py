"""Reference sweeps from the `langmuir` package (PyPI 0.9.0, OML currents), shared by the probe tests.

langmuir still uses ``numpy.float``, removed in numpy 1.24: ``load_langmuir``
restores that alias before importing it (a test-only shim). Its ion current is
exp(eta) erfc(sqrt(eta)), which overflows for very cold ions at large bias; the
ions here are at Te/10 and the bias stays within 15 Te of Vp, where it is
finite (``curves`` asserts it).
"""

from __future__ import annotations

from types import ModuleType

import numpy as np
import pytest

from monitor.diagnostics.probe_spec import ProbeSpec
from monitor.physics.constants import ELEMENTARY_CHARGE, EPSILON_0

VP = 5.0
ARGON_U = 39.9                # langmuir's Argon amu


def load_langmuir() -> ModuleType:
    if not hasattr(np, "float"):
        np.float = float      # type: ignore[attr-defined]  # test-only shim for langmuir 0.9.0
    return pytest.importorskip("langmuir")


def curves(ne: float, te: float, sweeps: int, points: int = 500) -> tuple[ProbeSpec, np.ndarray, np.ndarray, np.ndarray]:
    """(spec, V, I noisy (sweeps x points), noise-free reference I) for a cylinder in the OML regime.

    r_p = min(50 um, 0.2 lambda_D), l = 100 r_p; electrons at Te, argon ions at
    Te/10, both at density ne; bias Vp - 15 Te .. Vp + 5 Te. Noise: 1 % of |I|
    plus 1 % of the ion saturation current, Gaussian, seeded by the plasma.
    The currents are langmuir's conventional ones (electron collection
    negative), hence current_sign = -1 in the spec.
    """
    lm = load_langmuir()
    debye = np.sqrt(EPSILON_0 * te / (ELEMENTARY_CHARGE * ne))
    radius = min(50e-6, 0.2 * debye)
    length = 100.0 * radius
    geometry = lm.Cylinder(r=radius, l=length)
    species = [lm.Electron(n=ne, eV=te), lm.Argon(n=ne, eV=te / 10.0)]
    v = VP + te * np.linspace(-15.0, 5.0, points)
    i_ref = np.asarray(lm.OML_current(geometry, species, V=v - VP), dtype=float)
    assert np.isfinite(i_ref).all()
    spec = ProbeSpec(geometry="cylinder", radius=radius, length=length, current_sign=-1.0, ion_mass_u=ARGON_U)
    rng = np.random.default_rng([int(np.log10(ne) * 10), int(te * 10)])
    floor = 0.01 * abs(i_ref[0])
    I = i_ref[None, :] + (0.01 * np.abs(i_ref)[None, :] + floor) * rng.standard_normal((sweeps, points))
    return spec, np.tile(v, (sweeps, 1)), I, i_ref
