"""Importing equipoise switches JAX to float64 before any test builds an array."""

import equipoise  # noqa: F401
