"""Workbooks, CSV folders and sales histories that used to be read silently wrong, or with many follow-on errors."""

from __future__ import annotations

import shutil

import pytest
from click.testing import CliRunner

from planner import ScenarioError, load_scenario
from planner.cli.main import main
from planner.scenario.forms.writers import write_scenario
from planner.scenario.loading import read_raw

from .conftest import ROOT, tiny

DEMO = ROOT / "scenarios" / "demo.yaml"


def messages(path) -> list[str]:
    with pytest.raises(ScenarioError) as info:
        load_scenario(path)
    return [str(p) for p in info.value.problems]


@pytest.fixture
def folder(tmp_path):
    return write_scenario(read_raw(DEMO), tmp_path / "demo_csv")


@pytest.mark.parametrize("other", ["Products.csv", "PRODUCTS.csv", "products.CSV", " products.csv"])
def test_two_files_for_one_table_are_refused_naming_both(folder, other):
    shutil.copy(folder / "products.csv", folder / other)
    names = sorted(["products.csv", other])
    assert messages(folder) == [f"file {names[0]} and file {names[1]}: name the same table (file names are compared "
                                "ignoring case) (keep one: merge the rows into one file and delete the other)"]


def test_a_table_file_in_capitals_is_read(folder):
    (folder / "resources.csv").rename(folder / "Resources.CSV")
    s, _ = load_scenario(folder)
    assert len(s.resources) == 5


def test_two_sheets_for_one_table_are_refused():
    """Spreadsheet programs keep sheet names unique ignoring case; other writers may not: then neither is taken."""
    from planner.scenario.forms.tables import Table, from_tables

    tables = {"products": Table("products", ["name"], [(2, ["a"])]), "Products ": Table("Products ", ["name"], [])}
    with pytest.raises(ScenarioError) as info:
        from_tables(tables, lambda t: f"sheet {t}", "x")
    assert [str(p) for p in info.value.problems] == [
        "sheet products and sheet Products : name the same table (table names are compared ignoring case and "
        "surrounding spaces) (keep one: merge the rows into one and delete the other)"]


@pytest.mark.parametrize("sep, name", [(";", "semicolon"), ("\t", "tab")])
def test_a_file_saved_with_another_separator_is_named_once(folder, sep, name):
    """A spreadsheet program in a decimal-comma locale saves 'CSV' with semicolons (and decimal commas)."""
    text = (folder / "products.csv").read_text()
    (folder / "products.csv").write_text(text.replace(",", sep).replace(".", ","))
    res = CliRunner().invoke(main, ["check", str(folder)])
    assert res.exit_code == 2
    assert res.stderr == (f"error: {folder}: 1 problem in the scenario:\n  - file products.csv: this file looks "
                          f"{name}-separated (save it comma-separated: in the spreadsheet program, save as CSV with "
                          "the comma as separator)\n")


def test_a_one_column_file_with_a_semicolon_in_a_value_is_not_mistaken(folder):
    """Only the heading row decides: a value holding ';' in a comma-separated file is just text."""
    rows = (folder / "resources.csv").read_text().splitlines()
    rows[1] = rows[1].replace("saw line", "saw line; bay 2")
    (folder / "resources.csv").write_text("\n".join(rows) + "\n")
    raw = read_raw(folder)
    assert raw["resources"][0]["name"] == "saw line; bay 2"


def test_a_formula_with_no_saved_value_is_named(tmp_path):
    """openpyxl saves formulas without computing them, as other programs writing .xlsx files do."""
    from openpyxl import load_workbook

    path = write_scenario(read_raw(DEMO), tmp_path / "d.xlsx")
    wb = load_workbook(path)
    wb["products"]["D3"] = "=B3*0.4"
    wb.save(path)
    assert messages(path) == [
        "sheet products, row 3, column unit_cost (products[walnut desk].unit_cost): holds a formula (=B3*0.4) with "
        "no saved value (open the workbook in a spreadsheet program and save it, or type the value)"]


def test_a_formula_with_its_saved_value_is_read(tmp_path):
    """A cell whose formula was computed and saved gives its value (written here as the XML a spreadsheet saves)."""
    import re
    import zipfile

    path = write_scenario(read_raw(DEMO), tmp_path / "d.xlsx")
    fixed = tmp_path / "f.xlsx"
    with zipfile.ZipFile(path) as z, zipfile.ZipFile(fixed, "w") as out:
        for item in z.infolist():
            data = z.read(item.filename)
            if item.filename == "xl/worksheets/sheet2.xml":  # products
                data = re.sub(rb'<c r="D3"([^>]*)><v>([^<]*)</v></c>', rb'<c r="D3"\1><f>B3*0.4</f><v>\2</v></c>', data)
                assert b"<f>B3*0.4</f>" in data
            out.writestr(item, data)
    assert load_scenario(fixed)[0] == load_scenario(path)[0]


def test_a_report_workbook_is_recognised(tmp_path):
    """What `planner report` writes (plan.xlsx) is a plan: fed back, it is named as such (it gave 307 errors)."""
    from planner import plan, validate_scenario
    from planner.output.report.context import ReportContext
    from planner.output.report.workbook import write_workbook

    s, _ = validate_scenario(tiny())
    path = write_workbook(ReportContext(plan=plan(s), scenario=s, source="tiny.yaml"), tmp_path / "plan.xlsx")
    expected = (f"error: 1 problem in the scenario:\n  - {path}: this is a report workbook written by planner "
                "report: it holds a plan and the inputs as read, not a scenario (use the scenario file it "
                "came from, named on its Summary sheet, or `planner convert` that file to a workbook)\n")
    for command in ("plan", "check", "report"):
        res = CliRunner().invoke(main, [command, str(path)])
        assert res.exit_code == 2 and res.stderr == expected, command
    from openpyxl import load_workbook

    wb = load_workbook(path)  # with the input sheets deleted, the Summary sheet still tells
    for name in [n for n in wb.sheetnames if n.startswith("Input ")]:
        del wb[name]
    wb.save(path)
    assert CliRunner().invoke(main, ["check", str(path)]).stderr == expected


def test_a_heading_given_twice_in_a_history_is_refused(tmp_path):
    h = tmp_path / "h.csv"
    h.write_text("product,price,volume,Price\nA,10,100,11\nA,12,90,13\nA,14,80,15\n")
    res = CliRunner().invoke(main, ["fit-demand", str(h)])
    assert res.exit_code == 2
    assert ("h.csv, row 1: has the heading 'price' 2 times: columns B ('price') and D ('Price') "
            "(keep one of the columns, or rename the others)") in res.stderr


def test_a_semicolon_history_is_named_once(tmp_path):
    h = tmp_path / "h.csv"
    h.write_text("product;price;volume\nA;10,5;100\nA;12;90\n")
    res = CliRunner().invoke(main, ["fit-demand", str(h)])
    assert res.exit_code == 2
    assert res.stderr.splitlines()[1:] == ["  - h.csv: this file looks semicolon-separated (save it comma-separated: "
                                           "in the spreadsheet program, save as CSV with the comma as separator)"]


def test_history_numbers_follow_the_scenario_rule(tmp_path):
    from planner.scenario.fit import read_history

    h = tmp_path / "h.csv"
    h.write_text("product,price,volume\nA,010,100\nA,1_2,90\nA,1e1,80\nA,inf,70\n")
    data, problems = read_history(h)
    assert [str(p) for p in problems] == [
        "h.csv, row 2, column price: must be a plain decimal number: '010' has a leading zero (got '010') (write 10)",
        "h.csv, row 3, column price: must be a plain decimal number: '1_2' has '_' between its digits (got '1_2') "
        "(write 12)",
        "h.csv, row 5, column price: must be a number >= 0 (got 'inf')"]
    assert data["A"]["price"] == [10.0]
