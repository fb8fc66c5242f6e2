"""tunnelred.campaign: failure isolation, parallel executors, the per-run cache, interruption.

The campaigns are small (conftest's fixture: a zero, a spin tare and two data runs, one of them
using the tare). Which runs a change must re-reduce is worked out here from runs.csv with pandas,
independently of the engine. Executors are compared with xarray.testing.assert_identical.
"""

from __future__ import annotations

import pickle
import shutil
import sys

import pandas as pd
import pytest
import xarray as xr

from tunnelred import campaign as engine
from tunnelred import reduction
from tunnelred.reduction import RunResult

OUTPUT_FILES = {
    "results.nc",
    "results.csv",
    "provenance.json",
    "failures.csv",
    "budgets.csv",
}


@pytest.fixture
def calls(monkeypatch):
    """Record the runs reduce_run is called for (serial path: the engine runs in this process)."""
    seen: list[str] = []
    real = reduction.reduce_run

    def spy(campaign, run_id, **kwargs):
        seen.append(run_id)
        return real(campaign, run_id, **kwargs)

    monkeypatch.setattr(reduction, "reduce_run", spy)
    return seen


def _reduce(path, out, **kwargs):
    kwargs.setdefault("workers", 1)
    return engine.reduce_campaign(path, out, progress=False, **kwargs)


def _nudge(path):
    """Change one value in a log's first data row, keeping the file valid."""
    lines = path.read_text(encoding="utf-8").splitlines()
    cells = lines[1].split(",")
    cells[1] = repr(float(cells[1]) + 1e-3)
    lines[1] = ",".join(cells)
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


def _users_of(campaign_dir, run):
    """Data runs that use ``run`` as their zero, their tare, or a tare's zero (from runs.csv)."""
    table = pd.read_csv(campaign_dir / "runs.csv", dtype=str, keep_default_na=False)
    ids = lambda text: set(filter(None, text.split(";")))  # noqa: E731
    zeros = {r.run: ids(r.zero) for r in table.itertuples()}
    users = set()
    for r in table[table.kind == "data"].itertuples():
        used = {r.run} | ids(r.zero) | ids(r.tare)
        used |= set().union(*(zeros.get(t, set()) for t in ids(r.tare)))
        if run in used:
            users.add(r.run)
    return users


def _without_time(ds):
    return ds.assign_attrs(created="")


def test_serial_reduces_every_data_run(campaign_dir, tmp_path):
    out = tmp_path / "out"
    res = _reduce(campaign_dir, out)
    assert res.dataset["run"].values.tolist() == ["d1", "d2"]  # zero and tare runs are inputs
    assert (res.reduced, res.from_cache, res.failed) == (2, 0, 0)
    assert OUTPUT_FILES <= {p.name for p in out.iterdir()}
    assert (out / "figures").is_dir()
    assert set(res.outputs) == OUTPUT_FILES
    assert res.flagged == sum(1 for f in res.dataset["flags"].values if f)
    text = res.summary()
    assert "reduced  2 (2 now, 0 from cache)" in text and str(out) in text
    assert "<table" in res._repr_html_() or res.flagged == 0


def test_process_pool_identical_to_serial(campaign_dir):
    serial = _reduce(campaign_dir, None)
    pooled = _reduce(campaign_dir, None, workers=2)
    xr.testing.assert_identical(_without_time(pooled.dataset), _without_time(serial.dataset))
    pd.testing.assert_frame_equal(pooled.budgets, serial.budgets)


def test_dask_local_cluster_identical_to_serial(campaign_dir):
    pytest.importorskip("distributed")
    serial = _reduce(campaign_dir, None)
    distributed = _reduce(campaign_dir, None, workers=2, dask="local")
    xr.testing.assert_identical(_without_time(distributed.dataset), _without_time(serial.dataset))


def test_dask_missing_says_how_to_install(campaign_dir, monkeypatch):
    monkeypatch.setitem(sys.modules, "distributed", None)  # makes the import fail
    with pytest.raises(ImportError, match=r'pip install "tunnelred\[dask\]"'):
        _reduce(campaign_dir, None, workers=2, dask="local")


def test_unchanged_rerun_reduces_nothing(campaign_dir, tmp_path, calls):
    first = _reduce(campaign_dir, tmp_path)
    assert sorted(calls) == ["d1", "d2"]
    calls.clear()
    again = _reduce(campaign_dir, tmp_path)
    assert calls == []
    assert (again.reduced, again.from_cache) == (2, 2)
    xr.testing.assert_identical(_without_time(again.dataset), _without_time(first.dataset))


@pytest.mark.parametrize("log, run", [("logs/d2_all.csv", "d2"), ("logs/t1_bal.csv", "t1")])
def test_changed_log_rereduces_the_runs_that_use_it(campaign_dir, tmp_path, calls, log, run):
    _reduce(campaign_dir, tmp_path)
    calls.clear()
    _nudge(campaign_dir / log)
    res = _reduce(campaign_dir, tmp_path)
    expected = _users_of(campaign_dir, run)
    assert expected and expected != {"d1", "d2"}  # the change concerns some runs, not all
    assert sorted(calls) == sorted(expected)
    assert res.from_cache == 2 - len(expected)


def test_changed_zero_log_rereduces_every_run_using_it(campaign_dir, tmp_path, calls):
    _reduce(campaign_dir, tmp_path)
    calls.clear()
    _nudge(campaign_dir / "logs/z1_bal.csv")
    _reduce(campaign_dir, tmp_path)
    assert sorted(calls) == sorted(_users_of(campaign_dir, "z1")) == ["d1", "d2"]


def test_fresh_rereduces_all_and_rewrites_cache(campaign_dir, tmp_path, calls):
    _reduce(campaign_dir, tmp_path)
    calls.clear()
    res = _reduce(campaign_dir, tmp_path, fresh=True)
    assert sorted(calls) == ["d1", "d2"] and res.from_cache == 0
    calls.clear()
    _reduce(campaign_dir, tmp_path)
    assert calls == []


def test_corrupt_cache_entry_is_a_miss(campaign_dir, tmp_path, calls):
    _reduce(campaign_dir, tmp_path)
    entries = sorted((tmp_path / ".cache").glob("*.pkl"))
    assert len(entries) == 2
    entries[0].write_bytes(b"not a pickle")
    calls.clear()
    res = _reduce(campaign_dir, tmp_path)
    assert len(calls) == 1 and res.reduced == 2
    pickle.loads(entries[0].read_bytes())  # rewritten whole


def test_monte_carlo_setting_is_part_of_the_key(campaign_dir):
    from tunnelred.readers import open_campaign

    camp = open_campaign(campaign_dir, check_logs=False)
    assert engine.cache_key(camp, "d1") != engine.cache_key(camp, "d1", monte_carlo=200)
    assert engine.cache_key(camp, "d1") != engine.cache_key(camp, "d2")


def _add_copy_of_d2(campaign_dir):
    shutil.copy(campaign_dir / "logs/d2_all.csv", campaign_dir / "logs/d3_all.csv")
    runs = (campaign_dir / "runs.csv").read_text(encoding="utf-8")
    row = runs.strip().splitlines()[-1].replace("d2", "d3")
    (campaign_dir / "runs.csv").write_text(runs + row + "\n", encoding="utf-8")


def test_broken_runs_fail_alone_with_file_and_line(campaign_dir, tmp_path, calls):
    _add_copy_of_d2(campaign_dir)
    # d1: a cell that is not a number on line 5 of its tunnel log (found when it is loaded).
    tunnel = campaign_dir / "logs/d1_tun.csv"
    lines = tunnel.read_text(encoding="utf-8").splitlines()
    cells = lines[4].split(",")
    cells[1] = "abc"
    lines[4] = ",".join(cells)
    tunnel.write_text("\n".join(lines) + "\n", encoding="utf-8")
    # d2: its log is missing (found when the campaign is opened; the run is never reduced).
    (campaign_dir / "logs/d2_all.csv").unlink()

    res = _reduce(campaign_dir, tmp_path)
    assert res.dataset["run"].values.tolist() == ["d3"]
    assert (res.reduced, res.failed) == (1, 2)
    assert "d2" not in calls
    failures = pd.read_csv(tmp_path / "failures.csv")
    assert list(failures.columns) == ["run", "file", "line", "reason"]
    d1 = failures[failures.run == "d1"]
    assert (d1.file == "logs/d1_tun.csv").any()
    assert 5 in d1.line.tolist()
    d2 = failures[failures.run == "d2"]
    # The missing file is reported where it is named: runs.csv, d2's row (line 5).
    assert set(d2.file) == {"runs.csv"} and set(d2.line) == {5}
    assert d2.reason.str.contains("logs/d2_all.csv").all()
    text = res.summary()
    assert "failed   2" in text and "logs/d1_tun.csv:5" in text


def test_internal_error_is_isolated_and_not_cached(campaign_dir, tmp_path, monkeypatch):
    real = reduction.reduce_run

    def fails_on_d1(campaign, run_id, **kwargs):
        if run_id == "d1":
            raise ZeroDivisionError("float division by zero")
        return real(campaign, run_id, **kwargs)

    monkeypatch.setattr(reduction, "reduce_run", fails_on_d1)
    res = _reduce(campaign_dir, tmp_path)
    assert res.dataset["run"].values.tolist() == ["d2"]
    reason = res.failures.set_index("run").loc["d1", "reason"]
    assert reason == "internal error: ZeroDivisionError: float division by zero"
    monkeypatch.setattr(reduction, "reduce_run", real)
    again = _reduce(campaign_dir, tmp_path)
    assert (again.reduced, again.from_cache, again.failed) == (2, 1, 0)


def _interrupt_after(monkeypatch, k):
    real = reduction.reduce_run
    done = []

    def stops(campaign, run_id, **kwargs):
        if len(done) == k:
            raise KeyboardInterrupt
        done.append(run_id)
        return real(campaign, run_id, **kwargs)

    monkeypatch.setattr(reduction, "reduce_run", stops)


def _check_cache_whole(cache):
    for entry in cache.glob("*"):
        assert entry.suffix == ".pkl", entry.name  # no temporary file left behind
        outcome = pickle.loads(entry.read_bytes())
        assert isinstance(outcome.result, RunResult)


def test_interrupt_leaves_no_partial_output(campaign_dir, tmp_path, monkeypatch):
    out = tmp_path / "out"
    _interrupt_after(monkeypatch, 1)
    with pytest.raises(KeyboardInterrupt):
        _reduce(campaign_dir, out)
    assert [p.name for p in out.iterdir()] == [".cache"]
    assert len(list((out / ".cache").iterdir())) == 1
    _check_cache_whole(out / ".cache")


def test_interrupt_keeps_previous_outputs(campaign_dir, tmp_path, monkeypatch):
    _reduce(campaign_dir, tmp_path)
    before = {p.name: p.read_bytes() for p in tmp_path.iterdir() if p.is_file()}
    _interrupt_after(monkeypatch, 1)
    with pytest.raises(KeyboardInterrupt):
        _reduce(campaign_dir, tmp_path, fresh=True)
    after = {p.name: p.read_bytes() for p in tmp_path.iterdir() if p.is_file()}
    assert after == before
    _check_cache_whole(tmp_path / ".cache")


def test_run_ids_select_data_runs(campaign_dir):
    res = _reduce(campaign_dir, None, run_ids=["d2"])
    assert res.dataset["run"].values.tolist() == ["d2"] and res.outputs == {}
    with pytest.raises(ValueError, match="zero or tare"):
        _reduce(campaign_dir, None, run_ids=["z1"])
    with pytest.raises(ValueError, match="no run"):
        _reduce(campaign_dir, None, run_ids=["nope"])
