"""The state of a watch a view shows: each run's state and latest coefficients (`RunLine`),
the whole watch (`Status`), as written to and read from ``OUT/.live/status.json``.
"""

from __future__ import annotations

import json
import math
from dataclasses import asdict, dataclass
from pathlib import Path

from tunnelred.products import store

LIVE_DIR = ".live"
SNAPSHOT_DIR = "campaign"
_STATUS_FILE = "status.json"
FIGURE_FILE = "live.png"

# Run states, in the order the counts list them.
WAITING, TRUNCATED, COMPLETE, REDUCED, FLAGGED, FAILED = (
    "waiting",
    "truncated",
    "complete",
    "reduced",
    "flagged",
    "failed",
)


@dataclass(frozen=True)
class RunLine:
    """One data run as the views show it.

    ``state`` is one of waiting, truncated, complete (queued for the engine), reduced, flagged
    or failed; ``reason`` says why it waits, which flags it raised and why, or why it failed.
    The coefficients are NaN until the run is reduced. ``provisional`` marks results reduced
    before the run's closing zero was in (from its opening zero alone; docs/live.md).
    """

    run: str
    state: str
    config: str = ""
    alpha: float = math.nan
    CL: float = math.nan
    CD: float = math.nan
    u_CL: float = math.nan
    reason: str = ""
    provisional: bool = False


@dataclass(frozen=True)
class Status:
    """Everything a view shows: the data runs in runs.csv order and what the watch is doing.

    ``fresh`` lists the data runs whose inputs were new or changed at the latest reduction
    (the engine reduced them; the others came from its cache); ``reductions`` counts the
    engine calls so far, and ``busy`` is true while one runs (``fresh`` then lists the runs it
    is reducing). ``problems`` holds what stops the whole campaign (campaign.toml or
    runs.csv unusable). ``note`` is one line on what the watch is doing now.
    """

    title: str
    campaign: str
    out: str
    runs: tuple[RunLine, ...] = ()
    fresh: tuple[str, ...] = ()
    reductions: int = 0
    problems: tuple[str, ...] = ()
    note: str = ""
    updated: str = ""
    busy: bool = False
    stopped: bool = False

    def count(self) -> dict[str, int]:
        """Data runs by state: complete (all inputs in), reduced, flagged, failed, waiting.

        ``complete`` counts every run whose inputs are all in (queued, reduced, flagged or
        failed); ``reduced`` those with results (flagged ones included), ``provisional`` those
        of them still waiting for their closing zero; ``waiting`` those still being written,
        truncated ones included.
        """
        states = [r.state for r in self.runs]
        done = (COMPLETE, REDUCED, FLAGGED, FAILED)
        return {
            "complete": sum(s in done for s in states),
            "reduced": sum(s in (REDUCED, FLAGGED) for s in states),
            "flagged": states.count(FLAGGED),
            "provisional": sum(r.provisional and r.state in (REDUCED, FLAGGED) for r in self.runs),
            "failed": states.count(FAILED),
            "waiting": sum(s in (WAITING, TRUNCATED) for s in states),
        }

    @classmethod
    def from_json(cls, text: str) -> Status:
        record = json.loads(text)
        runs = tuple(
            RunLine(**{k: (math.nan if v is None else v) for k, v in r.items()})
            for r in record.pop("runs")
        )
        return cls(
            runs=runs,
            **{k: tuple(v) if isinstance(v, list) else v for k, v in record.items()},
        )


def _finite_or_none(x: float):
    return x if math.isfinite(x) else None


def read_status(out_dir) -> Status | None:
    """The latest status a watch wrote into ``out_dir`` (None when no watch has written one).

    Parameters
    ----------
    out_dir : str or path-like
        The output folder of :func:`watch`.

    Returns
    -------
    Status or None
    """
    path = Path(out_dir) / LIVE_DIR / _STATUS_FILE
    try:
        return Status.from_json(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        return None


def write_status(out_dir: Path, status: Status) -> None:
    record = asdict(status)
    record["runs"] = [
        {k: _finite_or_none(v) if isinstance(v, float) else v for k, v in r.items()}
        for r in record["runs"]
    ]
    text = json.dumps(record, indent=1) + "\n"
    path = store.contained(out_dir, out_dir / LIVE_DIR / _STATUS_FILE)
    store.atomic_write_bytes(path, text.encode("utf-8"))


def internal_text(doing: str, exc: BaseException) -> str:
    return f"internal error while {doing}: {type(exc).__name__}: {exc} (the watch goes on)"
