"""The certified gap, defined once for every solve and report."""

from __future__ import annotations


def relative_gap(bound: float, value: float, money: float = 1.0) -> float:
    """(bound − value) / max(|value|, 1 currency), never negative; the gap is unitless.

    ``money``: the currency in one unit of ``bound`` and ``value`` (the engine's
    money scale), so the floor of 1 is always one unit of the scenario's currency.
    """
    return max(0.0, (bound - value) / max(abs(value), 1.0 / money))
