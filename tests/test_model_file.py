"""The formulation against a checked-in LP file, so an unintended change to models/ shows up.

Regenerate after a deliberate change with
``planner plan tests/cases/small_mix.yaml --write-model tests/cases/small_mix.lp``
and review the diff.
"""

from __future__ import annotations

from planner.api import write_model_file

from .conftest import CASES


def test_lp_file_matches_reference(tmp_path):
    out = tmp_path / "small_mix.lp"
    write_model_file(CASES / "small_mix.yaml", out)
    expected = (CASES / "small_mix.lp").read_text().splitlines()
    got = out.read_text().splitlines()
    assert got == expected
