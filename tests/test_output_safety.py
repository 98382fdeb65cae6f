"""Outputs are never half-written, and names cannot leave the chosen folder."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest
import yaml
from click.testing import CliRunner

from planner.cli.main import main
from planner.files import OutputPathError, inside, safe_filename, write_atomic, write_text_atomic

from .conftest import ROOT, tiny

OLD = '{"old": "plan"}\n'


def test_killed_mid_write_leaves_the_old_file(tmp_path):
    """A child process writing a large file through write_atomic is killed (SIGKILL) half-way."""
    target = tmp_path / "plan.json"
    target.write_text(OLD)
    code = textwrap.dedent(f"""
        import sys, time
        sys.path.insert(0, {str(ROOT)!r})
        from planner.output import write_atomic

        def slow(p):
            with open(p, "w") as fh:
                for i in range(1000):
                    fh.write("x" * 1_000_000)
                    fh.flush()
                    if i == 2:
                        print("half", flush=True)
                    time.sleep(0.05)

        write_atomic({str(target)!r}, slow)
    """)
    child = subprocess.Popen([sys.executable, "-c", code], stdout=subprocess.PIPE, text=True)
    try:
        assert child.stdout.readline().strip() == "half"  # 3 MB written to the temporary file
        temps = list(tmp_path.glob(".plan.json.*.tmp"))
        assert temps and temps[0].stat().st_size >= 3_000_000
        child.send_signal(signal.SIGKILL)
        child.wait(timeout=10)
    finally:
        if child.poll() is None:
            child.kill()
    assert child.returncode == -signal.SIGKILL
    assert target.read_text() == OLD


def test_failed_writer_leaves_old_file_and_no_temporary(tmp_path):
    target = tmp_path / "out.csv"
    target.write_text(OLD)

    def broken(p: Path) -> None:
        p.write_text("half a tab")
        raise RuntimeError("disk full")

    with pytest.raises(RuntimeError):
        write_atomic(target, broken)
    assert target.read_text() == OLD
    assert [p.name for p in tmp_path.iterdir()] == ["out.csv"]


def test_new_file_gets_ordinary_permissions(tmp_path):
    umask = os.umask(0o022)
    try:
        write_text_atomic(tmp_path / "a.txt", "x")
    finally:
        os.umask(umask)
    assert (tmp_path / "a.txt").stat().st_mode & 0o777 == 0o644


def test_failed_plan_leaves_earlier_json(tmp_path):
    """An infeasible run (exit 3) and a bad-input run (exit 2) do not touch an earlier plan file."""
    out = tmp_path / "plan.json"
    out.write_text(OLD)
    infeasible = tmp_path / "inf.yaml"
    infeasible.write_text(yaml.safe_dump(tiny(min_volume=5000)))  # 5,000 h on a 1,000 h press
    bad = tmp_path / "bad.yaml"
    bad.write_text(yaml.safe_dump(tiny(unit_cost="abc")))
    assert CliRunner().invoke(main, ["plan", str(infeasible), "--json", str(out)]).exit_code == 3
    assert CliRunner().invoke(main, ["plan", str(bad), "--json", str(out)]).exit_code == 2
    assert out.read_text() == OLD


@pytest.mark.parametrize("name", ["../escape.json", "a/../../b.json", "/etc/passwd"])
def test_names_cannot_escape_the_folder(tmp_path, name):
    with pytest.raises(OutputPathError):
        inside(tmp_path / "out", name)


def test_symlink_out_of_the_folder_is_refused(tmp_path):
    (tmp_path / "out").mkdir()
    (tmp_path / "out" / "link").symlink_to(tmp_path)
    with pytest.raises(OutputPathError, match="leads outside"):
        inside(tmp_path / "out", "link/x.json")
    assert inside(tmp_path / "out", "sub/x.json") == (tmp_path / "out" / "sub" / "x.json").resolve()


@pytest.mark.parametrize("text, name", [("oak/pine", "oak_pine"), ("../../etc", "_.._etc"), ("..", "_"),
                                        (".hidden", "hidden"), ("Café table", "Caf_ table"), ("", "_")])
def test_safe_filename(text, name):
    assert safe_filename(text) == name


def test_writing_onto_a_folder_is_a_clear_error(tmp_path):
    res = CliRunner().invoke(main, ["demo", "--json", str(tmp_path)])
    assert res.exit_code == 2
    assert "is a folder; give a file name for the output" in res.stderr
