"""Errors a user can cause, each carrying every problem found, location first."""

from __future__ import annotations

from dataclasses import dataclass

#: Exit codes of the command line, one per kind of outcome.
EXIT_OK = 0
EXIT_BAD_INPUT = 2
EXIT_INFEASIBLE = 3
EXIT_SOLVER = 4


@dataclass(frozen=True)
class Problem:
    """One thing wrong with the input: where, what, and how to fix it."""

    where: str
    message: str
    fix: str = ""

    def __str__(self) -> str:
        text = f"{self.where}: {self.message}" if self.where else self.message
        return f"{text} ({self.fix})" if self.fix else text


class PlannerError(Exception):
    """Base class for errors reported to the user without a traceback."""

    exit_code = EXIT_SOLVER


class ScenarioError(PlannerError):
    """The scenario cannot be read or is not valid; lists every problem."""

    exit_code = EXIT_BAD_INPUT

    def __init__(self, problems: list[Problem], source: str = "") -> None:
        self.problems = list(problems)
        self.source = source
        head = f"{source}: " if source else ""
        count = len(self.problems)
        lines = [f"{head}{count} problem{'s' if count != 1 else ''} in the scenario:"]
        lines += [f"  - {p}" for p in self.problems]
        super().__init__("\n".join(lines))


class InfeasibleError(PlannerError):
    """The commitments cannot all be met within the limits."""

    exit_code = EXIT_INFEASIBLE

    def __init__(self, conflicts: list[str]) -> None:
        self.conflicts = list(conflicts)
        lines = ["The scenario is infeasible: its commitments cannot all be met."]
        lines += [f"  - {c}" for c in self.conflicts]
        super().__init__("\n".join(lines))


class SolverError(PlannerError):
    """The solver is missing or failed; the message says what to install or try."""

    exit_code = EXIT_SOLVER
