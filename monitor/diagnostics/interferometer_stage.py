"""InterferometerStage: a raw phase or I/Q Batch in, the same Batch with line-averaged density and quality columns out, state carried across batches."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from adapters.batch import Batch
from monitor.diagnostics.interferometer import (
    REASON_CODES, REASONS, discharge_from_density, fringe_events, hold_doubt, line_averaged_density, off_run_mean,
    phase_from_iq, unwrap,
)
from monitor.diagnostics.interferometer_config import InterferometerConfig
from monitor.physics.constants import SPEED_OF_LIGHT
from monitor.physics.densities import cutoff_density
from monitor.physics.derive import _warm_allocator

__all__ = ["InterferometerStage", "StageCounts", "OUTPUT_COLUMNS", "FLOOR"]

# columns the stage adds besides its output (``ne`` by default); NaN where a row carried no phase
_RAW = frozenset({"phase", "I_q", "Q_q", "discharge"})    # the raw signal (and the simulator's own truth)
OUTPUT_COLUMNS = ("phase_shift", "fringe_ok", "fringe_reason", "fringe_jumps", "ne_exact", "ne_floored",
                  "iq_amplitude")
# what a density at or below zero is reported as (``nonpositive = "floor"``): the pipeline refuses densities
# that are not positive, and between discharges an interferometer reads zero within its noise
FLOOR = 1.0         # m^-3
_BLOCK = 65_536     # samples per block of a large batch: the temporaries stay in cache (1.5x faster at 1e6)
Rows = np.ndarray | slice
_ALL: Rows = slice(None)  # the row selection when every row carries the phase
_warm = [False]     # glibc's malloc thresholds raised once (monitor.physics.derive._warm_allocator)


@dataclass(frozen=True)
class StageCounts:
    """What the stage has seen since it started (or was reset)."""

    samples: int = 0
    doubtful: int = 0
    fringe_jumps: int = 0
    by_reason: dict[str, int] = field(default_factory=dict)
    reason_now: str = "ok"
    last_event_t: float | None = None


@dataclass
class _State:
    last_wrapped: float = math.nan
    last_unwrapped: float = math.nan
    first_unwrapped: float = math.nan
    on: bool = False
    off_continuing: bool = False
    zero: float = math.nan
    zero_count: float = 0.0
    zero_tail: np.ndarray = field(default_factory=lambda: np.empty(0))
    noise_ms: float = math.nan
    noise_count: float = 0.0
    noise_tail: np.ndarray = field(default_factory=lambda: np.empty(0))
    amp_ref: float = math.nan
    amp_count: float = 0.0
    amp_tail: np.ndarray = field(default_factory=lambda: np.empty(0))
    doubt: int = 0
    reason_now: int = 0
    samples: int = 0
    doubtful: int = 0
    jumps: int = 0
    by_reason: dict[str, int] = field(default_factory=dict)
    last_event_t: float | None = None


class InterferometerStage:
    """Turns ``phase`` (rad, wrapped or accumulated) or ``I_q``/``Q_q`` columns into ``ne`` (m^-3) with sigma.

    Steps per batch, all on whole arrays: phase and amplitude from I/Q; unwrap
    by continuity from the previous batch's last sample; discharge on/off (the
    ``discharge_column`` if configured, > 0.5 = on; else the density against
    ``on_above`` with a 0.9 deadband); the zero as the mean phase of the
    current or last off period (or the fixed ``reference``); the density by
    the linear or exact relation with its uncertainty; fringe-jump events
    holding the data doubtful until the next off period re-zeroes.

    Added columns: the output (``ne``, and its sigma), ``phase_shift`` (rad,
    against the zero), ``fringe_ok`` (1 good, 0 doubtful), ``fringe_reason``
    (code into ``REASONS``), ``fringe_jumps`` (running count), ``ne_exact``
    (1 where the exact form was used), ``ne_floored`` (1 where a density at
    or below zero was reported as ``FLOOR``) and, for I/Q input, ``iq_amplitude``. A
    batch with neither phase nor I/Q passes through unchanged. The result does
    not depend on how the stream is cut into batches.
    """

    def __init__(self, config: InterferometerConfig, *, on_above: float = 1.0e15) -> None:
        self.config = config
        self.on_above = on_above
        self._k0l = 2.0 * math.pi * config.frequency / SPEED_OF_LIGHT * config.passes * config.path_length
        self._nc = float(cutoff_density(config.frequency))
        self._s = _State()

    def reset(self) -> None:
        """Start over (after a seek back): unwrapping, zero and doubt state are dropped, counts kept."""
        s = self._s
        self._s = _State(samples=s.samples, doubtful=s.doubtful, jumps=s.jumps, by_reason=dict(s.by_reason),
                         last_event_t=s.last_event_t)

    @property
    def counts(self) -> StageCounts:
        s = self._s
        return StageCounts(samples=s.samples, doubtful=s.doubtful, fringe_jumps=s.jumps,
                           by_reason=dict(s.by_reason), reason_now=REASONS[s.reason_now],
                           last_event_t=s.last_event_t)

    def process(self, batch: Batch) -> Batch:
        """The batch with the density and quality columns added (see the class docstring)."""
        n = len(batch)
        if n <= 4 * _BLOCK:
            return self._process(batch)
        # blocks that stay in cache (joining them again costs ~20 % at 1e5, so only for large batches);
        # the result cannot depend on the cut (state is carried)
        parts = [self._process(_rows(batch, lo, min(lo + _BLOCK, n))) for lo in range(0, n, _BLOCK)]
        columns = {k: np.concatenate([p.columns[k] for p in parts]) for k in parts[0].columns}
        sigma = {k: np.concatenate([p.sigma[k] for p in parts]) for k in parts[0].sigma}
        return Batch(source=batch.source, t=batch.t, columns=columns, sigma=sigma, seq=batch.seq,
                     t_from_source=batch.t_from_source, auxiliary=parts[0].auxiliary)

    def _process(self, batch: Batch) -> Batch:
        cols = batch.columns
        amp: np.ndarray | None = None
        if "I_q" in cols and "Q_q" in cols:
            i_all, q_all = np.asarray(cols["I_q"], np.float64), np.asarray(cols["Q_q"], np.float64)
            every = math.isfinite(float(i_all.sum()) + float(q_all.sum()))    # one pass when all are there
            mask: Rows = _ALL if every else np.isfinite(i_all) & np.isfinite(q_all)
            wrapped, amp = phase_from_iq(i_all if every else i_all[mask], q_all if every else q_all[mask])
        elif "phase" in cols:
            p_all = np.asarray(cols["phase"], np.float64)
            every = math.isfinite(float(p_all.sum()))
            mask = _ALL if every else np.isfinite(p_all)
            wrapped = p_all if every else p_all[mask]
        else:
            return batch
        if not _warm[0] and len(wrapped) >= 256:
            _warm_allocator()
            _warm[0] = True
        if len(wrapped) == 0:
            return batch
        cfg, s = self.config, self._s
        u, steps = unwrap(wrapped, s.last_wrapped, s.last_unwrapped, accumulated=cfg.accumulated)
        if math.isnan(s.first_unwrapped):
            s.first_unwrapped = float(u[0])
        on = self._discharge(batch, mask, every, u)
        off = ~on
        n = len(u)
        if cfg.reference is not None:
            zero = np.full(n, cfg.reference)
            zero_count = np.full(n, math.inf)
        else:
            shift = float(u[0])
            zero, zero_count, tail = off_run_mean(u - shift, off, s.zero_tail - shift, s.zero - shift,
                                                  s.zero_count, cfg.zero_samples)
            zero += shift
            s.zero_tail = tail + shift
        no_zero = np.isnan(zero)
        any_no_zero = bool(no_zero.any())
        dphi = u - (np.where(no_zero, s.first_unwrapped, zero) if any_no_zero else zero)
        if cfg.phase_sign != 1.0:
            dphi *= cfg.phase_sign
        sp = self._phase_sigma(batch, mask, every, steps, off, amp)
        # the zero's own scatter: sigma_phi / sqrt(count) in quadrature (one number when the count is)
        if not off.any():                            # all on: the count is the last off period's, one number
            c = float(zero_count[0])
            sp = sp * (math.sqrt(1.0 + 1.0 / c) if c > 0 else 1.0)
        else:
            with np.errstate(divide="ignore"):
                sp = sp * np.where(zero_count > 0, np.sqrt(1.0 + 1.0 / zero_count), 1.0)
        est = line_averaged_density(dphi, cfg.frequency, cfg.path_length, cfg.passes, phase_sigma=sp,
                                    path_length_sigma=cfg.path_length_sigma, method=cfg.method,
                                    exact_above=cfg.exact_above)
        amin: float | np.ndarray = cfg.amplitude_min
        amp_ref = amp_count = None
        if amp is not None and cfg.amplitude_relative:
            amp_ref, amp_count, s.amp_tail = off_run_mean(amp, off, s.amp_tail, s.amp_ref, s.amp_count,
                                                          cfg.zero_samples)
            amin = cfg.amplitude_min * amp_ref
        codes = fringe_events(steps, amp, est.cutoff_ratio, on, jump_threshold=cfg.jump_threshold,
                              amplitude_min=amin, cutoff_margin=cfg.cutoff_margin)
        clears = off if cfg.reference is None else np.zeros(n, dtype=bool)
        reason, starts = hold_doubt(codes, clears, s.doubt)
        fringe_reason = np.where(no_zero & (reason == 0), REASON_CODES["no_zero"], reason) if any_no_zero else reason
        ok = fringe_reason == 0
        jumps_run = s.jumps + np.cumsum(starts) if starts.any() else np.full(n, s.jumps)
        # state for the next batch
        s.last_wrapped, s.last_unwrapped = float(wrapped[-1]), float(u[-1])
        s.on, s.off_continuing = bool(on[-1]), bool(off[-1])
        if cfg.reference is None:
            s.zero, s.zero_count = float(zero[-1]), float(zero_count[-1])
        if amp_ref is not None and amp_count is not None:
            s.amp_ref, s.amp_count = float(amp_ref[-1]), float(amp_count[-1])
        s.doubt, s.reason_now = int(reason[-1]), int(fringe_reason[-1])
        s.samples += n
        s.doubtful += n - int(np.count_nonzero(ok))
        new = int(jumps_run[-1]) - s.jumps
        if new:
            t_rows = np.asarray(batch.t, np.float64)[mask]
            for code in codes[starts]:
                s.by_reason[REASONS[code]] = s.by_reason.get(REASONS[code], 0) + 1
            s.last_event_t = float(t_rows[starts][-1])
            s.jumps += new
        return self._emit(batch, mask, every, est.density, est.sigma, {
            "phase_shift": dphi, "fringe_ok": ok.astype(np.float64), "fringe_reason": fringe_reason.astype(np.float64),
            "fringe_jumps": jumps_run.astype(np.float64), "ne_exact": est.exact.astype(np.float64),
            **({"iq_amplitude": amp} if amp is not None else {})}, ok)

    def _discharge(self, batch: Batch, mask: Rows, every: bool, u: np.ndarray) -> np.ndarray:
        cfg, s = self.config, self._s
        n = len(u)
        name = cfg.discharge_column
        if name is not None:
            col = batch.columns.get(name)
            if col is None:
                return np.full(n, s.on)
            d = np.asarray(col, np.float64)
            d = d if every else d[mask]
            if math.isfinite(float(d.sum())):
                return d > 0.5
            known = np.isfinite(d)
            idx = np.arange(n)
            last = np.maximum.accumulate(np.where(known, idx, -1))
            return np.where(last >= 0, d[np.maximum(last, 0)] > 0.5, s.on)
        zero0 = cfg.reference if cfg.reference is not None else (
            s.zero if math.isfinite(s.zero) else s.first_unwrapped)
        n_lin = (u - zero0) * (cfg.phase_sign * 2.0 * self._nc / self._k0l)
        return discharge_from_density(n_lin, self.on_above, s.on)

    def _phase_sigma(self, batch: Batch, mask: Rows, every: bool, steps: np.ndarray, off: np.ndarray,
                     amp: np.ndarray | None) -> np.ndarray:
        """Phase standard uncertainty per sample (rad).

        The configured ``phase_sigma``, else the white-noise estimate
        sqrt(mean(step^2) / 2) over the quiet samples (off, after an off sample)
        of the current or last off period (the difference of two independent samples has twice the
        variance; common practice); in quadrature with ``iq_noise / amplitude``
        and any per-sample sigma the source sent for ``phase``."""
        cfg, s = self.config, self._s
        n = len(steps)
        if cfg.phase_sigma is not None:
            sp = np.full(n, cfg.phase_sigma)
        else:
            quiet = off.copy()
            quiet[0] &= s.off_continuing
            quiet[1:] &= off[:-1]
            ms, mc, s.noise_tail = off_run_mean(steps * steps, quiet, s.noise_tail, s.noise_ms, s.noise_count,
                                                cfg.zero_samples)
            s.noise_ms, s.noise_count = float(ms[-1]), float(mc[-1])
            sp = np.sqrt(ms * 0.5)
        if amp is not None and cfg.iq_noise > 0:
            with np.errstate(divide="ignore"):
                sp = np.hypot(sp, cfg.iq_noise / amp)
        given = batch.sigma.get("phase")
        if given is not None and "I_q" not in batch.columns:
            g = np.asarray(given, np.float64)
            g = g if every else g[mask]
            sp = np.where(np.isfinite(g), np.hypot(sp, g), sp)
        return sp

    def _emit(self, batch: Batch, mask: Rows, every: bool, density: np.ndarray, sigma: np.ndarray,
              extra: dict[str, np.ndarray], ok: np.ndarray) -> Batch:
        cfg = self.config
        if cfg.floor_nonpositive:
            low = density <= 0.0
            extra["ne_floored"] = low.astype(np.float64)
            if low.any():
                density = np.where(low, FLOOR, density)
        if cfg.withhold_doubtful and not ok.all():
            density = np.where(ok, density, np.nan)
            sigma = np.where(ok, sigma, np.nan)
        columns = dict(batch.columns)
        sig = dict(batch.sigma)

        def spread(values: np.ndarray) -> np.ndarray:
            if every:
                return values
            out = np.full(len(batch.t), np.nan)
            out[mask] = values
            return out

        for key, values in extra.items():
            columns[key] = spread(values)
        ne, ne_sigma = spread(density), spread(sigma)
        old = columns.get(cfg.output)
        if old is not None:
            keep = np.isnan(ne)
            ne = np.where(keep, np.asarray(old, np.float64), ne)
            old_sigma = sig.get(cfg.output)
            ne_sigma = np.where(keep, np.nan if old_sigma is None else np.asarray(old_sigma, np.float64), ne_sigma)
        columns[cfg.output] = ne
        sig[cfg.output] = ne_sigma
        # the raw signal and the stage's own results travel for information; the density is the reading
        auxiliary = batch.auxiliary | (set(columns) & (_RAW | set(OUTPUT_COLUMNS)))
        return Batch(source=batch.source, t=batch.t, columns=columns, sigma=sig, seq=batch.seq,
                     t_from_source=batch.t_from_source, auxiliary=frozenset(auxiliary))


def _rows(batch: Batch, lo: int, hi: int) -> Batch:
    return Batch(source=batch.source, t=batch.t[lo:hi], columns={k: v[lo:hi] for k, v in batch.columns.items()},
                 sigma={k: v[lo:hi] for k, v in batch.sigma.items()},
                 seq=None if batch.seq is None else batch.seq[lo:hi], t_from_source=batch.t_from_source,
                 auxiliary=batch.auxiliary)
