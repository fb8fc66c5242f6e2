"""runs.csv read into rows: its records, header, units, and the columns naming logs and runs."""

from __future__ import annotations

import csv
import io
import re
from collections.abc import Iterator, Mapping
from pathlib import Path

from tunnelred.common.errors import Problem, brief
from tunnelred.inputs.files import (
    MAX_CELL_CHARS,
    MAX_COLUMNS,
    MAX_RUNS,
    MAX_RUNS_BYTES,
    Refusal,
    read_regular,
)
from tunnelred.inputs.logs import (
    _encoding_problem,
    _example_unit,
    column_twice,
    column_unknown,
)
from tunnelred.inputs.streams import STREAMS as STREAM_SPECS
from tunnelred.inputs.streams import StreamSpec
from tunnelred.inputs.units import DIMENSIONS, conversion, parse_header

_RUNS_REQUIRED = ("run", "kind", "start", "config")
_RUNS_OPTIONAL = (
    *(s.log_column for s in STREAM_SPECS),
    "zero",
    "tare",
    "pressure_with",
    "notes",
)
#: The run list every problem of a row is reported against.
RUNS_FILE = "runs.csv"
RUNS_WITH_UNITS = {"speed_set": "speed", "spin_set": "rotation_rate"}
#: Characters no runs.csv cell may hold: the C0 controls but tab and the line breaks a quoted
#: cell may carry, and DEL. A NUL or an escape sequence is the mark of a binary or broken file,
#: and would be carried into results and the report; the logs refuse them as well (not a number).
_CONTROL = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\x7f]")


# ---------------------------------------------------------------------------------------------
# runs.csv


def read_runs(path: Path, problems: list[Problem]):
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
        control = [(i, m.start()) for i, c in enumerate(cells) if (m := _CONTROL.search(c))]
        if control:
            at_cell, pos = control[0]
            column = names[at_cell] if at_cell < len(names) else None
            problems.append(_control_character(file, line, column, cells[at_cell], pos))
            rows.append((line, None, run if run is not None and not _CONTROL.search(run) else None))
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
    file = RUNS_FILE
    names, units = [], {}
    fatal = False
    for cell in header:
        cell = cell.strip()
        base, unit = optional_unit(file, cell, problems) or (cell, None)
        if base in names:
            problems.append(column_twice(file, base, f"{brief(base)} twice", "Delete one of them."))
            fatal = True
        names.append(base)
        known = _RUNS_REQUIRED + _RUNS_OPTIONAL + tuple(RUNS_WITH_UNITS)
        if base not in known:
            hint = "Check the spelling; put remarks in notes."
            problems.append(column_unknown(file, base, known, brief(base), hint))
        else:
            units[base] = column_unit(file, cell, base, unit, RUNS_WITH_UNITS.get(base), problems)
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


def _control_character(file: str, line: int, column: str | None, cell: str, pos: int) -> Problem:
    return Problem(
        file,
        line,
        column,
        "text without control characters (tabs and line breaks in quotes are allowed)",
        f"U+{ord(cell[pos]):04X}, a control character, at character {pos + 1} of {brief(cell)}",
        "Delete it: it comes from a binary file or a broken copy, not from typing.",
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


def optional_unit(file: str, cell: str, problems: list) -> tuple[str, str | None] | None:
    """A stripped header cell whose unit may be left out: ``(base, unit)`` (unit None when the
    cell has no brackets), or None with a problem when its brackets cannot be read. Shared by
    runs.csv and a test plan's PLAN.csv."""
    if "[" not in cell:
        return cell, None
    try:
        return parse_header(cell)
    except ValueError as exc:
        problems.append(Problem(file, 1, cell, "a column name", str(exc)))
        return None


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
