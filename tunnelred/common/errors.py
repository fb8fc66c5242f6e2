"""Errors that speak to people: which file, which line and column, what was expected, what to do.

Bad input never surfaces as a traceback. Readers collect :class:`Problem` records; a campaign keeps
every problem it found, and raises :class:`InputError` holding all of them when asked to be strict.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

__all__ = [
    "Problem",
    "TunnelredError",
    "InputError",
    "ReductionError",
    "OutputFolderError",
    "OutsideError",
    "UsageError",
    "Terminated",
    "MAX_PROBLEMS_PER_FILE",
    "bounded",
    "brief",
]

#: How many problems of one file are listed before one line says how many more there are.
MAX_PROBLEMS_PER_FILE = 50


@dataclass(frozen=True)
class Problem:
    """One thing wrong with an input file.

    Parameters
    ----------
    file : str
        Path of the file, as the user named it (relative to the campaign folder where possible).
    line : int or None
        1-based line number in the file, or None when the problem concerns the whole file.
    column : str or None
        Column name (CSV) or key (TOML) the problem concerns, or None.
    expected : str
        What a valid file has there.
    found : str
        What this file has there.
    hint : str
        One line on what to do about it.
    """

    file: str
    line: int | None
    column: str | None
    expected: str
    found: str
    hint: str = ""

    def location(self) -> str:
        where = str(self.file)
        if self.line is not None:
            where += f":{self.line}"
        if self.column:
            where += f" [{self.column}]"
        return where

    def __str__(self) -> str:
        text = f"{self.location()}: expected {self.expected}; found {self.found}."
        if self.hint:
            text += f" {self.hint}"
        return text


def brief(value: object, limit: int = 60) -> str:
    """``repr(value)``, cut to about ``limit`` characters: a message quotes, it does not copy."""
    text = repr(value)
    if len(text) <= limit:
        return text
    return f"{text[:limit]}… ({len(text)} characters)"


def bounded(problems: list[Problem], limit: int = MAX_PROBLEMS_PER_FILE) -> list[Problem]:
    """The first ``limit`` problems of each file, and for a file with more, one that counts them.

    Keeps what ``check`` prints (and holds) bounded however broken a file is.
    """
    shown: list[Problem] = []
    counts: dict[str, int] = {}
    for p in problems:
        counts[p.file] = counts.get(p.file, 0) + 1
        if counts[p.file] <= limit:
            shown.append(p)
    for file, count in counts.items():
        if count > limit:
            shown.append(
                Problem(
                    file,
                    None,
                    None,
                    f"at most {limit} problems listed per file",
                    f"{count - limit} more problems in this file",
                    "Fix those listed and check again.",
                )
            )
    return shown


class TunnelredError(Exception):
    """Base class of the errors tunnelred raises on purpose."""


class InputError(TunnelredError):
    """One or more problems with the campaign's input files.

    Parameters
    ----------
    problems : Problem or list of Problem
    """

    def __init__(self, problems: Problem | list[Problem]):
        if isinstance(problems, Problem):
            problems = [problems]
        self.problems: list[Problem] = list(problems)
        super().__init__(self._message())

    def _message(self) -> str:
        if len(self.problems) == 1:
            return str(self.problems[0])
        lines = [f"{len(self.problems)} problems in the input:"]
        lines += [f"  {p}" for p in self.problems]
        return "\n".join(lines)

    @classmethod
    def single(
        cls,
        file: str | Path,
        line: int | None,
        column: str | None,
        expected: str,
        found: str,
        hint: str = "",
    ) -> InputError:
        return cls(Problem(str(file), line, column, expected, found, hint))


class ReductionError(TunnelredError):
    """A run whose inputs are valid but that cannot be reduced as asked.

    Examples: a spin tare needed outside the measured rpm range when the configuration says to
    refuse, or a pressure run whose taps leave a gap wider than the allowed one.

    Parameters
    ----------
    run : str
        The run id from runs.csv.
    reason : str
        What went wrong, for a person.
    file : str, optional
        The file most concerned, if any.
    line : int, optional
        The line in that file, if any.
    """

    def __init__(self, run: str, reason: str, file: str | None = None, line: int | None = None):
        self.run = run
        self.reason = reason
        self.file = file
        self.line = line
        where = f" ({file}" + (f":{line}" if line is not None else "") + ")" if file else ""
        super().__init__(f"run {run}: {reason}{where}")


class OutputFolderError(TunnelredError):
    """The output folder cannot be used as asked; nothing in it was changed.

    Examples: another reduction holds its lock, it lies inside the campaign folder, it is a
    non-empty folder that tunnelred did not make, it cannot be written, or the disk filled up
    while a new set of results was being written (the previous set stays in force).
    """


class OutsideError(OutputFolderError):
    """A path to be written resolves outside the folder it must stay in."""


class UsageError(TunnelredError):
    """Something asked for cannot be done as given; nothing was reduced or written.

    Examples: a ``--dask`` address that is malformed or where no scheduler answers, or an
    optional dependency that is not installed. The command exits 2, as for a usage error.
    """


class Terminated(KeyboardInterrupt):
    """SIGTERM, as the ``tunnelred`` command raises it: an interrupt, so that every clean-up
    made for Ctrl-C runs for it too (pending runs cancelled, pool processes ended, a
    half-written generation removed), told apart where the two end differently (the exit
    status 143; the watch, which takes Ctrl-C as its ordinary stop)."""
