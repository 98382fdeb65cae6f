"""What a report is made from: the Plan, the Scenario, where it came from, and the optional analyses.

Every output (HTML, workbook, charts) reads one :class:`ReportContext`, so
they cannot disagree.  Options come from ``plan.extras['options']`` (the
capacity analysis) when present, otherwise from :func:`replan.value_options`.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

from planner.output.plan import Plan
from planner.scenario.schema import Scenario


@dataclass
class ReportContext:
    plan: Plan
    scenario: Scenario
    source: str = ""
    """Path of the scenario file as given (text)."""
    sha256: str = ""
    """SHA-256 of the scenario file's bytes (hex), '' when planned from an object."""
    generated: datetime = field(default_factory=lambda: datetime.now(timezone.utc))
    options: list[dict[str, Any]] = field(default_factory=list)
    options_source: str = ""
    """'capacity analysis' (from the plan) or 're-solved for this report' (fallback), '' if none."""
    sweep: dict[str, Any] | None = None

    @property
    def currency(self) -> str:
        return self.plan.currency

    @property
    def best_option(self) -> dict[str, Any] | None:
        """The option with the largest net gain (currency per period), or None if there are none."""
        valued = [o for o in self.options if o.get("net_gain") is not None]
        return max(valued, key=lambda o: o["net_gain"]) if valued else None

    @property
    def versions(self) -> dict[str, str]:
        from importlib.metadata import PackageNotFoundError, version

        out = dict(self.plan.solver.get("versions", {}))
        for pkg in ("planner", "matplotlib", "openpyxl"):
            try:
                out.setdefault(pkg, version(pkg))
            except PackageNotFoundError:  # e.g. run from a source tree that was never installed
                continue
        return out


def file_sha256(path: str | Path) -> str:
    """Hex SHA-256 of a file's bytes ('' if it cannot be read, e.g. a folder)."""
    p = Path(path)
    if not p.is_file():
        return ""
    h = hashlib.sha256()
    with p.open("rb") as f:
        for chunk in iter(lambda: f.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def make_context(plan: Plan, scenario: Scenario, source: str | Path = "", sweep: dict[str, Any] | None = None,
                 value_options: bool = True, generated: datetime | None = None, **solve: Any) -> ReportContext:
    """Gather a report's inputs; values the scenario's options by re-solving when the plan has none.

    Where the capacity analysis (``planner.capacity``) is installed and the plan has not been through it,
    it is run first (shadow-price ranges and exact option values); otherwise options are valued by
    :func:`replan.value_options`.
    """
    if value_options and "options" not in plan.extras:
        _capacity_analysis(plan, scenario)
    options = plan.extras.get("options")
    origin = "capacity analysis" if options else ""
    if not options and scenario.options and value_options:
        from planner.analysis.replan import value_options as valuer

        options = valuer(scenario, plan, **solve)
        origin = "re-solved for this report"
    ctx = ReportContext(plan=plan, scenario=scenario, source=str(source), sha256=file_sha256(source) if source else "",
                        options=list(options or []), options_source=origin, sweep=sweep or plan.extras.get("sweep"))
    if generated is not None:
        ctx.generated = generated
    return ctx


def _capacity_analysis(plan: Plan, scenario: Scenario) -> bool:
    """Run the capacity analysis on ``plan`` if that package is present; False where it is not."""
    try:
        from planner.analysis.capacity.analysis import add_capacity_analysis, auto_budget
    except ImportError:
        return False
    add_capacity_analysis(plan, scenario, budget=auto_budget(plan))
    return True
