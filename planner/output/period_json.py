"""The JSON layout of a plan over several periods (see :mod:`planner.output.periods`)."""

from __future__ import annotations

from typing import Any


def period_json(out: dict[str, Any]) -> dict[str, Any]:
    """Lay a plan dict's ``periods`` extras out by the contract (see the module docstring); others unchanged."""
    months = out.get("periods")
    if not isinstance(months, dict):
        return out
    out["periods"] = months["names"]
    for p in out["products"]:
        p["holding_cost"] = months["holding"][p["name"]]
        p["periods"] = months["products"][p["name"]]
    for r in out["resources"]:
        r["periods"] = months["resources"][r["name"]]
    return out
