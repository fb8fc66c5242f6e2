"""tunnelred.pipeline.campaign: failure isolation, parallel executors, the per-run cache,
interruption.

The campaign is a small synthetic one (tunnelred.demo): three zeros, three spin tares and five
data runs at one speed, one of them with a pressure log, the last three repeats of one set point.
Which runs a change must re-reduce is worked out here from runs.csv with pandas, independently of
the engine. Executors are compared with xarray.testing.assert_identical.
"""

from __future__ import annotations

import json
import os
import pickle
import sys
import time

import numpy as np
import pandas as pd
import pytest
import xarray as xr
from conftest import small_spec

from tunnelred.common.errors import UsageError
from tunnelred.demo.writer import make_campaign
from tunnelred.engine import reduction
from tunnelred.pipeline import campaign as engine
from tunnelred.pipeline.campaign import executors

OUTPUT_FILES = {
    "results.nc",
    "results.csv",
    "provenance.json",
    "failures.csv",
    "budgets.csv",
}


DATA_RUNS = ["R001", "R002", "R003", "R004", "R005"]


@pytest.fixture
def campaign_dir(tmp_path):
    spec = small_spec(repeat_count=2)
    make_campaign(tmp_path / "campaign", spec)
    return tmp_path / "campaign"


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
    assert res.dataset["run"].values.tolist() == DATA_RUNS  # zero and tare runs are inputs
    assert (res.reduced, res.from_cache, res.failed) == (5, 0, 0)
    assert OUTPUT_FILES <= {p.name for p in out.iterdir()}
    assert (out / "figures").is_dir()
    assert {name for name in res.outputs if "/" not in name} == OUTPUT_FILES
    figures = {name for name in res.outputs if name.startswith("figures/")}
    assert "figures/CL_alpha.png" in figures
    assert all((out / name).is_file() for name in figures)
    assert res.flagged == sum(1 for f in res.dataset["flags"].values if f)
    text = res.summary()
    assert "reduced  5 (5 now, 0 from cache)" in text and str(out) in text


def test_process_pool_identical_to_serial(campaign_dir, monkeypatch):
    serial = _reduce(campaign_dir, None)
    # This process is one of the workers and starts at once; hold its first run until the
    # pool is up, so that the pool surely reduces some runs.
    pools = []
    real_init = engine._PoolStart.__init__

    def init(self, *args):
        real_init(self, *args)
        pools.append(self)

    here = []
    real_guarded = engine._reduce_guarded

    def guarded(campaign, run_id, monte_carlo):
        deadline = time.monotonic() + 60.0
        while not pools[-1].ready and time.monotonic() < deadline:
            time.sleep(0.02)
        here.append(run_id)
        return real_guarded(campaign, run_id, monte_carlo)

    monkeypatch.setattr(engine._PoolStart, "__init__", init)
    # patched where the executors look it up
    monkeypatch.setattr(executors, "_reduce_guarded", guarded)
    pooled = _reduce(campaign_dir, None, workers=2)
    assert 0 < len(here) < len(DATA_RUNS)  # both this process and the pool reduced runs
    xr.testing.assert_identical(_without_time(pooled.dataset), _without_time(serial.dataset))
    pd.testing.assert_frame_equal(pooled.budgets, serial.budgets)


def test_more_workers_than_runs_start_no_more_processes_than_runs(campaign_dir, monkeypatch):
    # before: --workers 100000 asked the pool for 99999 processes (and the figures for as
    # many), which never finished starting on a 4-run campaign
    started = []
    real_init = engine._PoolStart.__init__

    def init(self, path, helpers):
        started.append(helpers)
        real_init(self, path, min(helpers, 1))  # one process is enough, and old code ends

    monkeypatch.setattr(engine._PoolStart, "__init__", init)
    result = _reduce(campaign_dir, None, workers=100_000, figures=False)
    assert result.reduced == len(DATA_RUNS)
    assert started == [len(DATA_RUNS) - 1]  # this process is the last worker


def test_dask_local_cluster_identical_to_serial(campaign_dir):
    pytest.importorskip("distributed")
    serial = _reduce(campaign_dir, None)
    distributed = _reduce(campaign_dir, None, workers=2, dask="local")
    xr.testing.assert_identical(_without_time(distributed.dataset), _without_time(serial.dataset))


def test_dask_missing_says_how_to_install(campaign_dir, monkeypatch):
    monkeypatch.setitem(sys.modules, "distributed", None)  # makes the import fail
    with pytest.raises(UsageError, match=r'pip install "tunnelred\[dask\]"'):
        _reduce(campaign_dir, None, workers=2, dask="local")


def test_unchanged_rerun_reduces_nothing(campaign_dir, tmp_path, calls):
    first = _reduce(campaign_dir, tmp_path / "out")
    assert sorted(calls) == DATA_RUNS
    calls.clear()
    again = _reduce(campaign_dir, tmp_path / "out")
    assert calls == []
    assert (again.reduced, again.from_cache) == (5, 5)
    xr.testing.assert_identical(_without_time(again.dataset), _without_time(first.dataset))


@pytest.mark.parametrize(
    "log, run",
    [
        ("logs/R002_balance.csv", "R002"),  # a data run's own log
        ("logs/R003_pressure.csv", "R003"),
        ("logs/T001_balance.csv", "T001"),  # a spin tare: the spinning data runs use it
        ("logs/Z001_balance.csv", "Z001"),  # a zero only the tares use
        ("logs/Z003_balance.csv", "Z003"),  # the post-zero of every data run
    ],
)
def test_changed_log_rereduces_the_runs_that_use_it(campaign_dir, tmp_path, calls, log, run):
    _reduce(campaign_dir, tmp_path / "out")
    calls.clear()
    _nudge(campaign_dir / log)
    res = _reduce(campaign_dir, tmp_path / "out")
    expected = _users_of(campaign_dir, run)
    assert expected  # every log here is used by some data run
    assert sorted(calls) == sorted(expected)
    assert res.from_cache == len(DATA_RUNS) - len(expected)


def test_fresh_rereduces_all_and_rewrites_cache(campaign_dir, tmp_path, calls):
    _reduce(campaign_dir, tmp_path / "out")
    calls.clear()
    res = _reduce(campaign_dir, tmp_path / "out", fresh=True)
    assert sorted(calls) == DATA_RUNS and res.from_cache == 0
    calls.clear()
    _reduce(campaign_dir, tmp_path / "out")
    assert calls == []


def test_corrupt_cache_entry_is_a_miss(campaign_dir, tmp_path, calls):
    _reduce(campaign_dir, tmp_path / "out")
    entries = sorted((tmp_path / "out" / ".cache").glob("*.npz"))
    assert len(entries) == len(DATA_RUNS)
    entries[0].write_bytes(b"not an archive")
    entries[1].write_bytes(entries[1].read_bytes()[:100])  # truncated
    calls.clear()
    res = _reduce(campaign_dir, tmp_path / "out")
    assert len(calls) == 2 and res.reduced == len(DATA_RUNS)
    for entry in entries[:2]:
        assert _entry_is_whole(entry)  # rewritten


class _Planted:
    """An object whose unpickling runs code: it creates the file named in its argument."""

    def __init__(self, path):
        self.path = str(path)

    def __reduce__(self):
        return (os.system, (f"touch {self.path}",))


def test_planted_pickle_entry_never_runs(campaign_dir, tmp_path, calls):
    out = tmp_path / "out"
    _reduce(campaign_dir, out)
    proof = tmp_path / "code-ran"
    payload = pickle.dumps(_Planted(proof))
    entries = sorted((out / ".cache").glob("*.npz"))
    # As the entry itself, under the old suffix, and inside an .npz as an object array.
    entries[0].write_bytes(payload)
    (out / ".cache" / (entries[1].stem + ".pkl")).write_bytes(payload)
    with open(entries[2], "wb") as handle:
        np.savez(handle, meta=np.array([_Planted(proof)], dtype=object))
    calls.clear()
    res = _reduce(campaign_dir, out)
    assert not proof.exists()
    assert res.reduced == len(DATA_RUNS)
    assert len(calls) == 2  # the two planted .npz entries were misses; the .pkl is ignored
    assert not (out / ".cache" / (entries[1].stem + ".pkl")).exists()  # pruned


def test_cache_entry_of_another_key_is_a_miss(campaign_dir, tmp_path, calls):
    out = tmp_path / "out"
    _reduce(campaign_dir, out)
    entries = sorted((out / ".cache").glob("*.npz"))
    entries[1].write_bytes(entries[0].read_bytes())  # a whole entry, but for another run
    entries[2].unlink()
    entries[2].symlink_to("/dev/zero")  # never opened
    calls.clear()
    res = _reduce(campaign_dir, out)
    assert len(calls) == 2 and res.reduced == len(DATA_RUNS)


def test_monte_carlo_setting_is_part_of_the_key(campaign_dir):
    from tunnelred.inputs.readers import open_campaign

    camp = open_campaign(campaign_dir, check_logs=False)
    assert engine.cache_key(camp, "R002") != engine.cache_key(camp, "R002", monte_carlo=200)
    assert engine.cache_key(camp, "R002") != engine.cache_key(camp, "R003")


def _runs_csv_line(campaign_dir, run):
    table = pd.read_csv(campaign_dir / "runs.csv", dtype=str)
    return int(table.index[table.run == run][0]) + 2  # the header is line 1


def test_broken_runs_fail_alone_with_file_and_line(campaign_dir, tmp_path, calls):
    # R002: a cell that is not a number on line 5 of its tunnel log (found when it is loaded).
    tunnel = campaign_dir / "logs/R002_tunnel.csv"
    lines = tunnel.read_text(encoding="utf-8").splitlines()
    cells = lines[4].split(",")
    cells[1] = "abc"
    lines[4] = ",".join(cells)
    tunnel.write_text("\n".join(lines) + "\n", encoding="utf-8")
    # R004: its balance log is missing (found when the campaign is opened: never reduced).
    (campaign_dir / "logs/R004_balance.csv").unlink()

    res = _reduce(campaign_dir, tmp_path / "out")
    assert res.dataset["run"].values.tolist() == ["R001", "R003", "R005"]
    assert (res.reduced, res.failed) == (3, 2)
    assert "R004" not in calls
    failures = pd.read_csv(tmp_path / "out" / "failures.csv")
    assert list(failures.columns) == ["run", "file", "line", "reason"]
    bad_cell = failures[failures.run == "R002"]
    assert bad_cell[["file", "line"]].values.tolist() == [["logs/R002_tunnel.csv", 5]]
    missing = failures[failures.run == "R004"]
    # The missing file is reported where it is named: R004's row of runs.csv.
    assert set(missing.file) == {"runs.csv"}
    assert set(missing.line) == {_runs_csv_line(campaign_dir, "R004")}
    assert missing.reason.str.contains("logs/R004_balance.csv").all()
    text = res.summary()
    assert "failed   2" in text and "logs/R002_tunnel.csv:5" in text


def test_internal_error_is_isolated_and_not_cached(campaign_dir, tmp_path, monkeypatch):
    real = reduction.reduce_run

    def fails_on_r002(campaign, run_id, **kwargs):
        if run_id == "R002":
            raise ZeroDivisionError("float division by zero")
        return real(campaign, run_id, **kwargs)

    monkeypatch.setattr(reduction, "reduce_run", fails_on_r002)
    res = _reduce(campaign_dir, tmp_path / "out")
    assert "R002" not in res.dataset["run"].values and res.reduced == 4
    reason = res.failures.set_index("run").loc["R002", "reason"]
    assert reason == "internal error: ZeroDivisionError: float division by zero"
    monkeypatch.setattr(reduction, "reduce_run", real)
    again = _reduce(campaign_dir, tmp_path / "out")
    assert (again.reduced, again.from_cache, again.failed) == (5, 4, 0)


def test_repeat_disagreement_flags_the_repeats(campaign_dir):
    # R003, R004, R005 repeat one set point. Offset R005's lift channel by 0.05 V: with the
    # synthetic calibration (24 N/V on N2) that is 1.2 N, about 0.25 in CL at q d b near 4.6 N,
    # some ten times u(CL).
    log = campaign_dir / "logs/R005_balance.csv"
    table = pd.read_csv(log)
    table["N2 [V]"] += 0.05
    table.to_csv(log, index=False)
    ds = _reduce(campaign_dir, None).dataset
    raised = ds["flag_repeat_disagreement"].to_series()
    assert raised["R005"] and not raised["R001"] and not raised["R002"]
    assert "repeat_disagreement" in ds["flags"].sel(run="R005").item()


def _interrupt_after(monkeypatch, k):
    real = reduction.reduce_run
    done = []

    def stops(campaign, run_id, **kwargs):
        if len(done) == k:
            raise KeyboardInterrupt
        done.append(run_id)
        return real(campaign, run_id, **kwargs)

    monkeypatch.setattr(reduction, "reduce_run", stops)


def _entry_is_whole(entry) -> bool:
    with np.load(entry, allow_pickle=False) as archive:
        meta = json.loads(archive["meta"].tobytes().decode("utf-8"))
    return meta["run"] in DATA_RUNS and meta["result"] is not None


def _check_cache_whole(cache, count):
    entries = list(cache.iterdir())
    assert all(e.suffix == ".npz" for e in entries)  # no temporary file left behind
    assert len(entries) == count
    assert all(_entry_is_whole(entry) for entry in entries)


def test_interrupt_leaves_no_partial_output(campaign_dir, tmp_path, monkeypatch):
    out = tmp_path / "out"
    _interrupt_after(monkeypatch, 2)
    with pytest.raises(KeyboardInterrupt):
        _reduce(campaign_dir, out)
    names = sorted(p.name for p in out.iterdir())
    assert names == [".cache", ".generations", ".lock", ".tunnelred"]
    assert list((out / ".generations").iterdir()) == []
    _check_cache_whole(out / ".cache", 2)


def _published(out):
    """Every file users see in OUT (through the links), with its bytes."""
    return {
        p.relative_to(out).as_posix(): p.read_bytes()
        for p in [*out.iterdir(), *out.glob("figures/*")]
        if p.is_file()
    }


def test_interrupt_keeps_previous_outputs(campaign_dir, tmp_path, monkeypatch):
    _reduce(campaign_dir, tmp_path / "out")
    before = _published(tmp_path / "out")
    assert {"results.nc", "figures/CL_alpha.png"} <= set(before)
    _interrupt_after(monkeypatch, 2)
    with pytest.raises(KeyboardInterrupt):
        _reduce(campaign_dir, tmp_path / "out", fresh=True)
    assert _published(tmp_path / "out") == before
    _check_cache_whole(tmp_path / "out" / ".cache", len(DATA_RUNS))


def test_run_ids_select_data_runs(campaign_dir):
    res = _reduce(campaign_dir, None, run_ids=["R002"])
    assert res.dataset["run"].values.tolist() == ["R002"] and res.outputs == {}
    with pytest.raises(ValueError, match="zero or tare"):
        _reduce(campaign_dir, None, run_ids=["Z001"])
    with pytest.raises(ValueError, match="no run"):
        _reduce(campaign_dir, None, run_ids=["nope"])
