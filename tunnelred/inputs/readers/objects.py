"""The readers' holders: the run kinds and streams, :class:`RunSpec` (one runs.csv row),
:class:`RunData` (a run's logs) and the lazily computed file hashes."""

from __future__ import annotations

import hashlib
from collections.abc import Iterable, Iterator, Mapping
from dataclasses import dataclass
from datetime import datetime
from pathlib import Path

import xarray as xr

from tunnelred.inputs.streams import STREAM_NAMES

#: The kinds of log a run may name, each in a runs.csv column ``<stream>_log`` (their
#: specifications: inputs.streams.STREAMS).
STREAMS = STREAM_NAMES

#: Run kinds: wind-off zero, wind-off spin tare, wind-on data.
KINDS = ("zero", "tare", "data")


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


class FileHashes(Mapping):
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

    def offer(self, rel: str, sha: str) -> None:
        """Keep ``sha``, computed elsewhere from the file's bytes (a worker's parse), unless a
        hash of ``rel`` is known here already."""
        if rel in self._files and rel not in self._known and sha:
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
