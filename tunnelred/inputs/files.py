"""The rules every input file is held to before it is read: inside the campaign, regular, bounded.

campaign.toml, runs.csv, every log and the files campaign.toml names (a calibration table, a
photograph) are named relative to the campaign folder; a name may not be
absolute nor hold ``..``, and a link is followed only when it resolves inside the folder. The
file must then be a regular file no larger than its limit: a FIFO, a device or a folder is
refused from ``os.stat``, before anything opens it, so that no command waits on a pipe or reads
/dev/zero until memory runs out. The limits are generous for real campaigns and keep a hostile or
corrupt file from costing gigabytes; docs/input-format.md lists them.
"""

from __future__ import annotations

import os
import re
import stat
from dataclasses import dataclass
from pathlib import Path, PurePosixPath

__all__ = [
    "MAX_CONFIG_BYTES",
    "MAX_RUNS_BYTES",
    "MAX_LOG_BYTES",
    "MAX_NAMED_FILE_BYTES",
    "MAX_COLUMNS",
    "MAX_CELL_CHARS",
    "MAX_RUNS",
    "Refusal",
    "inside_campaign",
    "check_regular",
    "read_regular",
]

#: Largest campaign.toml read [bytes]; a real one is a few kilobytes.
MAX_CONFIG_BYTES = 4 * 2**20
#: Largest runs.csv read [bytes]; about 100 000 rows of 160 characters.
MAX_RUNS_BYTES = 16 * 2**20
#: Largest log read [bytes]; a log is read whole into memory, with its parsed columns beside it.
MAX_LOG_BYTES = 2**30
#: Largest file campaign.toml names (a calibration table, the model photograph) [bytes].
MAX_NAMED_FILE_BYTES = 64 * 2**20
#: Most rows runs.csv may hold (runs).
MAX_RUNS = 100_000
#: Most columns a log or runs.csv header may have (a 512-tap scanner log has 514).
MAX_COLUMNS = 4096
#: Longest cell of runs.csv or of a log's header [characters] (notes included).
MAX_CELL_CHARS = 4096


@dataclass(frozen=True)
class Refusal:
    """Why a named input file cannot be read: the parts of a Problem but its place."""

    expected: str
    found: str
    hint: str = ""


_OUTSIDE = "a path inside the campaign folder (relative, no '..')"


def inside_campaign(root: Path, text: str) -> tuple[str, Path] | Refusal:
    """The relative POSIX name and resolved path of ``text`` in ``root``, or why it is refused.

    ``text`` is a name as runs.csv writes it (either slash). It may not be absolute, carry a
    drive letter or a ``..`` part; a link is followed, and must resolve inside ``root``.
    Whether the file exists is left to :func:`read_regular`.
    """
    if "\x00" in text:  # no file system names a file so; os calls would raise on it
        return Refusal(
            "a file name without a NUL character", repr(text), "Delete the NUL from the name."
        )
    posix = text.replace("\\", "/")
    pure = PurePosixPath(posix)
    if pure.is_absolute() or re.match(r"^[A-Za-z]:", posix) or ".." in pure.parts:
        return Refusal(
            _OUTSIDE,
            repr(text),
            "Copy the file into the campaign folder and name it relative to it.",
        )
    try:
        resolved = (root / pure).resolve()
        inside = resolved.is_relative_to(root.resolve())
    except (OSError, RuntimeError):  # a loop of links
        return Refusal(_OUTSIDE, f"{text!r}, a link that does not resolve (a loop)")
    if not inside:
        return Refusal(
            _OUTSIDE,
            f"{text!r}, a link that resolves outside the folder",
            "Replace the link by a copy of the file.",
        )
    return pure.as_posix(), resolved


_KINDS = (
    (stat.S_ISDIR, "a folder"),
    (stat.S_ISFIFO, "a FIFO (named pipe)"),
    (stat.S_ISCHR, "a character device"),
    (stat.S_ISBLK, "a block device"),
    (stat.S_ISSOCK, "a socket"),
)


def _not_regular(mode: int, name: str) -> Refusal | None:
    if stat.S_ISREG(mode):
        return None
    what = next((text for test, text in _KINDS if test(mode)), "not a regular file")
    return Refusal(
        "a regular file", f"{name!r}, {what}", "Put the file itself there (a copy, not a pipe)."
    )


def _too_large(size: int, limit: int, name: str) -> Refusal:
    return Refusal(
        f"a file of at most {limit / 2**20:g} MiB",
        f"{name!r}, {size / 2**20:.1f} MiB" if size <= 1000 * limit else f"{name!r}, larger",
        "Check that it is the right file; split a log that is larger than this.",
    )


def check_regular(path: Path, limit: int, *, name: str = "") -> Refusal | None:
    """Why ``path`` is not a regular file of at most ``limit`` bytes, from ``os.stat`` alone."""
    name = name or path.name
    try:
        info = os.stat(path)
    except FileNotFoundError:
        return Refusal(
            "an existing file",
            f"no file {name!r}",
            "Check the path and its spelling (paths are case-sensitive).",
        )
    except OSError as exc:
        return Refusal("a readable file", f"{name!r}: {exc.strerror or exc}")
    refused = _not_regular(info.st_mode, name)
    if refused is None and info.st_size > limit:
        refused = _too_large(info.st_size, limit, name)
    return refused


def read_regular(path: Path, limit: int, *, name: str = "", head: int | None = None):
    """The bytes of a regular file of at most ``limit`` bytes, or a :class:`Refusal`.

    ``head``: read only the first ``head`` bytes (the limit still applies to the whole file).
    The file is checked with ``os.stat`` before it is opened (:func:`check_regular`), then opened
    without blocking and checked again with ``fstat``, so that a FIFO put in its place in
    between is not waited on.
    """
    name = name or path.name
    refused = check_regular(path, limit, name=name)
    if refused is not None:
        return refused
    flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_CLOEXEC", 0)
    try:
        fd = os.open(path, flags)
    except OSError as exc:
        return Refusal(
            "a readable file",
            f"{name!r}: {exc.strerror or exc}",
            "Check the file's permissions (tunnelred only reads it).",
        )
    with os.fdopen(fd, "rb") as stream:
        refused = _not_regular(os.fstat(fd).st_mode, name)
        if refused is not None:
            return refused
        try:
            data = stream.read(limit + 1 if head is None else head)
        except OSError as exc:
            return Refusal("a readable file", f"{name!r}: {exc.strerror or exc}")
    if len(data) > limit:  # it grew after the stat
        return _too_large(len(data), limit, name)
    return data
