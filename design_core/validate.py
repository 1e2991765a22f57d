"""Input checks shared by every design_core input: one message style for the whole package."""

from __future__ import annotations

import math
from typing import Any

import numpy as np


def number(name: str, value: Any, lo: float | None = None, hi: float | None = None,
           optional: bool = False) -> float | None:
    """Return ``value`` as a float, or raise ValueError naming the field and the allowed range.

    Refuses booleans, non-numbers, NaN and infinities, and values outside [lo, hi]. With
    ``optional`` a None passes through as None; otherwise None is "required".
    """
    if value is None:
        if optional:
            return None
        raise ValueError(f"{name} is required")
    if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)):
        raise ValueError(f"{name} must be a number, got {value!r}")
    value = float(value)
    if not math.isfinite(value):
        raise ValueError(f"{name} must be a finite number, got {value!r}")
    if lo is not None and value < lo:
        raise ValueError(f"{name} must be at least {lo:g}, got {value:g}")
    if hi is not None and value > hi:
        raise ValueError(f"{name} must be at most {hi:g}, got {value:g}")
    return value
