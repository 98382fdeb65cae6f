"""The README's two set-up commands make and use a virtual environment (so they work where a bare
`pip install` is refused, PEP 668), `.ci/run` runs exactly the README's test command, and `.venv/` is
ignored by git."""

from __future__ import annotations

import re

from .conftest import ROOT


def setup_commands() -> list[str]:
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    section = readme.split("## Set-up", 1)[1].split("\n## ", 1)[0]
    return [block.strip() for block in re.findall(r"```bash\n(.*?)```", section, flags=re.S)]


def test_both_setup_commands_make_and_use_a_virtual_environment():
    commands = setup_commands()
    assert len(commands) == 2
    for c in commands:
        assert "\n" not in c, "one line each"
        assert c.startswith("python3 -m venv .venv && .venv/bin/python -m pip install "), c
        steps = c.split(" && ")
        assert all(s.startswith((".venv/bin/", "python3 -m venv")) for s in steps), c  # nothing outside it
    assert commands[0].endswith(".venv/bin/planner plan scenarios/demo.yaml")
    assert commands[1].endswith(".venv/bin/python -m pytest -q")


def test_ci_runs_exactly_the_readme_test_command():
    ci = (ROOT / ".ci" / "run").read_text(encoding="utf-8")
    last = [line for line in ci.splitlines() if line.strip() and not line.startswith("#")][-1]
    assert last == setup_commands()[1]


def test_venv_is_ignored():
    assert ".venv/" in (ROOT / ".gitignore").read_text(encoding="utf-8").splitlines()
