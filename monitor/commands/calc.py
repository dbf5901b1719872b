"""`regime calc`: the regime parameters, uncertainties and criteria of one set of readings."""

from __future__ import annotations

import argparse
import json
import math
import sys
from typing import Any

from monitor.errors import UsageError

__all__ = ["register", "run", "KEYS", "parse_assignments", "compute", "reasons"]

# key -> (what it is, default shown in help)
KEYS: dict[str, str] = {
    "ne": "electron density (m^-3, cm^-3, /cc)",
    "Te": "electron temperature (eV, keV, K)",
    "Ti": "ion temperature (eV, keV, K)",
    "B": "magnetic field (T, mT, G, kG)",
    "p0": "neutral pressure (Pa, mPa, Torr, mTorr, mbar)",
    "L": "device length scale (m, cm, mm)",
    "f": "wave frequency, ordinary (Hz, kHz, MHz, GHz)",
    "Tgas": "gas temperature (K default, or eV), default 300 K",
    "A": "ion mass in u, default 39.948 (argon)",
    "Z": "ion charge number, default 1",
    "sigma_en": "electron-neutral cross section (m^2, cm^2), default 1e-19 m^2",
}
_INPUTS = ("ne", "Te", "Ti", "B", "p0")
_NO_SIGMA = ("A", "Z")
_LIMITS = {"ne": "finite, > 0 and <= 1e33 m^-3", "Te": "finite, > 0 and <= 1e7 eV",
           "Ti": "finite, > 0 and <= 1e7 eV", "B": "finite", "p0": "finite and >= 0"}


def register(parser: argparse.ArgumentParser) -> None:
    parser.formatter_class = argparse.RawDescriptionHelpFormatter
    parser.epilog = ("keys (VALUE[UNIT], optional uncertainty as +-0.5eV, ±0.5 or ±10%):\n"
                     + "\n".join(f"  {k:<9}{v}" for k, v in KEYS.items())
                     + "\nexample: regime calc ne=5e16m-3 Te=3eV±10% L=0.3m f=2.45GHz B=0.05T p0=2Pa")
    parser.add_argument("assignments", nargs="*", metavar="KEY=VALUE", help="readings and device constants")
    parser.add_argument("--json", action="store_true",
                        help='print one JSON object: name -> {"value", "unit", "sigma"}, plus "reason" '
                             'where a value or sigma is null because it is not defined (e.g. at B = 0)')


def parse_assignments(items: list[str]) -> tuple[dict[str, float], dict[str, float]]:
    """KEY=VALUE strings -> (values, sigmas) in canonical units; UsageError on anything wrong."""
    from monitor.units import DIMENSION_OF, parse_value

    values: dict[str, float] = {}
    sigmas: dict[str, float] = {}
    for item in items:
        key, sep, text = item.partition("=")
        key = key.strip()
        if not sep or not text.strip():
            raise UsageError(f"expected KEY=VALUE, got {item!r}; keys: {', '.join(KEYS)}")
        if key not in KEYS:
            raise UsageError(f"unknown key {key!r}; keys: {', '.join(KEYS)}")
        if key in values:
            raise UsageError(f"{key} given twice")
        value, sigma = parse_value(text, DIMENSION_OF[key])
        if sigma is not None and key in _NO_SIGMA:
            raise UsageError(f"{key} takes no uncertainty")
        values[key] = value
        if sigma is not None:
            sigmas[key] = sigma
    for key in ("L", "f", "Tgas", "A", "Z"):
        if key in values and not (math.isfinite(values[key]) and values[key] > 0):
            raise UsageError(f"{key} must be finite and > 0, got {values[key]:g}")
    if "sigma_en" in values and not (math.isfinite(values["sigma_en"]) and values["sigma_en"] >= 0):
        raise UsageError(f"sigma_en must be finite and >= 0, got {values['sigma_en']:g}")
    if not any(k in values for k in _INPUTS + ("f",)):
        raise UsageError("nothing to derive: give readings, e.g. ne=5e16m-3 Te=3eV "
                         f"(keys: {', '.join(KEYS)})")
    return values, sigmas


def compute(values: dict[str, float], sigmas: dict[str, float]) -> tuple[Any, Any]:
    """(Device, Derived) for parsed calc input; UsageError naming any meaningless reading."""
    from monitor.model import Device
    from monitor.physics import derive

    defaults = Device()
    device = Device(
        length=values.get("L"), wave_frequency=values.get("f"),
        ion_mass_u=values.get("A", defaults.ion_mass_u), ion_charge=values.get("Z", defaults.ion_charge),
        gas_temperature=values.get("Tgas", defaults.gas_temperature),
        sigma_en=values.get("sigma_en", defaults.sigma_en),
    )
    inputs = {k: values[k] for k in _INPUTS if k in values}
    derived = derive(inputs, device, sigmas or None)
    if derived.invalid:
        bad = sorted({reason.split("_", 1)[0] for reason in derived.invalid})
        raise UsageError("; ".join(f"{k}={values[k]:g} is not a meaningful reading (must be {_LIMITS[k]})"
                                   for k in bad if k in values) or ", ".join(derived.invalid))
    return device, derived


def _num(x: float) -> float | None:
    return float(x) if math.isfinite(x) else None


# Why a quantity that divides by the field has no value at B = 0.
_AT_ZERO_FIELD = {
    "electron_gyroradius": "no magnetic field: electrons do not gyrate, the radius is unbounded",
    "ion_gyroradius": "no magnetic field: ions do not gyrate, the radius is unbounded",
    "plasma_beta": "no magnetic field: no magnetic pressure to compare with",
}


def _why_not_finite(name: str, x: float, values: dict[str, float], sigmas: dict[str, float],
                    what: str = "") -> str:
    """The reason a derived value (or, with what="sigma ", its uncertainty) is not a finite number."""
    from monitor.physics import REQUIRES

    if "B" in REQUIRES[name] and values.get("B") == 0 and (not what or "B" in sigmas):
        if what:
            return f"{what}not defined at B = 0 (first-order propagation uses the relative uncertainty of B)"
        return f"not defined at B = 0 ({_AT_ZERO_FIELD.get(name, 'no magnetic field')})"
    if math.isinf(x):
        return f"{what}beyond the float range (the inputs are too extreme for this formula)"
    return f"{what}not a number for these inputs"


def reasons(values: dict[str, float], sigmas: dict[str, float], derived: Any) -> dict[str, str]:
    """Quantity name -> why its value or its sigma is not a finite number (only those that are not)."""
    out: dict[str, str] = {}
    for name, v in derived.values.items():
        x = float(v[0])
        s = float(derived.sigma[name][0]) if name in derived.sigma else 0.0
        if not math.isfinite(x):
            out[name] = _why_not_finite(name, x, values, sigmas)
        elif not math.isfinite(s):
            out[name] = _why_not_finite(name, s, values, sigmas, "sigma ")
    return out


def run(args: argparse.Namespace) -> int:
    from monitor.quantities import DERIVED

    values, sigmas = parse_assignments(list(args.assignments))
    device, derived = compute(values, sigmas)
    names = [q for q in DERIVED if q.name in derived.values]
    if args.json:
        why = reasons(values, sigmas, derived)
        out: dict[str, dict[str, Any]] = {}
        for q in names:
            out[q.name] = {"value": _num(derived.values[q.name][0]), "unit": q.unit,
                           "sigma": _num(derived.sigma[q.name][0]) if q.name in derived.sigma else None}
            if q.name in why:
                out[q.name]["reason"] = why[q.name]
        print(json.dumps(out, allow_nan=False))
        for code in derived.warnings:
            print(f"regime calc: warning: {code}", file=sys.stderr)
        return 0
    print(render(values, sigmas, device, derived))
    return 0


_UNITS = {"ne": "m^-3", "Te": "eV", "Ti": "eV", "B": "T", "p0": "Pa", "L": "m", "f": "Hz",
          "Tgas": "K", "A": "u", "Z": "", "sigma_en": "m^2"}


def _fmt_sigma(value: float, sigma: float | None, unit: str = "") -> str:
    if sigma is None or not math.isfinite(sigma):
        return ""
    u = f" {unit}" if unit else ""
    if value != 0 and math.isfinite(value):
        return f"± {sigma:.2g}{u} ({100.0 * sigma / abs(value):.2g}%)"
    return f"± {sigma:.2g}{u}"


def _given(key: str, value: float, sigma: float | None) -> str:
    unit = _UNITS[key]
    text = f"{key} = {value:.6g}{' ' + unit if unit else ''}"
    return text + (f" {_fmt_sigma(value, sigma, unit)}" if sigma is not None else "")


def render(values: dict[str, float], sigmas: dict[str, float], device: Any, derived: Any) -> str:
    """The readable table: inputs, device, quantity/value/unit/sigma/meaning, criteria, warnings, gaps."""
    from monitor.criteria import evaluate
    from monitor.physics import REQUIRES, WARNINGS
    from monitor.quantities import DERIVED

    lines = ["inputs   " + "   ".join(_given(k, values[k], sigmas.get(k)) for k in _INPUTS if k in values)]
    dev = [("L", device.length), ("f", device.wave_frequency), ("A", device.ion_mass_u),
           ("Z", device.ion_charge), ("Tgas", device.gas_temperature), ("sigma_en", device.sigma_en)]
    parts = [_given(k, v, sigmas.get(k)) + ("" if k in values or k in ("L", "f") else " (default)")
             for k, v in dev if v is not None]
    lines.append("device   " + "   ".join(parts))
    if "sigma_en" not in values and "electron_neutral_collision_frequency" in derived.values:
        lines.append("         sigma_en default 1e-19 m^2 is an order-of-magnitude value (common practice)")
    rows = [("quantity", "value", "unit", "± sigma", "meaning")]
    electrons_only = "plasma_beta_electrons_only" in derived.warnings
    why = reasons(values, sigmas, derived)
    for q in DERIVED:
        if q.name not in derived.values:
            continue
        v = float(derived.values[q.name][0])
        s = float(derived.sigma[q.name][0]) if q.name in derived.sigma else None
        meaning = q.meaning + (" (electrons only: Ti not given)" if q.name == "plasma_beta" and electrons_only else "")
        if q.name in why:
            meaning += f" [{why[q.name]}]"
        rows.append((q.name, f"{v:.4g}" if math.isfinite(v) else "-", q.unit, _fmt_sigma(v, s), meaning))
    widths = [max(len(r[i]) for r in rows) for i in range(4)]
    lines.append("")
    for r in rows:
        lines.append("  ".join(c.ljust(w) for c, w in zip(r[:4], widths)) + "  " + r[4])
    scalars: dict[str, float] = {k: float(v[0]) for k, v in derived.values.items()}
    if device.length is not None:
        scalars["L"] = device.length
    verdicts = evaluate(scalars)
    if verdicts:
        lines += ["", "criteria"]
        for vd in verdicts:
            mark = "yes" if vd.holds else ("?" if vd.holds is None else "NO")
            lines.append(f"  {mark:<4}{vd.text}")
    warned = [code for code, mask in derived.warnings.items() if mask.any()]
    if warned:
        lines += ["", "warnings"] + [f"  {WARNINGS.get(code, code)}" for code in warned]
    have = set(values) | ({"L"} if device.length is not None else set()) | ({"f"} if device.wave_frequency else set())
    missing = [(q.name, [k for k in REQUIRES[q.name] if k not in have]) for q in DERIVED
               if q.name not in derived.values]
    if missing:
        lines += ["", "not derived (give " + ", ".join(sorted({k for _, ks in missing for k in ks})) + " for them)"]
        lines.append("  " + ", ".join(f"{name} [{'+'.join(ks)}]" for name, ks in missing))
    lines += ["", "advisory only: not a safety interlock"]
    return "\n".join(lines)
