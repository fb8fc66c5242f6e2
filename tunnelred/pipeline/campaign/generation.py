"""The results folder's new generation: the result files, figures and report, each part carried
over from the previous generation when it was made from the same inputs.
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import os
from pathlib import Path
from typing import TYPE_CHECKING

from tunnelred.pipeline.campaign.cache import _code_digest
from tunnelred.pipeline.campaign.executors import _process_pool, _terminate
from tunnelred.products import store

if TYPE_CHECKING:
    from tunnelred.pipeline.campaign import _Settings


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
    # drawing is CPU-bound: no more helpers than cores (--workers 100000 tried to start them all)
    helpers = min(settings.workers, os.cpu_count() or 1) - 1 if settings.dask is None else 0
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
