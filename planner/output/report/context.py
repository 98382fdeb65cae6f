"""What a report is made from: the Plan, the Scenario, where it came from, and the optional analyses.

Every output (HTML, workbook, charts) reads one :class:`ReportContext`, so
they cannot disagree.  Options come from ``plan.extras['options']`` (the
capacity analysis) unless given; the analyses themselves run before, in
:func:`planner.analysis.replan.report_context`.
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
    risk: dict[str, Any] | None = None
    """The risk summary (``RiskResult.to_dict()``) when the report was asked for one, else None."""
    risk_result: Any = None
    """The risk result itself (its samples draw the risk charts), or None."""

    @property
    def currency(self) -> str:
        return self.plan.currency

    @property
    def best_option(self) -> dict[str, Any] | None:
        """The option with the largest net gain (currency per period), or None if there are none."""
        valued = [o for o in self.options if o.get("net_gain") is not None]
        return max(valued, key=lambda o: o["net_gain"]) if valued else None

    @property
    def paying_option(self) -> dict[str, Any] | None:
        """The best option if it pays (adds more profit than it costs), else None: no option pays."""
        best = self.best_option
        return best if best is not None and option_pays(best, self.plan.profit) else None

    def option_rate(self, o: dict[str, Any]) -> tuple[float | None, str]:
        """(cost per unit, the unit) of an option usable in part; (None, '') for an all-or-nothing one."""
        if o.get("kind") != "part":
            return None, ""
        adds = o.get("adds") or {}
        units = {r.name: r.unit for r in self.scenario.resources}
        found = {units.get(k, "") for k in adds}
        unit = found.pop() if len(found) == 1 else ""
        rate = o.get("cost_per_unit")
        if rate is None:
            spec = next((x for x in self.scenario.options if x.name == o.get("name")), None)
            rate = spec.cost_per_unit if spec is not None else None
        if rate is None and o.get("used") and adds:
            rate = o.get("cost", 0.0) / (o["used"] * sum(adds.values()))
        return rate, unit

    def for_display(self) -> ReportContext:
        """This context with every text in it made safe to show (:func:`planner.output.text.display_copy`:
        control and invisible characters written as escapes); the numbers are the same objects."""
        from planner.output.text import display_copy

        return display_copy(self)

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


def option_pays(option: dict[str, Any], profit: float = 0.0) -> bool:
    """True if an option's net gain is positive beyond rounding (its 'pays' flag where the analysis gives
    one; else net gain > 1e-9 × max(|profit|, 1))."""
    if "pays" in option:
        return bool(option["pays"])
    net = option.get("net_gain")
    return net is not None and net > 1e-9 * max(abs(profit), 1.0)


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
                 options: list[dict[str, Any]] | None = None, options_source: str = "",
                 generated: datetime | None = None, risk: Any = None) -> ReportContext:
    """Gather a report's inputs; nothing is solved here.

    ``options``: the options' values (default: ``plan.extras['options']``, from the capacity
    analysis); ``options_source`` says where they came from.  The analyses that fill them in
    are run before, by :func:`planner.analysis.replan.report_context`.  ``risk``: a risk result
    (``planner.analysis.risk.run.RiskResult``) to show, run before as well.
    """
    if options is None:
        options = plan.extras.get("options")
        options_source = "capacity analysis" if options else ""
    ctx = ReportContext(plan=plan, scenario=scenario, source=str(source), sha256=file_sha256(source) if source else "",
                        options=list(options or []), options_source=options_source,
                        sweep=sweep or plan.extras.get("sweep"),
                        risk=risk.to_dict() if risk is not None else None, risk_result=risk)
    if generated is not None:
        ctx.generated = generated
    return ctx
