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


# --- names becoming file names (planner.files.file_stems) --------------------------------------------------------
# Windows reserves CON, PRN, AUX, NUL, COM1-9, LPT1-9 (also with an extension, any case) and file systems
# such as NTFS and APFS compare names ignoring case (Microsoft, "Naming Files, Paths, and Namespaces").

import re as _re  # noqa: E402
import socket as _socket  # noqa: E402
import unicodedata as _ud  # noqa: E402

from hypothesis import given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402

from planner.files import WINDOWS_RESERVED, file_stems, remove_stale_temporaries, temp_prefix  # noqa: E402

COLLIDING = [
    "Oak/Bookcase", "oak bookcase", "OAK-BOOKCASE", "oak_bookcase", "oak\\bookcase", " oak bookcase ",
    "oak..bookcase", "Oak Bookcase!", "ＯＡＫ ＢＯＯＫＣＡＳＥ",  # case, separators, punctuation, full-width
    "+++", "***", "", "   ", "…", "漢字", "日本",  # nothing ASCII left: all 'item'
    "A", "a", "Café", "Cafe", "Cafe\u0301", "ﬁne", "fine",  # case, accents (composed or not), ligatures
    "CON", "con", "NUL", "nul.txt", "COM1", "lpt9", "AUX", "PRN", "CON ", "COM¹",  # reserved on Windows
    "..", "../x", "x/..", "/etc/passwd", "C:\\Windows", "a\x00b", "a\nb",  # paths and controls
    "x" * 300, "x" * 300 + "y", "x" * 60, "x" * 59 + "-y",  # long names, equal up to the cut
]


def _safe_and_distinct(names: list[str]) -> None:
    stems = file_stems(names)
    assert len(stems) == len(names)
    folded = [s.casefold() for s in stems]
    assert len(set(folded)) == len(stems), [n for n, s in zip(names, stems) if folded.count(s.casefold()) > 1]
    for s in stems:
        assert _re.fullmatch(r"[a-z0-9][a-z0-9-]*", s), s  # no separators, dots, spaces or non-ASCII
        assert len(s) <= 80, s
        assert s.split(".")[0] not in WINDOWS_RESERVED, s
        assert _ud.normalize("NFC", s) == s


def test_names_that_fold_together_get_files_of_their_own():
    _safe_and_distinct(COLLIDING)
    stems = dict(zip(COLLIDING, file_stems(COLLIDING)))
    assert stems["CON"] != "con" and stems["NUL"] != "nul"
    # A name alone keeps its plain stem; a stem someone else's hash could take is never taken twice.
    assert file_stems(["oak bookcase"]) == ["oak-bookcase"]
    assert file_stems(["A", "a"]) == file_stems(["A", "a"])  # deterministic
    a_hashed = file_stems(["A", "a"])[1]
    _safe_and_distinct(["A", "a", a_hashed, a_hashed.upper()])


@settings(max_examples=300, deadline=None, derandomize=True)
@given(st.lists(st.text(alphabet=st.sampled_from("aA-_ ./\\+*CONULé\u0301x1"), max_size=8), max_size=12))
def test_any_names_give_distinct_safe_stems(names):
    _safe_and_distinct(names)


# --- output paths: special files, folders, unwritable places (exit 2, never exit 5) ------------------------------

def _fifo(path: Path) -> Path:
    os.mkfifo(path)
    return path


def _sock(path: Path):
    s = _socket.socket(_socket.AF_UNIX, _socket.SOCK_STREAM)
    s.bind(str(path))
    return s


def _special_files(tmp_path: Path):
    """(description, path) of each kind of file that is not a regular file or a folder."""
    sock = _sock(tmp_path / "s.json")
    return sock, [("fifo", _fifo(tmp_path / "p.json")), ("device", Path("/dev/null")),
                  ("stdout", Path("/dev/stdout")), ("socket", tmp_path / "s.json")]


def _identity(path: Path) -> tuple[int, int, int]:
    """(device, inode, mode) of the path itself (a link not followed): a replaced file changes it."""
    st_ = os.lstat(path)
    return st_.st_dev, st_.st_ino, st_.st_mode


@pytest.mark.parametrize("command", [
    ["plan", "{demo}", "--json", "{target}"],
    ["demo", "--json", "{target}"],
    ["plan", "{demo}", "--write-model", "{target}"],
    ["sweep", "{demo}", "--resource", "saw line", "--to", "2700", "--steps", "1", "--json", "{target}", "-q"],
    ["sweep", "{demo}", "--resource", "saw line", "--to", "2700", "--steps", "1", "--csv", "{target}", "-q"],
    ["risk", "{demo}", "--samples", "5", "--workers", "0", "--json", "{target}", "-q"],
    ["convert", "{demo}", "{target}.yaml"],
    ["convert", "{demo}", "{target}.xlsx", "--force"],
    ["template", "{target}.xlsx"],
    ["report", "{demo}", "--out", "{target}", "--no-options", "-q"],
    ["risk", "{demo}", "--samples", "5", "--workers", "0", "--charts", "{target}", "-q"],
    ["compare", "{demo}", "--variant", "Saturday shift", "--json", "{target}", "-q"],
    ["compare", "{demo}", "--variant", "Saturday shift", "--out", "{target}", "-q"],
])
def test_special_files_are_refused_not_replaced(tmp_path, demo_path, command):
    sock, specials = _special_files(tmp_path)
    try:
        for kind, target in specials:
            if "{target}.yaml" in command or "{target}.xlsx" in command:
                if kind in ("device", "stdout"):
                    continue
                suffix = ".yaml" if "{target}.yaml" in command else ".xlsx"
                target = target.with_name(target.stem + suffix)
                if kind == "fifo":
                    _fifo(target)
                else:
                    sock2 = _sock(target)
            before = _identity(target)
            args = [a.replace("{demo}", str(demo_path)).replace("{target}.yaml", str(target))
                    .replace("{target}.xlsx", str(target)).replace("{target}", str(target)) for a in command]
            res = CliRunner().invoke(main, args)
            assert res.exit_code == 2, (kind, args, res.output)
            assert str(target) in res.stderr and "Traceback" not in res.output, res.stderr
            assert _identity(target) == before, (kind, target)  # still the pipe, device, socket or link
            if kind == "socket" and ("{target}.yaml" in command or "{target}.xlsx" in command):
                sock2.close()
    finally:
        sock.close()


def test_report_files_that_are_special_inside_the_folder_are_refused(tmp_path, demo_path):
    out = tmp_path / "r"
    out.mkdir()
    _fifo(out / "plan.json")
    res = CliRunner().invoke(main, ["report", str(demo_path), "--out", str(out), "--no-options", "-q"])
    assert res.exit_code == 2, res.output
    assert "plan.json: is a named pipe (FIFO), not a regular file" in res.stderr
    assert sorted(p.name for p in out.iterdir()) == ["plan.json"]  # all or nothing: no chart, no page


@pytest.mark.parametrize("case", ["existing file", "under a file", "unwritable"])
def test_report_out_mistakes_are_bad_input_with_the_fix(tmp_path, demo_path, monkeypatch, case):
    blocker = tmp_path / "notes.txt"
    blocker.write_text("mine")
    out = {"existing file": blocker, "under a file": blocker / "report", "unwritable": tmp_path / "ro" / "r"}[case]
    if case == "unwritable":
        (tmp_path / "ro").mkdir()
        real = os.access
        # Running as root ignores permission bits, so the folder is made unwritable for os.access itself.
        monkeypatch.setattr("planner.files.os.access",
                            lambda p, mode: False if Path(p) == tmp_path / "ro" else real(p, mode))
    res = CliRunner().invoke(main, ["report", str(demo_path), "--out", str(out), "--no-options", "-q"])
    assert res.exit_code == 2, res.output
    expect = {"existing file": f"{blocker}: is a file, not a folder; give a folder for the report (--out)",
              "under a file": f"{out}: cannot be written: {blocker} is a file, not a folder (choose a path "
                              "inside a folder)",
              "unwritable": f"{out}: cannot be written ({tmp_path / 'ro'} is not writable); choose a folder you "
                            "can write to"}[case]
    assert expect in " ".join(res.stderr.split()), res.stderr
    assert blocker.read_text() == "mine"


@pytest.mark.skipif(os.name != "posix" or os.geteuid() == 0, reason="root writes anywhere; covered above")
def test_report_into_a_read_only_folder(tmp_path, demo_path):
    ro = tmp_path / "ro"
    ro.mkdir()
    ro.chmod(0o500)
    try:
        res = CliRunner().invoke(main, ["report", str(demo_path), "--out", str(ro), "--no-options", "-q"])
    finally:
        ro.chmod(0o700)
    assert res.exit_code == 2 and "cannot be written" in res.stderr


def test_a_link_is_followed_to_its_file(tmp_path):
    real = tmp_path / "real.json"
    real.write_text(OLD)
    link = tmp_path / "link.json"
    link.symlink_to(real)
    write_text_atomic(link, "new\n")
    assert link.is_symlink() and real.read_text() == "new\n"


# --- temporary files of killed runs ------------------------------------------------------------------------------

def _dead_pid() -> int:
    child = subprocess.Popen([sys.executable, "-c", "pass"])
    child.wait()
    return child.pid


def test_temporary_files_name_their_target_and_process(tmp_path):
    seen = []
    write_atomic(tmp_path / "plan.json", lambda p: seen.append(p.name) or p.write_text("x"))
    assert seen[0].startswith(f".plan.json.planner-{os.getpid()}-") and seen[0].endswith(".tmp")


def test_stale_temporaries_of_ended_processes_are_removed_on_the_next_write(tmp_path):
    target = tmp_path / "plan.json"
    dead = tmp_path / (temp_prefix(target, _dead_pid()) + "abc123.tmp")
    dead.write_text("half")
    alive = tmp_path / (temp_prefix(target, os.getppid()) + "def456.tmp")  # a running process's
    alive.write_text("busy")
    other = tmp_path / (temp_prefix(tmp_path / "other.json", _dead_pid()) + "x.tmp")  # another target's
    other.write_text("half")
    stranger = tmp_path / ".plan.json.abc.tmp"  # not the planner's naming: never touched
    stranger.write_text("theirs")
    write_text_atomic(target, "{}\n")
    assert target.read_text() == "{}\n"
    assert not dead.exists() and alive.exists() and other.exists() and stranger.exists()
    assert remove_stale_temporaries(tmp_path / "other.json") == [other]


def test_a_killed_writer_leaves_a_temporary_that_the_next_run_removes(tmp_path):
    target = tmp_path / "plan.json"
    target.write_text(OLD)
    code = textwrap.dedent(f"""
        import sys, time
        sys.path.insert(0, {str(ROOT)!r})
        from planner.files import write_atomic

        def slow(p):
            p.write_text("half")
            print("half", flush=True)
            time.sleep(60)

        write_atomic({str(target)!r}, slow)
    """)
    child = subprocess.Popen([sys.executable, "-c", code], stdout=subprocess.PIPE, text=True)
    try:
        assert child.stdout.readline().strip() == "half"
        child.send_signal(signal.SIGKILL)
        child.wait(timeout=10)
    finally:
        if child.poll() is None:
            child.kill()
    left = list(tmp_path.glob(".plan.json.planner-*.tmp"))
    assert len(left) == 1 and f"-{child.pid}-" in left[0].name
    assert target.read_text() == OLD
    write_text_atomic(target, "new\n")
    assert target.read_text() == "new\n" and not list(tmp_path.glob("*.tmp")) and not list(tmp_path.glob(".*.tmp"))


def test_a_pipe_given_as_sweep_json_is_refused_before_it_blocks(tmp_path, demo_path):
    pipe = _fifo(tmp_path / "sweep.json")
    res = CliRunner().invoke(main, ["report", str(demo_path), "--out", str(tmp_path / "r"), "--sweep-json",
                                    str(pipe), "-q"])
    assert res.exit_code == 2
    assert f"{pipe}: is not a regular file (give the path of a sweep JSON file)" in res.stderr
