"""Diagnostic analyses that turn raw instrument signals (swept Langmuir probe I-V sweeps, interferometer phase or I/Q) into readings."""
