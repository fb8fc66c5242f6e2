"""The whole campaign: every data run reduced independently, in parallel, cached, failures isolated.

:func:`reduce_campaign` opens the campaign, reduces each data run with
:func:`tunnelred.engine.reduction.reduce_run` (in this process, in a pool of processes, or on a
dask.distributed cluster), runs the campaign-level checks, and writes the results with
:func:`tunnelred.products.store.write_results`.

A run that cannot be reduced becomes a row of failures.csv (run, file, line, reason) and never
stops the others. Results are cached per run in ``OUT/.cache``, keyed on everything the run's
reduction reads, so reducing an unchanged campaign again reduces nothing, and changing one log
reduces again only the runs that use it.
"""

from __future__ import annotations

import contextlib
import dataclasses
import functools
import hashlib
import html
import json
import multiprocessing
import os
import secrets
import signal
import socket
import stat
import sys
import tempfile
import threading
import time
from collections import deque
from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
from concurrent.futures.process import BrokenProcessPool
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd
import xarray as xr
from threadpoolctl import threadpool_limits

from tunnelred import __version__
from tunnelred.common.errors import InputError, Problem, ReductionError, UsageError
from tunnelred.common.text import printable
from tunnelred.engine import quality, reduction
from tunnelred.inputs.readers import open_campaign
from tunnelred.products import store

__all__ = ["CampaignResults", "reduce_campaign", "cache_key"]

_CACHE_DIR = ".cache"
_CACHE_SUFFIX = ".npz"
_DASK_HINT = 'dask is not installed; install it with: pip install "tunnelred[dask]"'
# Seconds a dask scheduler has to answer before the reduction stops with a message.
_DASK_CONNECT = 5.0
# Seconds an interrupted reduction waits for a pool process still starting.
_STOP_WAIT = 3.0
# Lines of each list in the one-screen summary before "and N more".
_SUMMARY_LINES = 12


@dataclass
class CampaignResults:
    """What :func:`reduce_campaign` produced.

    ``reduced`` counts the data runs with results, ``from_cache`` those of them taken from the
    cache, ``failed`` the data runs without results (rows of ``failures``), ``flagged`` the runs
    with at least one quality flag. ``outputs`` maps each file name to where it was written
    (empty when no output folder was given). ``elapsed`` is the wall time [s].
    """

    dataset: xr.Dataset
    failures: pd.DataFrame
    budgets: pd.DataFrame
    outputs: dict[str, Path]
    reduced: int
    from_cache: int
    failed: int
    flagged: int
    elapsed: float
    title: str = ""
    notices: tuple[str, ...] = ()  # config's notices (campaign.toml), shown with the summary

    def _flagged_runs(self) -> list[tuple[str, str]]:
        if "flags" not in self.dataset:
            return []
        runs = self.dataset["run"].values
        return [
            (str(r), str(f)) for r, f in zip(runs, self.dataset["flags"].values, strict=True) if f
        ]

    def _failed_runs(self) -> list[tuple[str, str, str]]:
        rows = []
        for run, group in self.failures.groupby("run", sort=False):
            first = group.iloc[0]
            where = str(first["file"]) if first["file"] else ""
            if where and pd.notna(first["line"]):
                where += f":{int(first['line'])}"
            more = f" (+{len(group) - 1} more)" if len(group) > 1 else ""
            rows.append((str(run), where, f"{first['reason']}{more}"))
        return rows

    def summary(self) -> str:
        """The one-screen summary: runs reduced, flagged and failed, and where outputs went.

        Every string from a file in it (title, run ids, reasons, paths) is escaped for a
        terminal (:func:`tunnelred.common.text.printable`).
        """
        fresh = self.reduced - self.from_cache
        lines = [
            f"{printable(self.title or 'campaign')}: {self.reduced + self.failed} data runs in "
            f"{self.elapsed:.1f} s",
            f"  reduced  {self.reduced} ({fresh} now, {self.from_cache} from cache)",
            f"  flagged  {self.flagged}",
        ]
        lines += _capped([printable(f"    {run}  {f}") for run, f in self._flagged_runs()])
        lines.append(f"  failed   {self.failed}")
        lines += _capped(
            [
                printable(f"    {run}  {where + '  ' if where else ''}{reason}")
                for run, where, reason in self._failed_runs()
            ]
        )
        if self.outputs:
            folder = next(iter(self.outputs.values())).parent
            files = [name for name in self.outputs if "/" not in name and name != "report.pdf"]
            figures = sum(1 for name in self.outputs if name.startswith("figures/"))
            if figures:
                files.append(f"figures/ ({figures} PNG)")
            lines.append(f"  outputs  {printable(folder)}: {', '.join(files)}")
        else:
            lines.append("  outputs  none written (no output folder given)")
        lines += [f"  notice   {printable(text)}" for text in self.notices]
        return "\n".join(lines)

    def __str__(self) -> str:
        return self.summary()

    def _repr_html_(self) -> str:
        fresh = self.reduced - self.from_cache
        head = (
            f"<p><b>{html.escape(self.title or 'campaign')}</b>: {self.reduced} runs reduced "
            f"({fresh} now, {self.from_cache} from cache), {self.flagged} flagged, "
            f"{self.failed} failed, in {self.elapsed:.1f} s</p>"
        )
        parts = [head]
        flagged = self._flagged_runs()
        if flagged:
            rows = "".join(
                f"<tr><td>{html.escape(r)}</td><td>{html.escape(f)}</td></tr>" for r, f in flagged
            )
            parts.append(f"<table><tr><th>flagged run</th><th>flags</th></tr>{rows}</table>")
        failed = self._failed_runs()
        if failed:
            rows = "".join(
                f"<tr><td>{html.escape(r)}</td><td>{html.escape(w)}</td>"
                f"<td>{html.escape(why)}</td></tr>"
                for r, w, why in failed
            )
            parts.append(
                f"<table><tr><th>failed run</th><th>where</th><th>reason</th></tr>{rows}</table>"
            )
        if self.outputs:
            folder = next(iter(self.outputs.values())).parent
            parts.append(f"<p>outputs in <code>{html.escape(str(folder))}</code></p>")
        return "".join(parts)


def _capped(lines: list[str]) -> list[str]:
    if len(lines) <= _SUMMARY_LINES:
        return lines
    shown = lines[: _SUMMARY_LINES - 1]
    return [*shown, f"    … and {len(lines) - len(shown)} more (see the results files)"]


# ---------------------------------------------------------------------------------------------
# One run's outcome, the same from every executor


@dataclass
class _Outcome:
    run: str
    result: reduction.RunResult | None = None
    failures: list[dict] = field(default_factory=list)
    # Deterministic outcomes (a result, a bad input, a run that cannot be reduced) are cached;
    # an internal error may be transient and is tried again next time.
    cacheable: bool = True


def _problem_row(run: str, problem: Problem) -> dict:
    reason = f"expected {problem.expected}; found {problem.found}."
    if problem.column:
        reason = f"[{problem.column}] {reason}"
    if problem.hint:
        reason += f" {problem.hint}"
    return {"run": run, "file": problem.file, "line": problem.line, "reason": reason}


def _internal_row(run: str, exc: BaseException) -> dict:
    return {
        "run": run,
        "file": "",
        "line": None,
        "reason": f"internal error: {type(exc).__name__}: {exc}",
    }


def _reduce_guarded(campaign, run_id: str, monte_carlo: int) -> _Outcome:
    """Reduce one run; every Exception becomes a failure (KeyboardInterrupt is not caught)."""
    try:
        result = reduction.reduce_run(campaign, run_id, monte_carlo=monte_carlo)
    except InputError as exc:
        return _Outcome(run_id, failures=[_problem_row(run_id, p) for p in exc.problems])
    except ReductionError as exc:
        row = {"run": run_id, "file": exc.file or "", "line": exc.line, "reason": exc.reason}
        return _Outcome(run_id, failures=[row])
    except Exception as exc:
        return _Outcome(run_id, failures=[_internal_row(run_id, exc)], cacheable=False)
    return _Outcome(run_id, result=result)


# A worker process opens each campaign once and keeps it for the runs it is sent, with a token:
# a pool's own (its processes live for one reduction), or for dask a hash of every input, so
# that a long-lived dask worker reopens a campaign that has changed.
_OPEN_CAMPAIGNS: dict[str, tuple[str, object]] = {}


def _blas_one_thread():
    """Hold numpy's BLAS to one thread.

    A run's matrices are small: a threaded BLAS spends a second core on them for nothing (and
    with several worker processes, oversubscribes the machine). Parallelism comes from
    processes.
    """
    return threadpool_limits(limits=1, user_api="blas")


_blas_limited = False


def _worker_setup() -> None:
    global _blas_limited
    if not _blas_limited:
        _blas_one_thread()  # kept for the life of the worker process
        _blas_limited = True


def _worker(path: str, token: str, run_id: str, monte_carlo: int) -> _Outcome:
    """A pool process's task: its BLAS stays at one thread (the process is ours)."""
    _worker_setup()
    return _open_and_reduce(path, token, run_id, monte_carlo)


def _dask_task(path: str, token: str, run_id: str, monte_carlo: int) -> _Outcome:
    """A dask worker's task: the worker may serve others, so the BLAS limit is for this run."""
    with _blas_one_thread():
        return _open_and_reduce(path, token, run_id, monte_carlo)


def _open_and_reduce(path: str, token: str, run_id: str, monte_carlo: int) -> _Outcome:
    try:
        held = _OPEN_CAMPAIGNS.get(path)
        if held is None or held[0] != token:
            _OPEN_CAMPAIGNS[path] = (token, open_campaign(path, check_logs=False))
        campaign = _OPEN_CAMPAIGNS[path][1]
    except InputError as exc:
        # The campaign opened in the parent; it changed on the way.
        rows = [_problem_row(run_id, p) for p in exc.problems]
        return _Outcome(run_id, failures=rows, cacheable=False)
    except Exception as exc:
        return _Outcome(run_id, failures=[_internal_row(run_id, exc)], cacheable=False)
    return _reduce_guarded(campaign, run_id, monte_carlo)


# ---------------------------------------------------------------------------------------------
# The cache


def _row_record(campaign, run_id: str) -> str:
    """A run's runs.csv row, with the hash of each log it names, as JSON text."""
    spec = campaign.runs[run_id]
    record = {f.name: getattr(spec, f.name) for f in dataclasses.fields(spec)}
    record["logs"] = {stream: [rel, campaign.file_hashes[rel]] for stream, rel in spec.logs.items()}
    return json.dumps(record, sort_keys=True, default=str)


def cache_key(campaign, run_id: str, *, monte_carlo: int = 0) -> str:
    """The cache key of one run's reduction: SHA-256 over everything that reduction reads.

    Parameters
    ----------
    campaign : tunnelred.inputs.readers.Campaign
    run_id : str
        A run of ``campaign``.
    monte_carlo : int
        Monte Carlo draws asked for.

    Returns
    -------
    str
        Hex digest over the tunnelred version and its code, the campaign.toml hash, the run's
        runs.csv row and the hashes of its logs, the same for every run it uses (zeros, tares,
        merged pressure runs), and ``monte_carlo``.
    """
    return _key(campaign, run_id, monte_carlo, {})


@functools.lru_cache(maxsize=1)
def _code_digest() -> str:
    """SHA-256 over tunnelred's own modules, so that edited code never reuses stale results."""
    digest = hashlib.sha256()
    package = Path(__file__).resolve().parents[1]
    for module in sorted(package.rglob("*.py")):
        digest.update(module.relative_to(package).as_posix().encode() + b"\0" + module.read_bytes())
    return digest.hexdigest()


def _calibration_sha(campaign) -> str:
    """SHA-256 of the balance calibration file, the one input outside campaign.toml and logs."""
    balance = campaign.config.instruments.balance
    return balance.calibration_sha256 if balance is not None else ""


def _key(campaign, run_id: str, monte_carlo: int, rows: dict[str, str]) -> str:
    # ``rows`` holds the row records made so far: zero and tare rows serve many runs.
    for rid in campaign.dependencies(run_id):
        if rid not in rows:
            rows[rid] = _row_record(campaign, rid)
    record = {
        "tunnelred": __version__,
        "code": _code_digest(),
        "config": campaign.config.sha256,
        "calibration": _calibration_sha(campaign),
        "monte_carlo": int(monte_carlo),
        "runs": [rows[rid] for rid in campaign.dependencies(run_id)],
    }
    text = json.dumps(record, sort_keys=True)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


# An entry is an .npz archive read with allow_pickle=False: arrays of numbers and one JSON
# document (``meta``), so that nothing in OUT can make tunnelred run code. Anything that does
# not parse, is not a regular file, is too large or names another key or run is a miss.
_CACHE_FORMAT = 1
_CACHE_MAX_BYTES = 256 * 2**20


def _plain(value):
    """JSON's fallback for numpy scalars and pandas' missing values."""
    if hasattr(value, "item"):
        return value.item()
    if value is pd.NA or value is None:
        return None
    raise TypeError(f"{type(value).__name__} is not cached")


def _entry(key: str, outcome: _Outcome) -> dict[str, np.ndarray]:
    meta: dict = {"format": _CACHE_FORMAT, "key": key, "run": outcome.run}
    meta["failures"] = outcome.failures
    arrays: dict[str, np.ndarray] = {}
    r = outcome.result
    if r is not None:
        record = {
            "run": r.run,
            "config": r.config,
            "values": r.values,
            "flags": [[f.name, f.value, f.tolerance, f.reason] for f in r.flags],
            "inputs": r.inputs,
            "profiles": list(r.profiles),
            "theta": r.theta is not None,
            "budgets": None,
        }
        if r.theta is not None:
            arrays["theta"] = np.asarray(r.theta)
        for i, array in enumerate(r.profiles.values()):
            arrays[f"profile_{i}"] = np.asarray(array)
        if r.budgets is not None:
            columns = []
            for i, name in enumerate(r.budgets.columns):
                column = r.budgets[name]
                if pd.api.types.is_numeric_dtype(column) and not pd.api.types.is_bool_dtype(column):
                    arrays[f"budget_{i}"] = column.to_numpy()
                    columns.append([str(name), None])
                else:
                    columns.append([str(name), column.tolist()])
            record["budgets"] = columns
        meta["result"] = record
    else:
        meta["result"] = None
    text = json.dumps(meta, default=_plain, allow_nan=True)
    arrays["meta"] = np.frombuffer(text.encode("utf-8"), dtype=np.uint8)
    return arrays


def _outcome_from(entry, key: str, run_id: str) -> _Outcome | None:
    meta = json.loads(entry["meta"].tobytes().decode("utf-8"))
    if meta.get("format") != _CACHE_FORMAT or meta.get("key") != key or meta.get("run") != run_id:
        return None
    record = meta["result"]
    if record is None:
        return _Outcome(run_id, failures=list(meta["failures"]))
    budgets = None
    if record["budgets"] is not None:
        budgets = pd.DataFrame(
            {
                name: entry[f"budget_{i}"] if values is None else pd.Series(values, dtype=object)
                for i, (name, values) in enumerate(record["budgets"])
            }
        )
    result = reduction.RunResult(
        run=str(record["run"]),
        config=str(record["config"]),
        values=dict(record["values"]),
        theta=entry["theta"] if record["theta"] else None,
        profiles={name: entry[f"profile_{i}"] for i, name in enumerate(record["profiles"])},
        flags=tuple(
            quality.Flag(str(n), float(v), float(t), str(w)) for n, v, t, w in record["flags"]
        ),
        budgets=budgets,
        inputs={str(k): str(v) for k, v in record["inputs"].items()},
    )
    if result.run != run_id:
        return None
    return _Outcome(run_id, result=result, failures=list(meta["failures"]))


def _cache_read(folder: Path, key: str, run_id: str) -> _Outcome | None:
    path = folder / f"{key}{_CACHE_SUFFIX}"
    try:
        # lstat, not open: a link, FIFO or device planted in the cache is never opened.
        info = os.lstat(path)
        if not stat.S_ISREG(info.st_mode) or info.st_size > _CACHE_MAX_BYTES:
            return None
        with np.load(path, allow_pickle=False) as entry:
            return _outcome_from(entry, key, run_id)
    except Exception:
        # Missing, torn, corrupt or foreign: a miss; the fresh outcome overwrites it.
        return None


def _cache_write(folder: Path, key: str, outcome: _Outcome) -> None:
    """Write one entry: a temporary file renamed into place, not synced (a torn entry is a miss)."""
    try:
        arrays = _entry(key, outcome)
    except (TypeError, ValueError):
        return  # an outcome JSON cannot hold is simply not cached
    target = store.contained(folder, folder / f"{key}{_CACHE_SUFFIX}")
    fd, name = tempfile.mkstemp(dir=folder, prefix=f".{key}.", suffix=".tmp")
    try:
        with os.fdopen(fd, "wb") as handle:
            np.savez(handle, **arrays)
        os.replace(name, target)
    except BaseException:
        Path(name).unlink(missing_ok=True)
        raise


def _cache_prune(folder: Path, keep: set[str]) -> None:
    """Remove every entry not in ``keep``, and anything else found in the cache folder."""
    names = {f"{key}{_CACHE_SUFFIX}" for key in keep}
    for entry in folder.iterdir():
        if entry.name not in names and not entry.is_dir():
            entry.unlink(missing_ok=True)


# ---------------------------------------------------------------------------------------------
# Executors: each yields outcomes as runs finish


def _run_serial(campaign, run_ids, monte_carlo):
    for run_id in run_ids:
        yield _reduce_guarded(campaign, run_id, monte_carlo)


def _pool_context():
    # forkserver forks workers from a clean server process that has imported tunnelred once:
    # quick to start, safe with threads in the parent, and the user's script is not re-run.
    if "forkserver" in multiprocessing.get_all_start_methods():
        context = multiprocessing.get_context("forkserver")
        # plotting (matplotlib) too: the same processes draw the figures after the runs.
        context.set_forkserver_preload(
            ["tunnelred.pipeline.campaign", "tunnelred.products.plotting"]
        )
        _start_forkserver_deaf_to_ctrl_c()
        return context
    return multiprocessing.get_context("spawn")


def _process_pool(helpers: int) -> ProcessPoolExecutor:
    """A pool of ``helpers`` processes whose every process ends when this one dies."""
    return ProcessPoolExecutor(
        max_workers=helpers,
        mp_context=_pool_context(),
        initializer=_end_with_owner,
        initargs=(os.getpid(),),
    )


def _end_with_owner(owner: int) -> None:
    """Pool process start-up: exit once ``owner``, the process that made the pool, is gone.

    A SIGKILL gives the owner no chance to stop its pool; the workers would then wait on their
    queue for ever (the fork server with them, as each worker holds its liveness pipe), keeping
    the terminal or a caller's pipes open. The owner is this process's parent (spawn) or the
    fork server's parent; a dead owner's children are re-parented at once, zombie or not.
    """

    def watch() -> None:
        while _is_ancestor(owner):
            time.sleep(0.5)
        os._exit(1)

    threading.Thread(target=watch, name="tunnelred-owner-watch", daemon=True).start()


def _is_ancestor(pid: int, depth: int = 2) -> bool:
    here = os.getppid()
    for _ in range(depth):
        if here == pid:
            return True
        try:
            # /proc/<pid>/stat: "pid (comm) state ppid ..."; comm may hold spaces and ")".
            stat_line = Path(f"/proc/{here}/stat").read_text()
            here = int(stat_line.rsplit(")", 1)[1].split()[1])
        except (OSError, ValueError, IndexError):
            # No /proc: fall back to "the owner still exists" (a zombie counts as alive).
            try:
                os.kill(pid, 0)
            except ProcessLookupError:
                return False
            except OSError:
                pass
            return True
    return False


def _start_forkserver_deaf_to_ctrl_c() -> None:
    """Start the fork server with SIGINT ignored, so that Ctrl-C reaches only this process.

    An ignored signal stays ignored across fork and exec, and Python leaves an ignored SIGINT
    alone at start-up: the server and every worker it forks then ignore Ctrl-C (none prints a
    KeyboardInterrupt of its own), and this process stops them itself (:meth:`_PoolStart.finish`).
    Only the main thread may change a signal's handler; elsewhere the server starts as it would.
    """
    if threading.current_thread() is not threading.main_thread():
        return
    from multiprocessing import forkserver

    previous = signal.signal(signal.SIGINT, signal.SIG_IGN)
    try:
        forkserver.ensure_running()
    finally:
        signal.signal(signal.SIGINT, previous)


def _warm(path: str, token: str) -> None:
    """Open the campaign in a new pool process before its first run arrives."""
    _worker_setup()
    if _OPEN_CAMPAIGNS.get(path, ("",))[0] != token:
        _OPEN_CAMPAIGNS[path] = (token, open_campaign(path, check_logs=False))


class _PoolStart:
    """A process pool of ``helpers`` processes, started without waiting for it.

    The first submission to a forkserver pool blocks until the server has imported tunnelred
    (a second or more); a helper thread makes it (a warm-up task that opens the campaign) while
    this process gets on with its own work. :meth:`finish` with ``wait`` joins both, so no
    half-started process outlives the reduction. The pool lives for one reduction, so its
    processes' opened campaign is current: the token is only this pool's.
    """

    def __init__(self, path: str, helpers: int):
        self.path = path
        self.helpers = helpers
        self.token = secrets.token_hex(8)
        self.executor = _process_pool(helpers)
        self._lock = threading.Lock()
        self._submitted = False
        self._finished = False
        self._thread = threading.Thread(target=self._start, daemon=True)
        self._thread.start()

    def _start(self) -> None:
        try:
            for _ in range(self.helpers):
                self.executor.submit(_warm, self.path, self.token)
        except Exception:
            pass  # a pool that cannot start leaves the runs to this process
        with self._lock:
            self._submitted = True
            if self._finished:
                self.executor.shutdown(wait=False, cancel_futures=True)

    @property
    def ready(self) -> bool:
        with self._lock:
            return self._submitted

    def finish(self, wait: bool, *, stop: bool = False) -> None:
        """Shut the pool down; ``stop`` (an interrupted reduction) ends its processes at once.

        Without ``stop`` a process still reducing finishes its run first; with it, queued runs
        are cancelled and the processes terminated, so that Ctrl-C or SIGTERM ends the command
        within a second or two whatever the workers are doing.
        """
        if wait:
            # A process still starting when the command exits dies with a traceback of its own;
            # an interrupted reduction waits a little for it, not for ever.
            self._thread.join(timeout=_STOP_WAIT if stop else None)
        with self._lock:
            self._finished = True
            if stop:
                _terminate(self.executor)
            if self._submitted:
                self.executor.shutdown(wait=wait, cancel_futures=True)


def _terminate(executor: ProcessPoolExecutor) -> None:
    """End an executor's processes now (an interrupted reduction waits for none of them)."""
    # The executor has no public way to do it before Python 3.14.
    for process in list((getattr(executor, "_processes", None) or {}).values()):
        with contextlib.suppress(Exception):
            process.terminate()


def _run_pool(campaign, pool: _PoolStart, run_ids, monte_carlo):
    """The pool's processes, and this process as one more worker.

    This process reduces from the front of the list at once; once the pool is up, its
    processes take runs from the back, each kept two runs ahead so that none waits.
    """
    todo = deque(run_ids)
    pending: dict = {}
    broken = False
    complete = False
    try:
        while todo or pending:
            while todo and not broken and len(pending) < 2 * pool.helpers and pool.ready:
                try:
                    future = pool.executor.submit(
                        _worker, pool.path, pool.token, todo[-1], monte_carlo
                    )
                except BrokenProcessPool:
                    broken = True  # the rest is reduced here
                    break
                pending[future] = todo.pop()
            if todo:
                yield _reduce_guarded(campaign, todo.popleft(), monte_carlo)
                done = [f for f in pending if f.done()]
            else:
                done, _ = wait(pending, return_when=FIRST_COMPLETED)
            for future in done:
                run_id = pending.pop(future)
                try:
                    yield future.result()
                except Exception as exc:
                    # The worker process died (BrokenProcessPool) or the outcome did not
                    # come back; the run is failed, the others go on.
                    yield _Outcome(run_id, failures=[_internal_row(run_id, exc)], cacheable=False)
        complete = True
    finally:
        # Not complete: interrupted (Ctrl-C, SIGTERM) or closed early; stop the processes.
        for future in pending:
            future.cancel()
        pool.finish(wait=True, stop=not complete)


def _distributed():
    """dask.distributed, imported only when asked for: it is an optional dependency."""
    try:
        import distributed
    except ImportError:
        raise UsageError(_DASK_HINT) from None
    return distributed


def _check_scheduler(address: str) -> None:
    """Refuse a malformed ``--dask`` address at once, and one where nothing answers quickly.

    The address is parsed as dask.distributed parses it; then a plain connection to its host
    and port must open within :data:`_DASK_CONNECT` seconds (dask's own client would wait 30 s
    and then print its tracebacks). Raises :class:`UsageError`; nothing has been reduced.
    """
    from distributed.comm.addressing import get_address_host_port

    hint = "give tcp://HOST:PORT of a running dask scheduler, or 'local'"
    try:
        host, port = get_address_host_port(address)
    except (ValueError, TypeError) as exc:
        raise UsageError(f"--dask {address!r} is not a scheduler address ({exc}); {hint}") from None
    if not host or not 0 < int(port) < 65536:
        raise UsageError(f"--dask {address!r} is not a scheduler address; {hint}")
    try:
        conn = socket.create_connection((host, int(port)), timeout=_DASK_CONNECT)
    except OSError as exc:
        reason = exc.strerror or str(exc) or type(exc).__name__
        raise UsageError(
            f"no dask scheduler answers at {address} within {_DASK_CONNECT:g} s ({reason}); "
            "check that it runs and the address, or use --dask local"
        ) from None
    with conn:
        if not address.startswith("tcp://") and "://" in address:
            return  # tls and the others: the client speaks first
        # A dask scheduler sends its handshake as soon as a connection opens; something else
        # listening there (dask's client would wait on it for ever) says nothing or closes.
        try:
            greeting = conn.recv(1)
        except OSError:
            greeting = b""
    if not greeting:
        raise UsageError(
            f"{address} does not answer as a dask scheduler within {_DASK_CONNECT:g} s; "
            "check the address (the scheduler's port, 8786 by default), or use --dask local"
        )


def _dask_client(dask: str, workers: int):
    from distributed import Client, LocalCluster

    if dask == "local":
        cluster = LocalCluster(
            n_workers=workers, threads_per_worker=1, processes=True, dashboard_address=None
        )
        return Client(cluster), cluster
    try:
        return Client(dask, timeout=f"{_DASK_CONNECT}s"), None
    except Exception as exc:  # the port answers, but not as a dask scheduler would
        raise UsageError(
            f"{dask} does not answer as a dask scheduler within {_DASK_CONNECT:g} s "
            f"({type(exc).__name__}); check the address, or use --dask local"
        ) from None


def _run_dask(path, token, run_ids, monte_carlo, workers, dask):
    from distributed import as_completed

    client, cluster = _dask_client(dask, workers)
    futures = []
    try:
        futures = [
            client.submit(_dask_task, path, token, rid, monte_carlo, pure=False) for rid in run_ids
        ]
        names = {future.key: rid for future, rid in zip(futures, run_ids, strict=True)}
        for future in as_completed(futures):
            run_id = names[future.key]
            try:
                yield future.result()
            except Exception as exc:
                yield _Outcome(run_id, failures=[_internal_row(run_id, exc)], cacheable=False)
    finally:
        client.cancel(futures)
        client.close()
        if cluster is not None:
            cluster.close()


# ---------------------------------------------------------------------------------------------
# The campaign


def _progress_bar(total: int, enabled: bool):
    from tqdm.auto import tqdm

    return tqdm(total=total, unit="run", desc="reducing", disable=not enabled, file=sys.stderr)


def _select(campaign, run_ids) -> list[str]:
    data = [spec.run for spec in campaign.runs.values() if spec.kind == "data"]
    if run_ids is None:
        return data
    wanted = list(dict.fromkeys(run_ids))
    unknown = [r for r in wanted if r not in campaign.runs]
    if unknown:
        raise ValueError(f"runs.csv has no run(s) {', '.join(map(repr, unknown))}")
    not_data = [r for r in wanted if campaign.runs[r].kind != "data"]
    if not_data:
        raise ValueError(
            f"only data runs are reduced; {', '.join(map(repr, not_data))} "
            "are zero or tare runs (their data enter the data runs that name them)"
        )
    return wanted


def _token(campaign, keys: dict[str, str]) -> str:
    """A hash of every input: a long-lived dask worker reopens a campaign that has changed."""
    text = json.dumps([campaign.config.sha256, _calibration_sha(campaign), sorted(keys.values())])
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def _repeat_flags(results: list, campaign) -> list:
    """Add the campaign-level repeat_disagreement flags to the runs they concern."""
    if len(results) < 2:
        return results
    table = pd.DataFrame([{**r.values, "run": r.run, "config": r.config} for r in results])
    # Each configuration's repeats are judged with its own tolerances.
    raised = quality.repeat_disagreement(table, campaign.config.tolerances_for)
    return [
        dataclasses.replace(r, flags=(*r.flags, raised[r.run])) if r.run in raised else r
        for r in results
    ]


def _failures_table(rows: list[dict]) -> pd.DataFrame:
    table = pd.DataFrame(rows, columns=list(store.FAILURE_COLUMNS))
    table["line"] = table["line"].astype("Int64")
    return table


def _budgets_table(results: list) -> pd.DataFrame:
    tables = [r.budgets for r in results if r.budgets is not None and len(r.budgets)]
    if not tables:
        return pd.DataFrame(columns=list(store.BUDGET_COLUMNS))
    return pd.concat(tables, ignore_index=True)


def reduce_campaign(
    path,
    out=None,
    *,
    workers: int | None = None,
    dask: str | None = None,
    fresh: bool = False,
    monte_carlo: int = 0,
    progress: bool = True,
    run_ids=None,
    figures: bool = True,
    report: bool = False,
    extras=None,
    force: bool = False,
    provisional: bool = False,
) -> CampaignResults:
    """Reduce every data run of a campaign folder and write the results.

    Parameters
    ----------
    path : str or path-like
        The campaign folder (opened read-only).
    out : str, path-like or tunnelred.products.results_folder.ResultsFolder, optional
        Output folder: results.nc, results.csv, provenance.json, failures.csv, budgets.csv,
        figures/ (and report.pdf) as one new generation (docs/results.md), and the cache
        .cache/. It is locked for the reduction; a ResultsFolder is one the caller holds. None:
        nothing is written and nothing is cached.
    workers : int, optional
        Processes to reduce with; default ``os.cpu_count()``. 1 reduces in this process.
    dask : str, optional
        ``"local"``: a dask.distributed LocalCluster of ``workers`` single-threaded processes;
        ``"tcp://host:port"``: an existing scheduler, whose workers must see ``path`` at the same
        place. Needs ``pip install "tunnelred[dask]"``.
    fresh : bool
        Ignore cached results (the cache is rewritten).
    monte_carlo : int
        Monte Carlo draws per run (JCGM 101) to check the linear uncertainty; 0 skips them.
    progress : bool
        Show a progress bar counting runs as they finish.
    run_ids : iterable of str, optional
        Reduce only these data runs.
    figures : bool
        Write the standard figures into OUT/figures
        (:func:`tunnelred.products.plotting.save_standard_figures`).
    report : bool
        Also write OUT/report.pdf (:func:`tunnelred.products.report.write_report`), part of the
        same generation.
    extras : callable, optional
        ``extras(staging, dataset)`` writes more files into the new generation before it is
        switched to (``staging.file(name)`` gives each path); returns a dict name → path or None.
    force : bool
        Write into a non-empty folder that is not a tunnelred results folder.
    provisional : bool
        For the watch only: a data run whose closing zero has no row yet is reduced from its
        opening zero and marked ``provisional`` (see
        :func:`tunnelred.inputs.readers.open_campaign`); such runs are reduced in this process.
        ``tunnelred reduce`` never sets it, so its results are all final.

    Returns
    -------
    CampaignResults

    Raises
    ------
    InputError
        campaign.toml or runs.csv is unusable as a whole, or has a problem that would stop every
        run (an unknown blockage method, a misspelt key): nothing is written.
    OutputFolderError
        ``out`` cannot be used (inside the campaign, locked by another process, not writable,
        a foreign non-empty folder) or the new results could not be written (a full disk): the
        previous results stay in force.
    ValueError
        ``run_ids`` names a run that is not a data run of the campaign.
    KeyboardInterrupt
        Re-raised after cancelling the pending runs; the previous results stay in force and
        every cache entry written is whole.

    Notes
    -----
    Runs are independent: each is reduced from its own logs and those of its zero and tare runs.
    A run with problems in its inputs, or that cannot be reduced, becomes a row of failures.csv
    and the others go on. The campaign-level repeat-run check runs once all runs are in.
    """
    from tunnelred.products.results_folder import (
        ResultsFolder,
        check_location,
        open_results_folder,
    )

    started = time.perf_counter()
    if dask is not None:
        _distributed()
        if dask != "local":
            _check_scheduler(dask)
    path = Path(path).resolve()
    held = isinstance(out, ResultsFolder)
    if out is not None and not held:
        check_location(out, path, force=force)  # before anything is opened or reduced
    settings = _Settings(
        path=path,
        workers=max(1, int(workers or os.cpu_count() or 1)),
        dask=dask,
        fresh=fresh,
        monte_carlo=monte_carlo,
        progress=progress,
        run_ids=None if run_ids is None else tuple(run_ids),
        figures=figures,
        report=report,
        provisional=provisional,
    )
    campaign = open_campaign(path, check_logs=False, closing_zero_pending=provisional)
    shared = campaign.shared_problems()
    if shared:
        # every run would fail with these same problems: stop once, before OUT is touched
        raise InputError(shared)
    plan = _plan(campaign, settings)  # an unknown run id is refused before OUT is touched
    folder = out if held or out is None else open_results_folder(out, path, force=force)
    try:
        return _reduce(campaign, plan, folder, settings, started, extras)
    finally:
        if folder is not None and not held:
            folder.close()


@dataclass(frozen=True)
class _Settings:
    """How :func:`reduce_campaign` was asked to reduce (its arguments, normalised)."""

    path: Path  # the campaign folder, absolute
    workers: int
    dask: str | None
    fresh: bool
    monte_carlo: int
    progress: bool
    run_ids: tuple[str, ...] | None  # None: every data run
    figures: bool
    report: bool
    provisional: bool = False  # closing zeros may be pending: reduced here, not in workers


@dataclass
class _Plan:
    """The runs of one reduction: those that failed already and the cache key of the others."""

    selected: list[str]
    unreadable: list[str]
    failures: dict[str, list[dict]]
    keys: dict[str, str]


def _plan(campaign, settings: _Settings) -> _Plan:
    """Runs with input problems fail at once; every other selected run gets its cache key."""
    selected = _select(campaign, settings.run_ids)
    failures: dict[str, list[dict]] = {}
    # A row too broken to say its kind may be a data run: it is listed with the failures.
    unreadable = list(campaign.unreadable_runs) if settings.run_ids is None else []
    for rid in unreadable:
        failures[rid] = [_problem_row(rid, p) for p in campaign.run_problems(rid)]
    keys: dict[str, str] = {}
    rows: dict[str, str] = {}
    for rid in selected:
        problems = campaign.run_problems(rid)
        if problems:
            failures[rid] = [_problem_row(rid, p) for p in problems]
        else:
            keys[rid] = _key(campaign, rid, settings.monte_carlo, rows)
    return _Plan(selected, unreadable, failures, keys)


def _cached_outcomes(plan: _Plan, cache: Path | None, settings: _Settings) -> dict[str, _Outcome]:
    outcomes: dict[str, _Outcome] = {}
    if cache is not None and not settings.fresh:
        for rid, key in plan.keys.items():
            hit = _cache_read(cache, key, rid)
            if hit is not None:
                outcomes[rid] = hit
    return outcomes


def _reduce_pending(campaign, plan: _Plan, cache, settings: _Settings, outcomes: dict) -> None:
    """Reduce the runs the cache did not answer, on the executor asked for, caching each."""
    todo = [rid for rid in plan.keys if rid not in outcomes]
    mc = settings.monte_carlo
    bar = _progress_bar(len(plan.failures) + len(plan.keys), settings.progress)
    bar.update(len(plan.failures) + len(outcomes))
    caching = cache is not None
    try:
        if settings.provisional:
            # Workers open the campaign afresh, as `reduce` does: they would not know.
            stream = _run_serial(campaign, todo, mc)
        elif settings.dask is not None:
            token = _token(campaign, plan.keys)
            stream = _run_dask(str(settings.path), token, todo, mc, settings.workers, settings.dask)
        elif settings.workers == 1 or len(todo) <= 1:
            stream = _run_serial(campaign, todo, mc)
        else:
            # Started only when there is work for it: this process reduces from the front of
            # the list while the pool's processes start, and the pool is joined when done,
            # so that no half-started process outlives the command.
            pool = _PoolStart(str(settings.path), settings.workers - 1)
            stream = _run_pool(campaign, pool, todo, mc)
        with contextlib.closing(stream), _blas_one_thread():
            for outcome in stream:
                outcomes[outcome.run] = outcome
                if caching and outcome.cacheable:
                    try:
                        _cache_write(cache, plan.keys[outcome.run], outcome)
                    except OSError:
                        caching = False  # a full disk: reduce on; the results say so later
                bar.update(1)
    finally:
        bar.close()


def _reduce(campaign, plan: _Plan, folder, settings: _Settings, started: float, extras):
    cache = folder.inside(folder.cache) if folder is not None else None
    outcomes = _cached_outcomes(plan, cache, settings)
    from_cache = sum(1 for o in outcomes.values() if o.result is not None)
    _reduce_pending(campaign, plan, cache, settings, outcomes)

    failures = plan.failures
    results = []
    for rid in plan.selected:
        outcome = outcomes.get(rid)
        if outcome is not None and outcome.result is not None:
            results.append(outcome.result)
        elif outcome is not None:
            failures[rid] = outcome.failures
    results = _repeat_flags(results, campaign)
    ds = store.results_to_dataset(
        results, campaign=campaign, methods=_methods(campaign, settings.monte_carlo)
    )
    runs = [*plan.selected, *plan.unreadable]
    failures_table = _failures_table([row for rid in runs for row in failures.get(rid, [])])
    budgets = _budgets_table(results)

    outputs: dict[str, Path] = {}
    if folder is not None:
        with folder.stage() as staging:
            written = _write_generation(staging, ds, failures_table, budgets, settings)
            if extras is not None:
                written.update(extras(staging, ds) or {})
        outputs = {name: folder.root / name for name in written}
        if settings.run_ids is None:
            _cache_prune(cache, set(plan.keys.values()))
    return CampaignResults(
        dataset=ds,
        failures=failures_table,
        budgets=budgets,
        outputs=outputs,
        reduced=len(results),
        from_cache=from_cache,
        failed=len(failures),
        flagged=sum(1 for r in results if r.flags),
        elapsed=time.perf_counter() - started,
        title=campaign.config.campaign.title,
        notices=tuple(_notice_text(p) for p in campaign.notices),
    )


def _notice_text(notice: Problem) -> str:
    return f"{notice.location()}: {notice.hint or notice.found}"


# What each part of a generation was made from, kept in the generation (hidden from OUT's
# published names): a re-run whose part would come out the same reuses the previous files.
_MADE_FROM = ".made_from.json"
_RESULT_FILES = ("results.nc", "results.csv", "provenance.json", "failures.csv", "budgets.csv")


def _write_generation(staging, ds, failures_table, budgets, settings: _Settings) -> dict:
    """Every output of one reduction, into its new generation; name → path inside it.

    A part (the result files, the figures, the report) whose inputs are those of the previous
    generation is carried over from it (hard links) instead of being written again: an unchanged
    re-run costs the cache reads, not the drawing.
    """
    results = hashlib.sha256(
        (_code_digest() + store.results_digest(ds, failures_table, budgets)).encode()
    ).hexdigest()
    made_from = {"results": results}
    before = staging.previous_record(_MADE_FROM)

    written = _carried(staging, before, "results", results, _RESULT_FILES)
    if written is None:
        written = dict(
            store.write_results(ds, staging.path, failures=failures_table, budgets=budgets)
        )
    staging.file("figures").mkdir(exist_ok=True)
    if settings.figures and ds.sizes.get("run", 0):
        made_from["figures"] = results
        figures = _carried(staging, before, "figures", results)
        if figures is None:
            from tunnelred.products.plotting import (
                save_standard_figures,  # matplotlib only where figures are made
            )

            with _figure_helpers(settings) as (executor, helpers):
                drawn = save_standard_figures(ds, staging.path, executor=executor, helpers=helpers)
            figures = {f"figures/{figure.name}": figure for figure in drawn}
        written.update(figures)
        made_from["figures_files"] = sorted(figures)
    if settings.report:
        # The report also reads the campaign folder (report control, model, photo).
        report = hashlib.sha256(
            (results + _campaign_files_stamp(settings.path, ds)).encode()
        ).hexdigest()
        made_from["report"] = report
        carried = _carried(staging, before, "report", report, ("report.pdf",))
        if carried is None:
            from tunnelred.products.report import write_report

            carried = {
                "report.pdf": write_report(
                    staging.path, staging.file("report.pdf"), campaign=settings.path
                )
            }
        written.update(carried)
    store.atomic_write_bytes(
        staging.file(_MADE_FROM), json.dumps(made_from, indent=1).encode() + b"\n"
    )
    return written


@contextlib.contextmanager
def _figure_helpers(settings: _Settings):
    """(executor, helpers): processes to draw figures beside this one, or (None, 0) for none."""
    helpers = settings.workers - 1 if settings.dask is None else 0
    if helpers < 1:
        yield None, 0
        return
    executor = _process_pool(helpers)
    try:
        yield executor, helpers
    except BaseException:
        _terminate(executor)  # interrupted: no figure is waited for
        raise
    finally:
        executor.shutdown(wait=True, cancel_futures=True)


def _carried(staging, before: dict, part: str, digest: str, names=None) -> dict | None:
    """``part``'s files brought from the previous generation if it was made from ``digest``.

    None (and nothing left behind) when it was not, or when any file could not be carried:
    the caller then writes the part anew.
    """
    if before.get(part) != digest:
        return None
    if names is None:
        names = before.get(f"{part}_files")
        if not isinstance(names, list) or not all(isinstance(n, str) for n in names):
            return None
    carried = {}
    for name in names:
        if not staging.carry(name):
            for path in carried.values():
                path.unlink(missing_ok=True)
            return None
        carried[name] = staging.file(name)
    return carried


def _campaign_files_stamp(campaign_path, ds) -> str:
    """Size and modification time of every campaign file that is not a hashed input."""
    if campaign_path is None:
        return ""
    root = Path(campaign_path)
    try:
        hashed = set(json.loads(ds.attrs.get("input_sha256", "{}")))
    except (TypeError, ValueError):
        hashed = set()
    stamp = []
    for folder, dirs, files in os.walk(root):
        dirs.sort()
        for name in sorted(files):
            path = Path(folder) / name
            relative = path.relative_to(root).as_posix()
            if relative in hashed:
                continue
            try:
                info = path.stat()
            except OSError:
                continue
            stamp.append(f"{relative}\0{info.st_size}\0{info.st_mtime_ns}")
    return hashlib.sha256("\n".join(stamp).encode()).hexdigest()


def _methods(campaign, monte_carlo: int) -> dict:
    methods = store.campaign_methods(campaign)
    methods["uncertainty"] = "GUM linear propagation (JCGM 100:2008)"
    methods["monte_carlo_draws"] = int(monte_carlo)
    return methods
