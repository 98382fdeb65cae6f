"""What a fixed plan earns under each sample, and the model data of each sample.

Economics of a plan under a sample (made to order, within the plan):

- The plan sets each running product's price p_i = a_i − b_i·D_i and plans to make
  D_i.  Under a sample's line (a_s, b_s) the demand at that price is
  Q_i = (a_s − p_i)/b_s, and the plant sells and makes clip(Q_i, 0, D_i): it
  never makes more than planned, nor more than sells.  A product whose
  scenario slope is 0 takes the market price: it sells its planned D_i at the
  sample's price a_s − b_s·D_i.
- Committed volumes are part of the same demand line in the model, so they are
  treated the same way (a sample with weak demand sells less than the commitment).
- If a sampled capacity cannot hold the volumes, every product's volume is cut
  by the same factor θ = min_r H_r / used_r (≤ 1), so the tightest limit just
  fits (a proportional cut, not a re-plan).
- Variable cost is paid on the volume made (= sold); each product's fixed cost
  as in the plan (if running, or must run); the plant-wide fixed cost always.

profit_s = Σ_i (price_i − v_s,i)·sold_i − Σ_i F_i·running_i − plant fixed cost   (currency per period)
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from models.data import MixData

from planner.output.plan import Plan
from planner.analysis.risk.sampling import Samples


def sample_arrays(base: MixData, samples: Samples) -> dict[str, np.ndarray]:
    """Full (N × n) intercepts, slopes, unit costs and (N × m) capacities of the samples."""
    return {"a": samples.full("price_intercept", base.a), "b": samples.full("price_slope", base.b),
            "v": samples.full("unit_cost", base.v), "H": samples.full("capacity", base.capacity)}


def sample_data(base: MixData, a: np.ndarray, b: np.ndarray, v: np.ndarray, H: np.ndarray) -> MixData:
    """The mix data of one sample: the base with these numbers, every other field kept (bounds recomputed)."""
    return replace(base, a=np.asarray(a, float), b=np.asarray(b, float), v=np.asarray(v, float),
                   capacity=np.asarray(H, float))


def evaluate_plan(plan: Plan, base: MixData, arrays: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
    """Profit (N,), volumes sold (N × n) and cut factor θ (N,) of the plan under each sample."""
    price = np.array([p.price for p in plan.products])
    made = np.array([p.volume for p in plan.products])
    fixed = float(sum(p.fixed_cost for p in plan.products)) + plan.plant_fixed_cost
    return evaluate(price, made, fixed, base, arrays)


def evaluate(price: np.ndarray, made: np.ndarray, fixed: float, base: MixData,
             arrays: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
    """As :func:`evaluate_plan` for prices (currency/unit), planned volumes (units) and total fixed cost."""
    a, b, v, H = arrays["a"], arrays["b"], arrays["v"], arrays["H"]
    taker = base.b == 0  # price takers: sell the planned volume at the sample's price
    with np.errstate(divide="ignore", invalid="ignore"):
        demand = np.where(b > 0, (a - price) / np.where(b > 0, b, 1.0), np.where(a >= price, np.inf, 0.0))
    sold = np.clip(demand, 0.0, made)
    sold = np.where(taker, made, sold)
    used = sold @ base.usage_dense().T if len(base.resources) else np.zeros((len(a), 0))
    with np.errstate(divide="ignore", invalid="ignore"):
        room = np.where(used > 0, H / np.where(used > 0, used, 1.0), np.inf)
    theta = np.minimum(1.0, room.min(axis=1, initial=np.inf))
    sold = sold * theta[:, None]
    unit_price = np.where(taker, a - b * sold, price)
    profit = np.sum((unit_price - v) * sold, axis=1) - fixed
    return {"profit": profit, "sold": sold, "theta": theta}
