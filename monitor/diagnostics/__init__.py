"""Diagnostic analyses that turn raw instrument signals (swept Langmuir probe I-V sweeps) into readings."""
