"""The operating envelope: `[[limit]]` and `[alarms]` TOML tables read into frozen LimitSpec and AlarmOptions."""

from __future__ import annotations

import difflib
import math
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping

from monitor.alarms.events import Priority
from monitor.errors import ConfigError
from monitor.quantities import ALL
from monitor.units import DIMENSIONS, UnitError, parse_value

__all__ = ["LimitSpec", "HookSpec", "AlarmOptions", "parse_limits", "parse_alarm_options",
           "QUANTITY_ALIASES", "UNCERTAINTY_MODES"]

# Long names accepted for the five base keys (the canonical name is the key).
QUANTITY_ALIASES: dict[str, str] = {
    "electron_density": "ne", "electron_temperature": "Te", "ion_temperature": "Ti",
    "magnetic_field": "B", "neutral_pressure": "p0",
}
UNCERTAINTY_MODES = ("none", "certain", "possible")

# Units of quantities that monitor.units has no dimension for: unit -> {spelling: factor}.
_EXTRA_UNITS: dict[str, dict[str, float]] = {
    "rad/s": {"rad/s": 1.0, "krad/s": 1e3, "Mrad/s": 1e6, "Grad/s": 1e9},
    "1/s": {"1/s": 1.0, "/s": 1.0, "s^-1": 1.0, "s-1": 1.0, "Hz": 1.0, "kHz": 1e3, "MHz": 1e6, "GHz": 1e9},
    "m/s": {"m/s": 1.0, "km/s": 1e3, "cm/s": 1e-2, "mm/us": 1e3},
    "1": {"1": 1.0, "%": 1e-2, "ppm": 1e-6},
}
_DIMENSION_OF_UNIT = {canonical: dim for dim, (canonical, _) in DIMENSIONS.items() if dim != "dimensionless"}
_NUMBER_UNIT = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")


@dataclass(frozen=True)
class LimitSpec:
    """One `[[limit]]`: an alarm on one quantity, all numbers in canonical units and seconds.

    ``deadband`` is absolute when ``deadband_relative`` is False, else a
    fraction of each limit's magnitude (see ``band``). ``uncertainty`` is
    ``none``, ``certain`` (raise only when beyond the limit by ``k`` sigma) or
    ``possible`` (raise already when value + ``k`` sigma crosses).
    ``predict_within`` (s) enables the predictive warning ``<name>:predict``.
    """

    name: str
    quantity: str
    high: float | None = None
    low: float | None = None
    deadband: float = 0.0
    deadband_relative: bool = True
    on_delay: float = 0.0
    off_delay: float = 0.0
    latch: bool = False
    priority: Priority = Priority.HIGH
    description: str = ""
    uncertainty: str = "none"
    k: float = 2.0
    predict_within: float | None = None
    predict_window: float | None = None
    predict_priority: Priority | None = None
    realarm_after: float | None = None
    max_shelve: float | None = None
    only_when_on: bool = True
    out_of_service: bool = False

    def band(self, limit: float) -> float:
        """Absolute deadband applied on the return side of ``limit``."""
        return abs(limit) * self.deadband if self.deadband_relative else self.deadband


@dataclass(frozen=True)
class HookSpec:
    """A command run (no shell) when an alarm of one priority enters one of ``states``."""

    command: tuple[str, ...]
    timeout: float = 5.0
    states: tuple[str, ...] = ("unacknowledged",)


@dataclass(frozen=True)
class AlarmOptions:
    """The `[alarms]` table: operator-load figures, diagnostics, predictive grid, shelving, hooks."""

    flood_count: int = 10           # more than this many activations in flood_window: flood
    flood_clear: int = 5            # flood over when fewer than this many
    flood_window: float = 600.0
    chatter_count: int = 3          # this many activations of one alarm in chatter_window: chattering
    chatter_window: float = 60.0
    max_shelve: float = 3600.0
    stale_priority: Priority = Priority.HIGH
    quality_priority: Priority = Priority.HIGH
    quality_window: float = 1.0     # s of data time
    quality_above: float = 0.2      # share of invalid samples that raises
    quality_below: float = 0.1      # share below which it returns
    quality_min_samples: int = 20
    predict_window: float = 1.0     # s of data for the slope fit
    predict_step: float = 0.1       # s between evaluations, on a fixed data-time grid
    predict_priority: Priority = Priority.ADVISORY
    discharge_deadband: float = 0.1  # off only below on_above * (1 - this): no flicker near the threshold
    discharge_delay: float = 0.0    # s a change of discharge state must hold
    bell: bool = False
    hooks: Mapping[Priority, HookSpec] = field(default_factory=dict)
    journal: str | None = None      # JSON Lines file of every transition and operator action (resolved path)


def _err(path: str | Path | None, key: str, message: str) -> ConfigError:
    return ConfigError(path, key, message)


def _unit_of(quantity: str) -> str:
    return ALL[quantity].unit


def parse_quantity_value(raw: Any, quantity: str, path: str | Path | None, key: str) -> float:
    """A number in the canonical unit of ``quantity`` or a string with a unit ("40um", "5e16 cm^-3")."""
    if isinstance(raw, bool) or not isinstance(raw, (int, float, str)):
        raise _err(path, key, f"expected a number or a string with a unit, got {raw!r}")
    unit = _unit_of(quantity)
    if isinstance(raw, (int, float)):
        value = float(raw)
    elif unit in _DIMENSION_OF_UNIT:
        try:
            value, sigma = parse_value(raw, _DIMENSION_OF_UNIT[unit])
        except UnitError as exc:
            raise _err(path, key, str(exc)) from None
        if sigma is not None:
            raise _err(path, key, "a limit takes no uncertainty")
    else:
        m = _NUMBER_UNIT.match(raw)
        table = _EXTRA_UNITS.get(unit, {unit: 1.0})
        spelled = m.group(2) if m else None
        if m is None or (spelled and spelled not in table):
            raise _err(path, key, f"cannot read {raw!r} for {quantity} (unit {unit}); accepted units: "
                       f"{', '.join(table)}")
        value = float(m.group(1)) * (table[spelled] if spelled else 1.0)
    if not math.isfinite(value):
        raise _err(path, key, f"{raw!r} is not a finite number")
    return value


def parse_seconds(raw: Any, path: str | Path | None, key: str, *, allow_zero: bool = True) -> float:
    """A duration: a number of seconds or a string such as "500ms", "2 min"."""
    if isinstance(raw, bool) or not isinstance(raw, (int, float, str)):
        raise _err(path, key, f"expected seconds (a number or e.g. \"500ms\"), got {raw!r}")
    try:
        value, sigma = parse_value(raw, "time")
    except UnitError as exc:
        raise _err(path, key, str(exc)) from None
    if sigma is not None or not math.isfinite(value) or value < 0 or (value == 0 and not allow_zero):
        raise _err(path, key, f"{raw!r} must be a finite {'non-negative' if allow_zero else 'positive'} duration")
    return value


def _priority(raw: Any, path: str | Path | None, key: str) -> Priority:
    try:
        return Priority(raw)
    except ValueError:
        raise _err(path, key, f"unknown priority {raw!r}; use one of {', '.join(p.value for p in Priority)}") from None


def _bool(raw: Any, path: str | Path | None, key: str) -> bool:
    if not isinstance(raw, bool):
        raise _err(path, key, f"expected true or false, got {raw!r}")
    return raw


def _number(raw: Any, path: str | Path | None, key: str, lo: float, hi: float = math.inf) -> float:
    if isinstance(raw, bool) or not isinstance(raw, (int, float)) or not (lo <= raw <= hi):
        raise _err(path, key, f"expected a number in [{lo}, {hi}], got {raw!r}")
    return float(raw)


def _int(raw: Any, path: str | Path | None, key: str, lo: int) -> int:
    if isinstance(raw, bool) or not isinstance(raw, int) or raw < lo:
        raise _err(path, key, f"expected a whole number >= {lo}, got {raw!r}")
    return raw


_LIMIT_KEYS = ("name", "quantity", "high", "low", "deadband", "deadband_absolute", "on_delay", "off_delay",
               "latch", "priority", "description", "uncertainty", "k", "predict_within", "predict_window",
               "predict_priority", "realarm_after", "max_shelve", "only_when_on", "out_of_service")
_NAME_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.\-]*$")


def _close(word: str, known: Any) -> str:
    match = difflib.get_close_matches(word, list(known), n=1)
    return f" (did you mean {match[0]!r}?)" if match else ""


def _parse_deadband(table: Mapping[str, Any], quantity: str, path: str | Path | None, key: str) -> tuple[float, bool]:
    if "deadband" in table and "deadband_absolute" in table:
        raise _err(path, f"{key}.deadband", "give deadband (a fraction) or deadband_absolute, not both")
    if "deadband_absolute" in table:
        value = parse_quantity_value(table["deadband_absolute"], quantity, path, f"{key}.deadband_absolute")
        if value < 0:
            raise _err(path, f"{key}.deadband_absolute", "must not be negative")
        return value, False
    raw = table.get("deadband", 0.0)
    k = f"{key}.deadband"
    if isinstance(raw, str):
        text = raw.strip()
        if text.endswith("%"):
            try:
                frac = float(text[:-1]) / 100.0
            except ValueError:
                raise _err(path, k, f"cannot read {raw!r} as a percentage") from None
        else:   # a string with a unit is an absolute band
            value = parse_quantity_value(raw, quantity, path, k)
            if value < 0:
                raise _err(path, k, "must not be negative")
            return value, False
    elif isinstance(raw, bool) or not isinstance(raw, (int, float)):
        raise _err(path, k, f"expected a fraction (0.05), a percentage (\"5%\") or a value with units, got {raw!r}")
    else:
        frac = float(raw)
    if not (0.0 <= frac < 1.0):
        raise _err(path, k, f"a fraction of the limit must be in [0, 1), got {raw!r}; "
                   "for an absolute band write a value with units or use deadband_absolute")
    return frac, True


def _parse_limit(table: Any, index: int, path: str | Path | None) -> LimitSpec:
    key = f"limit[{index}]"
    if not isinstance(table, Mapping):
        raise _err(path, key, "each [[limit]] must be a table")
    name = table.get("name")
    if isinstance(name, str) and _NAME_RE.match(name):
        key = f"limit[{index}] ({name})"
    for k in table:
        if k not in _LIMIT_KEYS:
            raise _err(path, f"{key}.{k}", f"unknown key{_close(k, _LIMIT_KEYS)}; known: {', '.join(_LIMIT_KEYS)}")
    if not isinstance(name, str) or not _NAME_RE.match(name):
        raise _err(path, f"{key}.name", "every limit needs a name of letters, digits, '_', '-', '.'")
    quantity = table.get("quantity")
    if not isinstance(quantity, str):
        raise _err(path, f"{key}.quantity", "every limit needs a quantity")
    quantity = QUANTITY_ALIASES.get(quantity, quantity)
    if quantity not in ALL:
        raise _err(path, f"{key}.quantity", f"unknown quantity {table['quantity']!r}{_close(quantity, ALL)}; "
                   f"known: {', '.join(ALL)}")
    high = parse_quantity_value(table["high"], quantity, path, f"{key}.high") if "high" in table else None
    low = parse_quantity_value(table["low"], quantity, path, f"{key}.low") if "low" in table else None
    if high is None and low is None:
        raise _err(path, key, "a limit needs high, low or both")
    if high is not None and low is not None and not low < high:
        raise _err(path, f"{key}.low", f"impossible limits: low ({low:g}) must be below high ({high:g})")
    deadband, relative = _parse_deadband(table, quantity, path, key)
    if high is not None and low is not None:
        band_h = abs(high) * deadband if relative else deadband
        band_l = abs(low) * deadband if relative else deadband
        if high - band_h < low or low + band_l > high:
            raise _err(path, f"{key}.deadband", "deadband wider than the gap between low and high")
    uncertainty = table.get("uncertainty", "none")
    if uncertainty not in UNCERTAINTY_MODES:
        raise _err(path, f"{key}.uncertainty", f"use one of {', '.join(UNCERTAINTY_MODES)}, got {uncertainty!r}")
    description = table.get("description", "")
    if not isinstance(description, str):
        raise _err(path, f"{key}.description", "must be a string")
    opt_s = {k: parse_seconds(table[k], path, f"{key}.{k}", allow_zero=False) if k in table else None
             for k in ("predict_within", "predict_window", "realarm_after", "max_shelve")}
    return LimitSpec(
        name=name, quantity=quantity, high=high, low=low, deadband=deadband, deadband_relative=relative,
        on_delay=parse_seconds(table.get("on_delay", 0.0), path, f"{key}.on_delay"),
        off_delay=parse_seconds(table.get("off_delay", 0.0), path, f"{key}.off_delay"),
        latch=_bool(table.get("latch", False), path, f"{key}.latch"),
        priority=_priority(table.get("priority", "high"), path, f"{key}.priority"),
        description=description, uncertainty=uncertainty,
        k=_number(table.get("k", 2.0), path, f"{key}.k", 0.0, 100.0),
        predict_within=opt_s["predict_within"], predict_window=opt_s["predict_window"],
        predict_priority=(_priority(table["predict_priority"], path, f"{key}.predict_priority")
                          if "predict_priority" in table else None),
        realarm_after=opt_s["realarm_after"], max_shelve=opt_s["max_shelve"],
        only_when_on=_bool(table.get("only_when_on", True), path, f"{key}.only_when_on"),
        out_of_service=_bool(table.get("out_of_service", False), path, f"{key}.out_of_service"),
    )


def parse_limits(tables: Any, path: str | Path | None) -> tuple[LimitSpec, ...]:
    """Every `[[limit]]` table, checked; ConfigError naming file and key on the first problem."""
    if tables is None:
        return ()
    if isinstance(tables, Mapping) or not isinstance(tables, (list, tuple)):
        raise _err(path, "limit", "write limits as [[limit]] tables (an array of tables)")
    limits = tuple(_parse_limit(t, i, path) for i, t in enumerate(tables))
    seen: set[str] = set()
    for i, lim in enumerate(limits):
        if lim.name in seen:
            raise _err(path, f"limit[{i}].name", f"duplicate alarm name {lim.name!r}")
        seen.add(lim.name)
    return limits


_OPTION_KEYS = ("flood_count", "flood_clear", "flood_window", "chatter_count", "chatter_window", "max_shelve",
                "stale_priority", "quality_priority", "quality_window", "quality_above", "quality_below",
                "quality_min_samples", "predict_window", "predict_step", "predict_priority", "discharge_deadband",
                "discharge_delay", "bell", "hooks", "journal")


def _parse_hook(raw: Any, path: str | Path | None, key: str) -> HookSpec:
    if isinstance(raw, str):
        raise _err(path, key, "a hook is an argument list such as [\"prog\", \"{alarm}\"]; "
                   "a command string is refused because no shell is used")
    if isinstance(raw, list):
        raw = {"command": raw}
    if not isinstance(raw, Mapping):
        raise _err(path, key, "a hook is an argument list [\"prog\", \"arg\", ...] or a table with command, timeout")
    for k in raw:
        if k not in ("command", "timeout", "states"):
            raise _err(path, f"{key}.{k}", "unknown key; known: command, timeout, states")
    command = raw.get("command")
    if not isinstance(command, list) or not command or not all(isinstance(a, str) and a for a in command):
        raise _err(path, f"{key}.command", "must be a non-empty list of strings (no shell is used)")
    states = raw.get("states", ["unacknowledged"])
    from monitor.alarms.events import AlarmState
    known = {s.value for s in AlarmState}
    if not isinstance(states, list) or not states or any(s not in known for s in states):
        raise _err(path, f"{key}.states", f"must be a list of states from {', '.join(sorted(known))}")
    return HookSpec(command=tuple(command), timeout=parse_seconds(raw.get("timeout", 5.0), path, f"{key}.timeout",
                                                                  allow_zero=False), states=tuple(states))


def _journal_path(raw: Any, path: str | Path | None) -> str | None:
    """``[alarms] journal``: a file name, relative to the config file's directory (absolute kept)."""
    if raw is None:
        return None
    if not isinstance(raw, str) or not raw.strip():
        raise _err(path, "alarms.journal", f"expected a file name, got {raw!r}")
    if path is not None and not Path(raw).is_absolute():
        return str(Path(path).parent / raw)
    return raw


def parse_alarm_options(table: Any, path: str | Path | None) -> AlarmOptions:
    """The `[alarms]` table (absent or empty: the defaults); ConfigError naming file and key."""
    if table is None:
        return AlarmOptions()
    if not isinstance(table, Mapping):
        raise _err(path, "alarms", "must be a table")
    for k in table:
        if k not in _OPTION_KEYS:
            raise _err(path, f"alarms.{k}", f"unknown key{_close(k, _OPTION_KEYS)}; known: {', '.join(_OPTION_KEYS)}")
    d = AlarmOptions()
    g = table.get
    hooks_raw = g("hooks", {})
    if not isinstance(hooks_raw, Mapping):
        raise _err(path, "alarms.hooks", "must be a table keyed by priority")
    hooks = {_priority(p, path, f"alarms.hooks.{p}"): _parse_hook(h, path, f"alarms.hooks.{p}")
             for p, h in hooks_raw.items()}
    opts = AlarmOptions(
        journal=_journal_path(g("journal"), path),
        flood_count=_int(g("flood_count", d.flood_count), path, "alarms.flood_count", 1),
        flood_clear=_int(g("flood_clear", d.flood_clear), path, "alarms.flood_clear", 1),
        flood_window=parse_seconds(g("flood_window", d.flood_window), path, "alarms.flood_window", allow_zero=False),
        chatter_count=_int(g("chatter_count", d.chatter_count), path, "alarms.chatter_count", 2),
        chatter_window=parse_seconds(g("chatter_window", d.chatter_window), path, "alarms.chatter_window",
                                     allow_zero=False),
        max_shelve=parse_seconds(g("max_shelve", d.max_shelve), path, "alarms.max_shelve", allow_zero=False),
        stale_priority=_priority(g("stale_priority", d.stale_priority.value), path, "alarms.stale_priority"),
        quality_priority=_priority(g("quality_priority", d.quality_priority.value), path, "alarms.quality_priority"),
        quality_window=parse_seconds(g("quality_window", d.quality_window), path, "alarms.quality_window",
                                     allow_zero=False),
        quality_above=_number(g("quality_above", d.quality_above), path, "alarms.quality_above", 0.0, 1.0),
        quality_below=_number(g("quality_below", d.quality_below), path, "alarms.quality_below", 0.0, 1.0),
        quality_min_samples=_int(g("quality_min_samples", d.quality_min_samples), path,
                                 "alarms.quality_min_samples", 1),
        predict_window=parse_seconds(g("predict_window", d.predict_window), path, "alarms.predict_window",
                                     allow_zero=False),
        predict_step=parse_seconds(g("predict_step", d.predict_step), path, "alarms.predict_step", allow_zero=False),
        predict_priority=_priority(g("predict_priority", d.predict_priority.value), path, "alarms.predict_priority"),
        discharge_deadband=_number(g("discharge_deadband", d.discharge_deadband), path,
                                   "alarms.discharge_deadband", 0.0, 0.99),
        discharge_delay=parse_seconds(g("discharge_delay", d.discharge_delay), path, "alarms.discharge_delay"),
        bell=_bool(g("bell", d.bell), path, "alarms.bell"),
        hooks=hooks,
    )
    if opts.flood_clear > opts.flood_count:
        raise _err(path, "alarms.flood_clear", "must not exceed flood_count")
    if opts.quality_below > opts.quality_above:
        raise _err(path, "alarms.quality_below", "must not exceed quality_above")
    return opts
