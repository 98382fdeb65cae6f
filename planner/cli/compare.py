"""``planner compare``: the base plan and named variants (or whole files) side by side (registered on main)."""

from __future__ import annotations

import json
from pathlib import Path

import click



def register(main: click.Group) -> None:
    """Add the ``compare`` command to ``main``."""
    from planner.cli.main import WholeNumber, console, err_console, friendly, gap_option, time_limit_option
    from planner.cli.risk import ADDRESS_EXAMPLE, MAX_WORKERS, check_address, connect

    @main.command("compare")
    @click.argument("scenarios", nargs=-1, required=True, type=click.Path(path_type=Path))
    @click.option("--variant", "variants", multiple=True, metavar="NAME",
                  help="Plan this variant of the scenario (repeat for several; default: every variant).")
    @click.option("--json", "json_path", type=click.Path(path_type=Path), default=None,
                  help="Write the comparison as JSON to this file.")
    @click.option("--out", "out_dir", type=click.Path(path_type=Path), default=None, metavar="DIR",
                  help="Write compare.html, compare.xlsx, compare.json and charts/ (profit by variant) here.")
    @click.option("--workers", type=WholeNumber(0, MAX_WORKERS, why="0 plans in this process without Dask"),
                  default=None,
                  help=f"Worker processes of the local Dask cluster, 0 to {MAX_WORKERS} (default: this process for "
                       "up to 5 variants, else a worker per core; 0: always this process).")
    @click.option("--scheduler", default=None, metavar="ADDRESS", callback=check_address,
                  help=f"Plan the variants on an existing Dask cluster at SCHEME://HOST:PORT (e.g. {ADDRESS_EXAMPLE}).")
    @gap_option(what="Certified relative gap of every plan")
    @time_limit_option()
    @click.option("--quiet", "-q", is_flag=True, help="Print nothing but errors.")
    @click.option("--debug", is_flag=True, help="Show the full traceback on errors.")
    @friendly
    def compare_cmd(scenarios: tuple[Path, ...], variants: tuple[str, ...], json_path: Path | None,
                    out_dir: Path | None, workers: int | None, scheduler: str | None, rel_gap: float,
                    time_limit: float | None, quiet: bool, debug: bool) -> None:
        """Plan SCENARIO and its variants side by side; or compare whole files: compare A.yaml B.xlsx ...

        Variants are listed in the scenario under 'variants:' (see README, "What-if"). With several files
        the first is the base.  The time limit bounds each plan on its own.
        """
        from planner.analysis.compare import CompareError, compare_files, compare_variants
        from planner.files import check_folder, check_target, write_text_atomic
        from planner.output.compare.terminal import print_comparison

        if len(scenarios) > 1 and variants:
            raise CompareError("--variant names a variant of one scenario: give one SCENARIO with --variant, or "
                               "several files without it")
        if out_dir is not None:  # before any solve: an output that cannot be written fails at once
            check_folder(out_dir, "the comparison (--out)")
        if json_path is not None:
            check_target(json_path)
        client = connect(scheduler) if scheduler else None
        try:
            if len(scenarios) == 1:
                from planner.scenario.loading import load_scenario

                s, warns = load_scenario(scenarios[0])
                from planner.scenario.periods import refuse_periods

                refuse_periods(s, "planner compare")
                if not quiet:
                    for w in warns:
                        err_console.print(f"warning: {w}", markup=False, highlight=False)
                comp = compare_variants(s, list(variants) or None, rel_gap=rel_gap, time_limit=time_limit,
                                        workers=workers, client=client, warnings=warns)
            else:
                comp = compare_files(list(scenarios), rel_gap=rel_gap, time_limit=time_limit, workers=workers,
                                     client=client)
        finally:
            if client is not None:
                client.close()
        data = comp.to_dict()
        written = []
        if json_path is not None:
            written.append(write_text_atomic(json_path, json.dumps(data, indent=2, allow_nan=False,
                                                                   ensure_ascii=False)))
        if out_dir is not None:
            from planner.output.compare import write_comparison

            written += list(write_comparison(data, out_dir, source=scenarios[0]).values())
        if not quiet:
            print_comparison(data, console)
            for path in written:
                console.print(f"[dim]written: {path}[/]", highlight=False)
