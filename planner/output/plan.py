"""The Plan: one object that feeds every output (terminal, JSON, tables, reports).

Signs: revenue, variable cost, fixed cost are amounts ≥ 0 (currency per
period); profit = revenue − variable cost − fixed cost; a shadow price is the
profit gained per extra unit of capacity (currency per resource unit, ≥ 0).
"""

from __future__ import annotations

import copy
import json
import platform
from dataclasses import dataclass, field, fields
from typing import Any

from models.economics import Standalone

#: Labour caution shown wherever a plan touches people (shifts, overtime).
LABOUR_NOTE = ("Labour rules on shifts and overtime differ by jurisdiction; local law and company "
               "agreements govern. This plan is decision support for qualified people.")


@dataclass
class ProductPlan:
    name: str
    running: bool
    volume: float  # units
    price: float  # currency / unit, from the price–demand line at this volume
    revenue: float  # currency
    variable_cost: float  # currency
    contribution: float  # currency, revenue − variable cost
    fixed_cost: float  # currency, paid only if running (or must run)
    profit: float  # currency, contribution − fixed cost
    unit: str
    standalone: Standalone
    must_run: bool = False  # may not be shut down: its must_run, or a committed min_volume
    # why it may not be shut down: "must_run", "min_volume" (a commitment), "final_stock" (over periods:
    # more stock to leave than there is at the start), "" if it may
    forced: str = ""
    bought: float | None = None  # units of ``volume`` bought in (variable_cost counts them at buy_cost); None: no buy-in
    # Filled by the decision analysis (planner.analysis.decisions); None where it was not run (then not in JSON):
    # cost_of_reversal (currency, ≥ 0), switch_intercept (currency/unit), contribution_per_bottleneck_unit
    # (currency per bottleneck unit), decision_checked, decision_note
    decision: dict[str, Any] | None = None

    @property
    def sold_price(self) -> float | None:
        """The price the plan charges: "no sale, no price" (None where the volume is 0), in every output."""
        return self.price if self.volume > 0 else None

    def to_dict(self) -> dict[str, Any]:
        d = {f: getattr(self, f) for f in _PRODUCT_FIELDS}
        d["price"] = self.sold_price
        d["standalone"] = self.standalone.to_dict()
        if self.bought is not None:
            d["bought"] = self.bought
        if self.decision is not None:
            d.update(self.decision)
        return d


@dataclass
class ResourcePlan:
    name: str
    capacity: float  # resource unit
    used: float  # resource unit
    utilisation: float  # used / capacity, 0..1 (0 where capacity is 0)
    shadow_price: float  # currency per resource unit, ≥ 0
    binding: bool
    unit: str
    value_of_one_percent: float = 0.0  # currency: shadow price × 1 % of capacity, comparable across units
    # Filled by the capacity analysis (planner.capacity); None where not analysed or unbounded.
    shadow_price_range: list[float | None] | None = None  # [low, high] capacity where the price law holds
    shadow_price_slope: float | None = None  # dλ/dH on that range (currency per unit²)
    range_low_reason: str = ""  # why the range ends below
    range_high_reason: str = ""  # why the range ends above
    range_slates_checked: bool | None = None  # both ends re-checked for a better slate (None: not analysed)
    open: bool = True  # False where the plan closes it (capacity then 0; fixed_cost saved)
    fixed_cost: float = 0.0  # currency: the resource's own fixed cost for the period
    closable: bool = False
    show_fixed: bool = False  # the scenario uses resource fixed costs or product groups: 'open' and 'fixed_cost' shown

    def to_dict(self) -> dict[str, Any]:
        d = {f: getattr(self, f) for f in _RESOURCE_FIELDS}
        if self.show_fixed:
            d["open"] = self.open
            d["fixed_cost"] = self.fixed_cost
        if d["shadow_price_range"] is not None:
            d["shadow_price_range"] = list(d["shadow_price_range"])
        return d


@dataclass
class Plan:
    """A solved plan with its certificate; ``profit`` includes the plant-wide fixed cost."""

    scenario: str
    status: str  # optimal | time_limit | infeasible | error
    profit: float  # currency
    bound: float  # currency, certified upper bound on profit
    gap: float  # (bound − profit) / max(|profit|, 1)
    products: list[ProductPlan]
    resources: list[ResourcePlan]
    currency: str = "$"
    period: str = "quarter"
    plant_fixed_cost: float = 0.0
    solver: dict[str, Any] = field(default_factory=dict)
    warnings: list[str] = field(default_factory=list)
    extras: dict[str, Any] = field(default_factory=dict)
    groups: list[GroupPlan] = field(default_factory=list)  # product groups (none: the key is left out)

    @property
    def fixed_paid(self) -> float:
        """Group and resource fixed costs the plan pays (currency; not the plant-wide one)."""
        return sum(g.fixed_cost for g in self.groups if g.running) + \
            sum(r.fixed_cost for r in self.resources if r.open)

    @property
    def bottlenecks(self) -> list[ResourcePlan]:
        """Binding resources, the one whose extra 1 % is worth most first (the bottleneck; independent of units)."""
        return sorted((r for r in self.resources if r.binding), key=lambda r: (-r.value_of_one_percent, -r.shadow_price))

    def to_dict(self) -> dict[str, Any]:
        out = {
            "scenario": self.scenario,
            "status": self.status,
            "profit": self.profit,
            "bound": self.bound,
            "gap": self.gap,
            "currency": self.currency,
            "period": self.period,
            "plant_fixed_cost": self.plant_fixed_cost,
            "products": [p.to_dict() for p in self.products],
            "resources": [r.to_dict() for r in self.resources],
            **({"product_groups": [g.to_dict() for g in self.groups]} if self.groups else {}),
            "solver": self.solver,
            "warnings": self.warnings,
            "note": LABOUR_NOTE,
        }
        out.update(self.extras)
        if "periods" in self.extras:  # a plan over several periods: the months beside each product and resource
            from planner.output.period_json import period_json

            out = period_json(copy.deepcopy(out))
        return out

    def to_json(self) -> str:
        """The plan as JSON text: one key per line, one product or resource per line."""
        return readable_json(self.to_dict())

    def products_frame(self):
        """Products as a pandas DataFrame, one row per product (standalone columns prefixed)."""
        import pandas as pd

        rows = []
        for p in self.products:
            row = {k: v for k, v in p.to_dict().items() if k != "standalone"}
            row.update({f"standalone_{k}": v for k, v in p.standalone.to_dict().items()})
            rows.append(row)
        return pd.DataFrame(rows).set_index("name")

    def resources_frame(self):
        """Resources as a pandas DataFrame, one row per resource."""
        import pandas as pd

        return pd.DataFrame([r.to_dict() for r in self.resources]).set_index("name") if self.resources \
            else pd.DataFrame(columns=["capacity", "used", "utilisation", "shadow_price", "binding", "unit"])


_PRODUCT_FIELDS = [f.name for f in fields(ProductPlan) if f.name not in ("standalone", "bought", "decision")]
_RESOURCE_FIELDS = [f.name for f in fields(ResourcePlan)
                    if f.name not in ("open", "fixed_cost", "closable", "show_fixed")]


@dataclass
class GroupPlan:
    """A product group in the plan: its shared fixed cost is paid if any member runs (currency)."""

    name: str
    running: bool
    fixed_cost: float  # currency, the group's fixed cost (paid only if running)
    products: list[str] = field(default_factory=list)

    def to_dict(self) -> dict[str, Any]:
        return {"name": self.name, "running": self.running, "fixed_cost": self.fixed_cost}


def readable_json(obj: dict[str, Any]) -> str:
    """``obj`` as JSON with its keys one per line and list items one per line.

    Each item is written by the C encoder (``json.dumps`` without indent),
    which is what keeps a 10,000-product plan fast to write; NaN and
    infinity are refused as in strict JSON.
    """
    def one(x: Any) -> str:
        return json.dumps(x, allow_nan=False, default=_json_default, ensure_ascii=False)

    parts = []
    for key, value in obj.items():
        if isinstance(value, list) and value:
            body = ",\n    ".join(one(v) for v in value)
            parts.append(f"  {one(key)}: [\n    {body}\n  ]")
        else:
            parts.append(f"  {one(key)}: {one(value)}")
    return "{\n" + ",\n".join(parts) + "\n}\n"


def _json_default(x: Any) -> Any:
    import numpy as np

    if isinstance(x, np.generic):
        return x.item()
    if isinstance(x, np.ndarray):
        return x.tolist()
    raise TypeError(f"not JSON serialisable: {type(x).__name__}")


def solver_versions() -> dict[str, str]:
    """Versions of the solvers and libraries that made a plan, for reproducibility."""
    from importlib.metadata import PackageNotFoundError, version

    out = {"python": platform.python_version()}
    for pkg in ("highspy", "highspy-extras", "pyomo", "numpy"):
        try:
            out[pkg] = version(pkg)
        except PackageNotFoundError:
            out[pkg] = "not installed"
    return out
