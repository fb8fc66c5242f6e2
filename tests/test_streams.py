"""The streams' specifications (tunnelred.inputs.streams) against the documented input format
(docs/input-format.md, the schema users write to), and the watch's reading of runs.csv against
the readers'."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from tunnelred.inputs.readers import KINDS, open_campaign
from tunnelred.inputs.streams import RESERVED_COLUMNS, STREAMS
from tunnelred.live.folder import read_runs_rows, whole_lines

ROOT = Path(__file__).resolve().parents[1]
DOC = (ROOT / "docs" / "input-format.md").read_text(encoding="utf-8")


def _doc_row(first_cell: str) -> list[str]:
    """The cells of the docs' table row whose first cell is ``first_cell``."""
    for line in DOC.splitlines():
        cells = [c.strip() for c in line.strip().strip("|").split("|")]
        if line.startswith("|") and cells[0] == first_cell:
            return cells
    raise AssertionError(f"docs/input-format.md has no table row {first_cell!r}")


@pytest.mark.parametrize("spec", STREAMS, ids=lambda s: s.name)
def test_runs_kinds_needing_each_log_are_the_documented_ones(spec):
    # docs/input-format.md, runs.csv table: "| balance_log | zero, tare; data with a balance |"
    required = _doc_row(spec.log_column)[1].split(";")[0]
    assert {k for k in KINDS if re.search(rf"\b{k}\b", required)} == set(spec.needed_by)


@pytest.mark.parametrize("spec", STREAMS, ids=lambda s: s.name)
def test_each_streams_columns_are_the_documented_ones(spec):
    # docs/input-format.md, CSV logs table: "| tunnel log | `time`; ...; optionally `speed` |"
    config = open_campaign(ROOT / "sample_runs", check_logs=False).config
    documented = _doc_row(f"{spec.name} log")[1]
    plain, _, optional_text = documented.partition("optionally")
    required, optional = spec.columns(config, False)
    fixed_required = {n for n in required if n in spec.fixed}
    fixed_optional = {n for n in optional if n in spec.fixed}
    in_plain = set(re.findall(r"`([^`]+)`", plain))
    in_optional = set(re.findall(r"`([^`]+)`", optional_text))
    assert fixed_required <= in_plain
    # the other q source and a still model's angle are listed before "optionally" in the docs
    assert in_optional <= fixed_optional
    assert fixed_optional <= in_plain | in_optional


def test_reserved_names_include_the_documented_fixed_log_names():
    # docs/input-format.md [instruments.balance] channels: "not a fixed log name such as
    # `time`, `speed`, `T`"
    assert {"time", "speed", "T"} <= set(RESERVED_COLUMNS)
    assert not {"Fx", "tap01", "N1"} & set(RESERVED_COLUMNS)


def test_the_watch_reads_each_run_as_the_readers_do():
    # the watch's rows of the demo's runs.csv name the same logs and the same zero, tare and
    # pressure_with runs as the readers' RunSpecs (RunSpec.logs, RunSpec.uses)
    folder = ROOT / "sample_runs"
    campaign = open_campaign(folder, check_logs=False)
    text = whole_lines((folder / "runs.csv").read_bytes()).decode("utf-8-sig")
    _, rows = read_runs_rows(folder, text)
    assert [r.run for r in rows] == list(campaign.runs)
    for row in rows:
        spec = campaign.runs[row.run]
        assert row.needs == spec.uses
        assert row.logs == tuple(spec.logs.values())
        assert row.zeros == spec.zero
