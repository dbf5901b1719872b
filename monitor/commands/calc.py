"""`regime calc`: the regime parameters, uncertainties and criteria of one set of readings."""

from __future__ import annotations

import argparse
import json
import math
import sys
from typing import Any

from monitor.errors import UsageError

__all__ = ["register", "run", "KEYS", "parse_assignments", "compute", "reasons", "notes", "to_json"]

# key -> (what it is, default shown in help)
KEYS: dict[str, str] = {
    "ne": "electron density (m^-3, cm^-3, /cc)",
    "Te": "electron temperature (eV, keV, K)",
    "Ti": "ion temperature (eV, keV, K)",
    "B": "magnetic field (T, mT, G, kG)",
    "p0": "neutral pressure (Pa, mPa, kPa, Torr, mTorr, mbar, bar, atm)",
    "L": "device length scale (m, cm, mm)",
    "f": "wave frequency, ordinary (Hz, kHz, MHz, GHz)",
    "Tgas": "gas temperature (K default, or eV), default 300 K",
    "A": "ion mass in u, default 39.948 (argon)",
    "Z": "ion charge number, default 1",
    "sigma_en": "electron-neutral cross section (m^2, cm^2), default 1e-19 m^2",
    "phase": "interferometer phase shift (rad, mrad, deg), with f= and Lpath=: the line-averaged ne",
    "Lpath": "interferometer chord length through the plasma (m, cm, mm)",
    "passes": "times the beam crosses the chord, default 1 (2 for a double pass)",
    "method": "phase to density: auto (default), linear or exact",
}
_INTERFEROMETER = ("phase", "Lpath", "passes", "method")     # monitor.diagnostics.interferometer_calc
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
                             'where a value or sigma is null because it is not defined (e.g. at B = 0), '
                             '"flags" where a validity warning concerns it, and a top-level "notes" list')
    parser.add_argument("--mc", type=_draws, default=None, metavar="N",
                        help="also give the 16th-84th percentile interval of each quantity from N Monte Carlo "
                             "draws of the inputs' uncertainties (e.g. --mc 100000; JSON: p16, p84)")


def _draws(text: str) -> int:
    from monitor.physics.montecarlo import MAX_DRAWS, MIN_DRAWS

    try:
        n = int(float(text))
    except ValueError:
        raise argparse.ArgumentTypeError(f"--mc takes a number of draws, got {text!r}") from None
    if not (MIN_DRAWS <= n <= MAX_DRAWS) or float(text) != n:
        raise argparse.ArgumentTypeError(f"--mc must be a whole number from {MIN_DRAWS} to {MAX_DRAWS}, got {text}")
    return n


def parse_assignments(items: list[str]) -> tuple[dict[str, float], dict[str, float]]:
    """KEY=VALUE strings -> (values, sigmas) in canonical units; UsageError on anything wrong."""
    from monitor.units import DIMENSION_OF, parse_value

    values: dict[str, float] = {}
    sigmas: dict[str, float] = {}
    interferometer: dict[str, str] = {}
    for item in items:
        key, sep, text = item.partition("=")
        key = key.strip()
        if not sep or not text.strip():
            raise UsageError(f"expected KEY=VALUE, got {item!r}; keys: {', '.join(KEYS)}")
        if key not in KEYS:
            raise UsageError(f"unknown key {key!r}; keys: {', '.join(KEYS)}")
        if key in values or key in interferometer:
            raise UsageError(f"{key} given twice")
        if key in _INTERFEROMETER:
            interferometer[key] = text
            continue
        value, sigma = parse_value(text, DIMENSION_OF[key])
        if sigma is not None and key in _NO_SIGMA:
            raise UsageError(f"{key} takes no uncertainty")
        values[key] = value
        if sigma is not None:
            sigmas[key] = sigma
    if interferometer:
        reading = phase_reading(interferometer, values, sigmas)
        values["ne"] = reading.density
        if math.isfinite(reading.sigma):
            sigmas["ne"] = reading.sigma
    from monitor.physics.ranges import check_value

    for key, value in values.items():
        problem = check_value(key, value)
        if problem:
            raise UsageError(problem)
    if not any(k in values for k in _INPUTS + ("f",)):
        raise UsageError("nothing to derive: give readings, e.g. ne=5e16m-3 Te=3eV "
                         f"(keys: {', '.join(KEYS)})")
    return values, sigmas


def phase_reading(texts: dict[str, str], values: dict[str, float], sigmas: dict[str, float]) -> Any:
    """The interferometer keys' line-averaged density (a PhaseReading); UsageError when ne= is given too."""
    from monitor.diagnostics.interferometer_calc import density_from_calc_keys

    if "ne" in values:
        raise UsageError("give ne= or phase=, not both")
    return density_from_calc_keys(texts, values.get("f"), sigmas.get("f"))


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
    from monitor.physics.tables import sample_withheld

    out: dict[str, str] = {name: f"withheld: {why}: the formula does not hold here"
                           for name, why in sample_withheld(derived.warnings, derived.values, 0).items()}
    for name, v in derived.values.items():
        if name in out:
            continue
        x = float(v[0])
        s = float(derived.sigma[name][0]) if name in derived.sigma else 0.0
        if not math.isfinite(x):
            out[name] = _why_not_finite(name, x, values, sigmas)
        elif not math.isfinite(s):
            out[name] = _why_not_finite(name, s, values, sigmas, "sigma ")
    return out


def notes(values: dict[str, float], sigmas: dict[str, float], derived: Any, mc: Any = None) -> list[dict[str, str]]:
    """The run's validity notes and warnings as {"code", "text"}: what the table prints under "warnings"."""
    from monitor.physics.nonlinear import NONLINEAR, RHO_MAX
    from monitor.physics.tables import sample_flags, warning_text

    out: list[dict[str, str]] = []
    if "sigma_en" not in values and "electron_neutral_collision_frequency" in derived.values:
        out.append({"code": "sigma_en_default",
                    "text": "sigma_en default 1e-19 m^2 is an order-of-magnitude value (common practice)"})
    codes = sample_flags(derived.warnings, 0)
    nonlinear = [c.partition(":")[2] for c in codes if c.startswith(NONLINEAR + ":")]
    for code in codes:
        if not code.startswith(NONLINEAR + ":"):
            out.append({"code": code, "text": warning_text(code)})
    if nonlinear:
        out.append({"code": NONLINEAR,
                    "text": f"linear uncertainty not trustworthy for {', '.join(nonlinear)}: the second-order "
                            f"term exceeds {RHO_MAX:g} of the first-order sigma"
                            + (" (see the Monte Carlo interval)" if mc is not None else " (use --mc N)")})
    if mc is not None:
        text = f"Monte Carlo: {mc.draws} draws of normal inputs"
        if mc.discarded:
            lost = ", ".join(f"{k} {n}" for k, n in sorted(mc.discarded.items()))
            text += (f"; {mc.draws - mc.kept} left an input's physical domain and were discarded ({lost}): "
                     "the interval is that of the truncated distribution")
        out.append({"code": "monte_carlo", "text": text})
        for name, iv in mc.intervals.items():
            if iv.withheld:
                out.append({"code": "monte_carlo_withheld",
                            "text": f"{name}: {iv.withheld} of {iv.finite + iv.withheld} draws had no value "
                                    "(formula outside its validity there); the interval is over the rest"})
    return out


def to_json(values: dict[str, float], sigmas: dict[str, float], derived: Any, mc: Any = None) -> dict[str, Any]:
    """The --json object: quantity -> {"value", "unit", "sigma"[, "reason", "flags", "p16", "p84"]}, and "notes"."""
    from monitor.physics.tables import flags_of, sample_flags
    from monitor.quantities import DERIVED

    why = reasons(values, sigmas, derived)
    codes = sample_flags(derived.warnings, 0)
    out: dict[str, Any] = {}
    for q in DERIVED:
        if q.name not in derived.values:
            continue
        entry: dict[str, Any] = {"value": _num(derived.values[q.name][0]), "unit": q.unit,
                                 "sigma": _num(derived.sigma[q.name][0]) if q.name in derived.sigma else None}
        if q.name in why:
            entry["reason"] = why[q.name]
        flags = flags_of(q.name, codes)
        if flags:
            entry["flags"] = flags
        if mc is not None and q.name in mc.intervals:
            entry["p16"] = _num(mc.intervals[q.name].p16)
            entry["p84"] = _num(mc.intervals[q.name].p84)
        out[q.name] = entry
    out["notes"] = notes(values, sigmas, derived, mc)
    return out


def run(args: argparse.Namespace) -> int:
    values, sigmas = parse_assignments(list(args.assignments))
    device, derived = compute(values, sigmas)
    mc = None
    if args.mc is not None:
        if not sigmas:
            raise UsageError("--mc needs at least one uncertainty, e.g. Te=3eV±10%")
        from monitor.physics.montecarlo import monte_carlo

        mc = monte_carlo({k: values[k] for k in _INPUTS if k in values}, device, sigmas, args.mc)
    if args.json:
        print(json.dumps(to_json(values, sigmas, derived, mc), allow_nan=False))
        for code in derived.warnings:
            print(f"regime calc: warning: {code}", file=sys.stderr)
        return 0
    print(render(values, sigmas, device, derived, mc))
    texts = {k.strip(): v for k, _, v in (a.partition("=") for a in args.assignments) if k.strip() in _INTERFEROMETER}
    if texts:
        from monitor.diagnostics.interferometer_calc import density_from_calc_keys, describe
        print(describe(density_from_calc_keys(texts, values.get("f"), sigmas.get("f"))))
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


def render(values: dict[str, float], sigmas: dict[str, float], device: Any, derived: Any, mc: Any = None) -> str:
    """The readable table: inputs, device, quantity/value/unit/sigma/meaning, criteria, warnings, gaps."""
    from monitor.criteria import evaluate
    from monitor.physics import REQUIRES
    from monitor.physics.nonlinear import NONLINEAR
    from monitor.physics.tables import sample_withheld
    from monitor.quantities import DERIVED

    lines = ["inputs   " + "   ".join(_given(k, values[k], sigmas.get(k)) for k in _INPUTS if k in values)]
    dev = [("L", device.length), ("f", device.wave_frequency), ("A", device.ion_mass_u),
           ("Z", device.ion_charge), ("Tgas", device.gas_temperature), ("sigma_en", device.sigma_en)]
    parts = [_given(k, v, sigmas.get(k)) + ("" if k in values or k in ("L", "f") else " (default)")
             for k, v in dev if v is not None]
    lines.append("device   " + "   ".join(parts))
    if "sigma_en" not in values and "electron_neutral_collision_frequency" in derived.values:
        lines.append("         sigma_en default 1e-19 m^2 is an order-of-magnitude value (common practice)")
    rows = [("quantity", "value", "unit", "± sigma" + (" [MC 16-84 %]" if mc is not None else ""), "meaning")]
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
        elif q.name == "coulomb_logarithm" and "coulomb_logarithm_small" in derived.warnings:
            meaning += " [below 2: outside its validity]"
        sig_text = _fmt_sigma(v, s)
        if f"{NONLINEAR}:{q.name}" in derived.warnings:
            sig_text += " (!)"
        if mc is not None and q.name in mc.intervals:
            iv = mc.intervals[q.name]
            sig_text += f" [{iv.p16:.3g} .. {iv.p84:.3g}]"
        rows.append((q.name, f"{v:.4g}" if math.isfinite(v) else "-", q.unit, sig_text, meaning))
    widths = [max(len(r[i]) for r in rows) for i in range(4)]
    lines.append("")
    for r in rows:
        lines.append("  ".join(c.ljust(w) for c, w in zip(r[:4], widths)) + "  " + r[4])
    scalars: dict[str, float] = {k: float(v[0]) for k, v in derived.values.items()}
    if device.length is not None:
        scalars["L"] = device.length
    verdicts = evaluate(scalars, sample_withheld(derived.warnings, derived.values, 0))
    if verdicts:
        lines += ["", "criteria"]
        for vd in verdicts:
            mark = "yes" if vd.holds else ("?" if vd.holds is None else "NO")
            lines.append(f"  {mark:<4}{vd.text}")
    warned = [n["text"] for n in notes(values, sigmas, derived, mc) if n["code"] != "sigma_en_default"]
    if warned:
        lines += ["", "warnings" + (" ((!) beside a sigma: linear propagation not trustworthy there)"
                                    if any(c.startswith(NONLINEAR) for c in derived.warnings) else "")]
        lines += [f"  {text}" for text in warned]
    have = set(values) | ({"L"} if device.length is not None else set()) | ({"f"} if device.wave_frequency else set())
    missing = [(q.name, [k for k in REQUIRES[q.name] if k not in have]) for q in DERIVED
               if q.name not in derived.values]
    if missing:
        lines += ["", "not derived (give " + ", ".join(sorted({k for _, ks in missing for k in ks})) + " for them)"]
        lines.append("  " + ", ".join(f"{name} [{'+'.join(ks)}]" for name, ks in missing))
    lines += ["", "advisory only: not a safety interlock"]
    return "\n".join(lines)
