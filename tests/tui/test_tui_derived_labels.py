"""The derived panel's labels say what its numbers are: f where practical units show omega / 2 pi in Hz."""

from __future__ import annotations

from monitor.quantities import ALL
from monitor.tui.formatting import fmt_value
from monitor.tui.widgets.derived import SYMBOL, _label


def test_practical_units_label_an_angular_frequency_as_f() -> None:
    q = ALL["electron_plasma_frequency"]
    # 2 pi x 1 GHz rad/s is shown as 1 GHz: the label must then be f, not omega
    number, _, unit = fmt_value(2e9 * 3.141592653589793, None, q.unit, "practical")
    assert unit == "GHz" and number.startswith("1")
    assert _label(q, wide=False, practical=True) == "f pe"
    assert _label(q, wide=False, practical=False) == "ωpe"
    assert "ω/2π" in _label(q, wide=True, practical=True)
    assert "(angular)" in _label(q, wide=True, practical=False)


def test_every_derived_quantity_has_a_short_symbol() -> None:
    from monitor.quantities import DERIVED

    assert {q.name for q in DERIVED} <= set(SYMBOL)
    assert max(len(s) for s in SYMBOL.values()) <= 12     # fits the narrow panel beside value and unit
