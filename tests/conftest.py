"""Shared fixtures: paths to the published cases, the demo, and small scenario builders."""

from __future__ import annotations

from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
CASES = Path(__file__).resolve().parent / "cases"


def have_scip() -> bool:
    try:
        import pyscipopt  # noqa: F401
    except ImportError:
        return False
    return True


needs_scip = pytest.mark.skipif(not have_scip(), reason="pyscipopt (SCIP) is not installed: pip install -e '.[test]'")


@pytest.fixture(scope="session")
def demo_path() -> Path:
    return ROOT / "scenarios" / "demo.yaml"


@pytest.fixture(scope="session")
def demo_plan(demo_path):
    from planner import plan

    return plan(demo_path, rel_gap=1e-6)


def tiny(**product_overrides) -> dict:
    """A one-product, one-resource raw scenario with overrides on the product."""
    product = {"name": "widget", "price_intercept": 100.0, "price_slope": 0.5, "unit_cost": 40.0,
               "usage": {"press": 1.0}}
    product.update(product_overrides)
    return {"name": "tiny", "products": [product], "resources": [{"name": "press", "capacity": 1000.0, "unit": "h"}]}
