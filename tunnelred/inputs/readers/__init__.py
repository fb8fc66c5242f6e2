"""The campaign folder → validated runs and their logs as xarray Datasets in SI units.

:func:`open_campaign` reads campaign.toml and runs.csv and checks every reference between them
and the logs; :meth:`Campaign.load_run` parses one run's logs with :mod:`tunnelred.inputs.logs`. The
schema enforced here is docs/input-format.md. Every problem is collected (never only the first)
as a :class:`~tunnelred.common.errors.Problem`.
"""

from __future__ import annotations

import csv
import hashlib
import io
import re
from collections.abc import Callable, Iterable, Iterator, Mapping
from dataclasses import dataclass, field, replace
from datetime import datetime
from pathlib import Path

import numpy as np
import xarray as xr

from tunnelred.common.errors import InputError, Problem, bounded, brief
from tunnelred.inputs.config import CampaignConfig, load_config
from tunnelred.inputs.files import (
    MAX_CELL_CHARS,
    MAX_COLUMNS,
    MAX_LOG_BYTES,
    MAX_RUNS,
    MAX_RUNS_BYTES,
    Refusal,
    check_regular,
    inside_campaign,
    read_regular,
)
from tunnelred.inputs.logs import (
    _NUMBER,
    MAX_MAGNITUDE,
    LogInfo,
    _encoding_problem,
    _example_unit,
    _parse_log,
    _read_header,
    log_columns,
    read_log,
    split_line,
    stream_hints,
)
from tunnelred.inputs.streams import STREAM_NAMES, StreamSpec
from tunnelred.inputs.streams import STREAMS as STREAM_SPECS
from tunnelred.inputs.units import DIMENSIONS, conversion, parse_header

__all__ = [
    "STREAMS",
    "KINDS",
    "RunSpec",
    "RunData",
    "LogInfo",
    "Campaign",
    "open_campaign",
    "read_log",
    "log_columns",
]

#: The kinds of log a run may name, each in a runs.csv column ``<stream>_log`` (their
#: specifications: inputs.streams.STREAMS).
STREAMS = STREAM_NAMES

#: Run kinds: wind-off zero, wind-off spin tare, wind-on data.
KINDS = ("zero", "tare", "data")

_RUN_ID = re.compile(r"^[A-Za-z0-9_.-]+$")
_RUNS_REQUIRED = ("run", "kind", "start", "config")
_RUNS_OPTIONAL = (
    *(s.log_column for s in STREAM_SPECS),
    "zero",
    "tare",
    "pressure_with",
    "notes",
)
#: The run list every problem of a row is reported against.
_RUNS_FILE = "runs.csv"
_RUNS_WITH_UNITS = {"speed_set": "speed", "spin_set": "rotation_rate"}
_RPM_PER_RAD_S = 60.0 / (2.0 * np.pi)


# ---------------------------------------------------------------------------------------------
# Holders


@dataclass(frozen=True)
class RunSpec:
    """One row of runs.csv.

    ``logs`` maps a stream name (:data:`STREAMS`) to its log's path relative to the campaign
    folder (forward slashes). ``speed_set`` is in m/s and ``spin_set`` in rpm (signed), None
    when not given. ``line`` is the row's line in runs.csv. ``provisional`` is true only for a
    data run opened by the watch before its closing zero is in (``zero`` then holds the opening
    zero alone; see :func:`open_campaign`).
    """

    run: str
    kind: str
    config: str
    start: datetime
    logs: dict[str, str]
    zero: tuple[str, ...] = ()
    tare: tuple[str, ...] = ()
    speed_set: float | None = None
    spin_set: float | None = None
    notes: str = ""
    line: int = 0
    pressure_with: tuple[str, ...] = ()
    provisional: bool = False

    @property
    def uses(self) -> tuple[str, ...]:
        """The runs this run's reduction reads besides its own: zeros, tares, merged pressure."""
        return (*self.zero, *self.tare, *self.pressure_with)


@dataclass
class RunData:
    """A run's logs: one Dataset a stream, dim ``time`` [s from start], SI values.

    Each Dataset's attrs hold ``file`` (relative path), ``sha256`` and ``stream``; each variable
    its ``units``. Streams served by one file share that file's arrays.
    """

    spec: RunSpec
    streams: dict[str, xr.Dataset]


class _FileHashes(Mapping):
    """SHA-256 of each input file by relative path, computed when first asked for.

    Opening a large campaign with ``check_logs=False`` must not read every log; the hashes of
    those not yet parsed are computed on demand (and then kept).
    """

    def __init__(self, root: Path, files: Iterable[str]):
        self._root = root
        self._files = list(dict.fromkeys(files))
        self._known: dict[str, str] = {}

    def _set(self, rel: str, sha: str) -> None:
        self._known[rel] = sha

    def __getitem__(self, rel: str) -> str:
        if rel not in self._known:
            if rel not in self._files:
                raise KeyError(rel)
            digest = hashlib.sha256()
            with open(self._root / rel, "rb") as stream:
                for chunk in iter(lambda: stream.read(1 << 22), b""):
                    digest.update(chunk)
            self._known[rel] = digest.hexdigest()
        return self._known[rel]

    def __iter__(self) -> Iterator[str]:
        return iter(self._files)

    def __len__(self) -> int:
        return len(self._files)

    def __repr__(self) -> str:
        return f"<file hashes of {len(self._files)} files>"


# ---------------------------------------------------------------------------------------------
# runs.csv


def _read_runs(path: Path, problems: list[Problem]):
    """Parse runs.csv. Returns (rows, fatal) with rows as (line, {column: text}) pairs."""
    file = "runs.csv"
    data = read_regular(path, MAX_RUNS_BYTES, name=file)
    if isinstance(data, Refusal):
        problems.append(Problem(file, None, None, data.expected, data.found, data.hint))
        return [], {}, True
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        problems.append(
            _encoding_problem(file, data[: exc.start].count(b"\n") + 1, exc.start, data)
        )
        return [], {}, True
    records = runs_records(text)
    _, line, header, error = next(records, (0, 0, None, None))
    if error is not None:
        problems.append(_csv_problem(file, line, error))
        return [], {}, True
    if not header or not any(c.strip() for c in header):
        problems.append(
            Problem(file, None, None, "a header row and one row a run", "an empty file")
        )
        return [], {}, True
    if len(header) > MAX_COLUMNS:
        problems.append(_too_many_columns(file, len(header)))
        return [], {}, True
    names, units, fatal = runs_header(header, problems)
    for name in _RUNS_REQUIRED:
        if name not in names:
            problems.append(Problem(file, 1, name, f"a column {name!r}", "none", "Add it."))
            fatal = True
    rows = []
    for _, line, cells, error in records:
        if error is not None:
            # the reader cannot go on past a cell over its limit: runs.csv is unusable
            problems.append(_csv_problem(file, line, error))
            return rows, units, True
        if not any(c.strip() for c in cells):
            continue
        if len(rows) == MAX_RUNS:
            problems.append(
                Problem(
                    file,
                    line,
                    None,
                    f"at most {MAX_RUNS} runs",
                    "more rows",
                    "Split the campaign into several folders.",
                )
            )
            return rows, units, True
        # a row too broken to use is still listed under its run id, when it has a usable one
        at = names.index("run") if "run" in names else len(cells)
        run = cells[at].strip() if at < len(cells) and len(cells[at]) <= MAX_CELL_CHARS else None
        long = [i for i, c in enumerate(cells) if len(c) > MAX_CELL_CHARS]
        if long:
            column = names[long[0]] if long[0] < len(names) else None
            problems.append(_long_cell(file, line, column, len(cells[long[0]])))
            rows.append((line, None, run))
            continue
        if len(cells) != len(names):
            problems.append(
                Problem(
                    file,
                    line,
                    None,
                    f"{len(names)} fields",
                    str(len(cells)),
                    "Each row needs one value per header column (quote text holding commas).",
                )
            )
            rows.append((line, None, run))
            continue
        rows.append((line, {n: c.strip() for n, c in zip(names, cells, strict=True)}, None))
    return rows, units, fatal


def runs_records(text: str) -> Iterator[tuple[int, int, list[str] | None, csv.Error | None]]:
    """Each CSV record of a runs.csv text, the header first: (first, last, cells, error), the
    record on physical lines ``first + 1`` to ``last``; ``cells`` None and ``error`` the csv
    module's refusal (a cell over its limit) when it cannot read the record. Shared with the
    watch (tunnelred.live.folder), which reads the whole lines of a runs.csv still written."""
    reader = csv.reader(io.StringIO(text, newline=""))
    first = 0
    while True:
        try:
            cells = next(reader)
        except StopIteration:
            return
        except csv.Error as exc:
            yield first, reader.line_num, None, exc
        else:
            yield first, reader.line_num, cells, None
        first = reader.line_num


def runs_header(header: list[str], problems: list[Problem]) -> tuple[list[str], dict, bool]:
    """runs.csv's header row: the base names in order, each known column's unit conversion
    (None for a column without unit) and whether it is fatal (a column twice); the problems
    found go to ``problems``."""
    file = _RUNS_FILE
    names, units = [], {}
    fatal = False
    for cell in header:
        cell = cell.strip()
        base, unit = cell, None
        if "[" in cell:
            try:
                base, unit = parse_header(cell)
            except ValueError as exc:
                problems.append(Problem(file, 1, cell, "a column name", str(exc)))
        if base in names:
            problems.append(
                Problem(
                    file,
                    1,
                    base,
                    "each column once",
                    f"{brief(base)} twice",
                    "Delete one of them.",
                )
            )
            fatal = True
        names.append(base)
        known = _RUNS_REQUIRED + _RUNS_OPTIONAL + tuple(_RUNS_WITH_UNITS)
        if base not in known:
            problems.append(
                Problem(
                    file,
                    1,
                    base,
                    f"only the columns {', '.join(known)}",
                    brief(base),
                    "Check the spelling; put remarks in notes.",
                )
            )
        else:
            units[base] = column_unit(file, cell, base, unit, _RUNS_WITH_UNITS.get(base), problems)
    return names, units, fatal


def _csv_problem(file: str, line: int, exc: csv.Error) -> Problem:
    limit = csv.field_size_limit()
    if "field larger than field limit" in str(exc):
        return _long_cell(file, line, None, limit)
    return Problem(file, line, None, "a CSV row", str(exc), "Check the quoting on that line.")


def _long_cell(file: str, line: int, column: str | None, length: int) -> Problem:
    return Problem(
        file,
        line,
        column,
        f"cells of at most {MAX_CELL_CHARS} characters",
        f"a cell of {length} characters" + (" or more" if length >= csv.field_size_limit() else ""),
        "Check for a missing closing quote; shorten the text.",
    )


def _too_many_columns(file: str, count: int) -> Problem:
    return Problem(
        file,
        1,
        None,
        f"at most {MAX_COLUMNS} columns",
        f"{count} columns",
        "Check the separator and that this is the right file.",
    )


def column_unit(
    file: str, cell: str, base: str, unit: str | None, dimension: str | None, problems: list
):
    """The conversion of a header column's bracketed unit to SI, or None with a problem.

    ``dimension`` is the column's (units.DIMENSIONS), None for a column that takes no unit;
    ``cell`` the header cell as written. Shared by runs.csv and a test plan's PLAN.csv.
    """
    if dimension is None:
        if unit is not None:
            problems.append(Problem(file, 1, base, f"{base!r} without a unit", brief(cell)))
        return None
    if unit is None:
        problems.append(
            Problem(
                file,
                1,
                base,
                f"'{base} [unit]'",
                f"{brief(base)} without a unit",
                "Add the unit in brackets.",
            )
        )
        return None
    try:
        return conversion(unit, dimension)
    except ValueError as exc:
        problems.append(
            Problem(
                file,
                1,
                base,
                DIMENSIONS[dimension][2],
                str(exc),
                f"Write e.g. '{base} [{_example_unit(dimension)}]'.",
            )
        )
        return None


def _split_ids(text: str) -> tuple[str, ...]:
    return tuple(s.strip() for s in text.split(";") if s.strip())


#: runs.csv's columns naming the runs a run's reduction reads besides its own, in the order of
#: :attr:`RunSpec.uses`.
RUN_LIST_COLUMNS = ("zero", "tare", "pressure_with")


def run_lists(row: Mapping[str, str]) -> dict[str, tuple[str, ...]]:
    """The run ids a runs.csv row names in each of :data:`RUN_LIST_COLUMNS` (split at ';')."""
    return {column: _split_ids(row.get(column, "")) for column in RUN_LIST_COLUMNS}


def log_cells(row: Mapping[str, str]) -> list[tuple[StreamSpec, str]]:
    """Each stream whose log a runs.csv row names, with the path as written, in stream order."""
    return [(spec, row[spec.log_column]) for spec in STREAM_SPECS if row.get(spec.log_column)]


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


def _build_runs(root, rows, units, config, problems, *, closing_zero_pending: bool = False):
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
            rid = short_run or f"{_RUNS_FILE} line {line}"
            mine = [p for p in problems if p.file == _RUNS_FILE and p.line == line]
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
        mine.append(Problem(_RUNS_FILE, line, column, expected, found, hint))

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
        rel = _check_path(root, text, _RUNS_FILE, line, spec.log_column, mine)
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
    for name in _RUNS_WITH_UNITS:
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
                wanted, found = _reference_fault(spec, column, wanted, ref, runs, unreadable)
                if found is None:
                    continue
                p = Problem(
                    _RUNS_FILE,
                    spec.line,
                    column,
                    f"the id of a {wanted} run",
                    found,
                    f"Fix the {column} column of run {spec.run}.",
                )
                problems.append(p)
                by_run[spec.run].append(p)


def _reference_fault(spec: RunSpec, column: str, wanted: str, ref: str, runs, unreadable):
    """(what the column wants, what ``ref`` is instead), or (wanted, None) when it fits."""
    target = runs.get(ref)
    if ref == spec.run:
        return "different data", f"{brief(ref)}, the run itself"
    if target is None:
        return wanted, f"{ref!r}, which " + (
            "could not be read" if ref in unreadable else "runs.csv does not hold"
        )
    if target.kind != wanted:
        return wanted, f"{ref!r}, a {target.kind} run"
    if column == "tare" and target.config != spec.config:
        return (
            f"tare of configuration {spec.config!r}",
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
            _RUNS_FILE,
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


@dataclass(repr=False)
class Campaign:
    """An opened campaign folder: its configuration, its runs and every problem found.

    ``problems`` holds all problems; :meth:`run_problems` those that stop one run.
    ``file_hashes`` maps each input's relative path to its SHA-256. ``log_info`` holds what the
    full parse of each log found (filled by ``check_logs=True`` and by :meth:`load_run`).
    ``unreadable_runs`` lists runs.csv ids whose row was too broken to become a RunSpec.
    """

    root: Path
    config: CampaignConfig
    runs: dict[str, RunSpec]
    problems: list[Problem]
    file_hashes: Mapping[str, str]
    log_info: dict[str, LogInfo] = field(default_factory=dict)
    unreadable_runs: tuple[str, ...] = ()
    _global: list[Problem] = field(default_factory=list)
    _by_run: dict[str, list[Problem]] = field(default_factory=dict)
    _by_file: dict[str, list[Problem]] = field(default_factory=dict)
    _columns: dict[str, tuple[dict, dict, dict, str]] = field(default_factory=dict)

    @property
    def notices(self) -> tuple[Problem, ...]:
        """Things campaign.toml made config decide that stop no run (a substituted method)."""
        return self.config.notices if self.config is not None else ()

    # -- lists of runs
    def data_runs(self) -> list[RunSpec]:
        return [r for r in self.runs.values() if r.kind == "data"]

    def zero_runs(self) -> list[RunSpec]:
        return [r for r in self.runs.values() if r.kind == "zero"]

    def tare_runs(self) -> list[RunSpec]:
        return [r for r in self.runs.values() if r.kind == "tare"]

    def dependencies(self, run_id: str) -> list[str]:
        """The run and every run its reduction reads (:attr:`RunSpec.uses`, transitively)."""
        return run_closure(run_id, lambda rid: self.runs[rid].uses if rid in self.runs else ())

    def shared_problems(self) -> list[Problem]:
        """Problems that stop every run: those of campaign.toml and of runs.csv as a whole."""
        return list(self._global)

    def run_problems(self, run_id: str) -> list[Problem]:
        """Problems that keep ``run_id`` from being reduced.

        Those of campaign.toml and of runs.csv as a whole, of the run's row and logs, and of the
        rows and logs of the zero and tare runs it uses.
        """
        if run_id not in self.runs and run_id not in self._by_run:
            raise KeyError(f"runs.csv has no run {run_id!r}")
        found = list(self._global)
        for rid in self.dependencies(run_id):
            found += self._by_run.get(rid, [])
            spec = self.runs.get(rid)
            for rel in spec.logs.values() if spec else ():
                found += self._by_file.get(rel, [])
        return list(dict.fromkeys(found))

    def _parse_file(self, rel: str):
        required, optional, hints, stream = self._columns[rel]
        ds, problems, info, sha = _parse_log(
            self.root / rel, rel, required, optional, hints, stream
        )
        if sha:
            self.file_hashes._set(rel, sha)
        new = [p for p in problems if p not in self._by_file.get(rel, [])]
        self._by_file[rel] = list(dict.fromkeys(self._by_file.get(rel, []) + problems))
        self.problems += new
        if info is not None:
            self.log_info[rel] = info
        return ds

    def load_run(self, run_id: str) -> RunData:
        """Parse and validate one run's logs.

        Raises
        ------
        InputError
            Listing every problem of the run (see :meth:`run_problems`), including those of its
            logs found now.
        KeyError
            When runs.csv has no such run.
        """
        spec = self.runs.get(run_id)
        if spec is None:
            if run_id in self._by_run:
                raise InputError(self.run_problems(run_id))
            raise KeyError(f"runs.csv has no run {run_id!r}")
        known = self.run_problems(run_id)
        if known:
            raise InputError(known)
        datasets: dict[str, xr.Dataset] = {}
        for rel in dict.fromkeys(spec.logs.values()):
            ds = self._parse_file(rel)
            if ds is not None:
                datasets[rel] = ds
        problems = self.run_problems(run_id)
        if problems:
            raise InputError(problems)
        streams = {}
        for stream, rel in spec.logs.items():
            ds = datasets[rel]
            required, optional = log_columns(self.config, stream, spinning=True)
            names = [n for n in ds.data_vars if n in required or n in optional]
            part = ds[names]
            part.attrs = dict(ds.attrs, stream=stream)
            streams[stream] = part
        return RunData(spec, streams)

    # -- display
    def __repr__(self) -> str:
        kinds = ", ".join(
            f"{len([r for r in self.runs.values() if r.kind == k])} {k}" for k in KINDS
        )
        title = self.config.campaign.title if self.config else "?"
        return (
            f"<Campaign {title!r} at {self.root}: {len(self.runs)} runs ({kinds}), "
            f"{len(self.problems)} problems>"
        )

    def _repr_html_(self) -> str:
        import html

        labels = sorted({r.config for r in self.runs.values()})
        head = "".join(f"<th>{html.escape(k)}</th>" for k in KINDS)
        body = ""
        for label in labels:
            counts = [
                sum(r.config == label and r.kind == k for r in self.runs.values()) for k in KINDS
            ]
            cells = "".join(f"<td>{n}</td>" for n in counts)
            body += f"<tr><th>{html.escape(label or '(none)')}</th>{cells}</tr>"
        title = html.escape(self.config.campaign.title)
        return (
            f"<p><b>{title}</b> — {html.escape(self.config.campaign.facility)}; "
            f"{len(self.runs)} runs, {len(self.problems)} problems</p>"
            f"<table><tr><th>config</th>{head}</tr>{body}</table>"
        )


# Bytes read for a log's header when its data are left for later (check_logs=False); a header
# longer than this is read in full by the full parse, which judges it.
_HEADER_BYTES = 1 << 16


def _header_names(path: Path) -> set[str]:
    """Base names in a log's first line (for cross-log rules; problems come from the parse)."""
    first = read_regular(path, MAX_LOG_BYTES, head=_HEADER_BYTES)
    if isinstance(first, Refusal):
        return set()
    line = first.splitlines()[0] if first else b""
    cells = split_line(line.decode("utf-8-sig", errors="replace")) or []
    names = set()
    for cell in cells:
        try:
            names.add(parse_header(cell)[0])
        except ValueError:
            continue
    return names


def open_campaign(path, *, check_logs: bool = True, closing_zero_pending: bool = False) -> Campaign:
    """Open a campaign folder: read campaign.toml and runs.csv and check every reference.

    Parameters
    ----------
    path : str or Path
        The campaign folder.
    check_logs : bool
        True: parse every log fully and collect its problems (the data are not kept).
        False: check each log's header row only, so that a large campaign opens quickly; the
        logs' data are checked by :meth:`Campaign.load_run`.
    closing_zero_pending : bool
        For the watch only (``tunnelred reduce`` never sets it): a data run naming two zeros of
        which the one after it has no row yet is opened as *provisional*, with its opening zero
        alone (:attr:`RunSpec.provisional`), instead of failing for the missing zero.

    Returns
    -------
    Campaign

    Raises
    ------
    InputError
        When campaign.toml or runs.csv is unusable as a whole (missing, not parsable, a
        required value or column missing or invalid), listing every problem found in both.
        Otherwise problems are collected in ``Campaign.problems``.

    Examples
    --------
    >>> from tunnelred.inputs.readers import open_campaign
    >>> campaign = open_campaign("sample_runs/broken")  # doctest: +SKIP
    >>> len(campaign.problems) > 0  # doctest: +SKIP
    True
    """
    root = Path(path)
    if not root.is_dir():
        raise InputError(
            Problem(
                str(root),
                None,
                None,
                "a campaign folder",
                "no such folder",
                "Give the folder that holds campaign.toml and runs.csv.",
            )
        )
    # campaign.toml and runs.csv are held to the rules of the logs (inputs.files)
    outside = [
        Problem(name, None, None, found.expected, found.found, found.hint)
        for name in ("campaign.toml", "runs.csv")
        if isinstance(found := inside_campaign(root, name), Refusal)
    ]
    if outside:
        raise InputError(outside)
    config, problems = load_config(root / "campaign.toml")
    config_problems = list(problems)
    rows, units, runs_fatal = _read_runs(root / "runs.csv", problems)
    if config is None or runs_fatal:
        raise InputError(bounded(problems))
    # A problem of one runs.csv row stops that run (and those using it), not the campaign.
    global_problems = [p for p in problems if not (p.file == "runs.csv" and (p.line or 1) > 1)]
    runs, by_run, unreadable = _build_runs(
        root, rows, units, config, problems, closing_zero_pending=closing_zero_pending
    )
    global_problems = config_problems + [p for p in global_problems if p not in config_problems]

    def stop_all(p: Problem):
        problems.append(p)
        global_problems.append(p)

    used = {s for spec in runs.values() for s in spec.logs}
    for stream_spec in STREAM_SPECS:
        missing = stream_spec.declared(config) if stream_spec.name in used else None
        if missing is not None:
            stop_all(missing)

    files = {}
    for spec in runs.values():
        existing = {s: rel for s, rel in spec.logs.items() if (root / rel).is_file()}
        headers = set().union(*(_header_names(root / rel) for rel in existing.values()))
        spinning = bool(spec.spin_set) if spec.spin_set is not None else "speed" in headers
        for stream, rel in existing.items():
            required, optional = log_columns(config, stream, spinning=spinning)
            prev = files.get(rel)
            if prev is not None:
                required = prev[0] | required
                optional = prev[1] | optional
                hints = prev[2] | stream_hints(stream)
                streams = prev[3] if stream in prev[3].split("+") else f"{prev[3]}+{stream}"
            else:
                hints, streams = stream_hints(stream), stream
            optional = {k: v for k, v in optional.items() if k not in required}
            files[rel] = (required, optional, hints, streams)
    hashes = _FileHashes(root, ["campaign.toml", "runs.csv", *files])
    campaign = Campaign(
        root=root,
        config=config,
        runs=runs,
        problems=problems,
        file_hashes=hashes,
        unreadable_runs=tuple(unreadable),
        _global=global_problems,
        _by_run=by_run,
        _columns=files,
    )
    for rel in files:
        if check_logs:
            campaign._parse_file(rel)
        else:
            required, optional, hints, stream = files[rel]
            first = read_regular(root / rel, MAX_LOG_BYTES, name=rel, head=_HEADER_BYTES)
            if isinstance(first, Refusal):
                # unreadable now (permissions, or changed since runs.csv was checked): the
                # runs that use it fail with the reason, the others go on
                found = [Problem(rel, None, None, first.expected, first.found, first.hint)]
            else:
                found = _read_header(first, rel, required, optional, hints).problems
            campaign._by_file[rel] = found
            campaign.problems += found
    campaign.problems = bounded(campaign.problems)
    return campaign
