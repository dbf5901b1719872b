"""Langmuir probe sweeps to readings: screening, single or double analysis in row chunks, quality verdict.

``analyse_sweeps(V, I, spec)`` takes a (sweeps x points) block and returns a
``ProbeResults`` with one entry per sweep: Te (eV), ne and ni (m^-3), Vf, Vp
(V), I_sat (A, magnitude), their standard uncertainties, the ion-density
method (``oml``, ``bohm``, ``double_bohm``), the quality (``accepted``,
``doubtful``, ``rejected``) and the reason (the rejection token, or the doubt
tokens). The physics is in ``probe_single`` (Hutchinson, *Principles of
Plasma Diagnostics*, ch. 3; Merlino, Am. J. Phys. 75, 1078 (2007)) and
``probe_double``. Work is done on chunks of CHUNK rows so the temporaries stay
in cache; there is no per-sweep Python loop.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Mapping

import numpy as np

from monitor.diagnostics.probe_double import analyse_double
from monitor.diagnostics.probe_quality import orient, screen, verdict
from monitor.diagnostics.probe_single import OML_MAX_RATIO, analyse_single
from monitor.diagnostics.probe_spec import ProbeSpec

__all__ = ["ProbeResults", "analyse_sweeps", "CHUNK", "VALUE_KEYS", "THICK_SHEATH"]

CHUNK = 128
VALUE_KEYS = ("Te", "ne", "ni", "Vf", "Vp", "I_sat")
THICK_SHEATH = 10.0      # probe size / lambda_D above which the thin-sheath (Bohm) law holds (common practice)
_FLOAT = ("Te", "ne", "ni", "Vf", "Vp", "I_sat", "Vp_knee", "ion_slope", "debye_length",
          "sigma_Te", "sigma_ne", "sigma_ni", "sigma_Vf", "sigma_Vp", "sigma_I_sat")
_FITS = ("ion_a", "ion_b", "ion_x0", "ret_a", "ret_b", "ret_x0", "dbl_slope", "dbl_offset")


@dataclass(frozen=True, eq=False)
class ProbeResults:
    """One entry per sweep. ``values`` maps each of _FLOAT's names to a float64 array (NaN where not
    found); ``method``, ``quality``, ``reason`` are object arrays of str; ``fits`` holds the fitted
    lines for drawing (ion line a + b (V - x0), retarding ln Ie line, double-probe slope and offset)."""

    sweep: np.ndarray
    t: np.ndarray
    values: Mapping[str, np.ndarray]
    method: np.ndarray
    quality: np.ndarray
    reason: np.ndarray
    fits: Mapping[str, np.ndarray] = field(default_factory=dict)

    def __len__(self) -> int:
        return len(self.sweep)

    def __getitem__(self, name: str) -> np.ndarray:
        return self.values[name]


def _single_chunk(V: np.ndarray, I: np.ndarray, spec: ProbeSpec, out: dict[str, np.ndarray], rows: np.ndarray,
                  fail: np.ndarray, method: np.ndarray, doubts: dict[str, np.ndarray]) -> None:
    r = analyse_single(V, I, spec)
    for name in _FLOAT:
        out[name][rows] = getattr(r, name)
    out["ion_a"][rows], out["ion_b"][rows], out["ion_x0"][rows] = r.ion_line.a, r.ion_line.b, r.ion_line.x0
    out["ret_a"][rows], out["ret_b"][rows], out["ret_x0"][rows] = (r.retarding_line.a, r.retarding_line.b,
                                                                   r.retarding_line.x0)
    fail[rows] = r.fail
    method[rows] = r.method
    ratio = spec.size / r.debye_length
    with np.errstate(invalid="ignore"):
        halves = np.abs(r.Te_low - r.Te_high)
        doubts["few_retarding_points"][rows] = r.n_retarding < 8
        doubts["not_exponential"][rows] = (halves > 0.15 * r.Te) & (halves > 3.0 * r.sigma_Te_halves)
        doubts["large_residuals"][rows] = r.chi2_retarding > 4.0
        doubts["knee_disagrees"][rows] = np.abs(r.Vp - r.Vp_knee) > r.Te
        lower = OML_MAX_RATIO if spec.geometry == "cylinder" else 0.0
        doubts["transitional_sheath"][rows] = (ratio > lower) & (ratio < THICK_SHEATH)
        zr = spec.ion_charge * r.ni / r.ne
        doubts["ni_ne_mismatch"][rows] = (zr < 0.5) | (zr > 2.0)
        doubts["coarse_smoothing"][rows] = r.window_volts > r.Te


def _double_chunk(V: np.ndarray, I: np.ndarray, spec: ProbeSpec, out: dict[str, np.ndarray], rows: np.ndarray,
                  fail: np.ndarray, method: np.ndarray, doubts: dict[str, np.ndarray]) -> None:
    r = analyse_double(V, I, spec)
    out["Te"][rows], out["sigma_Te"][rows] = r.Te, r.sigma_Te
    out["I_sat"][rows], out["sigma_I_sat"][rows] = r.I_sat, r.sigma_I_sat
    out["ni"][rows], out["sigma_ni"][rows] = r.ni, r.sigma_ni
    out["ne"][rows], out["sigma_ne"][rows] = spec.ion_charge * r.ni, spec.ion_charge * r.sigma_ni
    out["dbl_slope"][rows], out["dbl_offset"][rows] = r.slope, r.offset
    fail[rows] = r.fail
    method[rows] = "double_bohm"
    with np.errstate(invalid="ignore", divide="ignore"):
        doubts["double_fit_poor"][rows] = (r.chi2_red > 4.0) | (r.sigma_Te > 0.2 * r.Te)


def analyse_sweeps(V: np.ndarray, I: np.ndarray, spec: ProbeSpec, *, sweep: np.ndarray | None = None,
                   t: np.ndarray | None = None) -> ProbeResults:
    """Analyse a block of sweeps (S x N bias V in volts, current I in A as the instrument reports it).

    The current is multiplied by ``spec.current_sign``; sweeps going down are
    turned round; malformed ones are rejected with their token (probe_quality.screen);
    the rest go to the single or double analysis by ``spec.kind``.
    """
    V = np.atleast_2d(np.asarray(V, dtype=np.float64))
    I = np.atleast_2d(np.asarray(I, dtype=np.float64)) * spec.current_sign
    S = I.shape[0]
    sweep_ids = np.arange(S, dtype=np.int64) if sweep is None else np.asarray(sweep, dtype=np.int64)
    times = np.full(S, np.nan) if t is None else np.asarray(t, dtype=np.float64)
    out = {name: np.full(S, np.nan) for name in _FLOAT + _FITS}
    method = np.full(S, "", dtype=object)
    if V.shape != I.shape:
        fail = np.full(S, "length_mismatch", dtype=object)
        quality, reason = verdict(fail, {})
        return ProbeResults(sweep_ids, times, {k: out[k] for k in _FLOAT}, method, quality, reason,
                            {k: out[k] for k in _FITS})
    fail = np.full(S, "", dtype=object)
    doubts = {name: np.zeros(S, dtype=bool) for name in
              ("few_retarding_points", "not_exponential", "large_residuals", "knee_disagrees",
               "transitional_sheath", "ni_ne_mismatch", "coarse_smoothing", "double_fit_poor")}
    run = _double_chunk if spec.kind == "double" else _single_chunk
    with np.errstate(all="ignore"):               # meaningless input gives NaN and a verdict, not warnings
        for start in range(0, S, CHUNK):          # screening and analysis chunk by chunk (cache-sized)
            Vc, Ic = orient(V[start:start + CHUNK], I[start:start + CHUNK])
            fail[start:start + CHUNK] = screen(Vc, Ic)
            ok = np.flatnonzero(fail[start:start + CHUNK] == "")
            if len(ok) == len(Vc):
                run(Vc, Ic, spec, out, np.arange(start, start + len(Vc)), fail, method, doubts)
            elif len(ok):
                run(Vc[ok], Ic[ok], spec, out, start + ok, fail, method, doubts)
    quality, reason = verdict(fail, doubts)
    rejected = quality == "rejected"
    for name in _FLOAT:
        out[name][rejected] = np.nan
    method[rejected] = ""
    return ProbeResults(sweep_ids, times, {k: out[k] for k in _FLOAT}, method, quality, reason,
                        {k: out[k] for k in _FITS})
