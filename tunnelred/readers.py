"""The campaign folder → validated runs and their logs as xarray Datasets in SI units.

:func:`open_campaign` reads campaign.toml and runs.csv and checks every reference between them
and the logs; :meth:`Campaign.load_run` parses one run's logs. :func:`read_log` parses one CSV log.
The schema enforced here is docs/input-format.md.

Logs are parsed with pyarrow's CSV reader, every column as float64, with no per-row Python work.
Only when that parse fails does a line-by-line scan run, to say exactly where and why.
Every problem is collected (never only the first) as a :class:`~tunnelred.errors.Problem`.
"""

from __future__ import annotations

import csv
import hashlib
import io
import re
from collections.abc import Iterable, Iterator, Mapping
from dataclasses import dataclass, field, replace
from datetime import datetime
from pathlib import Path, PurePosixPath

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pacsv
import xarray as xr

from .config import Q_SOURCES, CampaignConfig, load_config
from .errors import InputError, Problem
from .units import DIMENSIONS, conversion, parse_header

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

#: The kinds of log a run may name, each in a runs.csv column ``<stream>_log``.
STREAMS = ("balance", "pressure", "tunnel")

#: Run kinds: wind-off zero, wind-off spin tare, wind-on data.
KINDS = ("zero", "tare", "data")

#: Dimension of every log column with a fixed name (see units.DIMENSIONS).
FIXED_COLUMNS = {
    "time": "time",
    "dp_pitot": "pressure",
    "dp_contraction": "pressure",
    "T": "temperature",
    "p_baro": "pressure",
    "RH": "fraction",
    "speed": "rotation_rate",
    "angle": "angle",
}

#: How many offending rows a problem lists before saying "and N more".
SHOWN_ROWS = 3

_RUN_ID = re.compile(r"^[A-Za-z0-9_.-]+$")
_RUNS_REQUIRED = ("run", "kind", "start", "config")
_RUNS_OPTIONAL = (
    "balance_log",
    "pressure_log",
    "tunnel_log",
    "zero",
    "tare",
    "pressure_with",
    "notes",
)
_RUNS_WITH_UNITS = {"speed_set": "speed", "spin_set": "rotation_rate"}
_NUMBER = re.compile(r"^[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?$")
_NONFINITE = re.compile(r"^[+-]?(?:nan|inf|infinity)$", re.IGNORECASE)
_RPM_PER_RAD_S = 60.0 / (2.0 * np.pi)


# ---------------------------------------------------------------------------------------------
# Holders


@dataclass(frozen=True)
class RunSpec:
    """One row of runs.csv.

    ``logs`` maps a stream name (:data:`STREAMS`) to its log's path relative to the campaign
    folder (forward slashes). ``speed_set`` is in m/s and ``spin_set`` in rpm (signed), None
    when not given. ``line`` is the row's line in runs.csv.
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
    cells = next(csv.reader([text]), [])
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
            problems.append(
                Problem(
                    file,
                    1,
                    base,
                    "each column once",
                    f"{base!r} in columns {seen[base]} and {position}",
                    "Delete or rename one of them.",
                )
            )
        seen.setdefault(base, position)
        if base not in known:
            problems.append(
                Problem(
                    file,
                    1,
                    base,
                    f"only the columns {', '.join(known)}",
                    f"an extra column {base!r}",
                    hints.get("extra", "Remove it or check its spelling."),
                )
            )
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
    for name, (test, expected) in ranges.items():
        if name in columns:
            with np.errstate(invalid="ignore"):
                bad = test(columns[name]) & np.isfinite(columns[name])
            if bad.any():
                problems.append(
                    Problem(
                        file,
                        int(lines[bad][0]),
                        name,
                        expected,
                        f"{columns[name][bad][0]:g} (SI) on {_rows_text(lines[bad])}",
                        "Check the unit in the header.",
                    )
                )
    return problems


def _fast_parse(body: pa.Buffer, ncols: int) -> list[np.ndarray] | None:
    """All columns as float64 with pyarrow, or None when anything is not plain numbers."""
    names = [f"c{i}" for i in range(ncols)]
    try:
        table = pacsv.read_csv(
            pa.BufferReader(body),
            read_options=pacsv.ReadOptions(column_names=names, block_size=1 << 24),
            parse_options=pacsv.ParseOptions(ignore_empty_lines=False),
            convert_options=pacsv.ConvertOptions(
                column_types={n: pa.float64() for n in names},
                null_values=[],
                strings_can_be_null=False,
                quoted_strings_can_be_null=False,
            ),
        )
    except (pa.ArrowException, ValueError, OverflowError):
        return None
    if table.num_columns != ncols:
        return None
    return [table.column(i).to_numpy() for i in range(ncols)]


def _string_parse(body: pa.Buffer, ncols: int):
    """Every column as text with pyarrow (checks UTF-8), or None when the rows are malformed."""
    names = [f"c{i}" for i in range(ncols)]
    try:
        table = pacsv.read_csv(
            pa.BufferReader(body),
            read_options=pacsv.ReadOptions(column_names=names, block_size=1 << 24),
            parse_options=pacsv.ParseOptions(ignore_empty_lines=False),
            convert_options=pacsv.ConvertOptions(
                column_types={n: pa.string() for n in names},
                null_values=[],
                strings_can_be_null=False,
                quoted_strings_can_be_null=False,
            ),
        )
    except (pa.ArrowException, ValueError, OverflowError):
        return None
    return table if table.num_columns == ncols else None


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
            examples = ", ".join(repr(text[int(j)].as_py()) for j in bad[:SHOWN_ROWS])
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
    cells = next(csv.reader([last]), [])
    if len(cells) >= ncols:
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
        cells = next(csv.reader([text]), [])
        if len(cells) != ncols:
            if pos >= end and len(cells) < ncols:
                problems.append(
                    Problem(
                        file,
                        line,
                        None,
                        f"{ncols} fields",
                        f"{len(cells)}",
                        "The last line is cut off (the logger stopped while writing); delete it.",
                    )
                )
            else:
                short.append(line)
                problems.append(
                    Problem(
                        file,
                        line,
                        None,
                        f"{ncols} fields",
                        f"{len(cells)}: {text[:60]!r}",
                        "Each row needs one value per header column.",
                    )
                )
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
                bad_cells.setdefault(i, []).append((line, cell))
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
        examples = ", ".join(repr(c) for _, c in cells[:SHOWN_ROWS])
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
    try:
        with open(path, "rb") as f:
            data = f.read()
    except OSError as exc:
        return (
            None,
            [
                Problem(
                    rel,
                    None,
                    None,
                    "a readable file",
                    exc.strerror or str(exc),
                    "Check the path in runs.csv.",
                )
            ],
            None,
            "",
        )
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

    ``spinning``: the run spins (makes ``angle`` required in a pressure log).
    """
    fixed = FIXED_COLUMNS
    if stream == "tunnel":
        q = Q_SOURCES[config.tunnel.q_source]
        other = next(c for c in Q_SOURCES.values() if c != q)
        required = {c: fixed[c] for c in ("time", q, "T", "p_baro", "RH")}
        optional = {c: fixed[c] for c in (other, "speed", "angle")}
    elif stream == "balance":
        channels = config.instruments.balance.channels if config.instruments.balance else ()
        required = {"time": "time"} | {c: None for c in channels}
        optional = {"speed": fixed["speed"], "angle": fixed["angle"]}
    elif stream == "pressure":
        required = {"time": "time"} | {t.name: "pressure" for t in config.taps}
        optional = {"speed": fixed["speed"]}
        (required if spinning else optional)["angle"] = fixed["angle"]
    else:
        raise ValueError(f"unknown stream {stream!r}")
    return required, optional


def _stream_hints(stream: str) -> dict:
    if stream == "pressure":
        return {
            "extra": "A tap column must be declared in campaign.toml [[taps]]; declare it "
            "or remove the column.",
            "missing": "Every [[taps]] entry needs its column in the pressure log.",
            "angle": "A spinning run's pressure log needs the encoder angle to place its taps.",
        }
    if stream == "balance":
        return {"missing": "Every [instruments.balance] channel needs its column."}
    return {}


# ---------------------------------------------------------------------------------------------
# runs.csv


def _read_runs(path: Path, problems: list[Problem]):
    """Parse runs.csv. Returns (rows, fatal) with rows as (line, {column: text}) pairs."""
    file = "runs.csv"
    try:
        with open(path, "rb") as f:
            data = f.read()
    except OSError as exc:
        problems.append(
            Problem(
                file,
                None,
                None,
                "a readable runs.csv",
                exc.strerror or str(exc),
                "Each campaign folder needs a runs.csv.",
            )
        )
        return [], {}, True
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        problems.append(
            _encoding_problem(file, data[: exc.start].count(b"\n") + 1, exc.start, data)
        )
        return [], {}, True
    reader = csv.reader(io.StringIO(text, newline=""))
    header = next(reader, None)
    if not header or not any(c.strip() for c in header):
        problems.append(
            Problem(file, None, None, "a header row and one row a run", "an empty file")
        )
        return [], {}, True
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
                    f"{base!r} twice",
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
                    f"{base!r}",
                    "Check the spelling; put remarks in notes.",
                )
            )
        elif base in _RUNS_WITH_UNITS:
            dimension = _RUNS_WITH_UNITS[base]
            try:
                units[base] = conversion(unit or "", dimension) if unit else None
            except ValueError as exc:
                units[base] = None
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
                continue
            if unit is None:
                problems.append(
                    Problem(
                        file,
                        1,
                        base,
                        f"'{base} [unit]'",
                        f"{base!r} without a unit",
                        "Add the unit in brackets.",
                    )
                )
        elif unit is not None:
            problems.append(Problem(file, 1, base, f"{base!r} without a unit", repr(cell)))
    for name in _RUNS_REQUIRED:
        if name not in names:
            problems.append(Problem(file, 1, name, f"a column {name!r}", "none", "Add it."))
            fatal = True
    rows = []
    for cells in reader:
        line = reader.line_num
        if not any(c.strip() for c in cells):
            continue
        if len(cells) != len(names):
            run = (
                cells[names.index("run")].strip()
                if "run" in names and len(cells) > names.index("run")
                else None
            )
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


def _split_ids(text: str) -> tuple[str, ...]:
    return tuple(s.strip() for s in text.split(";") if s.strip())


def _check_path(root: Path, text: str, file: str, line: int, column: str, problems) -> str | None:
    """A log path from runs.csv, made relative and checked to stay inside the folder."""
    posix = text.replace("\\", "/")
    pure = PurePosixPath(posix)
    outside = "a path inside the campaign folder (relative, no '..')"
    if pure.is_absolute() or re.match(r"^[A-Za-z]:", posix) or ".." in pure.parts:
        problems.append(
            Problem(
                file,
                line,
                column,
                outside,
                repr(text),
                "Copy the log into the campaign folder and name it relative to it.",
            )
        )
        return None
    full = root / pure
    try:
        inside = full.resolve().is_relative_to(root.resolve())
    except (OSError, RuntimeError):
        inside = False
    if not inside:
        problems.append(
            Problem(
                file,
                line,
                column,
                outside,
                f"{text!r}, a link that resolves outside the folder",
                "Replace the link by a copy of the file.",
            )
        )
        return None
    if not full.is_file():
        problems.append(
            Problem(
                file,
                line,
                column,
                "an existing log file",
                f"no file {text!r}",
                "Check the path and its spelling (paths are case-sensitive).",
            )
        )
        return None
    return pure.as_posix()


def _parse_start(text: str) -> datetime | None:
    if len(text) < 16:  # a date alone, or a date and an hour, is not a start time
        return None
    try:
        return datetime.fromisoformat(text)
    except ValueError:
        return None


def _build_runs(root, rows, units, config, problems):
    """RunSpecs from runs.csv rows; problems go to ``problems`` keyed by run id."""
    file = "runs.csv"
    labels = set(config.configurations) if config is not None else None
    runs: dict[str, RunSpec] = {}
    by_run: dict[str, list[Problem]] = {}
    unreadable: list[str] = []
    for line, row, short_run in rows:
        if row is None:
            # A row too short to name its run is still listed, under its line, so that
            # a reduction reports it among the failures instead of dropping it unseen.
            rid = short_run or f"runs.csv line {line}"
            mine = [p for p in problems if p.file == file and p.line == line]
            by_run.setdefault(rid, []).extend(mine)
            unreadable.append(rid)
            continue
        mine: list[Problem] = []

        def bad(column, expected, found, hint="", mine=mine, line=line):
            mine.append(Problem(file, line, column, expected, found, hint))

        run = row.get("run", "")
        if not _RUN_ID.match(run):
            bad("run", "a run id of letters, digits, '-', '_', '.'", repr(run))
            problems.extend(mine)
            continue
        if run in runs or run in unreadable:
            first = runs[run].line if run in runs else "above"
            bad(
                "run",
                "a unique run id",
                f"{run!r}, already on line {first}",
                "Give each run its own id.",
            )
            problems.extend(mine)
            by_run.setdefault(run, []).extend(mine)
            continue
        kind = row.get("kind", "")
        if kind not in KINDS:
            bad("kind", f"one of {', '.join(KINDS)}", repr(kind))
        start = _parse_start(row.get("start", ""))
        if start is None:
            bad(
                "start",
                "an ISO 8601 date and time, e.g. 2026-11-16T09:14:05",
                repr(row.get("start", "")),
            )
        label = row.get("config", "")
        if label or kind in ("tare", "data"):
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
                    repr(label),
                    "Add the configuration to campaign.toml or fix the label.",
                )
        logs: dict[str, str] = {}
        for stream in STREAMS:
            text = row.get(f"{stream}_log", "")
            if text:
                before = len(mine)
                rel = _check_path(root, text, file, line, f"{stream}_log", mine)
                if rel is not None:
                    logs[stream] = rel
                elif len(mine) == before:
                    logs[stream] = text
        needs = {"zero": ("balance",), "tare": ("balance",), "data": ("tunnel",)}.get(kind, ())
        for stream in needs:
            if not row.get(f"{stream}_log"):
                bad(f"{stream}_log", f"the {stream} log of a {kind} run", "an empty cell")
        if kind == "data" and not (row.get("balance_log") or row.get("pressure_log")):
            bad("balance_log", "a balance_log or pressure_log on a data run", "neither")
        set_points = {}
        for name in _RUNS_WITH_UNITS:
            text = row.get(name, "")
            if not text or units.get(name) is None:
                set_points[name] = None
                continue
            if not (_NUMBER.match(text)):
                bad(name, "a finite number", repr(text))
                set_points[name] = None
                continue
            value = float(units[name](float(text)))
            set_points[name] = value * _RPM_PER_RAD_S if name == "spin_set" else value
        speed = set_points["speed_set"]
        if speed is not None and (speed < 0 or (kind in ("zero", "tare") and speed != 0)):
            bad(
                "speed_set",
                "0 for a wind-off run" if kind != "data" else "a speed of 0 or more",
                row["speed_set"],
            )
        if kind == "zero" and set_points["spin_set"] not in (None, 0.0):
            bad("spin_set", "0 (a zero run does not spin)", row["spin_set"])
        zero = _split_ids(row.get("zero", ""))
        tare = _split_ids(row.get("tare", ""))
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
            bad("tare", "tare runs only on a data run", repr(row["tare"]))
        if tare and kind == "data" and not row.get("balance_log"):
            bad("tare", "tare runs only with a balance log", repr(row["tare"]))
        pressure_with = _split_ids(row.get("pressure_with", ""))
        if pressure_with and (kind != "data" or not row.get("pressure_log")):
            bad(
                "pressure_with",
                "other runs' pressure only on a data run with a pressure log",
                repr(row["pressure_with"]),
            )
        problems.extend(mine)
        if kind not in KINDS or start is None:
            unreadable.append(run)
            by_run.setdefault(run, []).extend(mine)
            continue
        runs[run] = RunSpec(
            run=run,
            kind=kind,
            config=label,
            start=start,
            logs=logs,
            zero=zero,
            tare=tare,
            speed_set=speed,
            spin_set=set_points["spin_set"],
            notes=row.get("notes", ""),
            line=line,
            pressure_with=pressure_with,
        )
        by_run.setdefault(run, []).extend(mine)
    # references can point forward, so they are checked once every row is read
    for spec in runs.values():
        for column, wanted in (("zero", "zero"), ("tare", "tare"), ("pressure_with", "data")):
            for ref in getattr(spec, column):
                target = runs.get(ref)
                if target is None:
                    found = f"{ref!r}, which " + (
                        "could not be read" if ref in unreadable else "runs.csv does not hold"
                    )
                elif target.kind != wanted:
                    found = f"{ref!r}, a {target.kind} run"
                elif column == "tare" and target.config != spec.config:
                    found = f"{ref!r}, of configuration {target.config!r}"
                    wanted = f"tare of configuration {spec.config!r}"
                elif column == "pressure_with" and (
                    "pressure" not in target.logs or target.config != spec.config
                ):
                    found = f"{ref!r}, " + (
                        "without a pressure log"
                        if "pressure" not in target.logs
                        else f"of configuration {target.config!r}"
                    )
                    wanted = f"data run of configuration {spec.config!r} with a pressure log"
                else:
                    continue
                p = Problem(
                    file,
                    spec.line,
                    column,
                    f"the id of a {wanted} run",
                    found,
                    f"Fix the {column} column of run {spec.run}.",
                )
                problems.append(p)
                by_run[spec.run].append(p)
    return runs, by_run, unreadable


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

    # -- lists of runs
    def data_runs(self) -> list[RunSpec]:
        return [r for r in self.runs.values() if r.kind == "data"]

    def zero_runs(self) -> list[RunSpec]:
        return [r for r in self.runs.values() if r.kind == "zero"]

    def tare_runs(self) -> list[RunSpec]:
        return [r for r in self.runs.values() if r.kind == "tare"]

    def dependencies(self, run_id: str) -> list[str]:
        """The run and every run its reduction reads (:attr:`RunSpec.uses`, transitively)."""
        order, todo = [], [run_id]
        while todo:
            rid = todo.pop(0)
            if rid in order:
                continue
            order.append(rid)
            spec = self.runs.get(rid)
            if spec is not None:
                todo += list(spec.uses)
        return order

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


def _header_names(path: Path) -> set[str]:
    """Base names in a log's first line (for cross-log rules; problems come from the parse)."""
    try:
        with open(path, "rb") as f:
            first = f.readline(1 << 16)
        cells = next(csv.reader([first.decode("utf-8-sig", errors="replace")]), [])
    except OSError:
        return set()
    names = set()
    for cell in cells:
        try:
            names.add(parse_header(cell)[0])
        except ValueError:
            continue
    return names


def open_campaign(path, *, check_logs: bool = True) -> Campaign:
    """Open a campaign folder: read campaign.toml and runs.csv and check every reference.

    Parameters
    ----------
    path : str or Path
        The campaign folder.
    check_logs : bool
        True: parse every log fully and collect its problems (the data are not kept).
        False: check each log's header row only, so that a large campaign opens quickly; the
        logs' data are checked by :meth:`Campaign.load_run`.

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
    >>> from tunnelred.readers import open_campaign
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
    config, problems = load_config(root / "campaign.toml")
    config_problems = list(problems)
    rows, units, runs_fatal = _read_runs(root / "runs.csv", problems)
    if config is None or runs_fatal:
        raise InputError(problems)
    # A problem of one runs.csv row stops that run (and those using it), not the campaign.
    global_problems = [p for p in problems if not (p.file == "runs.csv" and (p.line or 1) > 1)]
    runs, by_run, unreadable = _build_runs(root, rows, units, config, problems)
    global_problems = config_problems + [p for p in global_problems if p not in config_problems]

    def stop_all(p: Problem):
        problems.append(p)
        global_problems.append(p)

    used = {s for spec in runs.values() for s in spec.logs}
    if "balance" in used and config.instruments.balance is None:
        stop_all(
            Problem(
                "campaign.toml",
                None,
                "instruments.balance",
                "an [instruments.balance] table (runs name balance logs)",
                "none",
                "Add the balance channels and calibration matrix.",
            )
        )
    if "pressure" in used and not config.taps:
        stop_all(
            Problem(
                "campaign.toml",
                None,
                "taps",
                "[[taps]] tables (runs name pressure logs)",
                "none",
                "Declare each tap's name and azimuth.",
            )
        )

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
                hints = prev[2] | _stream_hints(stream)
                streams = prev[3] if stream in prev[3].split("+") else f"{prev[3]}+{stream}"
            else:
                hints, streams = _stream_hints(stream), stream
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
            with open(root / rel, "rb") as f:
                first = f.read(1 << 16)
            header = _read_header(first, rel, required, optional, hints)
            campaign._by_file[rel] = header.problems
            campaign.problems += header.problems
    return campaign
