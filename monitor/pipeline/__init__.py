"""The rolling pipeline: channel map, validation, alignment, derivation and rolling statistics on whole arrays."""

from monitor.pipeline.pipeline import Pipeline

__all__ = ["Pipeline"]
