"""The channel map: instrument keys to canonical quantities, units and uncertainties, applied to whole batches."""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from adapters.batch import Batch
from monitor.errors import ConfigError
from monitor.units import DIMENSION_OF, UnitError, parse_value, unit_scale

__all__ = ["BASE_KEYS", "Channel", "ChannelMap", "Mapped", "parse_channels", "DEFAULT_CHANNELS"]

# canonical input keys, in the order the pipeline keeps them
BASE_KEYS: tuple[str, ...] = ("ne", "Te", "Ti", "B", "p0")
# quantities a channel may feed: the base keys, or the data time itself
_TARGETS: tuple[str, ...] = BASE_KEYS + ("t",)
_CHANNEL_KEYS = {"quantity", "unit", "uncertainty"}


@dataclass(frozen=True)
class Channel:
    """One instrument key and how it becomes a canonical quantity.

    ``scale`` multiplies the instrument's number into the canonical unit of
    ``quantity``. ``sigma_abs`` is an absolute standard uncertainty in the
    canonical unit, ``sigma_rel`` a fraction of the value; at most one is set.
    """

    key: str
    quantity: str
    unit: str = ""
    scale: float = 1.0
    sigma_abs: float | None = None
    sigma_rel: float | None = None


DEFAULT_CHANNELS: dict[str, Channel] = {k: Channel(k, k) for k in BASE_KEYS}


@dataclass(frozen=True, eq=False)
class Mapped:
    """A batch in canonical quantities.

    ``values``: canonical key -> float64 array (NaN where the reading did not
    carry it); only keys some channel fed appear. ``sigma``: same keys where an
    uncertainty is known (NaN where unknown for a sample). ``t`` is the batch's
    time, or the mapped time column when the map has one. ``unknown``:
    instrument key -> number of readings in this batch that carried it.
    """

    t: np.ndarray
    values: dict[str, np.ndarray]
    sigma: dict[str, np.ndarray]
    unknown: dict[str, int] = field(default_factory=dict)


@dataclass(frozen=True)
class ChannelMap:
    """Instrument key -> Channel. Configured keys come first; the identity
    defaults (ne, Te, Ti, B, p0 in canonical units) stay unless overridden."""

    channels: Mapping[str, Channel] = field(default_factory=lambda: dict(DEFAULT_CHANNELS))

    def quantities(self) -> tuple[str, ...]:
        """Canonical keys some channel feeds, in canonical order."""
        fed = {c.quantity for c in self.channels.values()}
        return tuple(k for k in BASE_KEYS if k in fed)

    def apply(self, batch: Batch) -> Mapped:
        """Map the batch's columns. Several keys feeding one quantity combine,
        the one listed first (configured before defaults) winning where both carry a value."""
        n = len(batch.t)
        values: dict[str, np.ndarray] = {}
        sigma: dict[str, np.ndarray] = {}
        unknown: dict[str, int] = {}
        t = np.asarray(batch.t, dtype=np.float64)
        for key, col in batch.columns.items():
            if key not in self.channels and key not in batch.auxiliary:
                carried = int(np.count_nonzero(~np.isnan(np.asarray(col, dtype=np.float64))))
                if carried:
                    unknown[key] = carried
        for key, ch in self.channels.items():      # map order = priority order
            given = batch.columns.get(key)
            if given is None:
                continue
            col = np.asarray(given, dtype=np.float64)
            v = col * ch.scale if ch.scale != 1.0 else col
            if ch.quantity == "t":
                t = np.where(np.isnan(v), t, v)
                continue
            s = self._sigma_of(batch, key, ch, v, n)
            old = values.get(ch.quantity)
            if old is None:
                values[ch.quantity] = v
                if s is not None:
                    sigma[ch.quantity] = s
                continue
            fill = np.isnan(old)
            values[ch.quantity] = np.where(fill, v, old)
            if s is not None or ch.quantity in sigma:
                prev = sigma.get(ch.quantity, np.full(n, np.nan))
                new = s if s is not None else np.full(n, np.nan)
                sigma[ch.quantity] = np.where(fill, new, prev)
        return Mapped(t=t, values=values, sigma=sigma, unknown=unknown)

    @staticmethod
    def _sigma_of(batch: Batch, key: str, ch: Channel, v: np.ndarray, n: int) -> np.ndarray | None:
        per_sample = batch.sigma.get(key)
        fallback: np.ndarray | None = None
        if ch.sigma_abs is not None:
            fallback = np.full(n, ch.sigma_abs)
        elif ch.sigma_rel is not None:
            fallback = np.abs(v) * ch.sigma_rel
        if per_sample is None:
            return fallback
        s = np.abs(np.asarray(per_sample, dtype=np.float64) * ch.scale)
        if fallback is not None:
            s = np.where(np.isfinite(s), s, fallback)
        return s


def _sort_channels(configured: dict[str, Channel]) -> dict[str, Channel]:
    out = dict(configured)
    for k, ch in DEFAULT_CHANNELS.items():
        out.setdefault(k, ch)
    return out


def parse_channels(table: Mapping[str, Any], path: str | Path | None) -> ChannelMap:
    """Read a ``[channels]`` table: ``key = {quantity = "ne", unit = "cm^-3", uncertainty = "20%"}``.

    ``quantity`` is a canonical key (ne, Te, Ti, B, p0) or ``t`` (a time
    column, e.g. ``time_ms`` in ms); ``unit`` any unit monitor.units accepts for
    that quantity (default: canonical); ``uncertainty`` an absolute value with
    a unit, a bare number in the channel's own unit, or a percentage.
    """
    configured: dict[str, Channel] = {}
    for key, spec in table.items():
        where = f"channels.{key}"
        if not isinstance(spec, Mapping):
            raise ConfigError(path, where, 'expected a table like {quantity = "ne", unit = "cm^-3"}')
        extra = sorted(set(spec) - _CHANNEL_KEYS)
        if extra:
            raise ConfigError(path, f"{where}.{extra[0]}",
                              f"unknown key; accepted: {', '.join(sorted(_CHANNEL_KEYS))}")
        quantity = spec.get("quantity", key if key in _TARGETS else None)
        if quantity is None:
            raise ConfigError(path, f"{where}.quantity", f"missing; one of {', '.join(_TARGETS)}")
        if quantity not in _TARGETS:
            raise ConfigError(path, f"{where}.quantity",
                              f"unknown quantity {quantity!r}; one of {', '.join(_TARGETS)}")
        dimension = DIMENSION_OF[quantity]
        unit = spec.get("unit", "")
        if not isinstance(unit, str):
            raise ConfigError(path, f"{where}.unit", f"expected a unit as a string, got {unit!r}")
        try:
            scale = unit_scale(unit, dimension)
        except UnitError as exc:
            raise ConfigError(path, f"{where}.unit", str(exc)) from None
        sigma_abs, sigma_rel = _parse_uncertainty(spec.get("uncertainty"), dimension, scale, path, where)
        if quantity == "t" and (sigma_abs is not None or sigma_rel is not None):
            raise ConfigError(path, f"{where}.uncertainty", "a time column takes no uncertainty")
        configured[key] = Channel(key, quantity, unit, scale, sigma_abs, sigma_rel)
    if sum(1 for c in configured.values() if c.quantity == "t") > 1:
        raise ConfigError(path, "channels", "more than one channel maps onto t")
    return ChannelMap(_sort_channels(configured))


def _parse_uncertainty(raw: Any, dimension: str, scale: float, path: str | Path | None,
                       where: str) -> tuple[float | None, float | None]:
    key = f"{where}.uncertainty"
    if raw is None:
        return None, None
    if isinstance(raw, bool):
        raise ConfigError(path, key, f"expected a number, a value with a unit or a percentage, got {raw!r}")
    if isinstance(raw, (int, float)):
        sigma = float(raw) * scale
    elif isinstance(raw, str):
        text = raw.strip()
        if text.endswith("%"):
            try:
                pct = float(text[:-1])
            except ValueError:
                raise ConfigError(path, key, f"cannot read {raw!r} as a percentage; write e.g. \"20%\"") from None
            if not math.isfinite(pct) or pct < 0:
                raise ConfigError(path, key, f"{raw!r} must be a non-negative percentage")
            return None, pct / 100.0
        try:
            float(text)
        except ValueError:
            try:
                sigma, _ = parse_value(text, dimension)
            except UnitError as exc:
                raise ConfigError(path, key, str(exc)) from None
        else:
            sigma = float(text) * scale
    else:
        raise ConfigError(path, key, f"expected a number, a value with a unit or a percentage, got {raw!r}")
    if not math.isfinite(sigma) or sigma < 0:
        raise ConfigError(path, key, f"{raw!r} must be finite and non-negative")
    return sigma, None
