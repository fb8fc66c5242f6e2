"""OUT as one generation, its lock and its location rules, under kills and concurrent reducers.

`python -m tunnelred reduce` runs as a subprocess on a small synthetic campaign
(tunnelred.demo) and is killed (SIGKILL, SIGINT, SIGTERM) at random moments; after each
kill OUT must hold one whole generation (every published file from the same reduction) or none,
and the next reduction must still work and use the cache.
"""

from __future__ import annotations

import json
import os
import random
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import xarray as xr

from tunnelred.products import results_folder

REPO = Path(__file__).resolve().parents[1]
PUBLISHED = ("results.nc", "results.csv", "budgets.csv", "failures.csv", "provenance.json")


@pytest.fixture
def campaign(small_campaign) -> Path:
    return small_campaign


def _command(campaign, out, *extra):
    return [sys.executable, "-m", "tunnelred", "reduce", str(campaign), "-o", str(out), "--quiet"]


def _env():
    env = dict(os.environ)
    env["PYTHONPATH"] = str(REPO) + os.pathsep + env.get("PYTHONPATH", "")
    return env


def _reduce(campaign, out, *extra, timeout=300, **run):
    return subprocess.run(
        [*_command(campaign, out), "--workers", "1", *extra],
        capture_output=True,
        text=True,
        env=_env(),
        timeout=timeout,
        **run,
    )


def assert_one_generation(out: Path) -> Path | None:
    """OUT holds one whole generation (returned), or none at all and no published file."""
    current = out / "current"
    if not current.is_symlink():
        assert not any((out / name).exists() for name in PUBLISHED)
        return None
    generation = Path(os.path.realpath(current))
    assert generation.parent == (out / ".generations").resolve()
    for name in [*PUBLISHED, "figures"]:
        # Every published path resolves into the one generation in force.
        assert Path(os.path.realpath(out / name)).parent == generation, name
    with xr.open_dataset(out / "results.nc", engine="netcdf4") as ds:
        created, runs = ds.attrs["created"], [str(r) for r in ds["run"].values]
    provenance = json.loads((out / "provenance.json").read_text(encoding="utf-8"))
    assert provenance["created"] == created
    table = pd.read_csv(out / "results.csv", dtype={"run": str})
    assert table["run"].tolist() == runs
    return generation


def _entries_parse(cache: Path) -> int:
    whole = 0
    for entry in cache.glob("*.npz"):
        with np.load(entry, allow_pickle=False) as archive:
            json.loads(archive["meta"].tobytes().decode("utf-8"))
        whole += 1
    return whole


def _kill_loop(campaign, tmp_path, iterations, seed):
    rng = random.Random(seed)
    out = tmp_path / "out"
    first = _reduce(campaign, out)
    assert first.returncode == 0, first.stderr
    reference = assert_one_generation(out)
    assert reference is not None
    kills = 0
    hangs: list = []
    for i in range(iterations):
        sig = (signal.SIGKILL, signal.SIGINT, signal.SIGTERM)[i % 3]
        extra = ["--fresh"] if i % 2 == 0 else []
        proc = subprocess.Popen(
            [*_command(campaign, out), "--workers", "2", *extra],
            stdout=subprocess.DEVNULL,
            stderr=subprocess.PIPE,
            env=_env(),
        )
        time.sleep(rng.uniform(0.2, 8.0))
        proc.send_signal(sig)
        try:
            _, err = proc.communicate(timeout=60)
        except subprocess.TimeoutExpired:
            hangs.append(sig)  # did not stop after the signal: killed, OUT must still be whole
            proc.kill()
            # Bounded too: a pool process left behind would hold the pipe (the test would hang).
            _, err = proc.communicate(timeout=30)
        kills += proc.returncode != 0
        if sig == signal.SIGINT and proc.returncode == 130:
            assert b"Traceback" not in err  # workers silent, one message
        assert assert_one_generation(out) is not None
        _entries_parse(out / ".cache")
    last = _reduce(campaign, out)
    assert last.returncode == 0, last.stderr
    assert "from cache" in last.stdout
    assert assert_one_generation(out) is not None
    assert len(list((out / ".generations").iterdir())) == 1  # leftovers cleaned
    assert not list(out.glob(".*.tmp")) and not list((out / ".cache").glob(".*.tmp"))
    assert hangs == []
    return kills


def test_kills_at_random_moments_leave_one_generation(campaign, tmp_path):
    _kill_loop(campaign, tmp_path, iterations=3, seed=14)


@pytest.mark.slow
def test_many_kills_leave_one_generation(campaign, tmp_path):
    _kill_loop(campaign, tmp_path, iterations=24, seed=1414)


def test_second_reducer_on_a_locked_out_exits_2_at_once(campaign, tmp_path):
    out = tmp_path / "out"
    held = results_folder.open_results_folder(out, campaign)
    try:
        started = time.monotonic()
        second = _reduce(campaign, out)
        assert second.returncode == 2
        assert f"in use by process {os.getpid()}" in second.stderr
        assert "Traceback" not in second.stderr
        assert time.monotonic() - started < 60  # stops before reducing anything
        assert not (out / "current").exists()
    finally:
        held.close()


def test_two_concurrent_reducers_one_wins_one_generation(campaign, tmp_path):
    out = tmp_path / "out"
    procs = [
        subprocess.Popen(
            [*_command(campaign, out), "--workers", "1"],
            stdout=subprocess.PIPE,
            stderr=subprocess.PIPE,
            env=_env(),
        )
        for _ in range(2)
    ]
    codes = sorted(p.wait(timeout=300) for p in procs)
    for p in procs:
        p.stdout.close()
        p.stderr.close()
    # Either one waited out the other's lock (0, 2), or they ran one after the other (0, 0).
    assert codes in ([0, 2], [0, 0])
    assert assert_one_generation(out) is not None


def test_stale_lock_of_a_dead_process_is_taken(campaign, tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    (out / results_folder.MARKER).write_text("{}\n")
    (out / ".lock").write_text("999999999\n")  # a pid no process has
    done = _reduce(campaign, out)
    assert done.returncode == 0, done.stderr
    assert (out / ".lock").read_text() == ""  # released


def test_out_inside_the_campaign_is_refused(campaign, tmp_path):
    for out in (campaign, campaign / "out", campaign / "logs" / "x"):
        done = _reduce(campaign, out)
        assert done.returncode == 2 and "inside the campaign folder" in done.stderr
        assert "Traceback" not in done.stderr
    assert not (campaign / "out").exists() and not (campaign / ".cache").exists()


def test_foreign_non_empty_out_needs_force(campaign, tmp_path):
    out = tmp_path / "mine"
    out.mkdir()
    (out / "notes.txt").write_text("mine")
    done = _reduce(campaign, out)
    assert done.returncode == 2 and "--force" in done.stderr
    assert sorted(p.name for p in out.iterdir()) == ["notes.txt"]
    forced = _reduce(campaign, out, "--force")
    assert forced.returncode == 0, forced.stderr
    assert (out / "notes.txt").read_text() == "mine"


@pytest.mark.parametrize("make", ["file", "parent-file", "read-only"])
def test_unusable_out_is_found_before_reducing(campaign, tmp_path, make):
    if make == "file":
        out = tmp_path / "out"
        out.write_text("x")
    elif make == "parent-file":
        (tmp_path / "f").write_text("x")
        out = tmp_path / "f" / "out"
    else:
        if os.geteuid() == 0:
            pytest.skip("root writes into read-only folders")
        out = tmp_path / "ro"
        out.mkdir(mode=0o500)
    done = _reduce(campaign, out)
    assert done.returncode == 2, done.stdout + done.stderr
    assert "Traceback" not in done.stderr and "reduced" not in done.stdout


def test_report_of_older_results_does_not_survive(campaign, tmp_path):
    out = tmp_path / "out"
    assert _reduce(campaign, out, "--report").returncode == 0
    assert (out / "report.pdf").is_file()
    assert _reduce(campaign, out).returncode == 0
    assert not (out / "report.pdf").exists() and not (out / "report.pdf").is_symlink()
    assert_one_generation(out)


def test_folder_of_the_older_layout_is_taken_over(campaign, tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    for name in ("results.nc", "provenance.json", "report.pdf", ".results.csv.abc.tmp"):
        (out / name).write_text("old")
    (out / "figures").mkdir()
    (out / "figures" / "CL_alpha.png").write_text("old")
    done = _reduce(campaign, out)
    assert done.returncode == 0, done.stderr
    assert assert_one_generation(out) is not None
    assert not (out / "report.pdf").exists() and not (out / ".results.csv.abc.tmp").exists()
    assert (out / "figures").is_symlink()


def test_staging_carry_brings_a_file_from_the_previous_generation(tmp_path):
    out = tmp_path / "out"
    with results_folder.open_results_folder(out) as folder:
        with folder.stage() as staging:
            staging.file("figures").mkdir()
            staging.file("figures/a.png").write_bytes(b"png")
        with folder.stage() as staging:
            assert staging.carry("figures/a.png")
            assert not staging.carry("figures/missing.png")
        assert (out / "figures" / "a.png").read_bytes() == b"png"
        assert len(list((out / ".generations").iterdir())) == 1


def test_a_failing_write_keeps_the_previous_generation(tmp_path):
    out = tmp_path / "out"
    with results_folder.open_results_folder(out) as folder:
        with folder.stage() as staging:
            staging.file("results.csv").write_text("old")
        with pytest.raises(results_folder.OutputFolderError, match="previous results are kept"):
            with folder.stage() as staging:
                staging.file("results.csv").write_text("new")
                raise OSError(28, "No space left on device")
        assert (out / "results.csv").read_text() == "old"
        assert len(list((out / ".generations").iterdir())) == 1


# ---------------------------------------------------------------------------------------------
# Interrupts, a full disk, and the command's messages (issue 14 item 8)

SAMPLE = REPO / "sample_runs"


@pytest.fixture(scope="module")
def sample_out(tmp_path_factory) -> Path:
    """OUT of the sample campaign, reduced once (84 runs: long enough to interrupt mid-run)."""
    out = tmp_path_factory.mktemp("sample") / "out"
    done = _reduce(SAMPLE, out, "--workers", "2")
    assert done.returncode == 0, done.stderr
    return out


def _fresh_entries(cache: Path, since: float) -> int:
    return sum(1 for e in cache.glob("*.npz") if e.stat().st_mtime > since)


def _default_sigint() -> None:
    signal.signal(signal.SIGINT, signal.SIG_DFL)


def _pool_reducing_sample(sample_out: Path, tmp_path: Path):
    """A copy of ``sample_out`` and a two-process ``--fresh`` reduction into it, caught once its
    pool has written a few cache entries: (out, its generation before, the running process)."""
    out = tmp_path / "out"
    shutil.copytree(sample_out, out, symlinks=True)
    before = assert_one_generation(out)
    launched = time.time()
    proc = subprocess.Popen(
        [*_command(SAMPLE, out), "--workers", "2", "--fresh"],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        env=_env(),
        start_new_session=True,  # its own process group, as a shell job has
        # Ctrl-C as a terminal's foreground job gets it: whoever started the tests may have
        # left SIGINT ignored (a background job of a non-interactive shell), and an ignored
        # SIGINT is inherited and, by Python's convention, kept.
        preexec_fn=_default_sigint,
    )
    try:
        deadline = time.monotonic() + 120
        while _fresh_entries(out / ".cache", launched) < 3 and proc.poll() is None:
            assert time.monotonic() < deadline, "the reduction never got going"
            time.sleep(0.05)
        assert proc.poll() is None, "finished before it could be stopped"
    except BaseException:
        os.killpg(proc.pid, signal.SIGKILL)
        proc.communicate()
        raise
    return out, before, proc


@pytest.mark.parametrize(
    ("sig", "group", "status"),
    [(signal.SIGINT, True, 130), (signal.SIGTERM, False, 143)],
    ids=["ctrl-c", "sigterm"],
)
def test_an_interrupted_pool_stops_at_once_and_silently(sample_out, tmp_path, sig, group, status):
    """Ctrl-C (SIGINT to the whole process group, as a terminal sends it) or SIGTERM (to the
    command alone) while two processes reduce: the command ends within seconds with one
    message, no worker prints anything, no process of it is left, and OUT keeps the previous
    generation. Before the fix the pool was shut down waiting for its processes, which kept
    running (and holding the terminal) after the command had gone."""
    out, before, proc = _pool_reducing_sample(sample_out, tmp_path)
    try:
        sent = time.monotonic()
        if group:
            os.killpg(proc.pid, sig)
        else:
            proc.send_signal(sig)
        out_text, err = proc.communicate(timeout=30)  # EOF: no worker holds the pipes either
        stopped = time.monotonic() - sent
    finally:
        if proc.poll() is None:
            os.killpg(proc.pid, signal.SIGKILL)
            proc.communicate()
    assert proc.returncode == status
    assert stopped < 10, f"{stopped:.1f} s to stop"
    lines = err.decode().strip().splitlines()
    assert len(lines) == 1 and "nothing half-written was kept" in lines[0], err.decode()
    assert b"Traceback" not in err and b"KeyboardInterrupt" not in err
    with pytest.raises(ProcessLookupError):  # every process of the group has gone
        for _ in range(50):
            os.killpg(proc.pid, 0)
            time.sleep(0.1)
    assert assert_one_generation(out) == before
    assert len(list((out / ".generations").iterdir())) == 1


def test_a_killed_command_leaves_no_pool_process_behind(sample_out, tmp_path):
    """SIGKILL to the command alone while its pool reduces (kill -9 of the pid): the command
    cannot stop its pool, so the pool's processes must notice and end themselves. Before the
    fix the fork server and its workers waited on their queues for ever, holding the caller's
    pipes open (the kill loop above then hung in communicate())."""
    out, before, proc = _pool_reducing_sample(sample_out, tmp_path)
    try:
        proc.kill()
        proc.communicate(timeout=30)  # EOF: no process of the pool holds the pipes any more
    finally:
        try:
            os.killpg(proc.pid, signal.SIGKILL)
        except ProcessLookupError:
            pass
        proc.communicate()
    with pytest.raises(ProcessLookupError):  # every process of the group has gone
        for _ in range(100):
            os.killpg(proc.pid, 0)
            time.sleep(0.1)
    assert assert_one_generation(out) == before


def test_a_full_disk_leaves_out_untouched_with_one_message(sample_out, tmp_path):
    """A file-size limit (ulimit -f: the writes fail as on a full disk) stops the new
    generation; OUT keeps the previous one, the command says so once, exit 2."""
    import resource

    out = tmp_path / "out"
    shutil.copytree(sample_out, out, symlinks=True)
    before = assert_one_generation(out)
    # Without its record the previous generation's files are not carried over (hard links)
    # but written again, from the cache: the writes meet the limit.
    (before / ".made_from.json").unlink()
    limit = 300 * 1024  # smaller than results.nc, larger than every cache entry

    def limited():
        resource.setrlimit(resource.RLIMIT_FSIZE, (limit, limit))

    done = _reduce(SAMPLE, out, preexec_fn=limited)
    assert done.returncode == 2, done.stdout + done.stderr
    assert "Traceback" not in done.stderr
    assert "could not be written" in done.stderr and "previous results are kept" in done.stderr
    assert len(done.stderr.strip().splitlines()) == 1
    assert assert_one_generation(out) == before
    assert len(list((out / ".generations").iterdir())) == 1
    assert not list(out.glob(".*.tmp"))


def test_report_goes_into_the_current_generation(campaign, tmp_path):
    """`tunnelred report OUT` writes beside the results it was made from (issue 14 item 3):
    OUT/report.pdf links into the generation, and the next reduction does not keep it."""
    out = tmp_path / "out"
    assert _reduce(campaign, out).returncode == 0
    generation = assert_one_generation(out)
    made = subprocess.run(
        [sys.executable, "-m", "tunnelred", "report", str(out)],
        capture_output=True,
        text=True,
        env=_env(),
        timeout=300,
    )
    assert made.returncode == 0, made.stderr
    assert (out / "report.pdf").is_symlink()
    assert Path(os.path.realpath(out / "report.pdf")).parent == generation
    assert (generation / "report.pdf").read_bytes()[:5] == b"%PDF-"
    assert _reduce(campaign, out).returncode == 0
    assert not (out / "report.pdf").exists() and not (out / "report.pdf").is_symlink()
    assert_one_generation(out)
