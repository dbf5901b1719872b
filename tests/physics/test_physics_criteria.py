"""monitor.criteria: verdicts, margins and the undecidable case."""

from __future__ import annotations

import math

import pytest

from monitor.criteria import CRITERIA, Verdict, evaluate


def test_all_criteria_on_a_typical_discharge() -> None:
    verdicts = {v.name: v for v in evaluate({
        "debye_ratio": 5.2e3, "debye_number": 4e4, "collectivity": 0.5, "cutoff_ratio": 0.67,
        "hall_parameter": 156.0, "ion_gyroradius": 0.02, "L": 0.3})}
    assert set(verdicts) == {c.name for c in CRITERIA}
    assert verdicts["quasi_neutral"].holds and verdicts["quasi_neutral"].margin == pytest.approx(520.0)
    assert verdicts["many_particles"].holds and verdicts["many_particles"].margin == pytest.approx(4e3)
    assert verdicts["collective"].holds is False and verdicts["collective"].margin == pytest.approx(0.5)
    assert verdicts["under_cutoff"].holds and verdicts["under_cutoff"].margin == pytest.approx(1 / 0.67)
    assert verdicts["electrons_magnetised"].holds
    assert verdicts["ions_magnetised"].holds and verdicts["ions_magnetised"].margin == pytest.approx(15.0)
    assert verdicts["quasi_neutral"].text.startswith("quasi-neutral: L/lambda_D = 5.2e+03")
    assert verdicts["collective"].text.startswith("collision-dominated")


def test_over_cutoff_and_unmagnetised() -> None:
    verdicts = {v.name: v for v in evaluate({"cutoff_ratio": 3.0, "hall_parameter": 0.2})}
    assert verdicts["under_cutoff"].holds is False and verdicts["under_cutoff"].margin == pytest.approx(1 / 3)
    assert "over cutoff" in verdicts["under_cutoff"].text
    assert verdicts["electrons_magnetised"].holds is False and "unmagnetised" in verdicts["electrons_magnetised"].text


def test_only_the_criteria_with_values_appear_and_nan_is_undecided() -> None:
    verdicts = evaluate({"debye_ratio": math.nan, "debye_length": 1e-4})
    assert [v.name for v in verdicts] == ["quasi_neutral"]
    assert verdicts[0].holds is None and math.isnan(verdicts[0].margin)
    assert evaluate({}) == []


def test_ion_size_ratio_recovers_l_from_debye_values() -> None:
    verdicts = {v.name: v for v in evaluate({"debye_ratio": 1000.0, "debye_length": 3e-4, "ion_gyroradius": 0.6})}
    assert verdicts["ions_magnetised"].holds is False and verdicts["ions_magnetised"].margin == pytest.approx(0.5)


def test_verdict_is_a_frozen_value() -> None:
    v = Verdict("x", True, 2.0, "x")
    with pytest.raises(AttributeError):
        v.holds = False  # type: ignore[misc]
