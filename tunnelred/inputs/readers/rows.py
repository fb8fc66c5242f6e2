"""runs.csv rows → checked :class:`RunSpec` objects, and the checks between runs (references,
merge cycles, a closing zero not yet taken)."""

from __future__ import annotations

import re
from collections.abc import Callable, Iterable
from dataclasses import replace
from datetime import datetime
from pathlib import Path

import numpy as np

from tunnelred.common.errors import Problem, brief
from tunnelred.inputs.files import (
    MAX_LOG_BYTES,
    Refusal,
    check_regular,
    inside_campaign,
)
from tunnelred.inputs.logs import (
    _NUMBER,
    MAX_MAGNITUDE,
)
from tunnelred.inputs.readers.objects import KINDS, RunSpec
from tunnelred.inputs.readers.runs import RUNS_FILE, RUNS_WITH_UNITS, log_cells, run_lists
from tunnelred.inputs.streams import STREAMS as STREAM_SPECS

_RUN_ID = re.compile(r"^[A-Za-z0-9_.-]+$")
_RPM_PER_RAD_S = 60.0 / (2.0 * np.pi)


def _check_path(root: Path, text: str, file: str, line: int, column: str, problems) -> str | None:
    """A log path from runs.csv, relative, checked by the input-file rules (inputs.files)."""
    found = inside_campaign(root, text)
    if not isinstance(found, Refusal):
        rel, resolved = found
        found = check_regular(resolved, MAX_LOG_BYTES, name=text)
        if found is None:
            return rel
    problems.append(Problem(file, line, column, found.expected, found.found, found.hint))
    return None


def _parse_start(text: str) -> datetime | None:
    if len(text) < 16:  # a date alone, or a date and an hour, is not a start time
        return None
    try:
        return datetime.fromisoformat(text)
    except ValueError:
        return None


def build_runs(root, rows, units, config, problems, *, closing_zero_pending: bool = False):
    """RunSpecs from runs.csv rows; problems go to ``problems`` keyed by run id.

    Each row is read on its own (:func:`_row_spec`); the references between rows are checked
    once every row is read, since they can point forward (:func:`_check_references`,
    :func:`_check_merge_cycles`).
    """
    labels = set(config.configurations) if config is not None else None
    runs: dict[str, RunSpec] = {}
    by_run: dict[str, list[Problem]] = {}
    unreadable: list[str] = []
    for line, row, short_run in rows:
        if row is None:
            # A row too short to name its run is still listed, under its line, so that
            # a reduction reports it among the failures instead of dropping it unseen.
            rid = short_run or f"{RUNS_FILE} line {line}"
            mine = [p for p in problems if p.file == RUNS_FILE and p.line == line]
            by_run.setdefault(rid, []).extend(mine)
            unreadable.append(rid)
            continue
        mine: list[Problem] = []
        bad = _row_problem(mine, line)
        run = row.get("run", "")
        if not _RUN_ID.match(run):
            bad("run", "a run id of letters, digits, '-', '_', '.'", brief(run))
            problems.extend(mine)
            continue
        if run in runs or run in unreadable:
            first = runs[run].line if run in runs else "above"
            bad(
                "run",
                "a unique run id",
                f"{brief(run)}, already on line {first}",
                "Give each run its own id.",
            )
            problems.extend(mine)
            by_run.setdefault(run, []).extend(mine)
            continue
        spec = _row_spec(root, row, line, run, labels, units, mine)
        problems.extend(mine)
        by_run.setdefault(run, []).extend(mine)
        if spec is None:
            unreadable.append(run)
            continue
        runs[run] = spec
    if closing_zero_pending:
        for spec in list(runs.values()):
            runs[spec.run] = _without_closing_zero(spec, runs, unreadable)
    _check_references(runs, unreadable, problems, by_run)
    _check_merge_cycles(runs, problems, by_run)
    return runs, by_run, unreadable


def _row_problem(mine: list[Problem], line: int):
    """The function a row's checks report through: one Problem of runs.csv on ``line``."""

    def bad(column, expected, found, hint=""):
        mine.append(Problem(RUNS_FILE, line, column, expected, found, hint))

    return bad


def _row_spec(root, row: dict, line: int, run: str, labels, units, mine: list) -> RunSpec | None:
    """One runs.csv row checked column by column into a RunSpec (None when its kind or start
    cannot be read); every problem found is added to ``mine``, in column order."""
    bad = _row_problem(mine, line)
    kind = row.get("kind", "")
    if kind not in KINDS:
        bad("kind", f"one of {', '.join(KINDS)}", brief(kind))
    start = _parse_start(row.get("start", ""))
    if start is None:
        bad(
            "start",
            "an ISO 8601 date and time, e.g. 2026-11-16T09:14:05",
            brief(row.get("start", "")),
        )
    label = row.get("config", "")
    _check_config_label(label, kind, labels, bad)
    logs = _row_logs(root, row, kind, line, mine)
    set_points = _row_set_points(row, kind, units, bad)
    zero, tare, pressure_with = _row_run_lists(row, kind, bad)
    if kind not in KINDS or start is None:
        return None
    return RunSpec(
        run=run,
        kind=kind,
        config=label,
        start=start,
        logs=logs,
        zero=zero,
        tare=tare,
        speed_set=set_points["speed_set"],
        spin_set=set_points["spin_set"],
        notes=row.get("notes", ""),
        line=line,
        pressure_with=pressure_with,
    )


def _check_config_label(label: str, kind: str, labels, bad) -> None:
    """A tare or data run names its configuration, and a label names one campaign.toml has."""
    if not (label or kind in ("tare", "data")):
        return
    if not label:
        bad(
            "config",
            "a configuration label",
            "an empty cell",
            "tare and data runs must name their configuration.",
        )
    elif labels is not None and label not in labels:
        bad(
            "config",
            f"a [configurations] label ({', '.join(sorted(labels))})",
            brief(label),
            "Add the configuration to campaign.toml or fix the label.",
        )


def _row_logs(root, row: dict, kind: str, line: int, mine: list) -> dict[str, str]:
    """The row's log paths by stream (each inside the campaign folder), and the logs its kind
    needs."""
    bad = _row_problem(mine, line)
    logs: dict[str, str] = {}
    for spec, text in log_cells(row):
        before = len(mine)
        rel = _check_path(root, text, RUNS_FILE, line, spec.log_column, mine)
        if rel is not None:
            logs[spec.name] = rel
        elif len(mine) == before:
            logs[spec.name] = text
    for spec in STREAM_SPECS:
        if kind in spec.needed_by and not row.get(spec.log_column):
            bad(spec.log_column, f"the {spec.name} log of a {kind} run", "an empty cell")
    loads = [s.log_column for s in STREAM_SPECS if s.loads]
    if kind == "data" and not any(row.get(column) for column in loads):
        bad(loads[0], f"a {' or '.join(loads)} on a data run", "neither")
    return logs


def _row_set_points(row: dict, kind: str, units, bad) -> dict[str, float | None]:
    """speed_set [m/s] and spin_set [rpm] in their header's units, None when blank or invalid;
    a wind-off run's speed is 0 and a zero run does not spin."""
    set_points: dict[str, float | None] = {}
    for name in RUNS_WITH_UNITS:
        set_points[name] = _set_point(row.get(name, ""), name, units, bad)
    speed = set_points["speed_set"]
    if speed is not None and (speed < 0 or (kind in ("zero", "tare") and speed != 0)):
        bad(
            "speed_set",
            "0 for a wind-off run" if kind != "data" else "a speed of 0 or more",
            row["speed_set"],
        )
    if kind == "zero" and set_points["spin_set"] not in (None, 0.0):
        bad("spin_set", "0 (a zero run does not spin)", row["spin_set"])
    return set_points


def _set_point(text: str, name: str, units, bad) -> float | None:
    """One set-point cell in SI (spin_set in rpm); None when blank, unitless or invalid."""
    if not text or units.get(name) is None:
        return None
    if not _NUMBER.match(text) or not np.isfinite(float(text)):
        bad(name, "a finite number", brief(text))
        return None
    value = float(units[name](float(text)))
    if abs(value) > MAX_MAGNITUDE:  # the logs' bound: no set point is near it
        bad(name, f"a value of magnitude at most {MAX_MAGNITUDE:g} (SI)", brief(text))
        return None
    return value * _RPM_PER_RAD_S if name == "spin_set" else value


def _row_run_lists(row: dict, kind: str, bad) -> tuple[tuple[str, ...], ...]:
    """The zero, tare and pressure_with runs the row names, each allowed on its kinds of run."""
    zero, tare, pressure_with = run_lists(row).values()
    if kind == "zero" and (zero or tare):
        bad("zero" if zero else "tare", "no zero or tare runs on a zero run", "some")
    if kind in ("data", "tare") and row.get("balance_log") and not zero:
        bad(
            "zero",
            f"the zero run(s) of a {kind} run with a balance log",
            "an empty cell",
            "Name the wind-off zero taken before (and after) the run.",
        )
    if len(zero) > 2:
        bad("zero", "one or two zero runs (before, after)", f"{len(zero)}")
    if tare and kind != "data":
        bad("tare", "tare runs only on a data run", brief(row["tare"]))
    if tare and kind == "data" and not row.get("balance_log"):
        bad("tare", "tare runs only with a balance log", brief(row["tare"]))
    if pressure_with and (kind != "data" or not row.get("pressure_log")):
        bad(
            "pressure_with",
            "other runs' pressure only on a data run with a pressure log",
            brief(row["pressure_with"]),
        )
    return zero, tare, pressure_with


def _check_references(runs: dict[str, RunSpec], unreadable, problems, by_run) -> None:
    """Each zero, tare and pressure_with reference names a readable run of the right kind (and,
    for tares and pressure, of the same configuration)."""
    for spec in runs.values():
        for column, wanted in (("zero", "zero"), ("tare", "tare"), ("pressure_with", "data")):
            for ref in getattr(spec, column):
                # each reference is judged on its own: what one wants must not leak to the next
                expected, found = _reference_fault(spec, column, wanted, ref, runs, unreadable)
                if found is None:
                    continue
                p = Problem(
                    RUNS_FILE,
                    spec.line,
                    column,
                    f"the id of a {expected}",
                    found,
                    f"Fix the {column} column of run {spec.run}.",
                )
                problems.append(p)
                by_run[spec.run].append(p)


def _reference_fault(spec: RunSpec, column: str, wanted: str, ref: str, runs, unreadable):
    """(what the column wants, what ``ref`` is instead), or (wanted, None) when it fits;
    what it wants reads after 'the id of a'."""
    target = runs.get(ref)
    if ref == spec.run:
        return f"{wanted} run other than {brief(spec.run)} itself", f"{brief(ref)}, the run itself"
    if target is None:
        return f"{wanted} run", f"{ref!r}, which " + (
            "could not be read" if ref in unreadable else "runs.csv does not hold"
        )
    if target.kind != wanted:
        return f"{wanted} run", f"{ref!r}, a {target.kind} run"
    if column == "tare" and target.config != spec.config:
        return (
            f"tare run of configuration {spec.config!r}",
            f"{ref!r}, of configuration {target.config!r}",
        )
    if column == "pressure_with" and (
        "pressure" not in target.logs or target.config != spec.config
    ):
        found = f"{ref!r}, " + (
            "without a pressure log"
            if "pressure" not in target.logs
            else f"of configuration {target.config!r}"
        )
        return f"data run of configuration {spec.config!r} with a pressure log", found
    return wanted, None


def _check_merge_cycles(runs: dict[str, RunSpec], problems, by_run) -> None:
    """No run's pressure comes back to it through the pressure_with of others."""
    for spec, cycle in _merge_cycles(runs):
        p = Problem(
            RUNS_FILE,
            spec.line,
            "pressure_with",
            "runs that do not merge this run's pressure back",
            f"a cycle {' → '.join(cycle)}",
            "Name the runs to merge in one run's pressure_with only.",
        )
        problems.append(p)
        by_run[spec.run].append(p)


def _merge_cycles(runs: dict[str, RunSpec]) -> list[tuple[RunSpec, list[str]]]:
    """Each run whose pressure_with leads back to it through other runs, with that path."""
    found = []
    for spec in runs.values():
        paths = {ref: [spec.run, ref] for ref in spec.pressure_with if ref != spec.run}
        todo = list(paths)
        while todo:
            rid = todo.pop()
            other = runs.get(rid)
            for ref in other.pressure_with if other is not None else ():
                if ref == spec.run:
                    found.append((spec, [*paths[rid], ref]))
                    todo = []
                    break
                if ref not in paths and ref != rid:
                    paths[ref] = [*paths[rid], ref]
                    todo.append(ref)
    return found


def _without_closing_zero(spec: RunSpec, runs: dict[str, RunSpec], unreadable) -> RunSpec:
    """A data run whose second zero has no row yet, reduced from its opening zero alone.

    Only when the run names two zeros, one of them has no row in runs.csv (it is still to be
    taken) and the other is a zero run that started before this one; any other missing zero is
    the readers' usual problem.
    """
    if spec.kind != "data" or len(spec.zero) != 2:
        return spec
    absent = [z for z in spec.zero if z not in runs and z not in unreadable]
    present = [runs[z] for z in spec.zero if z in runs]
    if len(absent) != 1 or len(present) != 1:
        return spec
    opening = present[0]
    if opening.kind != "zero" or None in (opening.start, spec.start) or opening.start > spec.start:
        return spec
    return replace(spec, zero=(opening.run,), provisional=True)


def run_closure(run_id: str, uses: Callable[[str], Iterable[str]]) -> list[str]:
    """``run_id`` and every run reached through ``uses`` (the runs one run's reduction reads),
    breadth first, each once; a run named but without a row is listed and leads nowhere.
    :meth:`Campaign.dependencies` and the watch (on the rows of a runs.csv still written) use it.
    """
    order, todo = [], [run_id]
    while todo:
        rid = todo.pop(0)
        if rid in order:
            continue
        order.append(rid)
        todo += list(uses(rid))
    return order


# ---------------------------------------------------------------------------------------------
# The campaign
