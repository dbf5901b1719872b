"""Floating potential and ion saturation current against PlasmaPy's swept-probe analysis on the langmuir curves.

Reference: PlasmaPy 2025.8, ``plasmapy.analysis.swept_langmuir``, on the same
noisy OML curves from the `langmuir` package as test_probe_langmuir.py:

- ``find_floating_potential`` (its default exponential fit around the
  crossing): Vf within 0.05 Te. On the 1e19 m^-3, 20 eV curve it returns NaN
  (observed), so that plasma is left out of the Vf check.
- ``find_ion_saturation_current`` with ``fit_type="linear"``: its line at our
  Vf within 2 % when it fits the same points (V <= Vf - 2.5 Te; ours is
  weighted, its is not), within 6 % with its own default point choice
  (current within 40 % of the minimum). Its default exponential-plus-linear
  fit did not converge on several of these curves (observed: the linear part
  off by 1e6 or by 46 %), so the linear fit is the comparison.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from probe_curves import curves

from monitor.diagnostics.probe import analyse_sweeps

swept = pytest.importorskip("plasmapy.analysis.swept_langmuir")

SWEEPS = 4


def _quiet(fn, *args, **kwargs):   # type: ignore[no-untyped-def]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return fn(*args, **kwargs)


@pytest.mark.parametrize(("ne", "te"), [(1e14, 0.5), (1e15, 2.0), (1e16, 1.0), (1e17, 5.0), (1e18, 10.0)])
def test_floating_potential_agrees_with_plasmapy(ne: float, te: float) -> None:
    spec, V, I, _ = curves(ne, te, SWEEPS)
    res = analyse_sweeps(V, I, spec)
    for k in range(SWEEPS):
        vf, _ = _quiet(swept.find_floating_potential, V[k], -I[k])   # PlasmaPy: electron collection positive
        # PlasmaPy swept_langmuir.find_floating_potential as the reference
        assert res["Vf"][k] == pytest.approx(vf, abs=0.05 * te)


@pytest.mark.parametrize(("ne", "te"), [(1e14, 0.5), (1e16, 1.0), (1e17, 5.0), (1e19, 20.0)])
def test_ion_saturation_current_agrees_with_plasmapy(ne: float, te: float) -> None:
    spec, V, I, _ = curves(ne, te, SWEEPS)
    res = analyse_sweeps(V, I, spec)
    assert (res.quality != "rejected").all()
    for k in range(SWEEPS):
        vf = float(res["Vf"][k])
        same, _ = _quiet(swept.find_ion_saturation_current, V[k], -I[k], fit_type="linear",
                         voltage_bound=vf - 2.5 * float(res["Te"][k]))
        own, _ = _quiet(swept.find_ion_saturation_current, V[k], -I[k], fit_type="linear")
        # PlasmaPy swept_langmuir.find_ion_saturation_current (linear) as the reference
        assert res["I_sat"][k] == pytest.approx(-same(vf), rel=0.02)
        assert res["I_sat"][k] == pytest.approx(-own(vf), rel=0.06)
        assert np.isfinite(res["sigma_I_sat"][k]) and res["sigma_I_sat"][k] > 0
