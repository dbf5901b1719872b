"""Druyvesteyn distribution on Maxwellian sweeps: its integral is n_e and its mean energy 1.5 Te.

The Maxwellian moments are textbook (mean energy 3/2 Te: common practice); the
curves are the langmuir package's OML cylinder (PyPI 0.9.0, see probe_curves.py)
at 1 % noise. Tolerances: density within 15 % (the plasma potential found about
0.1 Te low cuts the top of the distribution), mean energy within 10 %.
"""

from __future__ import annotations

import numpy as np
import pytest
from probe_curves import curves

from monitor.diagnostics.probe import analyse_sweeps
from monitor.diagnostics.probe_eedf import druyvesteyn


@pytest.mark.parametrize(("ne", "te"), [(1e15, 2.0), (1e17, 5.0)])
def test_druyvesteyn_moments_of_a_maxwellian(ne: float, te: float) -> None:
    spec, V, I, _ = curves(ne, te, 10)
    res = analyse_sweeps(V, I, spec)
    eedf = druyvesteyn(V, -I, res["Vp"], spec)          # langmuir's currents: electron collection negative
    # langmuir package (PyPI 0.9.0) curves; Maxwellian moments n_e and 3/2 Te
    assert np.median(eedf.density) == pytest.approx(ne, rel=0.15)
    assert np.median(eedf.mean_energy) == pytest.approx(1.5 * te, rel=0.10)
    assert eedf.window % 2 == 1 and np.nanmax(eedf.energy) < 15 * te
