"""An unchanged re-run reuses the previous generation's files; a changed input redraws its part.

Each part of a generation (the result files, the figures, the report) records what it was made
from (tunnelred.pipeline.campaign._MADE_FROM). A re-run whose part would come out the same hard
links the previous files into the new generation instead of writing them again; a re-run whose
inputs changed writes the part anew. The campaign is a small synthetic one (tunnelred.demo).
"""

from __future__ import annotations

import json
import os
from pathlib import Path

import numpy as np
import pytest

from tunnelred.pipeline import campaign as pipeline
from tunnelred.pipeline.campaign import reduce_campaign
from tunnelred.products import plotting, report, store


@pytest.fixture
def made(small_campaign) -> Path:
    return small_campaign


@pytest.fixture
def campaign(small_campaign_copy) -> Path:
    return small_campaign_copy


def _reduce(campaign, out, **kw):
    return reduce_campaign(campaign, out, workers=1, progress=False, report=True, **kw)


def _inodes(out: Path) -> dict[str, int]:
    generation = Path(os.path.realpath(out / "current"))
    return {
        p.relative_to(generation).as_posix(): p.stat().st_ino
        for p in generation.rglob("*")
        if p.is_file() and not p.name.startswith(".")
    }


def _forbid(monkeypatch, *what):
    def refuse(*args, **kwargs):
        raise AssertionError("drawn again although its inputs did not change")

    for module, name in what:
        monkeypatch.setattr(module, name, refuse)


def test_unchanged_rerun_carries_every_file(campaign, tmp_path, monkeypatch):
    out = tmp_path / "out"
    _reduce(campaign, out)
    before = _inodes(out)
    assert "report.pdf" in before and any(n.startswith("figures/") for n in before)
    _forbid(
        monkeypatch,
        (plotting, "save_standard_figures"),
        (report, "write_report"),
        (store, "write_results"),
    )
    again = _reduce(campaign, out)
    assert again.from_cache == again.reduced
    # The same files (hard links of the previous generation's), in a new generation.
    assert _inodes(out) == before
    assert len(list((out / ".generations").iterdir())) == 1


def test_fresh_reduction_of_the_same_inputs_carries_too(campaign, tmp_path, monkeypatch):
    # Reduced anew instead of read from the cache, the numbers are the same bit for bit (NaN
    # payloads and signed zeros aside), so the digest is, and nothing is drawn again.
    out = tmp_path / "out"
    first = _reduce(campaign, out)
    _forbid(monkeypatch, (plotting, "save_standard_figures"))
    second = _reduce(campaign, out, fresh=True)
    assert second.from_cache == 0
    assert store.results_digest(first.dataset, first.failures, first.budgets) == (
        store.results_digest(second.dataset, second.failures, second.budgets)
    )


def test_a_new_campaign_file_redraws_only_the_report(campaign, tmp_path, monkeypatch):
    out = tmp_path / "out"
    _reduce(campaign, out)
    before = _inodes(out)
    (campaign / "operator_notes.txt").write_text("model re-taped before R010\n")
    _forbid(monkeypatch, (plotting, "save_standard_figures"), (store, "write_results"))
    _reduce(campaign, out)
    after = _inodes(out)
    assert after["report.pdf"] != before["report.pdf"]
    assert {n: i for n, i in after.items() if n != "report.pdf"} == {
        n: i for n, i in before.items() if n != "report.pdf"
    }


def test_changed_results_redraw_everything(campaign, tmp_path):
    out = tmp_path / "out"
    _reduce(campaign, out)
    before = _inodes(out)
    toml = campaign / "campaign.toml"
    text = toml.read_text(encoding="utf-8")
    toml.write_text(text.replace('title = "', 'title = "Re-run: ', 1), encoding="utf-8")
    _reduce(campaign, out)
    after = _inodes(out)
    assert set(after) == set(before)
    assert all(after[name] != before[name] for name in before)


def test_results_digest_sees_one_changed_value(made, tmp_path):
    result = _reduce(made, tmp_path / "out")
    ds = result.dataset
    changed = ds.copy(deep=True)
    changed["CL"].values[0] = np.nextafter(changed["CL"].values[0], np.inf)
    assert store.results_digest(ds) != store.results_digest(changed)
    renamed = ds.copy(deep=True)
    renamed["CL"].attrs["units"] = "percent"
    assert store.results_digest(ds) != store.results_digest(renamed)
    stamped = ds.copy()
    stamped.attrs["created"] = "1999-01-01T00:00:00+00:00"
    assert store.results_digest(ds) == store.results_digest(stamped)


@pytest.mark.parametrize(
    "names",
    [["../../../outside.png"], ["figures/../../.cache"], "not a list", [7]],
    ids=["climbs-out", "into-cache", "not-a-list", "not-names"],
)
def test_a_planted_record_is_a_miss(campaign, tmp_path, names):
    # OUT is not trusted input: a record naming files outside the generation, or not naming
    # files at all, is ignored and the figures are drawn again; nothing outside is read or
    # written.
    out = tmp_path / "out"
    outside = tmp_path / "outside.png"
    outside.write_bytes(b"not ours")
    _reduce(campaign, out)
    generation = Path(os.path.realpath(out / "current"))
    record = json.loads((generation / pipeline._MADE_FROM).read_text())
    record["figures_files"] = names
    (generation / pipeline._MADE_FROM).write_text(json.dumps(record))
    _reduce(campaign, out)
    figures = sorted(p.name for p in (out / "figures").iterdir())
    assert figures and all(name.endswith(".png") for name in figures)
    assert outside.read_bytes() == b"not ours"
    assert not (out / "current" / "outside.png").exists()
