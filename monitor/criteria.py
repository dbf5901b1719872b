"""The plasma criteria (quasi-neutral, many particles per Debye sphere, collective, cutoff, magnetised) as verdicts with margins."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Mapping

__all__ = ["Verdict", "Criterion", "CRITERIA", "evaluate"]


@dataclass(frozen=True)
class Verdict:
    """One criterion judged on one set of values.

    ``holds`` is None when the value is not finite (cannot tell). ``margin``
    is the factor by which the criterion is met: value / threshold for an
    "at least" criterion, threshold / value for an "at most" one, so it
    holds exactly when margin >= 1 (NaN when it cannot tell).
    """

    name: str
    holds: bool | None
    margin: float
    text: str


@dataclass(frozen=True)
class Criterion:
    """A threshold on one derived quantity; ``at_least`` False means value must stay below."""

    name: str
    quantity: str
    symbol: str
    threshold: float
    at_least: bool
    yes: str
    no: str
    why: str


# "Much larger" is taken as a factor of 10 (our choice, stated in the README);
# the collective and magnetised criteria are the textbook omega tau > 1.
CRITERIA: tuple[Criterion, ...] = (
    Criterion("quasi_neutral", "debye_ratio", "L/lambda_D", 10.0, True,
              "quasi-neutral", "not quasi-neutral", "L >> lambda_D"),
    Criterion("many_particles", "debye_number", "N_D", 10.0, True,
              "many particles per Debye sphere", "few particles per Debye sphere", "N_D >> 1"),
    Criterion("collective", "collectivity", "omega_pe/nu", 1.0, True,
              "collective", "collision-dominated", "omega_pe > nu_ei + nu_en"),
    Criterion("under_cutoff", "cutoff_ratio", "ne/n_c", 1.0, False,
              "under cutoff", "over cutoff (overdense)", "ne < n_c of the wave"),
    Criterion("electrons_magnetised", "hall_parameter", "omega_ce/nu", 1.0, True,
              "electrons magnetised", "electrons unmagnetised", "omega_ce > nu_ei + nu_en"),
    Criterion("ions_magnetised", "ion_size_ratio", "L/r_i", 1.0, True,
              "ions magnetised", "ions unmagnetised", "r_i < L"),
)


def _ion_size_ratio(values: Mapping[str, float]) -> float | None:
    r_i = values.get("ion_gyroradius")
    if r_i is None:
        return None
    length = values.get("L")
    if length is None and "debye_ratio" in values and "debye_length" in values:
        length = values["debye_ratio"] * values["debye_length"]
    if length is None:
        return None
    return float(length) / float(r_i) if r_i != 0 else math.inf


def evaluate(values: Mapping[str, float], not_judged: Mapping[str, str] | None = None) -> list[Verdict]:
    """Verdicts for every criterion whose quantity is in ``values`` (floats, canonical units).

    ``values`` may also carry ``L`` (m) for the ion magnetisation criterion;
    otherwise L is recovered from debye_ratio * debye_length. ``not_judged``
    maps a quantity to the reason its formula does not hold (e.g. "strongly
    coupled (lnLambda < 2)", from derive()'s WITHHELD): its criterion is
    not judged (holds None) and says why, instead of a number.
    """
    verdicts: list[Verdict] = []
    skip = not_judged or {}
    for c in CRITERIA:
        if c.quantity in skip:
            verdicts.append(Verdict(c.name, None, math.nan, f"{c.yes}? not judged: {skip[c.quantity]} ({c.why})"))
            continue
        raw = _ion_size_ratio(values) if c.quantity == "ion_size_ratio" else values.get(c.quantity)
        if raw is None:
            continue
        v = float(raw)
        if not math.isfinite(v) and not (math.isinf(v) and v > 0):
            verdicts.append(Verdict(c.name, None, math.nan, f"{c.yes}? {c.symbol} unknown ({c.why})"))
            continue
        if c.at_least:
            margin = v / c.threshold
        else:
            margin = c.threshold / v if v > 0 else math.inf
        holds = margin >= 1.0
        relation = (">=" if holds else "<") if c.at_least else ("<=" if holds else ">")
        label = c.yes if holds else c.no
        factor = margin if holds else (1.0 / margin if margin > 0 else math.inf)
        text = (f"{label}: {c.symbol} = {v:.3g} {relation} {c.threshold:g} ({c.why}; "
                f"{'margin' if holds else 'short by'} x{factor:.3g})")
        verdicts.append(Verdict(c.name, holds, margin, text))
    return verdicts
