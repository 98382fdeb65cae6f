"""The command line: a thin layer over the Python API (``planner`` is ``planner.cli:run``)."""

from planner.cli.main import CAPACITY_AUTO_MAX, main, run

__all__ = ["CAPACITY_AUTO_MAX", "main", "run"]
