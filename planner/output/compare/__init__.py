"""``planner compare`` outputs: the terminal table, and with ``--out`` a self-contained page, a workbook
and charts of profit by variant, all read from the comparison's JSON.

    from planner.analysis.compare import compare_variants
    from planner.output.compare import write_comparison
    paths = write_comparison(compare_variants(scenario).to_dict(), "compare/", source="scenarios/demo.yaml")
"""

from __future__ import annotations

import hashlib
import json
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

from planner.output.text import display_copy

__all__ = ["write_comparison"]


def write_comparison(data: dict[str, Any], out_dir: str | Path, source: str | Path = "") -> dict[str, Path]:
    """Write compare.html, compare.xlsx, compare.json and charts/*.png|svg into ``out_dir``, all or nothing.

    Returns the written paths by name ('html', 'xlsx', 'json', 'chart:<key>.png', 'chart:<key>.svg').
    Page, charts and workbook show names with control and invisible characters escaped; the JSON
    keeps them exactly.
    """
    from planner.files import check_target, inside, make_folder, write_files
    from planner.output.compare.book import book_bytes
    from planner.output.compare.charts import comparison_charts
    from planner.output.compare.page import render_page
    from planner.output.report.charts import quiet_glyphs, render

    out = make_folder(out_dir, "the comparison (--out)")
    shown = display_copy(data)
    sha = ""
    if source and Path(source).is_file():
        sha = hashlib.sha256(Path(source).read_bytes()).hexdigest()
    names = [f"charts/{k}.{ext}" for k in ("profit-by-variant", "profit-change") for ext in ("png", "svg")]
    for rel in names + ["compare.html", "compare.xlsx", "compare.json"]:
        check_target(inside(out, rel))  # a link out of the folder or a pipe at a name: refused before drawing
    files: dict[str, tuple[str, bytes]] = {}
    with quiet_glyphs():
        charts = comparison_charts(shown)
        try:
            for ch in charts:
                files[f"chart:{ch.key}.png"] = (f"charts/{ch.key}.png", render(ch, "png"))
                files[f"chart:{ch.key}.svg"] = (f"charts/{ch.key}.svg", ch.svg())
            when = datetime.now(timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
            files["html"] = ("compare.html", render_page(shown, charts, str(source), sha, when).encode("utf-8"))
        finally:
            for ch in charts:
                ch.figure.clear()
    files["xlsx"] = ("compare.xlsx", book_bytes(shown))
    files["json"] = ("compare.json", json.dumps(data, indent=2, allow_nan=False, ensure_ascii=False)
                     .encode("utf-8", "backslashreplace"))
    for rel, _ in files.values():
        inside(out, rel)
    written = write_files([(out / rel, lambda tmp, b=b: tmp.write_bytes(b)) for rel, b in files.values()])
    return dict(zip(files, written))
