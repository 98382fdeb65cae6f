"""The command line: a thin layer over the Python API.

Exit codes (every command):

- 0: done (for a plan, read its status: ``optimal`` or ``time_limit``);
- 2: bad input, with the fix: the scenario, an option's value, or an output path that cannot be
  written (a folder where a file belongs, a file where a folder belongs, a pipe, a device, a place
  that is not writable); click's own usage errors are 2 as well;
- 3: the scenario is infeasible (the commitments that cannot fit are named);
- 4: solver trouble (a solver missing or failing, a plan that could not be certified);
- 5: internal error, a bug: rerun with ``--debug`` and report it;
- 130: interrupted (Ctrl-C); files already written are complete, none is half-written.

Other commands register themselves on ``main`` from their own modules (see
``COMMAND_MODULES``), so this file stays small.  Every numeric option is a
:class:`FiniteFloat` (or :class:`WholeNumber`): NaN and infinity are refused
in every spelling, and the range is stated in the message and in ``--help``.
"""

from __future__ import annotations

import functools
import importlib
import math
import sys
from pathlib import Path

import click
from rich.console import Console
from rich.markup import escape

from planner.engine.settings import MAX_GAP
from planner.errors import PlannerError

console = Console()
err_console = Console(stderr=True)

#: Largest scenario (products) for which `plan` adds the capacity analysis unless told otherwise.
CAPACITY_AUTO_MAX = 100

#: Longest --time-limit, in seconds (about 11.6 days): longer is no limit at all; leave the option out instead.
TIME_LIMIT_MAX = 1e6
#: Loosest --gap of a plan (the engine's own limit): the plan is still called optimal at this gap.
GAP_MAX = MAX_GAP
GAP_WHY = ("a plan within this gap is called optimal, so a looser one would promise too little; for a quick "
           "rough plan use --time-limit, which reports the gap it reached")
#: Largest scenario (products) for which `plan` adds the decision analysis unless told otherwise.
DECISIONS_AUTO_MAX = 100

#: Largest capacity a --from / --to may name (the scenario's own limit on any number, schema.MAX_MAGNITUDE).
CAPACITY_MAX = 1e15

#: Modules that add commands to ``main`` when imported (each has ``register(main)``).
COMMAND_MODULES: list[str] = ["planner.cli.data", "planner.cli.report", "planner.cli.risk", "planner.cli.sweep",
                              "planner.cli.compare", "planner.cli.serve"]


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


def plain_number(x: float) -> str:
    """A range end as people write it: 0.1, 1e-12, 1,000,000."""
    return f"{int(x):,}" if float(x).is_integer() and abs(x) < 1e15 else f"{x:g}".replace("e+", "e")


class FiniteFloat(click.FloatRange):
    """A number option that must be finite and inside a range; the message says which range, and why.

    NaN and infinity are refused in every spelling Python's ``float`` reads ('nan', 'NaN', '-nan',
    'inf', '-inf', '+Infinity', and overflowing ones such as '1e999'), as is text that is no number.
    ``min``/``max`` are the range ends (None: open-ended), ``min_open``/``max_open`` exclude them;
    ``why`` is one clause saying why the range is what it is.  ``--help`` shows the range
    (click's ``[0<=x<=0.1]``).
    """

    name = "number"
    noun = "a number"

    def __init__(self, min: float | None = None, max: float | None = None, min_open: bool = False,
                 max_open: bool = False, why: str = "") -> None:
        super().__init__(min=min, max=max, min_open=min_open, max_open=max_open)
        self.why = why

    def wanted(self) -> str:
        """'a number from 0 to 0.1', 'a number above 0 and at most 1,000,000', 'a number of 0 or more'."""
        lo = hi = None
        if self.min is not None:
            lo = f"above {plain_number(self.min)}" if self.min_open else plain_number(self.min)
        if self.max is not None:
            hi = f"below {plain_number(self.max)}" if self.max_open else plain_number(self.max)
        if lo is not None and hi is not None:
            if not self.min_open and not self.max_open:
                return f"{self.noun} from {lo} to {hi}"
            return f"{self.noun} {lo if self.min_open else 'of at least ' + lo} and " \
                   f"{hi if self.max_open else 'at most ' + hi}"
        if lo is not None:
            return f"{self.noun} {lo}" if self.min_open else f"{self.noun} of {lo} or more"
        if hi is not None:
            return f"{self.noun} {hi}" if self.max_open else f"{self.noun} of {hi} or less"
        return f"any finite {self.noun.split(' ', 1)[1]}"

    def _describe_range(self) -> str:  # click's range text in --help ('0<=x<=0.1'), numbers written plainly
        lo = "" if self.min is None else f"{plain_number(self.min)}{'<' if self.min_open else '<='}"
        hi = "" if self.max is None else f"{'<' if self.max_open else '<='}{plain_number(self.max)}"
        return f"{lo}x{hi}"

    def _refuse(self, what: str, param, ctx):
        self.fail(f"{what}; give {self.wanted()}" + (f" ({self.why})" if self.why else ""), param, ctx)

    def parse(self, value, param, ctx) -> float:
        """The value as a finite float (refusing booleans, text that is no number, NaN and infinity)."""
        if isinstance(value, bool):
            self._refuse(f"{value!r} is not a number", param, ctx)
        if isinstance(value, (int, float)):
            x, shown = float(value), repr(value)
        else:
            shown = repr(str(value))
            try:
                x = float(str(value).strip())
            except ValueError:
                self._refuse(f"{shown} is not a number", param, ctx)
        if not math.isfinite(x):
            self._refuse(f"{shown} is not a finite number (NaN and infinity are refused)", param, ctx)
        return x

    def in_range(self, x: float) -> bool:
        lo_ok = self.min is None or (x > self.min if self.min_open else x >= self.min)
        hi_ok = self.max is None or (x < self.max if self.max_open else x <= self.max)
        return lo_ok and hi_ok

    def convert(self, value, param, ctx):
        x = self.parse(value, param, ctx)
        if not self.in_range(x):
            self._refuse(f"{plain_number(x)} is out of range", param, ctx)
        return x


class WholeNumber(FiniteFloat):
    """A whole-number option with a range (counts, seeds): FiniteFloat's checks, and no fractions.

    Accepts whole numbers written as such ('1000') or as a float that is whole ('1e3', '1000.0').
    """

    name = "integer"
    noun = "a whole number"

    def convert(self, value, param, ctx):
        if isinstance(value, int) and not isinstance(value, bool):
            n = value
        else:
            try:
                n = int(str(value).strip())
            except ValueError:
                x = self.parse(value, param, ctx)
                if not x.is_integer():
                    self._refuse(f"{value!r} is not a whole number", param, ctx)
                n = int(x)
        if not self.in_range(n):
            self._refuse(f"{n:,} is out of range", param, ctx)
        return n


def gap_option(default: float = 1e-4, what: str = "Certified relative gap at which to stop"):
    """The --gap option of a command that plans (the same range and reason everywhere)."""
    return click.option("--gap", "rel_gap", type=FiniteFloat(0, GAP_MAX, why=GAP_WHY), default=default,
                        show_default=True,
                        help=f"{what}: (bound − profit) / max(|profit|, 1), from 0 to {GAP_MAX:g} (a plan is "
                             "called optimal within it, so a looser one would promise too little).")


def time_limit_option():
    """The --time-limit option (seconds, above 0, finite)."""
    return click.option("--time-limit", type=FiniteFloat(0, TIME_LIMIT_MAX, min_open=True,
                                                         why="leave the option out for no limit"),
                        default=None, metavar="SECONDS",
                        help="Stop with the best plan found and its certified gap (seconds, above 0, at most "
                             f"{plain_number(TIME_LIMIT_MAX)}; leave it out for no limit).")


def solve_options(func):
    """Options shared by every command that solves."""
    func = click.option("--debug", is_flag=True, help="Show the full traceback on errors.")(func)
    func = click.option("--quiet", "-q", is_flag=True, help="Print nothing but errors.")(func)
    func = time_limit_option()(func)
    func = gap_option()(func)
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
@click.option("--decisions/--no-decisions", "decisions", default=None,
              help="Add (or skip) what each product's run/stop decision is worth (cost of reversal, the price "
                   "intercept where it flips, contribution per bottleneck unit); by default added for scenarios "
                   f"of up to {DECISIONS_AUTO_MAX} products within a few seconds, --decisions computes them all.")
@solve_options
@friendly
def plan_cmd(scenario: Path, json_path: Path | None, no_standalone: bool, write_model: Path | None,
             rel_gap: float, time_limit: float | None, solver: str | None, quiet: bool, debug: bool,
             choose_options: bool = False, capacity: bool | None = None, decisions: bool | None = None) -> None:
    """Plan the optimal product mix of SCENARIO (YAML, .xlsx workbook or folder of CSV files)."""
    from planner.api import plan
    from planner.files import write_text_atomic
    from planner.output.terminal import print_plan

    if write_model:
        from planner.api import write_model_file
        from planner.scenario.loading import load_scenario as _load
        from planner.scenario.periods import refuse_periods

        refuse_periods(_load(scenario)[0], "--write-model", "leave --write-model out: the model file is one period's")

        write_model_file(scenario, write_model)
        if not quiet:
            console.print(f"model written to {write_model}")
        return
    import time

    from planner.scenario.loading import load_scenario

    t0 = time.perf_counter()
    deadline = None if time_limit is None else t0 + time_limit  # the whole command, analysis included
    s, warns = load_scenario(scenario)
    left = None if deadline is None else max(deadline - time.perf_counter(), 0.01)
    p = plan(s, rel_gap=rel_gap, time_limit=left, solver=solver)
    p.warnings = list(warns) + p.warnings
    automatic = capacity is None
    if s.periods is not None:  # ranges and option values per period: not yet (refused, never shown wrong)
        if capacity or choose_options:
            from planner.scenario.periods import refuse_periods

            refuse_periods(s, "--capacity / --choose-options", "leave them out")
        capacity, automatic = False, False
        p.warnings.append("shadow-price ranges per resource and period are not computed yet for plans over periods")
    if automatic:
        capacity = choose_options or len(s.products) <= CAPACITY_AUTO_MAX
        if not capacity:
            p.warnings.append(f"shadow-price ranges and option values were skipped for {len(s.products):,} "
                              "products (each needs several re-solves): add --capacity to compute them")
    if capacity:
        from planner.analysis.capacity.analysis import add_capacity_analysis, auto_budget

        add_capacity_analysis(p, s, choose=choose_options, budget=auto_budget(p) if automatic else None,
                              deadline=deadline)
    if decisions is None or decisions:
        from planner.analysis.decisions import add_decision_analysis, decision_budget

        auto = decisions is None
        add_decision_analysis(p, s, rel_gap=rel_gap, budget=decision_budget(p) if auto else None,
                              deadline=deadline, limit=DECISIONS_AUTO_MAX if auto else None)
    chosen = None
    if choose_options:
        left = None if deadline is None else deadline - time.perf_counter()
        if left is None or left > 0:
            chosen = chosen_plan(p, s, rel_gap=rel_gap, time_limit=left, solver=solver)
        else:
            p.warnings.append("the plan with the options chosen is not shown: the time limit is spent")
    if json_path:
        write_text_atomic(json_path, p.to_json())
    if not quiet:
        print_plan(p, console, standalone=not no_standalone, scenario=s, chosen=chosen)
        if json_path:
            console.print(f"[dim]plan written to {json_path}[/]")


def chosen_plan(p, s, **solve):
    """The Plan with the options of ``p.extras['option_pick']`` taken (their capacity added), or None.

    Planned again at the capacities the joint pick gives (each picked option's share × its amounts),
    so its tables are a whole Plan; profit before the options' cost.  The plan with no option
    picked is ``p`` itself.
    """
    from planner.api import plan

    pick = p.extras.get("option_pick")
    if pick is None:
        return None
    if not pick["picked"]:
        return p
    extra: dict[str, float] = {}
    for x in pick["picked"]:
        for r, amount in x["adds"].items():
            extra[r] = extra.get(r, 0.0) + float(amount)
    return plan(s, extra_capacity=extra, **solve)


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
    if s.periods is not None:
        from planner.engine.infeasible_periods import explain_periods

        explain_periods(s, mix_data(s))  # commitments over the periods that cannot fit, by resource and month
    else:
        explain(s, mix_data(s))  # commitments that cannot fit: exit 3 with the conflicts named
    for w in warnings:
        console.print(f"[yellow]warning:[/] {escape(w)}")
    console.print(f"{scenario}: valid — {len(s.products)} products, {len(s.resources)} resources, "
                  f"{len(s.options)} options")


@main.command("demo")
@click.option("--json", "json_path", type=click.Path(path_type=Path), default=None, help="Write the plan as JSON.")
@time_limit_option()
@friendly
def demo_cmd(json_path: Path | None, time_limit: float | None) -> None:
    """Plan the shipped demo scenario (a try-it command)."""
    from planner.api import plan
    from planner.files import write_text_atomic
    from planner.output.terminal import print_plan

    from planner.scenario.loading import load_scenario

    path = demo_path()
    console.print(f"[dim]scenario: {path}[/]")
    s, warns = load_scenario(path)
    p = plan(s, time_limit=time_limit)
    p.warnings = list(warns) + p.warnings
    if json_path:
        write_text_atomic(json_path, p.to_json())
    print_plan(p, console, scenario=s)


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
