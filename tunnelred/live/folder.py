"""The campaign folder as the acquisition writes it: the whole rows of runs.csv, the files a run
needs, and what was seen of each file between two looks.
"""

from __future__ import annotations

import os
import re
from dataclasses import dataclass
from pathlib import Path, PurePosixPath

from tunnelred.common.errors import Problem
from tunnelred.inputs.readers import log_cells, run_lists, runs_header, runs_records

NEWLINE = re.compile(rb"\r\n|\r|\n")


@dataclass(frozen=True)
class RunsRow:
    """One whole row of runs.csv: what the watch needs to know of it."""

    run: str
    kind: str
    config: str
    logs: tuple[str | None, ...]  # relative paths; None for one outside the folder
    needs: tuple[str, ...]  # its zero and tare runs
    lines: tuple[int, int]  # first and past-the-last physical line of the record
    text: str  # the record as written, for noticing an edited row
    problem: str = ""  # why the row cannot be used (the run is shown failed, never reduced)
    zeros: tuple[str, ...] = ()  # its zero runs, as runs.csv names them (before, after)


def whole_lines(data: bytes) -> bytes:
    """``data`` up to its last line break outside a quoted field (a row still being written,
    or a quoted cell still open, is left out)."""
    end = len(data)
    while end > 0:
        breaks = [m.end() for m in NEWLINE.finditer(data, 0, end)]
        if not breaks:
            return b""
        cut = breaks[-1]
        if data.count(b'"', 0, cut) % 2 == 0:
            return data[:cut]
        end = cut - 1
    return b""


def inside_folder(root: Path, text: str) -> str | None:
    """The log path, relative with forward slashes, or None when it may lead outside the folder.

    The readers' rule (tunnelred.inputs.readers): relative, no ``..`` segment, and inside the
    folder once links are followed. The watch never opens a file outside the campaign folder,
    and never copies one to a path that ``..`` could lead out of the snapshot; the readers
    report such a path as a problem of the run.
    """
    posix = text.replace("\\", "/")
    pure = PurePosixPath(posix)
    if pure.is_absolute() or re.match(r"^[A-Za-z]:", posix) or ".." in pure.parts:
        return None
    try:
        inside = Path(os.path.realpath(root / pure)).is_relative_to(os.path.realpath(root))
    except (OSError, RuntimeError, ValueError):
        inside = False
    return pure.as_posix() if inside else None


def _cell(line: str, index: int) -> str:
    """The ``index``-th comma-separated cell of a line that the csv module refused, or ''."""
    cells = line.split(",")
    return cells[index].strip()[:64] if 0 <= index < len(cells) else ""


def read_runs_rows(root: Path, text: str) -> tuple[list[str], list[RunsRow]]:
    """The physical lines of a runs.csv holding whole lines, and its rows that name a run.

    The records, header names, logs and referenced runs are read by the readers' own runs.csv
    functions (runs_records, runs_header, log_cells, run_lists); the row checks are left to the
    readers when the snapshot is reduced.
    """
    lines = re.findall(r"[^\r\n]*(?:\r\n|\r|\n)", text)
    records = runs_records(text)
    _, _, header, _ = next(records, (0, 0, None, None))
    if header is None:
        return lines, []
    names = runs_header(header, [])[0]  # its problems are the readers' to report
    rows = []
    for first, last, record, error in records:
        record_text = "".join(lines[first:last])
        if error is not None:  # a cell over the csv module's limit (128 KiB), say
            run = _cell(record_text, names.index("run")) if "run" in names else ""
            where = f"runs.csv:{first + 1}"
            rows.append(
                RunsRow(
                    run=run or where,
                    kind="",
                    config="",
                    logs=(),
                    needs=(),
                    lines=(first, last),
                    text=record_text,
                    problem=f"{where}: {error}; the row cannot be read",
                )
            )
            continue
        cells = {n: c.strip() for n, c in zip(names, record, strict=False)}
        run = cells.get("run", "")
        if run:
            references = run_lists(cells)
            rows.append(
                RunsRow(
                    run=run,
                    kind=cells.get("kind", ""),
                    config=cells.get("config", ""),
                    logs=tuple(inside_folder(root, text) for _, text in log_cells(cells)),
                    needs=tuple(ref for refs in references.values() for ref in refs),
                    zeros=references["zero"],
                    lines=(first, last),
                    text=record_text,
                )
            )
    return lines, rows


class Changed(Exception):
    """A file changed while it was being copied into the snapshot."""


def bad_file(rel: str, what: str) -> Problem:
    return Problem(
        rel,
        None,
        None,
        "a readable regular file",
        what,
        "Fix the path in runs.csv or the file; the watch goes on with the other runs.",
    )


@dataclass(frozen=True)
class FileState:
    state: str  # missing, empty, growing, cut, ready, or bad (a folder, unreadable: never ready)
    key: tuple[int, int] | None = None  # size, mtime_ns
    problem: Problem | None = None


@dataclass
class Seen:
    key: tuple[int, int]
    since: float
    tail: FileState | None = None  # the verdict on a settled file, kept while it holds
