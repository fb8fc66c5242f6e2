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
import hashlib
import json
import os
import secrets
import sys
import time
from dataclasses import dataclass
from pathlib import Path

import pandas as pd

from tunnelred.common.errors import InputError, Problem
from tunnelred.engine import quality
from tunnelred.inputs.readers import open_campaign
from tunnelred.pipeline.campaign.cache import (  # noqa: F401  (names tests and callers use from this path)
    _CACHE_DIR,
    _CACHE_SUFFIX,
    _cache_prune,
    _cache_read,
    _cache_write,
    _calibration_sha,
    _code_digest,
    _key,
    cache_key,
)
from tunnelred.pipeline.campaign.executors import (  # noqa: F401
    _DASK_HINT,
    _check_scheduler,
    _DaskStart,
    _distributed,
    _pool_context,
    _PoolStart,
    _process_pool,
    _run_dask,
    _run_pool,
    _run_serial,
    _terminate,
)
from tunnelred.pipeline.campaign.generation import _MADE_FROM, _RESULT_FILES, _write_generation  # noqa: F401
from tunnelred.pipeline.campaign.outcome import (  # noqa: F401
    _blas_one_thread,
    _internal_row,
    _Outcome,
    _problem_row,
    _reduce_guarded,
)
from tunnelred.pipeline.campaign.results import CampaignResults
from tunnelred.products import store

__all__ = ["CampaignResults", "reduce_campaign", "cache_key", "MAX_MONTE_CARLO_DRAWS"]


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


# The most Monte Carlo draws a run may take. JCGM 101:2008 §7.2.2: 10^6 draws can often be
# expected to give a 95 % coverage interval correct to one or two significant digits; more buys
# little, and every draw of every output is held in memory (about 3 GB for a run with a Cp
# profile at 10^6, measured on the demo's R016), in each worker at once.
MAX_MONTE_CARLO_DRAWS = 1_000_000


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
        Monte Carlo draws per run (JCGM 101) to check the linear uncertainty; 0 skips them,
        otherwise 2 to :data:`MAX_MONTE_CARLO_DRAWS`.
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
        ``run_ids`` names a run that is not a data run of the campaign, or ``monte_carlo`` is
        out of range (nothing is opened or written).
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
    if monte_carlo and not 2 <= monte_carlo <= MAX_MONTE_CARLO_DRAWS:
        raise ValueError(
            f"monte_carlo takes 0 (none) or 2 to {MAX_MONTE_CARLO_DRAWS} draws; got {monte_carlo}"
        )
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
    # The cluster starts while the campaign opens (provisional runs are reduced here).
    dask_start = _DaskStart(dask, settings.workers) if dask and not provisional else None
    try:
        campaign = open_campaign(path, check_logs=False, closing_zero_pending=provisional)
        shared = campaign.shared_problems()
        if shared:
            # every run would fail with these same problems: stop once, before OUT is touched
            raise InputError(shared)
        plan = _plan(campaign, settings)  # an unknown run id is refused before OUT is touched
        folder = out if held or out is None else open_results_folder(out, path, force=force)
        try:
            return _reduce(campaign, plan, folder, settings, started, extras, dask_start)
        finally:
            if folder is not None and not held:
                folder.close()
    finally:
        if dask_start is not None:
            dask_start.close()


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
    """The runs of one reduction: those that failed already and the cache key of the others.

    A key is None until it is needed (:func:`_known_keys`, :func:`_key_of`).
    """

    selected: list[str]
    unreadable: list[str]
    failures: dict[str, list[dict]]
    keys: dict[str, str | None]
    rows: dict[str, str] = dataclasses.field(default_factory=dict)  # row records made so far


def _plan(campaign, settings: _Settings) -> _Plan:
    """Runs with input problems fail at once; every other selected run is to be reduced."""
    selected = _select(campaign, settings.run_ids)
    failures: dict[str, list[dict]] = {}
    # A row too broken to say its kind may be a data run: it is listed with the failures.
    unreadable = list(campaign.unreadable_runs) if settings.run_ids is None else []
    for rid in unreadable:
        failures[rid] = [_problem_row(rid, p) for p in campaign.run_problems(rid)]
    keys: dict[str, str | None] = {}
    for rid in selected:
        problems = campaign.run_problems(rid)
        if problems:
            failures[rid] = [_problem_row(rid, p) for p in problems]
        else:
            keys[rid] = None
    return _Plan(selected, unreadable, failures, keys)


def _known_keys(campaign, plan: _Plan, cache: Path | None, settings: _Settings) -> None:
    """Every run's cache key now, when something is to be looked up by it before reducing.

    That is a cache holding entries that may answer, or a dask scheduler whose long-lived workers
    tell a changed campaign by a hash of every input. Otherwise (a fresh reduction, an empty
    cache, no OUT) each key waits for its run's outcome (:func:`_key_of`): the logs are then
    hashed from the very bytes the reduction parsed, and read once instead of twice.
    """
    remote = settings.dask not in (None, "local")
    if not (remote or (cache is not None and not settings.fresh and _has_entries(cache))):
        return
    for rid in plan.keys:
        plan.keys[rid] = _key(campaign, rid, settings.monte_carlo, plan.rows)


def _has_entries(cache: Path) -> bool:
    try:
        with os.scandir(cache) as entries:
            return any(True for _ in entries)
    except OSError:
        return False


def _key_of(campaign, plan: _Plan, outcome: _Outcome, monte_carlo: int) -> str:
    """A run's cache key once it is reduced, from the file hashes its reduction computed."""
    key = plan.keys[outcome.run]
    if key is None:
        for rel, sha in (outcome.result.inputs if outcome.result is not None else {}).items():
            campaign.file_hashes.offer(rel, sha)  # a worker's parse hashed it; this process did not
        key = plan.keys[outcome.run] = _key(campaign, outcome.run, monte_carlo, plan.rows)
    return key


def _cached_outcomes(plan: _Plan, cache: Path | None, settings: _Settings) -> dict[str, _Outcome]:
    outcomes: dict[str, _Outcome] = {}
    if cache is not None and not settings.fresh:
        for rid, key in plan.keys.items():
            if key is None:
                continue
            hit = _cache_read(cache, key, rid)
            if hit is not None:
                outcomes[rid] = hit
    return outcomes


def _reduce_pending(
    campaign, plan: _Plan, cache, settings: _Settings, outcomes: dict, dask_start=None
) -> None:
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
            # A local cluster lives for this reduction only: any token is its own.
            local = settings.dask == "local"
            token = secrets.token_hex(8) if local else _token(campaign, plan.keys)
            stream = _run_dask(
                str(settings.path), token, todo, mc, settings.workers, settings.dask, dask_start
            )
        elif settings.workers == 1 or len(todo) <= 1:
            stream = _run_serial(campaign, todo, mc)
        else:
            # Started only when there is work for it: this process reduces from the front of
            # the list while the pool's processes start, and the pool is joined when done,
            # so that no half-started process outlives the command.
            # no more processes than runs left (--workers 100000 started that many, for ever)
            pool = _PoolStart(str(settings.path), min(settings.workers, len(todo)) - 1)
            stream = _run_pool(campaign, pool, todo, mc)
        with contextlib.closing(stream), _blas_one_thread():
            for outcome in stream:
                outcomes[outcome.run] = outcome
                if caching and outcome.cacheable:
                    try:
                        _cache_write(cache, _key_of(campaign, plan, outcome, mc), outcome)
                    except OSError:
                        caching = False  # a full disk: reduce on; the results say so later
                bar.update(1)
    finally:
        bar.close()


def _reduce(
    campaign, plan: _Plan, folder, settings: _Settings, started: float, extras, dask_start=None
):
    cache = folder.inside(folder.cache) if folder is not None else None
    _known_keys(campaign, plan, cache, settings)
    outcomes = _cached_outcomes(plan, cache, settings)
    from_cache = sum(1 for o in outcomes.values() if o.result is not None)
    _reduce_pending(campaign, plan, cache, settings, outcomes, dask_start)

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
            # A key not made (caching stopped on a full disk) keeps no entry either.
            _cache_prune(cache, {key for key in plan.keys.values() if key is not None})
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


def _methods(campaign, monte_carlo: int) -> dict:
    methods = store.campaign_methods(campaign)
    methods["uncertainty"] = "GUM linear propagation (JCGM 100:2008)"
    methods["monte_carlo_draws"] = int(monte_carlo)
    return methods
