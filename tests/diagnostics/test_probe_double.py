"""Double-probe tanh fit on our forward model: recovery of Te and n_i, and sigmas matching the scatter."""

from __future__ import annotations

import numpy as np
import pytest

from monitor.diagnostics.probe import analyse_sweeps
from monitor.diagnostics.probe_model import double_probe_current, noisy
from monitor.diagnostics.probe_spec import ProbeSpec

SPEC = ProbeSpec(kind="double", geometry="cylinder", radius=1e-4, length=5e-3)


@pytest.mark.parametrize(("ne", "te", "slope"), [(1e15, 1.0, 0.0), (1e16, 4.0, 2e-8), (1e18, 15.0, 1e-6)])
def test_double_probe_recovers_te_and_density(ne: float, te: float, slope: float) -> None:
    V = np.tile(np.linspace(-10 * te, 10 * te, 300), (200, 1))
    I0 = double_probe_current(V, ne, te, SPEC, slope=slope)
    res = analyse_sweeps(V, noisy(I0, 0.0, 0.01 * float(np.abs(I0).max()), 5), SPEC)
    assert set(res.quality) == {"accepted"}
    assert set(res.method) == {"double_bohm"}
    assert np.median(res["Te"]) == pytest.approx(te, rel=0.01)
    assert np.median(res["ne"]) == pytest.approx(ne, rel=0.01)
    assert np.isnan(res["Vf"]).all() and np.isnan(res["Vp"]).all()
    for key in ("Te", "ni"):                    # GUM: the standard uncertainty is the result's spread
        ratio = np.std(res[key]) / np.median(res[f"sigma_{key}"])
        assert 0.7 < ratio < 1.4, (key, ratio)
