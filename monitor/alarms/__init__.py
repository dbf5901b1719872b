"""The operating envelope and the alarm engine (ISA-18.2 / IEC 62682 state model)."""
