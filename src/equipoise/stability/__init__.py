"""Stability of equilibria under learning at unknown, unequal speeds."""

from ._classify import SpeedVerdict, StabilityReport, classify

__all__ = ["SpeedVerdict", "StabilityReport", "classify"]
