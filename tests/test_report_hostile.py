"""Reports under hostile names and awkward scenarios: text cells stay text, names become distinct files,
a name no report can show raw never stops the report half-way, and the wording says what the numbers say.

Scenarios here are invented; numbers checked by hand are worked out beside each check.
"""

from __future__ import annotations

import dataclasses
import json
import re
from pathlib import Path

import openpyxl
import pytest
import yaml
from click.testing import CliRunner
from rich.console import Console

from planner import load_scenario, plan
from planner.cli.main import main
from planner.output.report import make_context, write_report

from .conftest import tiny

#: Text a spreadsheet reads as a formula when typed (OWASP, "CSV Injection"): =, +, -, @, tab, CR.
FORMULAS = ["=HYPERLINK(\"http://example.invalid\",\"open\")", "+1+1", "-2+3", "@SUM(1)", "=1/0"]


def _scenario_file(tmp_path: Path, raw: dict, name: str = "s.yaml") -> Path:
    f = tmp_path / name
    f.write_text(yaml.safe_dump(raw, allow_unicode=True))
    return f


def _formula_cells(path: Path) -> list[str]:
    wb = openpyxl.load_workbook(path)
    return [f"{ws.title}!{c.coordinate}={c.value!r}" for ws in wb.worksheets for row in ws.iter_rows()
            for c in row if c.data_type == "f"]


def _injection_scenario() -> dict:
    raw = tiny(name=FORMULAS[0], description="=cmd|' /C calc'!A0")
    raw["name"] = "=1+1"
    raw["resources"][0]["name"] = "=press"
    raw["products"][0]["usage"] = {"=press": 1.0}
    for k, n in enumerate(FORMULAS[1:]):
        raw["products"].append({"name": n, "price_intercept": 90.0 + k, "price_slope": 0.5, "unit_cost": 40.0,
                                "usage": {"=press": 1.0}})
    raw["options"] = [{"name": "@overtime", "adds_up_to": {"=press": 50.0}, "cost_per_unit": 5.0}]
    return raw


# --- 1. formula injection -----------------------------------------------------------------------------------------

def test_report_workbook_holds_no_formula_whatever_the_names(tmp_path):
    f = _scenario_file(tmp_path, _injection_scenario())
    res = CliRunner().invoke(main, ["report", str(f), "--out", str(tmp_path / "r"), "-q"])
    assert res.exit_code == 0, res.output
    book = tmp_path / "r" / "plan.xlsx"
    assert _formula_cells(book) == []
    wb = openpyxl.load_workbook(book)
    names = [c.value for c in wb["Products"]["A"][1:]]
    assert names == [FORMULAS[0]] + FORMULAS[1:]  # the names themselves, as text
    assert [c.value for c in wb["Input products"]["A"][1:]] == names
    assert wb["Input usage"]["B1"].value == "=press" and wb["Input usage"]["B1"].data_type == "s"
    # Editing such a cell keeps it text: the quote prefix Excel shows as a leading apostrophe.
    assert all(c.quotePrefix for c in wb["Products"]["A"][1:])
    assert wb["Summary"]["B2"].value == "=1+1" and wb["Summary"]["B2"].quotePrefix


def test_converted_and_template_workbooks_hold_no_formula(tmp_path):
    f = _scenario_file(tmp_path, _injection_scenario())
    out = tmp_path / "c.xlsx"
    assert CliRunner().invoke(main, ["convert", str(f), str(out)]).exit_code == 0
    assert _formula_cells(out) == []
    assert CliRunner().invoke(main, ["template", str(tmp_path / "t.xlsx")]).exit_code == 0
    assert _formula_cells(tmp_path / "t.xlsx") == []


def test_set_cell_keeps_every_text_text():
    from openpyxl import Workbook

    from planner.files import set_cell

    ws = Workbook().active
    texts = FORMULAS + ["\t=1", "\r=1", "a\x07b", "plain", "=", "\ud800"]
    for k, t in enumerate(texts, start=1):
        set_cell(ws, k, 1, t)
    assert all(ws.cell(row=k, column=1).data_type == "s" for k in range(1, len(texts) + 1))
    assert ws["A8"].value == "a\\x07b"  # a worksheet cannot hold the control character: shown escaped
    set_cell(ws, 20, 1, 3.5)
    assert ws["A20"].data_type == "n"


# --- 2. names as file names in a report --------------------------------------------------------------------------

# Names a scenario accepts (they differ by more than case or spacing) that fold to one file name; names that
# differ only in case ("A", "a") are refused by validation, and file_stems keeps even those apart (tested below).
CLASHING = ["Oak/Bookcase", "oak bookcase", "OAK-BOOKCASE", "+++", "***", "A", "\u0391", "CON", "../x",
            "x" * 120 + "y"]


def test_every_product_gets_its_own_chart_file(tmp_path):
    raw = tiny()
    raw["products"] = [{"name": n, "price_intercept": 100.0 + k, "price_slope": 0.5, "unit_cost": 40.0,
                        "usage": {"press": 0.1}} for k, n in enumerate(CLASHING)]
    f = _scenario_file(tmp_path, raw)
    out = tmp_path / "r"
    res = CliRunner().invoke(main, ["report", str(f), "--out", str(out), "--no-options", "-q"])
    assert res.exit_code == 0, res.output
    pngs = sorted((out / "charts").glob("product-*.png"))
    assert len(pngs) == len(CLASHING)
    assert len({p.name.casefold() for p in pngs}) == len(CLASHING)  # distinct where case is ignored too
    html = (out / "report.html").read_text(encoding="utf-8")
    keys = re.findall(r'data-chart="(product-[^"]+)"', html)
    assert sorted(keys) == sorted(p.stem for p in pngs)
    for p in pngs:
        assert p.parent == out / "charts" and re.fullmatch(r"product-[a-z0-9-]+\.png", p.name)


def test_a_link_out_of_the_report_folder_is_refused(tmp_path, demo_path):
    out = tmp_path / "r"
    out.mkdir()
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    (out / "charts").symlink_to(elsewhere)
    res = CliRunner().invoke(main, ["report", str(demo_path), "--out", str(out), "--no-options", "-q"])
    assert res.exit_code == 2 and "leads outside" in res.stderr
    assert list(elsewhere.iterdir()) == []


# --- 3. names no page can show raw; all or nothing --------------------------------------------------------------

HOSTILE = {"oak bookcase": "oak\x07bookcase", "walnut desk": "walnut\x1b]0;pwned\x07desk",
           "pine dresser": "pine\u202edresser", "ash bench": "ash\u200bbench\n",
           "finishing booth": "finishing\x00booth"}


def _renamed(obj, mapping: dict[str, str]):
    """A copy of a Plan / Scenario (dataclasses, pydantic models, dicts, lists) with names replaced,
    as code can build one (model_copy skips validation)."""
    if isinstance(obj, str):
        return mapping.get(obj, obj)
    if isinstance(obj, dict):
        return {_renamed(k, mapping): _renamed(v, mapping) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return type(obj)(_renamed(v, mapping) for v in obj)
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        return dataclasses.replace(obj, **{f.name: _renamed(getattr(obj, f.name), mapping)
                                           for f in dataclasses.fields(obj) if f.init})
    if hasattr(type(obj), "model_fields"):
        return obj.model_copy(update={n: _renamed(getattr(obj, n), mapping) for n in type(obj).model_fields})
    return obj


@pytest.fixture(scope="module")
def hostile(demo_path):
    s, _ = load_scenario(demo_path)
    p = plan(s)
    return _renamed(p, HOSTILE), _renamed(s, HOSTILE)


def test_control_characters_in_names_do_not_stop_the_report(tmp_path, hostile):
    p, s = hostile
    paths = write_report(p, s, tmp_path / "r", context=make_context(p, s))
    assert {"html", "xlsx", "json"} <= set(paths)
    html = (tmp_path / "r" / "report.html").read_text(encoding="utf-8")
    assert not re.search(r"[\x00-\x08\x0b-\x1f\x7f\u200b\u202e]", html)
    assert "oak\\x07bookcase" in html and "walnut\\x1b]0;pwned\\x07desk" in html and "pine\\u202edresser" in html
    for svg in (tmp_path / "r" / "charts").glob("*.svg"):
        assert not re.search(r"[\x00-\x08\x0b\x0c\x0e-\x1f\u202e]", svg.read_text(encoding="utf-8")), svg
    wb = openpyxl.load_workbook(tmp_path / "r" / "plan.xlsx")
    assert wb["Products"]["A2"].value == "oak\\x07bookcase"
    assert wb["Resources"]["A4"].value == "finishing\\x00booth"
    exact = json.loads((tmp_path / "r" / "plan.json").read_text(encoding="utf-8"))
    assert [x["name"] for x in exact["products"]][:3] == [HOSTILE["oak bookcase"], HOSTILE["walnut desk"],
                                                          HOSTILE["pine dresser"]]


def test_the_terminal_shows_control_characters_escaped(hostile):
    from planner.output.terminal import print_plan

    p, _ = hostile
    con = Console(width=120, record=True, color_system=None)
    print_plan(p, con)
    text = con.export_text()
    assert "\x1b" not in text and "\u202e" not in text and "\x07" not in text
    assert "walnut\\x1b]0;pwned\\x07desk" in " ".join(text.split()) or "walnut\\x1b]0;pwned\\x07de" in text


def test_a_failure_while_making_the_report_leaves_the_folder_as_it_was(tmp_path, monkeypatch):
    s, _ = load_scenario(_scenario_file(tmp_path, tiny()))
    p = plan(s)
    out = tmp_path / "r"
    write_report(p, s, out, context=make_context(p, s))
    before = {f: f.read_bytes() for f in out.rglob("*") if f.is_file()}
    p.products[0].name = "renamed"  # a new chart file would appear if anything were written

    def broken(ctx):
        raise RuntimeError("disk full")

    monkeypatch.setattr("planner.output.report.workbook.workbook_bytes", broken)
    with pytest.raises(RuntimeError):
        write_report(p, s.model_copy(update={"products": [s.products[0].model_copy(update={"name": "renamed"})]}),
                     out, context=None)
    after = {f: f.read_bytes() for f in out.rglob("*") if f.is_file()}
    assert after == before  # no chart, page or JSON of the failed run; no temporary file


def test_write_files_moves_nothing_until_every_file_is_complete(tmp_path):
    from planner.files import write_files

    (tmp_path / "a.txt").write_text("old a")

    def fail(p):
        raise OSError("no space left")

    with pytest.raises(OSError):
        write_files([(tmp_path / "a.txt", lambda p: p.write_text("new a")),
                     (tmp_path / "sub" / "b.txt", lambda p: p.write_text("new b")), (tmp_path / "c.txt", fail)])
    assert sorted(x.name for x in tmp_path.iterdir()) == ["a.txt"] and (tmp_path / "a.txt").read_text() == "old a"


# --- 8. options: no option pays; rates of part-usable options ----------------------------------------------------
# One product p = 100 − 0.5·D, v = 40, 1 h per unit on a 40 h press: D = 40, profit 60·40 − 0.5·40² = 1,600 and
# the press's shadow price 60 − 2·0.5·40 = 20 per h.  Overtime up to 40 h at 100 per h: all 40 h give D = 60
# (the unconstrained optimum 60 / (2·0.5)), profit 60·60 − 0.5·60² = 1,800, gain 200, so it breaks even at
# 200 / 40 = 5.00 per h, far below its rate: it is not used.  A 10 h shift for 1,000 gains 1,750 − 1,600 = 150.
# Neither pays.

@pytest.fixture(scope="module")
def no_option_pays(tmp_path_factory):
    raw = tiny(unit="pieces")
    raw["currency"] = "£"
    raw["resources"][0]["capacity"] = 40.0
    raw["options"] = [{"name": "Saturday shift", "adds": {"press": 10.0}, "cost": 1000.0},
                      {"name": "overtime", "adds_up_to": {"press": 40.0}, "cost_per_unit": 100.0}]
    tmp = tmp_path_factory.mktemp("nopay")
    f = _scenario_file(tmp, raw)
    out = tmp / "r"
    res = CliRunner().invoke(main, ["report", str(f), "--out", str(out)], terminal_width=80)
    assert res.exit_code == 0, res.output
    return out, res.output


def test_the_summary_says_plainly_that_no_option_pays(no_option_pays):
    out, _ = no_option_pays
    html = (out / "report.html").read_text(encoding="utf-8")
    summary = re.sub(r"<[^>]+>", " ", html[html.index('id="summary"'):html.index('id="products"')])
    assert "No option pays" in summary and "none of the 2 options valued adds more profit than it costs" in summary
    assert "No capacity option pays" in summary
    assert "overtime" not in summary and "Saturday shift" not in summary  # no option named as the best
    wb = openpyxl.load_workbook(out / "plan.xlsx")
    summary_rows = {r[0].value: r[1].value for r in wb["Summary"].iter_rows(min_row=2)}
    assert summary_rows["best capacity option"] == "no option pays" and summary_rows["its net gain"] is None


def test_options_show_the_rate_and_the_break_even_rate(no_option_pays):
    out, terminal = no_option_pays
    html = (out / "report.html").read_text(encoding="utf-8")
    table = html[html.index('id="options"'):html.index("</section>", html.index('id="options"'))]
    row = re.sub(r"<[^>]+>", "|", table[table.index("overtime"):table.index("</tr>", table.index("overtime"))])
    cells = [c.strip() for c in row.split("|") if c.strip()]
    assert "£100.00 per h" in cells and "£5.00 per h" in cells, cells  # rate, and break-even rate (hand calc)
    assert "£150" in table and "£1,000" in table  # the shift: gain 150 for 1,000 (hand calc)
    flat = " ".join(terminal.split())
    assert "£100.00/h" in flat and "£5.00/h" in flat and "No capacity option pays" in flat
    wb = openpyxl.load_workbook(out / "plan.xlsx")
    head = [c.value for c in wb["Options"][1]]
    rows = {r[0].value: dict(zip(head, (c.value for c in r))) for r in wb["Options"].iter_rows(min_row=2)}
    assert rows["overtime"]["cost per unit"] == 100.0
    assert rows["overtime"]["break-even cost per unit"] == pytest.approx(5.0, abs=1e-6)
    assert rows["Saturday shift"]["break-even cost"] == pytest.approx(150.0, abs=1e-6)


def test_captions_use_the_singular_of_the_unit(no_option_pays):
    out, _ = no_option_pays
    html = (out / "report.html").read_text(encoding="utf-8")
    assert "per pieces" not in html and "per piece;" in html


@pytest.mark.parametrize("unit, per", [("pieces", "piece"), ("kits", "kit"), ("boxes", "box"),
                                       ("batteries", "battery"), ("sheets of board", "sheet of board"),
                                       ("h", "h"), ("kg", "kg"), ("m³", "m³"), ("", "unit"), ("lens", "lens"),
                                       ("glasses", "unit (glasses)"), ("pieces per pallet", "unit (pieces per pallet)"),
                                       ("pcs", "pc")])
def test_per_unit(unit, per):
    """English plurals (common practice): -s, -es after ch/sh/x/z/ss, -ies to -y; plural-only nouns kept."""
    from planner.output.report.fmt import per_unit

    assert per_unit(unit) == per
