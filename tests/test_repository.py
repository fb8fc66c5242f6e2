"""The README's quick start and CI agree (common practice: CI runs what the README promises)."""

from __future__ import annotations

import re
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]


def _quick_start_blocks() -> list[str]:
    text = (REPO / "README.md").read_text(encoding="utf-8")
    section = text.split("## Quick start", 1)[1].split("\n## ", 1)[0]
    return re.findall(r"```sh\n(.*?)\n```", section, flags=re.S)


def test_quick_start_is_two_one_line_commands():
    blocks = _quick_start_blocks()
    assert len(blocks) == 2
    assert all("\n" not in block for block in blocks)
    assert "tunnelred reduce sample_runs" in blocks[0] and "--report" in blocks[0]
    assert "pytest" in blocks[1]


def test_ci_runs_exactly_the_readme_test_command():
    ci = (REPO / ".ci" / "run").read_text(encoding="utf-8").strip().splitlines()
    assert ci[-1] == _quick_start_blocks()[1]
