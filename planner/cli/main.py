"""The command line: a thin layer over the Python API.

Exit codes (every command):

- 0: done (for a plan, read its status: ``optimal`` or ``time_limit``);
- 2: bad input, with the fix: the scenario, an option's value, or an output path that cannot be
  written (a folder where a file belongs, a file where a folder belongs, a pipe, a device, a place
  that is not writable); click's own usage errors are 2 as well;
- 3: the scenario is infeasible (the commitments that cannot fit are named);
- 4: solver trouble (a solver missing or failing, no plan found in the time allowed);
- 5: internal error, a bug: rerun with ``--debug`` and report it;
- 130: interrupted (Ctrl-C); files already written are complete, none is half-written.

Other commands register themselves on ``main`` from their own modules (see
``COMMAND_MODULES``), so this file stays small.
"""

from __future__ import annotations

import functools
import importlib
import sys
from pathlib import Path

import click
from rich.console import Console
from rich.markup import escape

from planner.errors import PlannerError

console = Console()
err_console = Console(stderr=True)

#: Largest scenario (products) for which `plan` adds the capacity analysis unless told otherwise.
CAPACITY_AUTO_MAX = 100

#: Modules that add commands to ``main`` when imported (each has ``register(main)``).
COMMAND_MODULES: list[str] = ["planner.cli.data", "planner.cli.report", "planner.cli.risk", "planner.cli.sweep"]


def friendly(func):
    """Print a PlannerError's message and exit with its code; --debug shows the traceback."""

    @functools.wraps(func)
    def wrapper(*args, **kwargs):
        debug = kwargs.get("debug", False)
        try:
            return func(*args, **kwargs)
        except PlannerError as e:
            if debug:
                raise
            err_console.print(f"error: {e}", markup=False, highlight=False, soft_wrap=True)
            sys.exit(e.exit_code)
        except KeyboardInterrupt:
            err_console.print("interrupted; files already written are complete, none is half-written")
            sys.exit(130)

    return wrapper


def solve_options(func):
    """Options shared by every command that solves."""
    func = click.option("--debug", is_flag=True, help="Show the full traceback on errors.")(func)
    func = click.option("--quiet", "-q", is_flag=True, help="Print nothing but errors.")(func)
    func = click.option("--time-limit", type=click.FloatRange(min=0, min_open=True), default=None,
                        metavar="SECONDS", help="Stop with the best plan found and its certified gap.")(func)
    func = click.option("--gap", "rel_gap", type=click.FloatRange(min=0), default=1e-4, show_default=True,
                        help="Certified relative gap at which to stop.")(func)
    func = click.option("--solver", default=None, metavar="NAME",
                        help="Hand the mixed-integer QP to another Pyomo solver (e.g. scip).")(func)
    return func


@click.group(context_settings={"help_option_names": ["-h", "--help"], "max_content_width": 100})
@click.version_option(package_name="planner", prog_name="planner")
def main() -> None:
    """Plan a period's product mix on shared work centres and materials."""


@main.command("plan")
@click.argument("scenario", type=click.Path(path_type=Path))
@click.option("--json", "json_path", type=click.Path(path_type=Path), default=None,
              help="Write the plan as JSON to this file.")
@click.option("--no-standalone", is_flag=True, help="Leave out the standalone economics table.")
@click.option("--write-model", type=click.Path(path_type=Path), default=None, metavar="PATH.lp",
              help="Write the mixed-integer QP as an LP file with readable names, and stop.")
@click.option("--choose-options", is_flag=True, help="Also pick the best set of capacity options jointly.")
@click.option("--capacity/--no-capacity", "capacity", default=None,
              help="Add (or skip) the shadow-price ranges and the options' values; by default they are "
                   f"added for scenarios of up to {CAPACITY_AUTO_MAX} products or with --choose-options, "
                   "with about 1 s for re-checking the range ends for better slates.")
@solve_options
@friendly
def plan_cmd(scenario: Path, json_path: Path | None, no_standalone: bool, write_model: Path | None,
             rel_gap: float, time_limit: float | None, solver: str | None, quiet: bool, debug: bool,
             choose_options: bool = False, capacity: bool | None = None) -> None:
    """Plan the optimal product mix of SCENARIO (YAML, .xlsx workbook or folder of CSV files)."""
    from planner.api import plan
    from planner.files import write_text_atomic
    from planner.output.terminal import print_plan

    if write_model:
        from planner.api import write_model_file

        write_model_file(scenario, write_model)
        if not quiet:
            console.print(f"model written to {write_model}")
        return
    from planner.scenario.loading import load_scenario

    s, warns = load_scenario(scenario)
    p = plan(s, rel_gap=rel_gap, time_limit=time_limit, solver=solver)
    p.warnings = list(warns) + p.warnings
    automatic = capacity is None
    if automatic:
        capacity = choose_options or len(s.products) <= CAPACITY_AUTO_MAX
        if not capacity:
            p.warnings.append(f"shadow-price ranges and option values were skipped for {len(s.products):,} "
                              "products (each needs several re-solves): add --capacity to compute them")
    if capacity:
        from planner.analysis.capacity.analysis import add_capacity_analysis, auto_budget

        add_capacity_analysis(p, s, choose=choose_options, budget=auto_budget(p) if automatic else None)
    if json_path:
        write_text_atomic(json_path, p.to_json())
    if not quiet:
        print_plan(p, console, standalone=not no_standalone)
        if json_path:
            console.print(f"[dim]plan written to {json_path}[/]")


@main.command("check")
@click.argument("scenario", type=click.Path(path_type=Path))
@click.option("--debug", is_flag=True, help="Show the full traceback on errors.")
@friendly
def check_cmd(scenario: Path, debug: bool) -> None:
    """Validate SCENARIO and list every problem, without solving."""
    from planner.engine.infeasible import explain
    from planner.scenario.loading import load_scenario
    from planner.scenario.arrays import mix_data

    s, warnings = load_scenario(scenario)
    explain(s, mix_data(s))  # commitments that cannot fit: exit 3 with the conflicts named
    for w in warnings:
        console.print(f"[yellow]warning:[/] {escape(w)}")
    console.print(f"{scenario}: valid — {len(s.products)} products, {len(s.resources)} resources, "
                  f"{len(s.options)} options")


@main.command("demo")
@click.option("--json", "json_path", type=click.Path(path_type=Path), default=None, help="Write the plan as JSON.")
@click.option("--time-limit", type=click.FloatRange(min=0, min_open=True), default=None, metavar="SECONDS",
              help="Stop with the best plan found and its certified gap.")
@friendly
def demo_cmd(json_path: Path | None, time_limit: float | None) -> None:
    """Plan the shipped demo scenario (a try-it command)."""
    from planner.api import plan
    from planner.files import write_text_atomic
    from planner.output.terminal import print_plan

    path = demo_path()
    console.print(f"[dim]scenario: {path}[/]")
    p = plan(path, time_limit=time_limit)
    if json_path:
        write_text_atomic(json_path, p.to_json())
    print_plan(p, console)


def demo_path() -> Path:
    """Path of the demo scenario shipped with the package."""
    here = Path(__file__).resolve().parents[1]  # the planner package
    for candidate in (here / "scenarios" / "demo.yaml", here.parent / "scenarios" / "demo.yaml"):
        if candidate.exists():
            return candidate
    raise click.ClickException("the demo scenario is not installed")


for _name in COMMAND_MODULES:
    importlib.import_module(_name).register(main)


def run() -> None:
    """Entry point: exit code 2 for usage errors too (click's own convention)."""
    try:
        main(standalone_mode=True)
    except SystemExit:
        raise
    except Exception as e:  # pragma: no cover - last resort, never a bare traceback for users
        if "--debug" in sys.argv:
            raise
        err_console.print(f"internal error ({type(e).__name__}: {e}); rerun with --debug and report it",
                          markup=False)
        sys.exit(5)


if __name__ == "__main__":
    run()
