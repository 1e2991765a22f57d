"""What every check function shares: the "not checked" signal and the utilisation."""

from __future__ import annotations

import math


class NotChecked(Exception):
    """A check could not be made; the message is the reason."""


def util(demand: float, capacity: float) -> float:
    """Demand over capacity: 0 with no demand, inf with demand and no capacity."""
    if demand <= 0.0:
        return 0.0
    return demand / capacity if capacity > 0.0 else math.inf


def signed(x: float) -> str:
    """A signed whole number for a reason (+12, -3)."""
    return f"{x:+.0f}"
