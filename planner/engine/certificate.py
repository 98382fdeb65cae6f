"""The certified gap, defined once for every solve route and report."""

from __future__ import annotations


def relative_gap(bound: float, value: float) -> float:
    """(bound − value) / max(|value|, 1), never negative; bound and value in currency, the gap unitless."""
    return max(0.0, (bound - value) / max(abs(value), 1.0))
