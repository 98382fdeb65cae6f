"""Writing output files safely, and keeping them inside the folder the user chose.

Atomic writes: every file is written to a temporary name in the same folder,
flushed to disk, then moved onto its name in one step (``os.replace``).  A run
that fails or is killed half-way leaves any earlier file exactly as it was; at
worst a hidden temporary file is left beside it (never the file itself
half-written).  Temporary files are named ``.NAME.planner-PID-HOST-XXXX.tmp``
(the target's name, the writing process's id and a tag of its host): the next
write of the same target on the same host removes those whose process has
ended.  The new file gets the permissions an ordinary new file would (or
those of the file it replaces), not the temporary file's private ones.
:func:`write_files` writes a set of files so that a failure leaves none of
them changed (every temporary file is complete before the first is moved).

What may be written (:func:`check_target`, used by every writer): a new path,
or an existing regular file (a link is followed to the file it names).  A
folder, a named pipe (FIFO), a device (``/dev/null``, a terminal) or a socket
is refused (OutputPathError, exit 2, naming the path), as is a path under a
file.  Output folders go through :func:`make_folder` (an existing folder, or
one it makes).

Folder rule: a path the user types (``--json plan.json``) is theirs to choose.
A file a command names *inside* a chosen output folder (a report per product,
say) goes through :func:`inside`: the name must be relative, may not contain
'..', and must still resolve (symlinks followed) to a place within the folder.
Names taken from the scenario (product names) become file names only through
:func:`file_stems` (or :func:`safe_filename` for one name), so 'A/B', '../x'
or 'CON' cannot become paths, and two names never share a file.

Spreadsheet cells: :func:`set_cell` is the one way the planner puts a value in
a workbook cell: text is stored as text, never as a formula.
"""

from __future__ import annotations

import hashlib
import os
import re
import socket
import stat
import tempfile
import unicodedata
from collections.abc import Callable, Iterable
from pathlib import Path, PurePath
from typing import Any

from planner.errors import EXIT_BAD_INPUT, PlannerError


class OutputPathError(PlannerError):
    """An output name would leave the chosen folder, or cannot be written."""

    exit_code = EXIT_BAD_INPUT


# --- what may be written ------------------------------------------------------------------------------------------

def _kind(mode: int) -> str:
    if stat.S_ISFIFO(mode):
        return "a named pipe (FIFO)"
    if stat.S_ISCHR(mode) or stat.S_ISBLK(mode):
        return "a device"
    if stat.S_ISSOCK(mode):
        return "a socket"
    return "not a regular file"


def _check_parents(path: Path) -> None:
    """Every existing folder above ``path`` must be a folder (not a file, a pipe or a device)."""
    for up in path.parents:
        try:
            mode = os.stat(up).st_mode
        except FileNotFoundError:
            continue
        except OSError as e:
            raise OutputPathError(f"{path}: cannot be written ({e.strerror or e}); choose another place") from None
        if not stat.S_ISDIR(mode):
            what = "a file" if stat.S_ISREG(mode) else _kind(mode)
            raise OutputPathError(f"{path}: cannot be written: {up} is {what}, not a folder "
                                  "(choose a path inside a folder)")
        return  # the nearest existing folder decides; those above it are folders too


def _device_path(path: Path) -> bool:
    """A path in the system's device or process folders (``/dev/stdout``, ``/proc/self/fd/1``), which
    name streams whatever they resolve to (``/dev/shm``, ordinary shared memory, is not one)."""
    if os.name != "posix":
        return False
    parts = Path(os.path.abspath(path)).parts
    return len(parts) > 2 and (parts[1] == "proc" or (parts[1] == "dev" and parts[2] != "shm"))


def check_target(path: str | Path) -> Path:
    """The file ``path`` really names (links followed), if the planner may write it; else OutputPathError.

    Allowed: a new path whose nearest existing parent is a folder, or an existing regular file.
    """
    given = Path(path)
    if _device_path(given):
        raise OutputPathError(f"{given}: is a device, not a regular file; the planner writes only new or "
                              "regular files (give the path of a file)")
    try:
        mode = os.stat(given).st_mode  # links followed: a link to a pipe is a pipe
    except (FileNotFoundError, NotADirectoryError):  # new (a file above it is named below)
        mode = None
    except OSError as e:
        raise OutputPathError(f"{given}: cannot be written ({e.strerror or e}); choose another path") from None
    if mode is not None:
        if stat.S_ISDIR(mode):
            raise OutputPathError(f"{given}: is a folder; give a file name for the output")
        if not stat.S_ISREG(mode):
            raise OutputPathError(f"{given}: is {_kind(mode)}, not a regular file; the planner writes only new "
                                  "or regular files (give the path of a file)")
    target = Path(os.path.realpath(given)) if given.is_symlink() else given
    _check_parents(target)
    return target


def check_folder(path: str | Path, purpose: str = "the output") -> Path:
    """Refuse (OutputPathError, exit 2) an output folder that cannot be used, without making it: a path
    that is a file, a pipe or a device, one under a file, or one in a place that cannot be written.
    ``purpose`` names what goes there in the message ('the report (--out)')."""
    folder = Path(path)
    try:
        mode = os.stat(folder).st_mode
    except (FileNotFoundError, NotADirectoryError):
        mode = None
    except OSError as e:
        raise OutputPathError(f"{folder}: cannot be used for {purpose} ({e.strerror or e})") from None
    if mode is not None and not stat.S_ISDIR(mode):
        what_is = "a file" if stat.S_ISREG(mode) else _kind(mode)
        raise OutputPathError(f"{folder}: is {what_is}, not a folder; give a folder for {purpose} "
                              "(a new one or an existing one)")
    if mode is None:
        _check_parents(folder)
    nearest = next((p for p in (folder, *folder.parents) if p.exists()), Path("."))
    if not os.access(nearest, os.W_OK | os.X_OK):
        where = "" if nearest == folder else f" ({nearest} is not writable)"
        raise OutputPathError(f"{folder}: cannot be written{where}; choose a folder you can write to")
    return folder


def make_folder(path: str | Path, purpose: str = "the output") -> Path:
    """``path`` as a folder the planner can write into (made if missing, after :func:`check_folder`)."""
    folder = check_folder(path, purpose)
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as e:
        raise OutputPathError(f"{folder}: cannot be made ({e.strerror or e}); choose a folder you can "
                              "write to") from None
    return folder


# --- temporary files ----------------------------------------------------------------------------------------------

#: Characters of the target's name kept in a temporary file's name (file names end at 255 bytes).
TMP_NAME_CHARS = 100


def _host_tag() -> str:
    return hashlib.sha256(socket.gethostname().encode("utf-8", "replace")).hexdigest()[:8]


def temp_prefix(target: Path, pid: int | None = None) -> str:
    """Start of the name of a temporary file for ``target`` written by process ``pid`` (default: this one)."""
    return f".{target.name[:TMP_NAME_CHARS]}.planner-{os.getpid() if pid is None else pid}-{_host_tag()}-"


def _alive(pid: int) -> bool:
    if os.name != "posix":  # no safe probe (os.kill would end the process on Windows): keep its files
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:  # e.g. another user's process
        return True
    return True


def remove_stale_temporaries(target: Path) -> list[Path]:
    """Remove temporary files left beside ``target`` by writers on this host that have ended."""
    pattern = re.compile(re.escape(f".{target.name[:TMP_NAME_CHARS]}.planner-") + r"(\d+)-"
                         + re.escape(_host_tag()) + r"-[^/\\]+\.tmp\Z")
    removed = []
    try:
        entries = list(os.scandir(target.parent))
    except OSError:
        return removed
    for e in entries:
        m = pattern.match(e.name)
        if m is None or int(m.group(1)) == os.getpid() or _alive(int(m.group(1))):
            continue
        try:
            if e.is_file(follow_symlinks=False):
                os.unlink(e.path)
                removed.append(Path(e.path))
        except OSError:
            continue
    return removed


def _default_mode() -> int:
    umask = os.umask(0)
    os.umask(umask)
    return 0o666 & ~umask


def _new_folders(target: Path) -> list[Path]:
    """The folders above ``target`` that do not exist yet, innermost first."""
    out = []
    for up in target.parents:
        if up.exists():
            break
        out.append(up)
    return out


def _temporary(target: Path, path: str | Path) -> Path:
    """A new empty temporary file beside ``target`` (stale ones of ended writers removed first)."""
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
    except OSError as e:
        raise OutputPathError(f"{path}: cannot be written ({e.strerror or e}); choose a folder you can "
                              "write to") from None
    remove_stale_temporaries(target)
    try:
        fd, tmp = tempfile.mkstemp(prefix=temp_prefix(target), suffix=".tmp", dir=target.parent)
    except OSError as e:
        raise OutputPathError(f"{path}: cannot be written ({e.strerror or e}); choose a folder you can "
                              "write to") from None
    os.close(fd)
    return Path(tmp)


def write_files(items: Iterable[tuple[str | Path, Callable[[Path], None]]]) -> list[Path]:
    """Write several files as one step: each ``write(tmp_path)`` fills a temporary file; only when all
    are complete (and on disk) are they moved onto their names.  Every path is checked
    (:func:`check_target`) before anything is made, and a failure before the moves leaves every target
    as it was, with no temporary file and no new folder behind.  Returns the paths written, in order."""
    items = list(items)
    targets = [check_target(path) for path, _ in items]
    made: list[Path] = []
    for t in targets:
        made += [f for f in _new_folders(t) if f not in made]
    staged: list[tuple[Path, Path]] = []
    done = False
    try:
        for (path, write), target in zip(items, targets):
            tmp = _temporary(target, path)
            staged.append((target, tmp))
            write(tmp)
            with open(tmp, "rb+") as fh:  # on disk before the rename, so a crash cannot leave it empty
                os.fsync(fh.fileno())
        for target, tmp in staged:
            # Checked again: a pipe or device may have appeared at the name meanwhile.
            check_target(target)
            os.chmod(tmp, target.stat().st_mode & 0o777 if target.exists() else _default_mode())
        for target, tmp in staged:
            os.replace(tmp, target)
        done = True
    finally:
        if not done:
            for _, tmp in staged:
                if tmp.exists():
                    tmp.unlink()
            for folder in sorted(made, key=lambda f: -len(f.parts)):
                try:
                    folder.rmdir()
                except OSError:
                    continue
    return [t for t, _ in staged]


def write_atomic(path: str | Path, write: Callable[[Path], None]) -> Path:
    """Call ``write(tmp_path)`` then move the temporary file onto ``path`` (see the module docstring)."""
    return write_files([(path, write)])[0]


def write_text_atomic(path: str | Path, text: str) -> Path:
    """Write text (UTF-8) atomically."""
    return write_atomic(path, lambda p: p.write_text(text, encoding="utf-8"))


def write_bytes_atomic(path: str | Path, data: bytes) -> Path:
    """Write bytes atomically."""
    return write_atomic(path, lambda p: p.write_bytes(data))


# --- names inside a folder ----------------------------------------------------------------------------------------

def inside(folder: str | Path, name: str | PurePath) -> Path:
    """``folder / name``, refused (OutputPathError) if ``name`` could lead outside ``folder``."""
    rel = PurePath(name)
    if rel.is_absolute() or rel.drive or rel.root:
        raise OutputPathError(f"output name '{name}' is an absolute path; name files relative to {folder}")
    if ".." in rel.parts:
        raise OutputPathError(f"output name '{name}' contains '..'; files stay inside {folder}")
    base = Path(folder).resolve()
    target = (base / rel).resolve()
    if target != base and base not in target.parents:
        raise OutputPathError(f"output name '{name}' leads outside {folder} (through a link); "
                              "choose another name")
    return target


_UNSAFE = re.compile(r"[^A-Za-z0-9._ -]+")


def safe_filename(text: str, max_chars: int = 100) -> str:
    """A file name made from any text (a product name): no separators, no leading dot, never empty,
    never a name Windows reserves (``CON``, ``NUL``, ``COM1`` ...: a '_' is added)."""
    name = _UNSAFE.sub("_", str(text)).strip(" .")
    name = name[:max_chars].rstrip(" .")
    if _reserved(name):
        name += "_"
    return name or "_"


#: Names Windows reserves for devices, with or without an extension (case does not matter).
WINDOWS_RESERVED = frozenset(["con", "prn", "aux", "nul", "conin$", "conout$"]
                             + [f"{d}{k}" for d in ("com", "lpt") for k in (*"123456789", "¹", "²", "³")])


def _reserved(stem: str) -> bool:
    return stem.split(".")[0].strip(" ").lower() in WINDOWS_RESERVED


#: Longest stem :func:`file_stems` makes before its suffix (ASCII, so well inside any file system's limit).
STEM_CHARS = 60


def file_stem(name: str) -> str:
    """One name as a file-name stem: ASCII lower case, letters and digits parted by '-' ('Oak/Bookcase' ->
    'oak-bookcase'); 'item' if nothing is left; a reserved Windows name gets '-' added."""
    text = unicodedata.normalize("NFKD", str(name))
    text = "".join(ch for ch in text if not unicodedata.combining(ch))
    stem = re.sub(r"[^a-z0-9]+", "-", text.casefold()).strip("-")[:STEM_CHARS].strip("-") or "item"
    return stem + "-" if _reserved(stem) else stem


def _tag(name: str, length: int = 6) -> str:
    return hashlib.sha256(str(name).encode("utf-8", "surrogatepass")).hexdigest()[:length]


def file_stems(names: Iterable[str]) -> list[str]:
    """A file-name stem for each name, never two alike, even where the file system ignores case.

    Each is :func:`file_stem`; where two names fold to the same stem (``A``/``a``, ``+++``/``***``,
    ``oak bookcase``/``OAK-BOOKCASE``) each gets a short hash of its own name added
    (``oak-bookcase-3fa2c1``), so a name keeps its file whatever the other names are.
    The same name given twice gets a counter as well.
    """
    names = [str(n) for n in names]
    plain = [file_stem(n) for n in names]
    count: dict[str, int] = {}
    for s in plain:
        count[s] = count.get(s, 0) + 1
    used: set[str] = set()
    out = []
    for n, s in zip(names, plain):
        cand = s if count[s] == 1 else f"{s}-{_tag(n)}"
        k = 2
        while cand in used or (cand != s and cand in count):  # never take another name's plain stem
            cand = f"{s}-{_tag(n)}-{k}"
            k += 1
        used.add(cand)
        out.append(cand)
    return out


# --- spreadsheet cells --------------------------------------------------------------------------------------------

#: Characters a worksheet cannot hold (XML 1.0 forbids them); written as \\xNN instead.
_NOT_IN_XML = re.compile(r"[\x00-\x08\x0b\x0c\x0e-\x1f\ud800-\udfff\ufffe\uffff]")
#: First characters that make a spreadsheet treat typed text as a formula.
FORMULA_START = ("=", "+", "-", "@", "\t", "\r", "\n")


def _xml_escape(m: re.Match) -> str:
    c = ord(m.group())
    return f"\\x{c:02x}" if c < 0x100 else f"\\u{c:04x}"


def set_cell(ws: Any, row: int, col: int, value: Any) -> Any:
    """Put ``value`` into cell (row, col) of an openpyxl worksheet and return the cell.

    Text is always a text cell (type 's'), never a formula, whatever it starts with; text that a
    spreadsheet would read as a formula when edited (``=``, ``+``, ``-``, ``@``, tab, CR) also gets
    the quote prefix, so editing the cell keeps it text.  Characters a worksheet cannot hold
    (control characters) are written as ``\\xNN``.
    """
    cell = ws.cell(row=row, column=col)
    if isinstance(value, str):
        text = _NOT_IN_XML.sub(_xml_escape, value)
        cell.value = text
        cell.data_type = "s"
        if text.startswith(FORMULA_START):
            cell.quotePrefix = True
    else:
        cell.value = value
    return cell
