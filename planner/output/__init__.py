"""The Plan and everything that shows it: terminal, JSON, HTML report, workbook, charts.

The file rules every command follows (atomic writes, sets written all or nothing, what may be written,
the output-folder rule, file names made from names) live in :mod:`planner.files` and are re-exported here.
"""

from planner.files import (OutputPathError, check_target, file_stems, inside, make_folder, safe_filename,
                           write_atomic, write_files, write_text_atomic)

__all__ = ["OutputPathError", "check_target", "file_stems", "inside", "make_folder", "safe_filename",
           "write_atomic", "write_files", "write_text_atomic"]
