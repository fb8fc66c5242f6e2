"""Executors: each yields outcomes as runs finish (this process, a process pool with this
process as one more worker, or a dask.distributed cluster).
"""

from __future__ import annotations

import contextlib
import multiprocessing
import os
import secrets
import signal
import socket
import threading
import time
from collections import deque
from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
from concurrent.futures.process import BrokenProcessPool
from pathlib import Path

from tunnelred.common.errors import UsageError
from tunnelred.pipeline.campaign.outcome import (
    _dask_task,
    _internal_row,
    _Outcome,
    _reduce_guarded,
    _warm,
    _worker,
)

_DASK_HINT = 'dask is not installed; install it with: pip install "tunnelred[dask]"'
# Seconds a dask scheduler has to answer before the reduction stops with a message.
_DASK_CONNECT = 5.0
# Seconds an interrupted reduction waits for a pool process still starting.
_STOP_WAIT = 3.0


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


class _DaskStart:
    """A dask client (and its local cluster), started in a thread while the campaign opens.

    A local cluster's worker processes take seconds to start and import tunnelred; started at
    once, that overlaps opening the campaign and planning. :meth:`take` hands the client over
    (:func:`_run_dask` closes it); :meth:`close` closes one never taken.
    """

    def __init__(self, dask: str, workers: int):
        self._made = None
        self._error: BaseException | None = None
        self._taken = False
        self._thread = threading.Thread(target=self._start, args=(dask, workers), daemon=True)
        self._thread.start()

    def _start(self, dask: str, workers: int) -> None:
        try:
            self._made = _dask_client(dask, workers)
        except BaseException as exc:  # raised again in the caller's thread, by take()
            self._error = exc

    def take(self):
        self._thread.join()
        if self._error is not None:
            raise self._error
        self._taken = True
        return self._made

    def close(self) -> None:
        self._thread.join()
        if self._made is not None and not self._taken:
            client, cluster = self._made
            client.close()
            if cluster is not None:
                cluster.close()


def _dask_chunks(run_ids, workers: int) -> list[list[str]]:
    """Runs in contiguous chunks, about four a worker: fewer round trips to the scheduler than
    one task a run, and still enough tasks to keep every worker busy to the end."""
    run_ids = list(run_ids)
    size = max(1, -(-len(run_ids) // (4 * max(1, workers))))
    return [run_ids[i : i + size] for i in range(0, len(run_ids), size)]


def _run_dask(path, token, run_ids, monte_carlo, workers, dask, start: _DaskStart | None = None):
    from distributed import as_completed

    client, cluster = start.take() if start is not None else _dask_client(dask, workers)
    futures = []
    try:
        chunks = _dask_chunks(run_ids, workers)
        futures = [
            client.submit(_dask_task, path, token, chunk, monte_carlo, pure=False)
            for chunk in chunks
        ]
        names = {future.key: chunk for future, chunk in zip(futures, chunks, strict=True)}
        for future in as_completed(futures):
            chunk = names[future.key]
            try:
                outcomes = future.result()
            except Exception as exc:
                # The worker died or the outcomes did not come back: the chunk's runs fail.
                outcomes = [
                    _Outcome(rid, failures=[_internal_row(rid, exc)], cacheable=False)
                    for rid in chunk
                ]
            yield from outcomes
    finally:
        client.cancel(futures)
        client.close()
        if cluster is not None:
            cluster.close()
