"""Stability of equilibria under learning at unknown, unequal speeds."""

from ._classify import SpeedVerdict, StabilityReport, classify, classify_batch, classify_free

__all__ = ["SpeedVerdict", "StabilityReport", "classify", "classify_batch", "classify_free"]
