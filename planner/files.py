"""Writing output files safely, and keeping them inside the folder the user chose.

Atomic writes: every file is written to a temporary name in the same folder,
flushed to disk, then moved onto its name in one step (``os.replace``).  A run
that fails or is killed half-way leaves any earlier file exactly as it was; at
worst a hidden ``.NAME.*.tmp`` file is left beside it (never the file itself
half-written).  The new file gets the permissions an ordinary new file would
(or those of the file it replaces), not the temporary file's private ones.

Folder rule: a path the user types (``--json plan.json``) is theirs to choose.
A file a command names *inside* a chosen output folder (a report per product,
say) goes through :func:`inside`: the name must be relative, may not contain
'..', and must still resolve (symlinks followed) to a place within the folder.
Names taken from the scenario (product names) go through
:func:`safe_filename` first, so 'A/B' or '../x' cannot become paths.
"""

from __future__ import annotations

import os
import re
import tempfile
from collections.abc import Callable
from pathlib import Path, PurePath

from planner.errors import EXIT_BAD_INPUT, PlannerError


class OutputPathError(PlannerError):
    """An output name would leave the chosen folder, or cannot be written."""

    exit_code = EXIT_BAD_INPUT


def _default_mode() -> int:
    umask = os.umask(0)
    os.umask(umask)
    return 0o666 & ~umask


def write_atomic(path: str | Path, write: Callable[[Path], None]) -> Path:
    """Call ``write(tmp_path)`` then move the temporary file onto ``path``."""
    target = Path(path)
    if target.is_dir():
        raise OutputPathError(f"{target}: is a folder; give a file name for the output")
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=target.parent)
    except OSError as e:
        raise OutputPathError(f"{target}: cannot be written ({e.strerror or e})") from None
    os.close(fd)
    tmp_path = Path(tmp)
    try:
        write(tmp_path)
        mode = target.stat().st_mode & 0o777 if target.exists() else _default_mode()
        with open(tmp_path, "rb+") as fh:  # on disk before the rename, so a crash cannot leave it empty
            os.fsync(fh.fileno())
        os.chmod(tmp_path, mode)
        os.replace(tmp_path, target)
    finally:
        if tmp_path.exists():
            tmp_path.unlink()
    return target


def write_text_atomic(path: str | Path, text: str) -> Path:
    """Write text (UTF-8) atomically."""
    return write_atomic(path, lambda p: p.write_text(text, encoding="utf-8"))


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
    """A file name made from any text (a product name): no separators, no leading dot, never empty."""
    name = _UNSAFE.sub("_", str(text)).strip(" .")
    name = name[:max_chars].rstrip(" .")
    return name or "_"
