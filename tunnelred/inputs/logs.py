"""One CSV log → an xarray.Dataset in SI units, or every problem with its line and column.

Logs are parsed with pyarrow's CSV reader, every column as float64, with no per-row Python work.
Only when that parse fails does a line-by-line scan run, to say exactly where and why.
Column names carry their units in brackets (``dp_pitot [Pa]``); pint converts them to SI
(angles to degrees, rotation rates to rad/s, relative humidity to a fraction). The schema is
docs/input-format.md; :mod:`tunnelred.inputs.readers` applies it to a whole campaign.
"""

from __future__ import annotations

import csv
import hashlib
import re
from collections.abc import Mapping
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pacsv
import xarray as xr

from tunnelred.common.errors import InputError, Problem, brief
from tunnelred.inputs.config import CampaignConfig
from tunnelred.inputs.files import (
    MAX_CELL_CHARS,
    MAX_COLUMNS,
    MAX_LOG_BYTES,
    Refusal,
    read_regular,
)
from tunnelred.inputs.streams import FIXED_COLUMNS, stream_spec
from tunnelred.inputs.units import DIMENSIONS, conversion, parse_header

__all__ = ["FIXED_COLUMNS", "LogInfo", "read_log", "log_columns", "column_twice", "column_unknown"]

#: How many offending rows a problem lists before saying "and N more".
SHOWN_ROWS = 3

#: Fewest data rows a log may have: every stream is averaged, differentiated and checked for
#: drift over time.
MIN_ROWS = 2

#: Largest magnitude a logged value may have, in SI units. No sensor of a low-speed tunnel reads
#: near it (a time stamp in seconds since 1970 is 1.8e9), and the reduction's products of a few
#: such values stay far from floating-point overflow (about 1.8e308).
MAX_MAGNITUDE = 1e12

_NUMBER = re.compile(r"^[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?$")
_NONFINITE = re.compile(r"^[+-]?(?:nan|inf|infinity)$", re.IGNORECASE)


@dataclass(frozen=True)
class LogInfo:
    """What a full parse of a log found: row count, time span [s], median sample interval [s]."""

    rows: int
    start: float
    end: float
    median_dt: float
    columns: tuple[str, ...]

    @property
    def duration(self) -> float:
        return self.end - self.start


# ---------------------------------------------------------------------------------------------
# One CSV log


@dataclass
class _Header:
    names: list[str]  # base names in file order
    conversions: list  # Conversion or None (a column whose unit is unusable)
    end: int  # byte offset where the data rows begin
    problems: list[Problem]


def _read_header(data: bytes, file: str, expected: dict, optional: dict, hints: dict) -> _Header:
    """Parse and check the header row. ``expected``/``optional``: base name → dimension."""
    problems: list[Problem] = []
    start = 3 if data.startswith(b"\xef\xbb\xbf") else 0
    newline = re.compile(rb"\r\n|\r|\n").search(data, start)
    end = newline.end() if newline else len(data)
    raw = data[start : newline.start() if newline else len(data)]
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        problems.append(_encoding_problem(file, 1, start + exc.start, data))
        # Latin-1 decodes any byte; reading the header on shows its other problems, if any.
        text = raw.decode("latin-1")
    cells = split_line(text)
    if cells is None or len(cells) > MAX_COLUMNS or any(len(c) > MAX_CELL_CHARS for c in cells):
        # judged as a whole: a header of a million columns must not make a million problems
        found = (
            f"{len(cells)} columns"
            if cells is not None and len(cells) > MAX_COLUMNS
            else f"a cell over {MAX_CELL_CHARS} characters"
        )
        expected = (
            f"a header of at most {MAX_COLUMNS} columns of at most {MAX_CELL_CHARS} characters"
        )
        hint = "Check the separator and that this is a log of the campaign."
        return _Header([], [], end, [Problem(file, 1, None, expected, found, hint)])
    names: list[str] = []
    conversions: list = []
    seen: dict[str, int] = {}
    known = expected | optional
    for position, cell in enumerate(cells, start=1):
        try:
            base, unit = parse_header(cell)
        except ValueError as exc:
            problems.append(
                Problem(
                    file,
                    1,
                    cell.strip() or f"#{position}",
                    "a header 'name [unit]', e.g. 'dp_pitot [Pa]'",
                    str(exc),
                    "Add the unit in brackets; [1] for a plain number.",
                )
            )
            names.append(cell.strip())
            conversions.append(None)
            seen.setdefault(cell.strip(), position)
            continue
        names.append(base)
        if base in seen:
            found = f"{base!r} in columns {seen[base]} and {position}"
            problems.append(column_twice(file, base, found, "Delete or rename one of them."))
        seen.setdefault(base, position)
        if base not in known:
            hint = hints.get("extra", "Remove it or check its spelling.")
            problems.append(column_unknown(file, base, known, f"an extra column {base!r}", hint))
            conversions.append(None)
            continue
        dimension = known[base]
        try:
            conversions.append(conversion(unit, dimension))
        except ValueError as exc:
            what = DIMENSIONS[dimension][2] if dimension else "a unit pint understands"
            problems.append(
                Problem(
                    file,
                    1,
                    base,
                    what,
                    str(exc),
                    f"Write the unit of {base} in its header, e.g. "
                    f"'{base} [{_example_unit(dimension)}]'.",
                )
            )
            conversions.append(None)
    for base in expected:
        if base not in seen:
            problems.append(
                Problem(
                    file,
                    1,
                    base,
                    f"a column {base!r}",
                    "none",
                    hints.get(
                        base, hints.get("missing", "Add the column or check the header's spelling.")
                    ),
                )
            )
    return _Header(names, conversions, end, problems)


def column_twice(file: str, column: str, found: str, hint: str = "") -> Problem:
    """A header that names ``column`` twice: a log's, runs.csv's and PLAN.csv's, worded alike."""
    return Problem(file, 1, column, "each column once", found, hint)


def column_unknown(file: str, column: str, known, found: str, hint: str = "") -> Problem:
    """A header column that is none of ``known`` (a log's, runs.csv's, PLAN.csv's)."""
    return Problem(file, 1, column, f"only the columns {', '.join(known)}", found, hint)


def split_line(text: str) -> list[str] | None:
    """The cells of one CSV line, or None when the csv module refuses it (a cell over its limit)."""
    try:
        return next(csv.reader([text]), [])
    except csv.Error:
        return None


def _example_unit(dimension: str | None) -> str:
    return {None: "V", "fraction": "1", "rotation_rate": "rpm", "temperature": "degC"}.get(
        dimension, DIMENSIONS.get(dimension, ("",))[0]
    )


def _encoding_problem(file: str, line: int, offset: int, data: bytes) -> Problem:
    return Problem(
        file,
        line,
        None,
        "UTF-8 text",
        f"byte 0x{data[offset]:02x} at byte offset {offset}, not UTF-8",
        "Save the file as UTF-8 (Latin-1 or a Windows code page was likely used).",
    )


def _rows_text(lines: np.ndarray) -> str:
    shown = ", ".join(str(int(n)) for n in lines[:SHOWN_ROWS])
    more = len(lines) - SHOWN_ROWS
    return f"line{'s' if len(lines) > 1 else ''} {shown}" + (
        f" and {more} more" if more > 0 else ""
    )


def _check_values(
    file: str,
    columns: dict[str, np.ndarray],
    lines: np.ndarray,
    skip: dict[str, np.ndarray] | None = None,
) -> list[Problem]:
    """Vectorised checks of parsed columns (SI values); ``lines`` are the rows' line numbers.

    ``skip`` masks cells already reported (the line scan's non-numeric cells).
    """
    problems = []
    for name, values in columns.items():
        bad = ~np.isfinite(values)
        if skip is not None and name in skip:
            bad &= ~skip[name]
        if bad.any():
            kinds = sorted({"NaN" if np.isnan(v) else "inf" for v in values[bad][:50]})
            problems.append(
                Problem(
                    file,
                    int(lines[bad][0]),
                    name,
                    "a finite number in every cell",
                    f"{' and '.join(kinds)} on {_rows_text(lines[bad])}",
                    "Repair or remove those rows (a logger writes NaN or inf when a sensor fails).",
                )
            )
    time = columns.get("time")
    if time is not None and len(time) > 1:
        good = np.isfinite(time)
        t, n = time[good], lines[good]
        step = np.diff(t)
        checks = (
            (step == 0, "repeated", "Remove the repeated rows."),
            (step < 0, "decreasing", "Check the logger's clock and the order of the rows."),
        )
        for mask, what, hint in checks:
            if mask.any():
                problems.append(
                    Problem(
                        file,
                        int(n[1:][mask][0]),
                        "time",
                        "time stamps that increase strictly",
                        f"{what} time on {_rows_text(n[1:][mask])}",
                        hint,
                    )
                )
    ranges = {
        "T": (lambda v: v <= 0, "a temperature above 0 K"),
        "RH": (lambda v: (v < 0) | (v > 1), "a relative humidity from 0 to 1 (0–100 %)"),
        "p_baro": (lambda v: v <= 0, "a positive barometric pressure"),
    }
    magnitude = (
        lambda v: np.abs(v) > MAX_MAGNITUDE,
        f"a value of magnitude at most {MAX_MAGNITUDE:g} (SI)",
        "Check the unit in the header and the logger's output (no reading is this large, and "
        "products of it would overflow).",
    )
    for name, values in columns.items():
        rules = [magnitude]
        if name in ranges:
            rules.append((*ranges[name], "Check the unit in the header."))
        for test, expected, hint in rules:
            with np.errstate(invalid="ignore"):
                bad = test(values) & np.isfinite(values)
            if bad.any():
                problems.append(
                    Problem(
                        file,
                        int(lines[bad][0]),
                        name,
                        expected,
                        f"{values[bad][0]:g} (SI) on {_rows_text(lines[bad])}",
                        hint,
                    )
                )
    return problems


def _arrow_table(body: pa.Buffer, ncols: int, kind: pa.DataType) -> pa.Table | None:
    """The rows as a pyarrow table of ``ncols`` columns of one type, or None if they are not."""
    names = [f"c{i}" for i in range(ncols)]
    try:
        table = pacsv.read_csv(
            pa.BufferReader(body),
            read_options=pacsv.ReadOptions(column_names=names, block_size=1 << 24),
            parse_options=pacsv.ParseOptions(ignore_empty_lines=False),
            convert_options=pacsv.ConvertOptions(
                column_types={n: kind for n in names},
                null_values=[],
                strings_can_be_null=False,
                quoted_strings_can_be_null=False,
            ),
        )
    except (pa.ArrowException, ValueError, OverflowError):
        return None
    return table if table.num_columns == ncols else None


def _fast_parse(body: pa.Buffer, ncols: int) -> list[np.ndarray] | None:
    """All columns as float64 with pyarrow, or None when anything is not plain numbers."""
    table = _arrow_table(body, ncols, pa.float64())
    return None if table is None else [table.column(i).to_numpy() for i in range(ncols)]


def _string_parse(body: pa.Buffer, ncols: int):
    """Every column as text with pyarrow (checks UTF-8), or None when the rows are malformed."""
    return _arrow_table(body, ncols, pa.string())


def _cells_to_numbers(file: str, table: pa.Table, names: list[str], first_line: int):
    """Vectorised: the number in each text cell (NaN where it is not one) and the problems."""
    number = r"^[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?$"
    nonfinite = r"(?i)^[+-]?(?:nan|inf|infinity)$"
    problems, values, reported = [], [], []
    lines = np.arange(first_line, first_line + table.num_rows)
    for i in range(table.num_columns):
        text = pc.utf8_trim_whitespace(table.column(i))
        ok = pc.or_(
            pc.match_substring_regex(text, number), pc.match_substring_regex(text, nonfinite)
        )
        ok = ok.to_numpy(zero_copy_only=False)
        values.append(pc.cast(pc.if_else(ok, text, "nan"), pa.float64()).to_numpy())
        reported.append(~ok)
        if not ok.all():
            bad = np.flatnonzero(~ok)
            examples = ", ".join(brief(text[int(j)].as_py()) for j in bad[:SHOWN_ROWS])
            problems.append(
                Problem(
                    file,
                    int(lines[bad[0]]),
                    names[i],
                    "a number in every cell",
                    f"{examples} on {_rows_text(lines[bad])}",
                    "Write plain decimal numbers (a point as decimal separator).",
                )
            )
    return problems, np.column_stack(values), lines, np.column_stack(reported)


def _truncated_tail(data: bytes, start: int, end: int, ncols: int):
    """(problem, new end) when the last line is cut short, else (None, end)."""
    cut = max(data.rfind(b"\n", start, end), data.rfind(b"\r", start, end))
    if cut < start:
        return None, end
    last = data[cut + 1 : end].decode("utf-8", errors="replace")
    cells = split_line(last)
    if cells is None or len(cells) >= ncols:
        return None, end
    newlines = data.count(b"\n", 0, end) or data.count(b"\r", 0, end)
    problem = Problem(
        "", newlines + 1, None, f"{ncols} fields", f"{len(cells)}",
        "The last line is cut off (the logger stopped while writing); delete it.",
    )  # fmt: skip
    return problem, cut


def _locate(data: bytes, start: int, end: int, file: str, names: list[str]):
    """Find what the fast parse refused, as vectorised as the damage allows.

    A cut-off last line is set aside; then, if the rows are well formed UTF-8, pyarrow reads
    them as text and the bad cells are found column by column. Only rows that pyarrow cannot
    split (wrong field counts, blank lines, bad encoding) need the line-by-line scan.
    """
    ncols = len(names)
    tail, body_end = _truncated_tail(data, start, end, ncols)
    problems = [] if tail is None else [replace(tail, file=file)]
    body = pa.py_buffer(data)[start:body_end]
    columns = _fast_parse(body, ncols) if tail is not None else None
    if columns is not None:
        lines = np.arange(2, len(columns[0]) + 2)
        return problems, np.column_stack(columns), lines, np.zeros((len(lines), ncols), bool)
    # pyarrow reads a blank line as a row of empty cells; the scan names it for what it is
    blank = any(gap in data[start:body_end] for gap in (b"\n\n", b"\r\r", b"\n\r\n"))
    table = None if blank else _string_parse(body, ncols)
    if table is not None:
        found, values, lines, reported = _cells_to_numbers(file, table, names, 2)
        return problems + found, values, lines, reported
    return _scan(data, start, end, file, names)


_LINE = re.compile(rb"([^\r\n]*)(\r\n|\r|\n|$)")


def _scan(data: bytes, start: int, end: int, file: str, names: list[str]):
    """Line-by-line scan for the error messages (only when the fast parse failed).

    Returns the problems, the parsed values (NaN where a cell was unusable), the line numbers
    of the rows kept, and the mask of cells already reported.
    """
    ncols = len(names)
    problems: list[Problem] = []
    rows: list[list[float]] = []
    row_lines: list[int] = []
    reported: list[list[bool]] = []
    bad_cells: dict[int, list[tuple[int, str]]] = {}
    short: list[int] = []
    blank: list[int] = []
    line = 1
    pos = start
    while pos < end:
        m = _LINE.match(data, pos, end)
        line += 1
        content = m.group(1)
        pos = m.end()
        if not m.group(0):
            break
        try:
            text = content.decode("utf-8")
        except UnicodeDecodeError as exc:
            problems.append(_encoding_problem(file, line, m.start() + exc.start, data))
            continue
        if not text.strip():
            blank.append(line)
            continue
        cells = split_line(text)  # None: a cell over the csv module's limit
        if cells is None or len(cells) != ncols:
            if cells is not None and pos >= end and len(cells) < ncols:
                found = f"{len(cells)}"
                hint = "The last line is cut off (the logger stopped while writing); delete it."
            else:
                short.append(line)
                found = (
                    f"a cell over {csv.field_size_limit()} characters"
                    if cells is None
                    else f"{len(cells)}: {text[:60]!r}"
                )
                hint = "Each row needs one value per header column."
            problems.append(Problem(file, line, None, f"{ncols} fields", found, hint))
            continue
        values, flags = [], []
        for i, cell in enumerate(cells):
            cell = cell.strip()
            if _NUMBER.match(cell) or _NONFINITE.match(cell):
                values.append(float(cell))
                flags.append(False)
            else:
                values.append(np.nan)
                flags.append(True)
                bad_cells.setdefault(i, []).append((line, cell[:100]))
        rows.append(values)
        row_lines.append(line)
        reported.append(flags)
    if blank:
        problems.append(
            Problem(
                file,
                blank[0],
                None,
                "no blank lines between rows",
                f"a blank {_rows_text(np.array(blank))}",
                "Delete the blank lines.",
            )
        )
    for i, cells in sorted(bad_cells.items()):
        lines = np.array([n for n, _ in cells])
        examples = ", ".join(brief(c) for _, c in cells[:SHOWN_ROWS])
        problems.append(
            Problem(
                file,
                cells[0][0],
                names[i] if i < ncols else None,
                "a number in every cell",
                f"{examples} on {_rows_text(lines)}",
                "Write plain decimal numbers (a point as decimal separator).",
            )
        )
    values = np.array(rows, dtype=float).reshape(-1, ncols)
    return (
        problems,
        values,
        np.array(row_lines, dtype=np.int64),
        np.array(reported, bool).reshape(-1, ncols),
    )


def _parse_log(path: Path, rel: str, expected: dict, optional: dict, hints: dict, stream: str):
    """Parse one log. Returns (Dataset or None, problems, LogInfo or None, sha256)."""
    data = read_regular(path, MAX_LOG_BYTES, name=rel)
    if isinstance(data, Refusal):
        return None, [Problem(rel, None, None, data.expected, data.found, data.hint)], None, ""
    sha = hashlib.sha256(data).hexdigest()
    if not data.strip():
        return (
            None,
            [
                Problem(
                    rel,
                    None,
                    None,
                    "a header row and data rows",
                    "an empty file",
                    "The logger wrote nothing; repeat the run or remove it.",
                )
            ],
            None,
            sha,
        )
    header = _read_header(data, rel, expected, optional, hints)
    problems = list(header.problems)
    end = len(data)
    while end > header.end and data[end - 1] in b"\r\n":
        end -= 1
    ncols = len(header.names)
    if ncols == 0 and problems:
        return None, problems, None, sha
    if ncols == 0:
        problems.insert(
            0,
            Problem(
                rel,
                1,
                None,
                "a header row of column names",
                "an empty first line",
                "Remove the blank first line.",
            ),
        )
        return None, problems, None, sha
    if end <= header.end:
        problems.append(
            Problem(
                rel,
                2,
                None,
                "data rows after the header",
                "the header only",
                "The logger stopped before the first sample.",
            )
        )
        return None, problems, None, sha
    columns = _fast_parse(pa.py_buffer(data)[header.end : end], ncols)
    if columns is not None:
        lines = np.arange(2, len(columns[0]) + 2)
        skip = None
    else:
        scan_problems, values, lines, reported = _locate(data, header.end, end, rel, header.names)
        problems += scan_problems
        columns = [values[:, i] for i in range(ncols)]
        skip = reported
        if not scan_problems and not problems:
            problems.append(
                Problem(
                    rel,
                    None,
                    None,
                    "a CSV file of numbers",
                    "a file the CSV reader could not parse",
                    "Check quoting and separators (commas only).",
                )
            )
    usable = {
        name: conv(col)
        for name, conv, col in zip(header.names, header.conversions, columns, strict=True)
        if conv is not None
    }
    skipmask = {}
    if skip is not None:
        skipmask = {n: skip[:, i] for i, n in enumerate(header.names) if n in usable}
    problems += _check_values(rel, usable, lines, skipmask)
    if problems:
        return None, problems, None, sha
    time = usable["time"]
    if len(time) < MIN_ROWS:  # said only of a log otherwise good: one problem at a time
        problem = Problem(
            rel,
            int(lines[-1]),
            None,
            f"at least {MIN_ROWS} data rows (a time series)",
            f"{len(time)} row",
            "The logger stopped after its first sample; repeat the run or remove it.",
        )
        return None, [problem], None, sha
    info = LogInfo(
        rows=len(time),
        start=float(time[0]),
        end=float(time[-1]),
        median_dt=float(np.median(np.diff(time))) if len(time) > 1 else float("nan"),
        columns=tuple(header.names),
    )
    variables = {
        name: xr.Variable("time", usable[name], {"units": conv.units})
        for name, conv in zip(header.names, header.conversions, strict=True)
        if name != "time"
    }
    ds = xr.Dataset(
        variables,
        coords={"time": xr.Variable("time", time, {"units": "s", "long_name": "time from start"})},
        attrs={"file": rel, "sha256": sha, "stream": stream},
    )
    return ds, [], info, sha


def read_log(path, *, root, stream, expected_columns, optional_columns=()) -> xr.Dataset:
    """Parse one CSV log into a Dataset in SI units.

    Parameters
    ----------
    path : str or Path
        The log, absolute or relative to ``root``.
    root : str or Path
        The campaign folder; the Dataset's ``file`` attribute is relative to it.
    stream : str
        Which stream the log is (one of :data:`STREAMS`, or several joined by ``+`` for a file
        serving several); written to the ``stream`` attribute.
    expected_columns : iterable of str, or mapping of str to dimension
        Base names of the required columns (``time`` is always required). A mapping gives
        each column's dimension (a key of units.DIMENSIONS, or None for any unit); with a
        plain list, fixed names (``T``, ``speed``, …) have their own dimension, other names are
        pressures in a pressure log and of any unit otherwise (balance channels).
    optional_columns : iterable of str, or mapping of str to dimension
        Columns that may be present.

    Returns
    -------
    xarray.Dataset
        Dim ``time`` [s]; one variable per column by base name, in SI (pressures in Pa,
        temperature in K, RH a fraction, ``speed`` in rad/s, ``angle`` in deg, balance channels
        in the SI unit of their header); attrs ``file``, ``sha256``, ``stream``.

    Raises
    ------
    InputError
        Listing every problem found in the file.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> root = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (root / "t.csv").write_text("time [s],T [degC]\\n0,20\\n0.5,20.5\\n")
    >>> ds = read_log("t.csv", root=root, stream="tunnel", expected_columns=["T"])
    >>> float(ds["T"][0]), ds["T"].attrs["units"]
    (293.15, 'K')
    """
    root = Path(root)
    full = Path(path) if Path(path).is_absolute() else root / path
    try:
        rel = full.relative_to(root).as_posix()
    except ValueError:
        rel = str(path)
    expected = _with_dimensions(expected_columns, stream)
    expected = {"time": "time"} | expected
    optional = _with_dimensions(optional_columns, stream)
    ds, problems, _, _ = _parse_log(full, rel, expected, optional, {}, stream)
    if problems:
        raise InputError(problems)
    return ds


def _with_dimensions(columns, stream: str) -> dict:
    if isinstance(columns, Mapping):
        return dict(columns)
    default = "pressure" if stream == "pressure" else None
    return {name: FIXED_COLUMNS.get(name, default) for name in columns}


def log_columns(config: CampaignConfig, stream: str, *, spinning: bool) -> tuple[dict, dict]:
    """The required and optional columns of a stream's log: base name → dimension.

    ``spinning``: the run spins (makes ``angle`` required in a pressure log). The columns are
    the stream's specification's (inputs.streams); ValueError for an unknown stream.
    """
    return stream_spec(stream).columns(config, spinning)


def stream_hints(stream: str) -> dict:
    """The hints of a stream's log header problems (inputs.streams)."""
    return dict(stream_spec(stream).hints)
