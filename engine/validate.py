"""Shared validators, called first in every public function that takes a signal."""

from __future__ import annotations

import numpy as np

from .errors import InputError, where


def as_signal(samples, name: str = "samples", *, source: str | None = None,
              min_size: int = 1) -> np.ndarray:
    """A 1-D, finite float64 array, or InputError saying what is wrong."""
    x = np.asarray(samples, dtype=float)
    if x.ndim != 1:
        raise InputError(f"{where(source)}{name} must be one-dimensional, got shape {x.shape}")
    if x.size < min_size:
        raise InputError(f"{where(source)}{name} needs at least {min_size} values, got {x.size}")
    if not np.isfinite(x).all():
        bad = int(np.count_nonzero(~np.isfinite(x)))
        raise InputError(f"{where(source)}{name} holds {bad} NaN or infinite value(s); "
                         "the channel cannot be analysed")
    return x


def require_positive(value, name: str, *, source: str | None = None) -> float:
    """``value`` as a positive finite float, or InputError."""
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{where(source)}{name} must be a number, got {value!r}") from None
    if not np.isfinite(v) or v <= 0:
        raise InputError(f"{where(source)}{name} must be a positive number, got {value!r}")
    return v
