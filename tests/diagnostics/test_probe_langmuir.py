"""Single-probe analysis against the `langmuir` package (PyPI, an independent implementation of OML probe currents).

Reference: langmuir 0.9.0, ``langmuir.OML_current`` for a cylinder in a
Maxwellian electron + argon ion plasma (its own implementation of OML theory).
It was last released in 2021 and still uses ``numpy.float``, removed in numpy
1.24: probe_curves.load_langmuir restores that alias before import (a
test-only shim); the ion temperature (Te/10) and bias range (within 15 Te of
Vp) keep its ion current finite.

Tolerances: Te within 5 %, ne within 20 %, ni within 20 % (OML cylinder,
r_p = 0.2 lambda_D or 50 um, whichever is smaller, so OML holds), at 1 % noise
(1 % of |I| plus 1 % of the ion saturation current), median over 40 sweeps per
plasma. The ne tolerance covers the plasma potential found a little low by
the smoothed derivative (about -0.1 Te, i.e. ne about -10 %).
"""

from __future__ import annotations

import numpy as np
import pytest
from probe_curves import VP, curves, load_langmuir

from monitor.diagnostics.probe import analyse_sweeps

load_langmuir()
PLASMAS = [(1e14, 0.5), (1e15, 2.0), (1e16, 1.0), (1e17, 5.0), (1e18, 10.0), (1e19, 20.0), (3e16, 3.0)]
SWEEPS = 40


@pytest.mark.parametrize(("ne", "te"), PLASMAS)
def test_recovers_te_ne_ni_of_langmuir_oml_curves(ne: float, te: float) -> None:
    spec, V, I, _ = curves(ne, te, SWEEPS)
    res = analyse_sweeps(V, I, spec)
    assert (res.quality != "rejected").all(), set(res.reason)
    assert set(res.method) == {"oml"}
    # langmuir package (PyPI 0.9.0) OML cylinder current as the reference
    assert np.median(res["Te"]) == pytest.approx(te, rel=0.05)
    assert np.median(res["ne"]) == pytest.approx(ne, rel=0.20)
    assert np.median(res["ni"]) == pytest.approx(ne, rel=0.20)
    assert np.median(res["Vp"]) == pytest.approx(VP, abs=0.3 * te)


@pytest.mark.parametrize(("ne", "te"), PLASMAS[:3])
def test_floating_potential_is_the_reference_zero_crossing(ne: float, te: float) -> None:
    spec, V, I, i_ref = curves(ne, te, SWEEPS)
    v = V[0]
    k = int(np.flatnonzero((i_ref[:-1] > 0) & (i_ref[1:] <= 0))[0])    # conventional current changes sign at Vf
    vf_ref = v[k] + (v[k + 1] - v[k]) * i_ref[k] / (i_ref[k] - i_ref[k + 1])
    res = analyse_sweeps(V, I, spec)
    # langmuir package (PyPI 0.9.0): zero of its noise-free OML current
    assert np.median(res["Vf"]) == pytest.approx(vf_ref, abs=0.05 * te)
    spread = np.std(res["Vf"])
    assert np.median(res["sigma_Vf"]) > 0.5 * spread
