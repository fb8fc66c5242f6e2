"""One run's outcome, the same from every executor, and the tasks a worker process or a dask
worker runs.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from threadpoolctl import threadpool_limits

from tunnelred.common.errors import InputError, Problem, ReductionError
from tunnelred.engine import reduction
from tunnelred.inputs.readers import open_campaign


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


def _dask_task(path: str, token: str, run_ids: list[str], monte_carlo: int) -> list[_Outcome]:
    """A dask worker's task, a chunk of runs: the worker may serve others, so the BLAS limit is
    for these runs only."""
    with _blas_one_thread():
        return [_open_and_reduce(path, token, run_id, monte_carlo) for run_id in run_ids]


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


def _warm(path: str, token: str) -> None:
    """Open the campaign in a new pool process before its first run arrives."""
    _worker_setup()
    if _OPEN_CAMPAIGNS.get(path, ("",))[0] != token:
        _OPEN_CAMPAIGNS[path] = (token, open_campaign(path, check_logs=False))
