"""Writing output files safely: to a temporary name in the same folder, then moved into place.

A run that fails or is killed half-way leaves any earlier file as it was.
"""

from __future__ import annotations

import os
import tempfile
from collections.abc import Callable
from pathlib import Path


def write_atomic(path: str | Path, write: Callable[[Path], None]) -> Path:
    """Call ``write(tmp_path)`` then move the temporary file onto ``path``."""
    target = Path(path)
    target.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=target.parent)
    os.close(fd)
    tmp_path = Path(tmp)
    try:
        write(tmp_path)
        os.replace(tmp_path, target)
    finally:
        if tmp_path.exists():
            tmp_path.unlink()
    return target


def write_text_atomic(path: str | Path, text: str) -> Path:
    """Write text (UTF-8) atomically."""
    return write_atomic(path, lambda p: p.write_text(text, encoding="utf-8"))
