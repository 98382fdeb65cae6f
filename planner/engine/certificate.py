"""The certified gap, defined once for every solve and report."""

from __future__ import annotations

from dataclasses import dataclass


def relative_gap(bound: float, value: float, money: float = 1.0) -> float:
    """(bound − value) / max(|value|, 1 currency), never negative; the gap is unitless.

    ``money``: the currency in one unit of ``bound`` and ``value`` (the engine's
    money scale), so the floor of 1 is always one unit of the scenario's currency.
    """
    return max(0.0, (bound - value) / max(abs(value), 1.0 / money))


@dataclass(frozen=True)
class Certificate:
    """The gap a search must certify, in the problem's units.

    ``money``: currency per unit of the problem's money; ``offset``: a constant in those units
    (the plant-wide fixed cost) that the plan's profit carries and the products' do not, so the
    gap certified is that of the plan: (bound − offset − (value − offset)) / max(|value − offset|, 1).
    """

    money: float = 1.0
    offset: float = 0.0

    def gap(self, bound: float, value: float) -> float:
        """The plan's gap for a products' bound and value."""
        return relative_gap(bound - self.offset, value - self.offset, self.money)

    def slack(self, rel_gap: float, value: float) -> float:
        """How far above ``value`` a bound may lie for the gap to hold: rel_gap · max(|value − offset|, 1)."""
        return rel_gap * max(abs(value - self.offset), 1.0 / self.money)
