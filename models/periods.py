r"""Validated numbers of a scenario planned over several periods (months, weeks), as numpy arrays.

Per product i and period t (T periods, in order), per resource r:

==========  =====================================================  ==========================
symbol      meaning                                                unit
==========  =====================================================  ==========================
a_it, b_it  price line of period t: price = a − b·sold             currency/unit, currency/unit²
v_it        variable cost per unit made in t                        currency / unit
lo_it       committed sales in t                                    units
hi_it       cap on sales in t (inf if none)                         units
k_it        holding cost per unit in stock at the end of t          currency / unit
F_i         fixed cost for the horizon, avoided only if i makes     currency
            nothing in any period
I_i         initial stock (may be sold even if i does not run)      units
E_i         final stock: at least this at the end of period T       units
h_ri        resource r used per unit made (in the period made)      resource unit / unit
g_ri        resource r used per unit in stock at a period's end     resource unit / unit
H_rt        capacity of resource r in period t                      resource unit
==========  =====================================================  ==========================

The model (made m_it ≥ 0, sold s_it, stock S_it, y_i ∈ {0, 1} makes anything):

.. math::

    \max \sum_i \Big[\sum_t (a_{it} s_{it} - b_{it} s_{it}^2 - v_{it} m_{it} - k_{it} S_{it}) - F_i y_i\Big]

    S_{it} = S_{i,t-1} + m_{it} - s_{it},\quad S_{i0} = I_i,\quad S_{it} \ge 0,\quad S_{iT} \ge E_i

    lo_{it} \le s_{it} \le hi_{it},\qquad m_{it} \le U_i\, y_i

    \sum_i h_{ri} m_{it} + g_{ri} S_{it} \le H_{rt}\quad\text{for every resource r and period t}

The shared rows are the pairs (resource, period), row index r·T + t.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class PeriodData:
    """The multi-period data; (n × T) arrays per product and period, dense (n × R) usage."""

    periods: tuple[str, ...]
    resources: tuple[str, ...]
    a: np.ndarray
    b: np.ndarray
    v: np.ndarray
    lo: np.ndarray
    hi: np.ndarray
    hold: np.ndarray
    F: np.ndarray  # (n,)
    initial: np.ndarray  # (n,)
    final: np.ndarray  # (n,)
    must_run: np.ndarray  # (n,) bool: may not be shut down (must_run)
    usage: np.ndarray  # (n × R) per unit made
    stock_usage: np.ndarray  # (n × R) per unit in stock at a period's end
    capacity: np.ndarray  # (R × T)

    @property
    def n(self) -> int:
        return int(self.a.shape[0])

    @property
    def T(self) -> int:
        return len(self.periods)

    @property
    def R(self) -> int:
        return len(self.resources)

    def row(self, r: int, t: int) -> int:
        """Index of the shared row (resource r, period t)."""
        return r * self.T + t

    @property
    def carry_total(self) -> np.ndarray:
        """(n × T) holding cost from the end of period t to the end of the horizon, Σ_{k≥t} k_ik."""
        return np.cumsum(self.hold[:, ::-1], axis=1)[:, ::-1]

    def sales_upper(self) -> np.ndarray:
        """(n × T) a bound on sales in each period that no optimum exceeds (units).

        The cap, the revenue peak (a + Σ holding to the end)/(2b) (selling beyond it loses more
        revenue than holding the unit to the end costs) where b > 0, and the stock that could
        exist: initial stock plus what each resource's capacity lets be made up to that period.
        """
        with np.errstate(divide="ignore", invalid="ignore"):
            peak = np.where(self.b > 0, (self.a + self.carry_total) / (2 * np.where(self.b > 0, self.b, 1.0)),
                            np.inf)
            make = np.full((self.n, self.T), np.inf)
            for r in range(self.R):
                h = self.usage[:, r]
                per = np.where(h[:, None] > 0, self.capacity[r][None, :] / np.where(h > 0, h, 1.0)[:, None], np.inf)
                make = np.minimum(make, per)
        reach = self.initial[:, None] + np.cumsum(make, axis=1)
        return np.maximum(np.minimum(np.minimum(self.hi, peak), reach), self.lo)

    def can_stop_alone(self) -> np.ndarray:
        """(n,) bool: the product's commitments and final stock can be met from its initial stock alone."""
        return self.lo.sum(axis=1) + self.final <= self.initial * (1 + 1e-12) + 1e-12

    def stock(self, made: np.ndarray, sold: np.ndarray) -> np.ndarray:
        """(n × T) stock at the end of each period, I + Σ_{k≤t} (made − sold) (units)."""
        return self.initial[:, None] + np.cumsum(made - sold, axis=1)

    def used(self, made: np.ndarray, sold: np.ndarray) -> np.ndarray:
        """(R × T) use of each resource in each period (resource units)."""
        S = self.stock(made, sold)
        return self.usage.T @ made + self.stock_usage.T @ S

    def profit(self, made: np.ndarray, sold: np.ndarray, running: np.ndarray) -> float:
        """The horizon's profit of a plan (currency), fixed costs of running products included."""
        S = self.stock(made, sold)
        return float(np.sum(self.a * sold - self.b * sold * sold - self.v * made - self.hold * S)
                     - np.sum(self.F[np.asarray(running, dtype=bool)]))
