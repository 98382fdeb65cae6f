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
                 options: list[dict[str, Any]] | None = None, options_source: str = "",
                 generated: datetime | None = None) -> ReportContext:
    """Gather a report's inputs; nothing is solved here.

    ``options``: the options' values (default: ``plan.extras['options']``, from the capacity
    analysis); ``options_source`` says where they came from.  The analyses that fill them in
    are run before, by :func:`planner.analysis.replan.report_context`.
    """
    if options is None:
        options = plan.extras.get("options")
        options_source = "capacity analysis" if options else ""
    ctx = ReportContext(plan=plan, scenario=scenario, source=str(source), sha256=file_sha256(source) if source else "",
                        options=list(options or []), options_source=options_source,
                        sweep=sweep or plan.extras.get("sweep"))
    if generated is not None:
        ctx.generated = generated
    return ctx
