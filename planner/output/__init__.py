"""The Plan and everything that shows it: terminal, JSON, HTML report, workbook, charts.

The file rules every command follows (atomic writes, the output-folder rule,
safe file names) live in :mod:`planner.files` and are re-exported here.
"""

from planner.files import OutputPathError, inside, safe_filename, write_atomic, write_text_atomic

__all__ = ["OutputPathError", "inside", "safe_filename", "write_atomic", "write_text_atomic"]
