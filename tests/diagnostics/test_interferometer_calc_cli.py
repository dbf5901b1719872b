"""`regime calc phase=... f=... Lpath=...`: the line-averaged density from an interferometer phase feeds the same
derivation as ne= does."""

from __future__ import annotations

import json
import math
import subprocess
import sys
from pathlib import Path

import scipy.constants as sc

ROOT = Path(__file__).resolve().parents[2]


def _calc(*args: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run([sys.executable, "-m", "monitor", "calc", *args], capture_output=True, text=True,
                          timeout=60, cwd=ROOT)


def test_phase_gives_the_density_the_plasma_frequency_follows() -> None:
    out = _calc("--json", "phase=2rad", "f=100GHz", "Lpath=0.2m", "passes=2", "Te=3eV")
    assert out.returncode == 0, out.stderr
    got = json.loads(out.stdout)["electron_plasma_frequency"]["value"]
    # far below cutoff: phase = r_e * lambda * passes * L * ne (r_e from CODATA via scipy.constants)
    r_e = sc.physical_constants["classical electron radius"][0]
    ne = 2.0 / (r_e * (sc.c / 100e9) * 2 * 0.2)
    # omega_pe = sqrt(ne e^2 / (eps0 m_e)) (NRL Plasma Formulary, plasma frequencies)
    want = math.sqrt(ne * sc.e**2 / (sc.epsilon_0 * sc.m_e))
    assert math.isclose(got, want, rel_tol=2e-3)      # the exact form differs by ~ne/(4 n_c) = 0.1 % here


def test_phase_with_ne_or_without_a_path_is_refused() -> None:
    both = _calc("phase=2rad", "f=100GHz", "Lpath=0.2m", "ne=1e17", "Te=3eV")
    assert both.returncode == 2 and "ne= or phase=" in both.stderr
    missing = _calc("phase=2rad", "f=100GHz", "Te=3eV")
    assert missing.returncode == 2 and "Lpath" in missing.stderr
