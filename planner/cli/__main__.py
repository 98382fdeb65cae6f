"""``python -m planner.cli``: the same as the ``planner`` command."""

from planner.cli.main import run

run()
