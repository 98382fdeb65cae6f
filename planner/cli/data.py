"""Commands for data in the planner's own formats: template, convert, fit-demand."""

from __future__ import annotations

import json
from pathlib import Path

import click
from rich.markup import escape
from planner.output.text import table

from planner.errors import EXIT_BAD_INPUT, PlannerError, Problem


class TargetError(PlannerError):
    """An output path that cannot be used (exists, or an unknown form)."""

    exit_code = EXIT_BAD_INPUT


class HistoryError(PlannerError):
    """A sales-history file that cannot be read or fitted; lists every problem."""

    exit_code = EXIT_BAD_INPUT

    def __init__(self, problems: list[Problem], source: str) -> None:
        self.problems = list(problems)
        n = len(self.problems)
        lines = [f"{source}: {n} problem{'s' if n != 1 else ''} in the sales history:"]
        super().__init__("\n".join(lines + [f"  - {p}" for p in self.problems]))


def _check_target(path: Path, force: bool) -> None:
    from planner.scenario.forms.writers import form_of

    from planner.files import check_folder, check_target

    try:
        form = form_of(path)
    except ValueError as e:
        raise TargetError(str(e)) from None
    if form == "csv":
        check_folder(path, "the CSV files")  # a pipe, a device or a file named like a folder: exit 2
    else:
        check_target(path)
    if path.exists() and not force and (path.is_file() or any(path.iterdir())):
        raise TargetError(f"{path} exists; pass --force to overwrite it")


def _g(v: float | None) -> str:
    return "∞" if v is None else f"{v:,.4g}"


def _interval(ci: tuple[float | None, float | None]) -> str:
    """'lo–hi'; '—' where the interval is undefined (fewer than 3 points); ∞ for an open end.

    An interval with a negative or open lower end is written 'lo to hi' ('-∞ to -4.1'), since a dash
    between negative numbers misreads.
    """
    lo, hi = ci
    if lo is None and hi is None:
        return "—"
    if lo is None or lo < 0:
        return f"{'-∞' if lo is None else _g(lo)} to {_g(hi)}"
    return f"{_g(lo)}–{_g(hi)}"


def wrong_sign(f) -> bool:
    """A fitted line whose volume rises with price (the condition of fit.fit_warnings' 'wrong sign')."""
    return f.slope is None or f.slope < 0 or f.dq_dp >= 0


def fit_table(lines, level: float = 0.95) -> Table:
    """The fits as a terminal table: line with intervals, R², n, observed price range, elasticity.

    A wrong-signed slope says so under its interval (the interval holds the estimate, so it is
    negative too): such a line cannot be used in a scenario.
    """
    pct = f"{100 * level:g}%"
    t = table("Price–demand lines fitted: price = intercept − slope × volume")
    for col in ("product", f"intercept\n{pct} CI", f"slope\n{pct} CI", "R²", "n", "prices\nseen", "ε at\nmean"):
        t.add_column(col, justify="left" if col == "product" else "right", no_wrap=col != "product",
                     min_width=8 if col == "product" else None)
    for f in lines:
        slope = f"{_g(f.slope)}\n{_interval(f.slope_ci)}" + ("\n[red]wrong sign[/]" if wrong_sign(f) else "")
        t.add_row(escape(f.product), f"{_g(f.intercept)}\n{_interval(f.intercept_ci)}",
                  slope, f"{f.r2:.3f}", str(f.n),
                  f"{_g(f.price_min)}–{_g(f.price_max)}",
                  "—" if f.elasticity_at_mean is None else f"{f.elasticity_at_mean:.3g}")
    return t


def _into(scenario: Path, out: Path, lines, history: Path, force: bool) -> list[str]:
    """Write a copy of scenario with each fitted product's line and demand_fit filled in."""
    from planner.scenario.forms.writers import base_dir_of, rebase_history, write_scenario
    from planner.scenario.loading import load_scenario, read_raw

    _check_target(out, force)
    load_scenario(scenario)
    raw = rebase_history(read_raw(scenario), base_dir_of(scenario), base_dir_of(out))
    by_name = {f.product: f for f in lines}
    done, skipped = [], []
    for p in raw.get("products", []):
        f = by_name.get(p.get("name"))
        if f is None:
            continue
        if f.slope is None or f.slope < 0 or f.intercept is None or f.intercept < 0:
            skipped.append(p["name"])
            continue
        p.pop("demand", None)
        p["price_intercept"], p["price_slope"] = f.intercept, f.slope
        fit = f.demand_fit()
        if fit:
            fit["source"] = history.name
            p["demand_fit"] = fit
        else:
            p.pop("demand_fit", None)
        done.append(p["name"])
    write_scenario(raw, out)
    notes = [f"{out}: fitted lines written for {', '.join(done) or 'no product'}"]
    if skipped:
        notes.append(f"not written (wrong sign or negative intercept): {', '.join(skipped)}")
    return notes


def register(main: click.Group) -> None:
    """Add the data commands to the CLI."""
    from planner.cli.main import FiniteFloat, console, friendly

    @main.command("template")
    @click.argument("path", type=click.Path(path_type=Path))
    @click.option("--force", is_flag=True, help="Overwrite an existing file.")
    @click.option("--debug", is_flag=True, help="Show the full traceback on errors.")
    @friendly
    def template_cmd(path: Path, force: bool, debug: bool) -> None:
        """Write an empty, annotated scenario workbook PATH.xlsx to fill in."""
        from planner.scenario.forms.xlsx import write_template

        if path.suffix.lower() != ".xlsx":
            raise TargetError(f"{path}: the template is a workbook; name it with .xlsx")
        _check_target(path, force)
        write_template(path)
        console.print(f"template written to {path}: fill in the sheets (hover a heading for its meaning), "
                      f"then: planner plan {path}")

    @main.command("convert")
    @click.argument("source", type=click.Path(path_type=Path))
    @click.argument("target", type=click.Path(path_type=Path))
    @click.option("--wide-usage", is_flag=True, help="Write usage as a matrix (one column per resource).")
    @click.option("--force", is_flag=True, help="Overwrite an existing file or non-empty folder.")
    @click.option("--debug", is_flag=True, help="Show the full traceback on errors.")
    @friendly
    def convert_cmd(source: Path, target: Path, wide_usage: bool, force: bool, debug: bool) -> None:
        """Convert a scenario between YAML, .xlsx and a folder of CSV files (validated first; lossless).

        The form of TARGET follows its name: .yaml/.yml, .xlsx, or a folder.
        """
        from planner.scenario.forms.writers import base_dir_of, rebase_history, write_scenario
        from planner.scenario.loading import load_scenario, read_raw

        _check_target(target, force)
        scenario = load_scenario(source)[0]
        if target.suffix.lower() not in (".yaml", ".yml"):
            from planner.scenario.periods import refuse_periods

            refuse_periods(scenario, "convert to a workbook or CSV folder", "convert to .yaml, or leave periods out")
        raw = rebase_history(read_raw(source), base_dir_of(source), base_dir_of(target))
        write_scenario(raw, target, wide_usage=wide_usage)
        console.print(f"{source} → {target}")

    @main.command("fit-demand")
    @click.argument("history", type=click.Path(path_type=Path))
    @click.option("--json", "json_path", type=click.Path(path_type=Path), default=None,
                  help="Write the fits as JSON to this file.")
    @click.option("--product", "products", multiple=True, metavar="NAME", help="Fit only this product (repeatable).")
    @click.option("--regress", type=click.Choice(["volume-on-price", "price-on-volume"]), default="volume-on-price",
                  show_default=True, help="Which way the least squares runs (see planner.fit).")
    @click.option("--level", type=FiniteFloat(0.5, 0.999, why="a confidence level below 0.5 is no confidence, "
                                                          "and 1 would make every interval infinite"),
                  default=0.95, show_default=True, help="Confidence level of the intervals, from 0.5 to 0.999.")
    @click.option("--into", "scenario", type=click.Path(path_type=Path), default=None, metavar="SCENARIO",
                  help="Also write SCENARIO with the fitted lines and their uncertainty filled in ...")
    @click.option("--out", type=click.Path(path_type=Path), default=None, metavar="PATH",
                  help="... to this path (any form).")
    @click.option("--force", is_flag=True, help="Overwrite --out if it exists.")
    @click.option("--debug", is_flag=True, help="Show the full traceback on errors.")
    @friendly
    def fit_cmd(history: Path, json_path: Path | None, products: tuple[str, ...], regress: str, level: float,
                scenario: Path | None, out: Path | None, force: bool, debug: bool) -> None:
        """Fit each product's price–demand line from HISTORY.csv (product, price, volume[, period]).

        Reports intercept and slope with confidence intervals, R², n and the prices seen, and warns
        about wrong signs, poor fits, few points.  Volumes are per planning period.
        """
        from planner.scenario.fit import fit_history
        from planner.files import write_text_atomic

        if (scenario is None) != (out is None):
            raise TargetError("--into and --out go together")
        if not history.exists():
            raise HistoryError([Problem(str(history), "no such file", "check the path")], str(history))
        lines, problems, unfit = fit_history(history, method=regress, level=level, products=list(products) or None)
        if problems or not lines:
            raise HistoryError(problems + unfit or [Problem(str(history), "has no rows to fit")], str(history))
        console.print(fit_table(lines, level))
        for f in lines:
            for w in f.warnings:
                console.print(f"[yellow]warning:[/] {escape(f.product)}: {escape(w)}")
        for u in unfit:
            console.print(f"[yellow]warning:[/] not fitted: {escape(str(u))}")
        console.print(f"[dim]{regress}; intervals at {100 * level:g}%; the planner warns when a plan prices "
                      "outside the prices seen.[/]")
        if json_path:
            doc = {"history": str(history), "method": regress, "level": level,
                   "products": [f.to_dict() for f in lines]}
            write_text_atomic(json_path, json.dumps(doc, indent=2, allow_nan=False))
            console.print(f"[dim]fits written to {json_path}[/]")
        if scenario is not None:
            for note in _into(scenario, out, lines, history, force):
                console.print(note)
