"""Live mode: reduce and flag each run while the test is still running.

:func:`watch` polls a campaign folder that the data acquisition is writing into. A run is *complete*
when its row is in runs.csv (whole lines only), every log it names and every log of its zero and
tare runs exists, ends with a line break, and none of them (nor campaign.toml and runs.csv) has
changed size or modification time for ``settle`` seconds. Complete inputs are copied into a snapshot
folder, ``OUT/.live/campaign``, which holds only complete runs; the snapshot is reduced by
:func:`tunnelred.pipeline.campaign.reduce_campaign`, whose per-run cache (keyed on each run's inputs
and those of its zero and tare runs) reduces only the runs that are new or whose inputs changed, and
which writes OUT atomically. The engine never reads a file the acquisition is still writing: it
reads the snapshot, and a file is copied into it only when it has settled and has not changed while
it was copied.

The state of the watch (:class:`Status`) goes to a view after every change: :class:`TerminalView`
(redrawn in place on a terminal, appended lines otherwise), :class:`LiveView` for a notebook, or
any object with ``update(status)`` and ``close()``. It is also written to
``OUT/.live/status.json`` so a notebook can follow a watch running elsewhere, and the lift and
drag so far are drawn in ``OUT/figures/live.png``.

The folder layout and the rule are described in docs/live.md.
"""

from __future__ import annotations

import csv
import io
import json
import math
import os
import re
import shutil
import stat
import sys
import threading
import time
from dataclasses import asdict, dataclass, replace
from datetime import datetime
from pathlib import Path, PurePosixPath

import numpy as np

from tunnelred.common.errors import InputError, OutputFolderError, Problem
from tunnelred.common.text import printable
from tunnelred.engine import quality
from tunnelred.inputs.config import load_config
from tunnelred.inputs.readers import STREAMS
from tunnelred.products import store

__all__ = [
    "DEFAULT_SETTLE",
    "DEFAULT_POLL",
    "RunLine",
    "Status",
    "TerminalView",
    "LiveView",
    "render_lines",
    "read_status",
    "live_figure",
    "watch",
    "main_watch",
]

#: Seconds a file must keep its size and modification time to count as finished. [s]
DEFAULT_SETTLE = 2.0
#: Seconds between two looks at the campaign folder. [s]
DEFAULT_POLL = 0.5

_LIVE_DIR = ".live"
_SNAPSHOT_DIR = "campaign"
_STATUS_FILE = "status.json"
_FIGURE_FILE = "live.png"
# Rows of the latest runs the views show.
_LATEST = 12
_INPUT_FILES = ("campaign.toml", "runs.csv")
_NEWLINE = re.compile(rb"\r\n|\r|\n")

# Run states, in the order the counts list them.
WAITING, TRUNCATED, COMPLETE, REDUCED, FLAGGED, FAILED = (
    "waiting",
    "truncated",
    "complete",
    "reduced",
    "flagged",
    "failed",
)


# ---------------------------------------------------------------------------------------------
# The state a view shows


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
    path = Path(out_dir) / _LIVE_DIR / _STATUS_FILE
    try:
        return Status.from_json(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        return None


def _write_status(out_dir: Path, status: Status) -> None:
    record = asdict(status)
    record["runs"] = [
        {k: _finite_or_none(v) if isinstance(v, float) else v for k, v in r.items()}
        for r in record["runs"]
    ]
    text = json.dumps(record, indent=1) + "\n"
    path = store.contained(out_dir, out_dir / _LIVE_DIR / _STATUS_FILE)
    store.atomic_write_bytes(path, text.encode("utf-8"))


# ---------------------------------------------------------------------------------------------
# Text rendering, shared by the terminal and plain-line views

_MARK = "!!"  # the marker of a flagged or failed run, readable without colour or video
_INVERSE, _BOLD, _RED, _RESET = "\x1b[7m", "\x1b[1m", "\x1b[31m", "\x1b[0m"


def _number(x: float, width: int = 8, digits: int = 3) -> str:
    return f"{x:{width}.{digits}f}" if math.isfinite(x) else f"{'–':>{width}}"


def _run_text(line: RunLine) -> str:
    mark = _MARK if line.state in (FLAGGED, FAILED) else "  "
    state = line.state.upper() if line.state in (FLAGGED, FAILED, TRUNCATED) else line.state
    text = (
        f"{mark} {line.run:<10} {line.config:<8} {_number(line.alpha)} {_number(line.CL)} "
        f"{_number(line.CD)} {_number(line.u_CL, 7, 4)}  {state:<9}"
    )
    if line.provisional:
        text += " PROVISIONAL"
    return f"{text} {line.reason}" if line.reason else text


def _counts_text(status: Status) -> str:
    c = status.count()
    return (
        f"data runs: {c['complete']} complete, {c['reduced']} reduced "
        f"({c['provisional']} provisional), {c['flagged']} flagged, "
        f"{c['failed']} failed, {c['waiting']} waiting"
    )


_HEADER = (
    f"   {'run':<10} {'config':<8} {'alpha':>8} {'CL':>8} {'CD':>8} {'u(CL)':>7}  {'state':<9}"
    " reason"
)


def render_lines(status: Status, *, latest: int = _LATEST) -> list[tuple[str, str]]:
    """The lines of the live view, each with its emphasis.

    Parameters
    ----------
    status : Status
    latest : int
        How many of the most recent data runs to list (every flagged, failed, truncated or
        waiting one is listed besides).

    Returns
    -------
    list of (str, str)
        The text of each line (control characters escaped, see
        :func:`tunnelred.common.text.printable`) and its kind: ``"title"``, ``"header"``,
        ``"run"``, ``"flag"``
        (a flagged or failed run, or a truncated log: to be shown so that it cannot be missed),
        ``"problem"`` or ``""``.

    Examples
    --------
    >>> s = Status("demo", "camp", "out", runs=(RunLine("R1", "flagged", reason="spin_scatter"),))
    >>> [kind for _, kind in render_lines(s)]
    ['title', '', '', 'header', 'flag', '']
    """
    lines: list[tuple[str, str]] = [
        (f"tunnelred watch: {status.title}", "title"),
        (f"{status.campaign} -> {status.out}   (updated {status.updated or '-'})", ""),
        (_counts_text(status), ""),
    ]
    lines += [(f"!! {p}", "problem") for p in status.problems]
    done = [r for r in status.runs if r.state in (REDUCED, FLAGGED, FAILED, COMPLETE)]
    shown = set(r.run for r in done[-latest:])
    shown |= {r.run for r in status.runs if r.state in (FLAGGED, FAILED)}
    pending = [r for r in status.runs if r.state in (WAITING, TRUNCATED)]
    lines.append((_HEADER, "header"))
    for r in status.runs:
        if r.run in shown:
            lines.append((_run_text(r), "flag" if r.state in (FLAGGED, FAILED) else "run"))
    for r in pending:
        lines.append((_run_text(r), "flag" if r.state == TRUNCATED else "run"))
    if status.fresh:
        lines.append((f"reduced at the latest update: {', '.join(status.fresh)}", ""))
    lines.append((status.note, ""))
    # Titles, run ids, reasons and paths come from files: no control character is drawn.
    return [(printable(text), kind) for text, kind in lines]


class TerminalView:
    """The live view on a text stream: redrawn in place on a terminal, appended lines otherwise.

    On a terminal the frame is redrawn with ANSI cursor movements; a flagged or failed run and a
    truncated log are in inverse video, marked ``!!`` and in red (the colour only adds to the
    marker and the video). When the stream is not a terminal, each change is printed once as a
    plain line (a run reduced, flagged, failed, waiting for a cut-off log), so the output reads
    well in a log file.

    Parameters
    ----------
    stream : text stream, optional
        Default ``sys.stdout``.
    tty : bool, optional
        Draw in place; default: whether ``stream`` is a terminal.
    """

    def __init__(self, stream=None, *, tty: bool | None = None):
        self.stream = stream if stream is not None else sys.stdout
        self.tty = bool(tty if tty is not None else getattr(self.stream, "isatty", bool)())
        self._drawn = 0
        self._said: dict[str, tuple[str, str, bool]] = {}
        self._problems: tuple[str, ...] = ()

    def update(self, status: Status) -> None:
        if self.tty:
            self._redraw(status)
        else:
            self._append(status)
        self.stream.flush()

    def close(self) -> None:
        if self.tty and self._drawn:
            self.stream.write("\x1b[?25h")  # the cursor, hidden while drawing
            self.stream.flush()

    def _redraw(self, status: Status) -> None:
        size = shutil.get_terminal_size((100, 40))
        lines = render_lines(status)
        if len(lines) > size.lines - 1:
            cut = len(lines) - (size.lines - 2)
            lines = [*lines[: size.lines - 2], (f"… {cut} more lines (see OUT)", "")]
        out = ["\x1b[?25l"]
        if self._drawn:
            out.append(f"\x1b[{self._drawn}F")
        out.append("\x1b[J")
        for text, kind in lines:
            text = text[: size.columns - 1]
            if kind in ("flag", "problem"):
                text = f"{_INVERSE}{_BOLD}{_RED}{text}{_RESET}"
            elif kind in ("title", "header"):
                text = f"{_BOLD}{text}{_RESET}"
            out.append(text + "\n")
        self.stream.write("".join(out))
        self._drawn = len(lines)

    def _append(self, status: Status) -> None:
        stamp = status.updated[11:19] if len(status.updated) >= 19 else status.updated
        for problem in status.problems:
            if problem not in self._problems:
                print(f"[{stamp}] !! {printable(problem)}", file=self.stream)
        self._problems = status.problems
        for r in status.runs:
            said = (r.state, r.reason, r.provisional)
            if self._said.get(r.run) == said:
                continue
            if r.state != WAITING or r.reason != "":
                print(f"[{stamp}] {printable(_run_text(r).rstrip())}", file=self.stream)
            self._said[r.run] = said
        if status.stopped:
            print(f"[{stamp}] {_counts_text(status)}; {printable(status.note)}", file=self.stream)


class LiveView:
    """The live view in a notebook cell: a table of the latest runs and the figure so far.

    Calling :meth:`update` in a cell shows the view the first time and refreshes it in place
    afterwards (an IPython display handle). With no argument it reads the status a watch last
    wrote into ``out_dir`` (the watch may run in a thread of the notebook, or as
    ``tunnelred watch`` elsewhere); :func:`watch` also accepts a LiveView as its ``view``.
    IPython is imported only when :meth:`update` runs.

    Parameters
    ----------
    out_dir : str or path-like
        The output folder of the watch.

    Examples
    --------
    >>> view = LiveView("out")  # doctest: +SKIP
    >>> view.update()  # doctest: +SKIP
    """

    def __init__(self, out_dir):
        self.out_dir = Path(out_dir)
        self.status: Status | None = None
        self._handle = None
        self._image_handle = None

    def update(self, status: Status | None = None) -> None:
        from IPython.display import HTML, Image, display

        self.status = status if status is not None else read_status(self.out_dir)
        content = HTML(self._repr_html_())
        if self._handle is None:
            self._handle = display(content, display_id=True)
        else:
            self._handle.update(content)
        figure = self.out_dir / "figures" / _FIGURE_FILE
        if figure.is_file():
            image = Image(data=figure.read_bytes(), format="png")
            if self._image_handle is None:
                self._image_handle = display(image, display_id=True)
            else:
                self._image_handle.update(image)

    def close(self) -> None:
        """Nothing to release; present so a LiveView can be a :func:`watch` view."""

    def _repr_html_(self) -> str:
        import html

        status = self.status
        if status is None:
            return f"<p>no watch has written into <code>{html.escape(str(self.out_dir))}</code></p>"
        parts = [
            f"<p><b>{html.escape(status.title)}</b>: {html.escape(_counts_text(status))} "
            f"(updated {html.escape(status.updated)})</p>"
        ]
        parts += [
            f"<p style='background:#000;color:#fff'><b>!! {html.escape(p)}</b></p>"
            for p in status.problems
        ]
        rows = []
        for text, kind in render_lines(status)[3 + len(status.problems) :]:
            if kind in ("header", ""):
                continue
            cell = html.escape(text)
            if kind == "flag":
                cell = f"<b style='background:#000;color:#fff'>{cell}</b>"
            rows.append(f"<tr><td><pre style='margin:0'>{cell}</pre></td></tr>")
        parts.append(
            f"<table><tr><th><pre style='margin:0'>{html.escape(_HEADER)}</pre></th></tr>"
            f"{''.join(rows)}</table>"
        )
        if status.note:
            parts.append(f"<p>{html.escape(status.note)}</p>")
        return "".join(parts)


# ---------------------------------------------------------------------------------------------
# The figure


def live_figure(results, *, stamp: str | None = None):
    """CL and CD against the spin ratio for the runs so far, flagged runs circled and labelled.

    Parameters
    ----------
    results : xarray.Dataset, CampaignResults or path-like
        Campaign results (see :func:`tunnelred.products.plotting.results_dataset`).
    stamp : str, optional
        When the figure was drawn, shown in its top right corner (the watch gives the time of
        the reduction it shows).

    Returns
    -------
    matplotlib.figure.Figure
        Two Axes: CL with the potential-flow line −2πα, and CD; wall-corrected values with
        expanded-uncertainty bars (k = 2), drawn by
        :func:`tunnelred.products.plotting.plot_coefficient`. Each flagged run is circled and
        labelled with its run id; the latest run (the last in run order) is drawn as a large
        star labelled ``latest run <id>``; a provisional result adds "provisional" to both.

    Notes
    -----
    The potential-flow line is the Kutta–Joukowski lift of a spinning cylinder, CL = −2πα
    (docs/conventions.md); it holds while the stagnation points stay on the surface, |α| ≤ 2.

    References
    ----------
    .. [1] J. D. Anderson, *Fundamentals of Aerodynamics*, 6th ed., McGraw-Hill, 2017, §3.15–3.16.

    Examples
    --------
    >>> import xarray as xr
    >>> ds = xr.Dataset({"config": ("run", ["A"]), "alpha": ("run", [1.0]),
    ...                  "CL": ("run", [-2.5]), "CD": ("run", [0.8]), "flags": ("run", [""])},
    ...                 coords={"run": ["r1"]})
    >>> [ax.get_ylabel() for ax in live_figure(ds).axes]
    ['lift coefficient $C_L$', 'drag coefficient $C_D$']
    """
    from matplotlib.figure import Figure  # deferred: `tunnelred --help` need not load matplotlib

    from tunnelred.products import plotting

    ds = plotting.results_dataset(results)
    fig = Figure(figsize=(11.0, 4.4), layout="constrained")
    axes = fig.subplots(1, 2)
    runs = [str(r) for r in ds["run"].values]
    flagged = np.array([bool(f) for f in ds["flags"].values]) if "flags" in ds else None
    provisional = ds["provisional"].values.astype(bool) if "provisional" in ds else None

    def worded(i: int, text: str) -> str:
        return f"{text} (provisional)" if provisional is not None and provisional[i] else text

    for ax, name in zip(axes, ("CL", "CD"), strict=True):
        if name not in ds:
            ax.set_title(f"no {name} yet")
            continue
        plotting.plot_coefficient(ds, name, ax=ax, uncorrected=False, theory=name == "CL")
        x, y = ds["alpha"].values, ds[name].values
        if flagged is not None and flagged.any():
            ax.plot(
                x[flagged],
                y[flagged],
                linestyle="none",
                marker="o",
                markersize=14,
                markerfacecolor="none",
                markeredgecolor="black",
                markeredgewidth=1.5,
                label="flagged run",
                zorder=4,
            )
            for i in np.flatnonzero(flagged):
                ax.annotate(
                    worded(i, runs[i]),
                    (x[i], y[i]),
                    xytext=(8, 8),
                    textcoords="offset points",
                    fontsize=8,
                    fontweight="bold",
                )
        if runs:
            last = len(runs) - 1
            ax.plot(
                x[last:],
                y[last:],
                linestyle="none",
                marker="*",
                markersize=16,
                markerfacecolor="gold",
                markeredgecolor="black",
                label=worded(last, f"latest run {runs[last]}"),
                zorder=5,
            )
        legend = ax.get_legend()
        ax.legend(title=legend.get_title().get_text() if legend else None)
    if stamp:
        fig.suptitle(f"updated {stamp}", x=0.99, ha="right", fontsize=9)
    return fig


def _live_figure_into(staging, ds) -> dict[str, Path]:
    """figures/live.png, drawn into the new generation with the results it shows, so that the
    switch to it brings the figure along (none while no run has results)."""
    if not ds.sizes.get("run", 0):
        return {}
    name = f"figures/{_FIGURE_FILE}"
    path = staging.file(name)
    with store.atomic_path(path) as tmp:
        stamp = datetime.now().isoformat(sep=" ", timespec="seconds")
        live_figure(ds, stamp=stamp).savefig(tmp, format="png", dpi=100)
    return {name: path}


def _internal_text(doing: str, exc: BaseException) -> str:
    return f"internal error while {doing}: {type(exc).__name__}: {exc} (the watch goes on)"


# ---------------------------------------------------------------------------------------------
# The campaign folder as the acquisition writes it


@dataclass(frozen=True)
class _Row:
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


def _whole_lines(data: bytes) -> bytes:
    """``data`` up to its last line break outside a quoted field (a row still being written,
    or a quoted cell still open, is left out)."""
    end = len(data)
    while end > 0:
        breaks = [m.end() for m in _NEWLINE.finditer(data, 0, end)]
        if not breaks:
            return b""
        cut = breaks[-1]
        if data.count(b'"', 0, cut) % 2 == 0:
            return data[:cut]
        end = cut - 1
    return b""


def _inside(root: Path, text: str) -> str | None:
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


def _rows(root: Path, text: str) -> tuple[list[str], list[_Row]]:
    """The physical lines of a runs.csv holding whole lines, and its rows that name a run."""
    lines = re.findall(r"[^\r\n]*(?:\r\n|\r|\n)", text)
    reader = csv.reader(io.StringIO(text, newline=""))
    header = next(reader, None)
    if header is None:
        return lines, []
    names = [cell.strip().lstrip("\ufeff") for cell in header]
    rows = []
    first = reader.line_num
    while True:
        try:
            record = next(reader)
        except StopIteration:
            break
        except csv.Error as exc:  # a cell over the csv module's limit (128 KiB), say
            last = reader.line_num
            record_text = "".join(lines[first:last])
            run = _cell(record_text, names.index("run")) if "run" in names else ""
            where = f"runs.csv:{first + 1}"
            rows.append(
                _Row(
                    run=run or where,
                    kind="",
                    config="",
                    logs=(),
                    needs=(),
                    lines=(first, last),
                    text=record_text,
                    problem=f"{where}: {exc}; the row cannot be read",
                )
            )
            first = last
            continue
        last = reader.line_num
        cells = {n: c.strip() for n, c in zip(names, record, strict=False)}
        run = cells.get("run", "")
        if run:
            logs = tuple(_inside(root, cells[f"{s}_log"]) for s in STREAMS if cells.get(f"{s}_log"))
            needs = tuple(
                s.strip()
                for column in ("zero", "tare", "pressure_with")
                for s in cells.get(column, "").split(";")
                if s.strip()
            )
            rows.append(
                _Row(
                    run=run,
                    kind=cells.get("kind", ""),
                    config=cells.get("config", ""),
                    logs=logs,
                    needs=needs,
                    zeros=tuple(z.strip() for z in cells.get("zero", "").split(";") if z.strip()),
                    lines=(first, last),
                    text="".join(lines[first:last]),
                )
            )
        first = last
    return lines, rows


class _Changed(Exception):
    """A file changed while it was being copied into the snapshot."""


def _bad_file(rel: str, what: str) -> Problem:
    return Problem(
        rel,
        None,
        None,
        "a readable regular file",
        what,
        "Fix the path in runs.csv or the file; the watch goes on with the other runs.",
    )


@dataclass(frozen=True)
class _FileState:
    state: str  # missing, empty, growing, cut, ready, or bad (a folder, unreadable: never ready)
    key: tuple[int, int] | None = None  # size, mtime_ns
    problem: Problem | None = None


@dataclass
class _Seen:
    key: tuple[int, int]
    since: float
    tail: _FileState | None = None  # the verdict on a settled file, kept while it holds


class _Watcher:
    """One poll after another of a campaign folder; see :func:`watch` for the rule."""

    def __init__(self, campaign_dir, out_dir, *, settle: float, workers: int, clock):
        self.root = Path(campaign_dir).resolve()
        self.out = Path(out_dir).resolve()
        self.snapshot = self.out / _LIVE_DIR / _SNAPSHOT_DIR
        self.folder = None  # the ResultsFolder the watch holds (locked) for the engine
        self.settle = float(settle)
        self.workers = workers
        self.clock = clock
        self.seen: dict[str, _Seen] = {}
        self.copied: dict[str, tuple[int, int]] = {}
        self.rows: list[_Row] = []
        self.lines: list[str] = []
        self.runs_key: tuple[int, int] | None = None
        self.snapshot_runs: bytes | None = None  # runs.csv as last written into the snapshot
        self.named_files: tuple[str, ...] = ()  # files campaign.toml names, copied with it
        self.signatures: dict[str, tuple] = {}
        self.pending: dict[str, str] = {}  # data run -> the closing zero it is reduced without
        self.results = None
        self.title = ""
        self.problems: tuple[str, ...] = ()
        self.fresh: tuple[str, ...] = ()
        self.reductions = 0

    # -- one file
    def _look(self, rel: str, *, whole_lines: bool) -> _FileState:
        path = self.root / rel
        try:
            st = path.stat()
        except OSError:
            self.seen.pop(rel, None)
            return _FileState("missing")
        key = (st.st_size, st.st_mtime_ns)
        if not stat.S_ISREG(st.st_mode):  # a folder, a FIFO, a device: never opened
            what = "a folder" if stat.S_ISDIR(st.st_mode) else "not a regular file"
            return _FileState("bad", key, _bad_file(rel, what))
        now = self.clock()
        seen = self.seen.get(rel)
        if seen is None or seen.key != key:
            self.seen[rel] = seen = _Seen(key, now)
        if st.st_size == 0:
            return _FileState("empty", key)
        if now - seen.since < self.settle:
            return _FileState("growing", key)
        if seen.tail is None:
            seen.tail = self._verdict(rel, key) if whole_lines else _FileState("ready", key)
        return seen.tail

    def _verdict(self, rel: str, key: tuple[int, int]) -> _FileState:
        """A settled log: ready, cut off mid-line (its last line has no line break), or bad."""
        try:
            with open(self.root / rel, "rb") as f:
                f.seek(-1, os.SEEK_END)
                if f.read(1) in b"\r\n":
                    return _FileState("ready", key)
                f.seek(0)
                data = f.read()
        except OSError as exc:
            unreadable = f"a file that cannot be read ({exc.strerror or exc})"
            return _FileState("bad", key, _bad_file(rel, unreadable))
        number = len(_NEWLINE.findall(data)) + 1
        last = data[data.rfind(b"\n") + 1 :].decode("utf-8", errors="replace")
        problem = Problem(
            rel,
            number,
            None,
            "a line break at the end of the last line",
            f"line {number} cut off mid-line: {last[:40]!r}, unchanged for {self.settle:g} s",
            "The logger stopped while writing; complete the line or delete it.",
        )
        return _FileState("cut", key, problem)

    def _copy_named_files(self) -> None:
        for rel in self.named_files:
            state = self._look(rel, whole_lines=False)
            if state.state == "ready":
                self._copy(rel, state.key)

    def _copy(self, rel: str, key: tuple[int, int]) -> bool:
        """Copy a settled file into the snapshot; False when it changed meanwhile."""
        if self.copied.get(rel) == key:
            return False
        source = self.root / rel
        try:
            # A log path that passed _inside (no `..`) or a file campaign.toml names; the
            # copy's path is checked, resolved, to stay inside OUT, as every write into OUT is.
            dest = store.contained(self.out, self.snapshot / rel)
        except OutputFolderError:
            return False
        try:
            st = dest.stat()
            if (st.st_size, st.st_mtime_ns) == key:
                # Left by an earlier watch of the same folder into the same OUT.
                self.copied[rel] = key
                return True
        except OSError:
            pass
        try:
            with store.atomic_path(dest) as tmp:
                shutil.copyfile(source, tmp)
                after = source.stat()
                if (after.st_size, after.st_mtime_ns) != key:
                    raise _Changed(rel)
                os.utime(tmp, ns=(after.st_atime_ns, after.st_mtime_ns))
        except (_Changed, OSError):
            self.seen.pop(rel, None)
            return False
        self.copied[rel] = key
        return True

    # -- one poll
    def cycle(self, publish) -> Status:
        inputs = {rel: self._look(rel, whole_lines=False) for rel in _INPUT_FILES}
        waiting_inputs = [rel for rel, s in inputs.items() if s.state != "ready"]
        if "campaign.toml" not in waiting_inputs:
            if self._copy("campaign.toml", inputs["campaign.toml"].key):
                # The files it names (model photo, calibration) go into the snapshot with it.
                source, _ = load_config(self.root / "campaign.toml")
                self.named_files = source.campaign_files() if source is not None else ()
                self._copy_named_files()
                config, _ = load_config(self.snapshot / "campaign.toml")
                self.title = config.campaign.title if config else ""
            else:
                self._copy_named_files()
        if "runs.csv" not in waiting_inputs and inputs["runs.csv"].key != self.runs_key:
            try:
                data = (self.root / "runs.csv").read_bytes()
            except OSError as exc:
                inputs["runs.csv"] = _FileState("bad", None, _bad_file("runs.csv", str(exc)))
                return self._status({}, set(), note=self._note(inputs))
            text = _whole_lines(data).decode("utf-8-sig", errors="replace")
            self.lines, self.rows = _rows(self.root, text)
            self.runs_key = inputs["runs.csv"].key
        by_id = {r.run: r for r in self.rows}
        files = {rel for r in self.rows for rel in r.logs if rel is not None}
        states = {rel: self._look(rel, whole_lines=True) for rel in sorted(files)}
        for rel, s in states.items():
            if s.state == "ready":
                self._copy(rel, s.key)

        verdicts: dict[str, tuple[str, str]] = {}
        self.pending = {}
        for row in self.rows:
            self._judge(row.run, by_id, states, verdicts, ())
        available = {
            r.run
            for r in self.rows
            if self._available(r.run, by_id, set(), skip=self.pending.get(r.run))
        }
        snapshot_text = self._snapshot_runs(available)
        named_copied = all(rel in self.copied for rel in self.named_files)
        if snapshot_text != self.snapshot_runs and "campaign.toml" in self.copied and named_copied:
            store.atomic_write_bytes(
                store.contained(self.out, self.snapshot / "runs.csv"), snapshot_text
            )
            self.snapshot_runs = snapshot_text

        data_runs = [r for r in self.rows if r.kind == "data"]
        signatures = {
            r.run: self._signature(r.run, by_id, skip=self.pending.get(r.run))
            for r in data_runs
            if r.run in available
        }
        fresh = tuple(rid for rid, sig in signatures.items() if self.signatures.get(rid) != sig)
        # The engine runs when a data run is new, changed or gone, and once at the start so that
        # OUT matches a snapshot an earlier watch left.
        first = self.reductions == 0 and not self.problems and bool(signatures)
        due = fresh or signatures.keys() != self.signatures.keys() or first
        if due and self.snapshot_runs is not None:
            self.fresh = fresh
            busy = self._status(verdicts, available, note=f"reducing {_list(fresh)}")
            publish(replace(busy, busy=True))
            if self._reduce():
                self.signatures = signatures
        return self._status(verdicts, available, note=self._note(inputs))

    def _judge(self, rid, by_id, states, verdicts, chain) -> tuple[str, str]:
        """(state, reason) of a run from its own logs and its zero and tare runs."""
        if rid in verdicts:
            return verdicts[rid]
        row = by_id.get(rid)
        if row is None:
            return WAITING, f"{rid}: no row in runs.csv yet"
        if row.problem:
            verdicts[rid] = (FAILED, row.problem)
            return verdicts[rid]
        if rid in chain:
            return COMPLETE, ""  # a loop of references is the readers' problem to report
        verdict = (COMPLETE, "")
        for rel in row.logs:
            s = states.get(rel) if rel is not None else None
            if s is None or s.state == "ready":
                continue
            if s.state == "cut":
                verdict = (TRUNCATED, str(s.problem))
                break
            if s.state == "bad":
                verdict = (FAILED, str(s.problem))
                break
            text = {"missing": "not written yet", "empty": "empty so far"}.get(
                s.state, "still being written"
            )
            verdict = (WAITING, f"{rel}: {text}")
            break
        if verdict[0] == COMPLETE:
            closing, pending = self._closing_zero(row, by_id), None
            for need in row.needs:
                state, reason = self._judge(need, by_id, states, verdicts, (*chain, rid))
                if state == WAITING and need == closing:
                    # Not taken yet: reduced provisionally from the opening zero meanwhile. A
                    # closing zero cut off or unusable is shown on the run, as any other need.
                    pending = closing
                elif state != COMPLETE:
                    prefix = f"{need}: " if not reason.startswith(f"{need}:") else ""
                    verdict = (state, f"{prefix}{reason}")
                    break
            else:
                if pending is not None:
                    self.pending[rid] = pending
        verdicts[rid] = verdict
        return verdict

    @staticmethod
    def _closing_zero(row: _Row, by_id) -> str | None:
        """The zero a data run names after it (its row absent or further down runs.csv), when
        the other zero it names comes before it: the one a provisional result may go without.
        The readers check the same pair by start time (open_campaign, closing_zero_pending)."""
        if row.kind != "data" or len(row.zeros) != 2:
            return None
        after = [z for z in row.zeros if z not in by_id or by_id[z].lines[0] > row.lines[0]]
        before = [z for z in row.zeros if z not in after]
        return after[0] if len(after) == 1 and len(before) == 1 else None

    def _available(self, rid, by_id, visiting, skip: str | None = None) -> bool:
        """Every log of the run and of its zero and tare runs (but ``skip``, a closing zero
        still pending) has a copy in the snapshot."""
        row = by_id.get(rid)
        if row is None or row.problem:
            return False
        if rid in visiting:
            return True
        visiting = visiting | {rid}
        own = all(rel is None or rel in self.copied for rel in row.logs)
        return own and all(self._available(n, by_id, visiting) for n in row.needs if n != skip)

    def _signature(self, rid, by_id, visiting=frozenset(), skip: str | None = None) -> tuple:
        """What the run's reduction reads, as the watch knows it: rows and copied versions
        (without ``skip``, the closing zero a provisional result goes without)."""
        row = by_id.get(rid)
        if row is None or rid in visiting:
            return (rid,)
        own = (row.text, tuple((rel, self.copied.get(rel)) for rel in row.logs))
        deps = tuple(self._signature(n, by_id, visiting | {rid}) for n in row.needs if n != skip)
        named = tuple(self.copied.get(rel) for rel in self.named_files)
        return (self.copied.get("campaign.toml"), named, self.lines[0], own, deps, skip)

    def _snapshot_runs(self, available: set[str]) -> bytes:
        """runs.csv of the snapshot: the rows of available runs; the others blanked, so that
        every row keeps its line number (the readers skip blank lines)."""
        lines = list(self.lines)
        for row in self.rows:
            if row.run not in available:
                for i in range(*row.lines):
                    lines[i] = lines[i][len(lines[i].rstrip("\r\n")) :]
        return "".join(lines).encode("utf-8")

    def _reduce(self) -> bool:
        """Reduce the snapshot into OUT; False when OUT could not take the results (a full
        disk, say: tried again at the next poll). Nothing here ends the watch."""
        from tunnelred.pipeline.campaign import reduce_campaign

        try:
            self.results = reduce_campaign(
                self.snapshot,
                self.folder if self.folder is not None else self.out,
                workers=self.workers,
                progress=False,
                figures=False,
                extras=_live_figure_into,
                provisional=True,
            )
        except InputError as exc:
            self.problems = tuple(str(p) for p in exc.problems)
            return True
        except OutputFolderError as exc:
            self.problems = (str(exc),)
            return False
        except Exception as exc:  # a fault of ours must not end a watch mid-test
            self.problems = (_internal_text("reducing", exc),)
            return True
        self.problems = ()
        self.reductions += 1
        return True

    def _status(self, verdicts, available, *, note: str) -> Status:
        values, reasons, failed = {}, {}, {}
        if self.results is not None:
            ds = self.results.dataset
            if ds.sizes.get("run", 0):
                table = store.run_table(ds)
                reasons = _flag_reasons(table)
                for rec in table.to_dict("records"):
                    values[str(rec["run"])] = rec
            for rec in self.results.failures.to_dict("records"):
                failed.setdefault(str(rec["run"]), _failure_text(rec))
        lines = []
        listed = set()
        for row in self.rows:
            if row.kind != "data" and not row.problem:  # a row too broken to say its kind
                continue
            listed.add(row.run)
            state, reason = verdicts.get(row.run, (WAITING, ""))
            rec = values.get(row.run) if row.run in available else None
            if row.run in available and row.run in failed:
                lines.append(RunLine(row.run, FAILED, row.config, reason=failed[row.run]))
                continue
            if rec is not None:
                provisional = bool(rec.get("provisional", False))
                if state == COMPLETE:
                    flags = str(rec.get("flags") or "")
                    state = FLAGGED if flags else REDUCED
                    reason = reasons.get(row.run, "")
                    if provisional:
                        closing = self.pending.get(row.run, "the closing zero")
                        wait = f"provisional until {closing} is in (opening zero only)"
                        reason = f"{reason}; {wait}" if reason else wait
                else:
                    reason = f"{reason} (results of the previous version)"
                lines.append(
                    RunLine(
                        row.run,
                        state,
                        str(rec.get("config", row.config)),
                        *(float(rec.get(k, math.nan)) for k in ("alpha", "CL", "CD", "u_CL")),
                        reason=reason,
                        provisional=provisional,
                    )
                )
                continue
            lines.append(RunLine(row.run, state, row.config, reason=reason))
        lines += [
            RunLine(rid, FAILED, reason=why) for rid, why in failed.items() if rid not in listed
        ]
        return Status(
            title=self.title,
            campaign=str(self.root),
            out=str(self.out),
            runs=tuple(lines),
            fresh=self.fresh,
            reductions=self.reductions,
            problems=self.problems,
            note=note,
            updated=datetime.now().isoformat(timespec="seconds"),
        )

    def _note(self, inputs: dict[str, _FileState]) -> str:
        bad = [str(s.problem) for s in inputs.values() if s.state == "bad"]
        if bad:
            return "; ".join(bad)
        waiting_inputs = [rel for rel, s in inputs.items() if s.state != "ready"]
        if waiting_inputs:
            return f"waiting for {' and '.join(waiting_inputs)} to settle"
        return f"watching {self.root} (a file counts once unchanged for {self.settle:g} s)"


def _list(runs) -> str:
    runs = list(runs)
    return ", ".join(runs) if len(runs) <= 6 else f"{', '.join(runs[:5])} and {len(runs) - 5} more"


def _failure_text(rec: dict) -> str:
    where = str(rec.get("file") or "")
    line = rec.get("line")
    if where and line is not None and not (isinstance(line, float) and math.isnan(line)):
        try:
            where += f":{int(line)}"
        except (TypeError, ValueError):
            pass
    return f"{where}: {rec['reason']}" if where else str(rec["reason"])


def _flag_reasons(table) -> dict[str, str]:
    """Each flagged run's flags with their reasons, as the results record them."""
    reasons = {}
    for run, flags, text in zip(table["run"], table["flags"], table["flag_reasons"], strict=True):
        if flags:
            worded = quality.parse_flag_reasons(text)
            reasons[str(run)] = "; ".join(f"{n}: {r}" for n, r in worded.items())
    return reasons


# ---------------------------------------------------------------------------------------------
# The watch


def watch(
    campaign_dir,
    out_dir,
    *,
    settle: float = DEFAULT_SETTLE,
    poll: float = DEFAULT_POLL,
    workers: int = 1,
    stop_event: threading.Event | None = None,
    view=True,
) -> None:
    """Reduce and flag each run of a campaign while the data acquisition writes it.

    Parameters
    ----------
    campaign_dir : str or path-like
        The campaign folder being written (read-only for tunnelred).
    out_dir : str or path-like
        The output folder: results.nc, results.csv, failures.csv, … as ``tunnelred reduce``
        writes them, figures/live.png, and ``.live/`` (the snapshot of complete inputs and
        status.json).
    settle : float
        Seconds a file must keep its size and modification time to count as finished. [s]
    poll : float
        Seconds between two looks at the folder. [s]
    workers : int
        Processes the engine reduces with (1: in this process).
    stop_event : threading.Event, optional
        The watch returns once it is set (checked between polls; a reduction under way is
        finished first). Without one, the watch runs until Ctrl-C.
    view : bool or view object
        True: a :class:`TerminalView` on stdout; False: none; or any object with
        ``update(status)`` and ``close()`` (a :class:`LiveView`, a test's recorder).

    Notes
    -----
    A data run is *complete* when

    - its row is in runs.csv (only whole lines count: a row still being written is ignored);
    - every log it names, and every log of the zero and tare runs it names, exists and ends
      with a line break;
    - none of those files, nor campaign.toml and runs.csv, has changed size or modification
      time over polls spanning ``settle`` seconds (measured on this machine's clock, so a file
      server's clock does not matter).

    A data run naming a zero before it and one after it does not wait for the one after: once
    everything else is complete it is reduced *provisionally*, from the opening zero alone, its
    loads' u widened by the drift the zero_shift check would let pass, and shown
    ``PROVISIONAL``; it is reduced again, final, once the closing zero is complete (docs/live.md).

    A log that has settled without a line break at its end is *truncated* (the logger stopped
    mid-line): it is shown as such and waited for, never read as data. Complete inputs are copied
    into ``OUT/.live/campaign`` and that snapshot is reduced by
    :func:`tunnelred.pipeline.campaign.reduce_campaign`: its cache re-reduces exactly the runs whose
    row, logs or zero and tare runs changed (all of them when campaign.toml changes). Every output
    is written atomically, so stopping at any moment leaves OUT whole.

    Examples
    --------
    >>> import threading
    >>> stop = threading.Event()
    >>> worker = threading.Thread(target=watch, args=("campaign", "out"),
    ...                           kwargs={"stop_event": stop, "view": False})  # doctest: +SKIP
    """
    if settle < 0 or poll <= 0:
        raise ValueError("settle must be 0 or more and poll more than 0 seconds")
    from tunnelred.products.results_folder import open_results_folder

    # OUT is held (locked) for the whole watch: a reduce into it meanwhile stops at once.
    folder = open_results_folder(out_dir, campaign_dir)
    watcher = _Watcher(
        campaign_dir, folder.root, settle=settle, workers=max(1, int(workers)), clock=time.monotonic
    )
    watcher.folder = folder
    shown = TerminalView() if view is True else (view or None)
    stop = stop_event if stop_event is not None else threading.Event()
    last: list[Status | None] = [None]

    def publish(status: Status) -> None:
        if last[0] is not None and replace(last[0], updated="") == replace(status, updated=""):
            return
        last[0] = status
        _write_status(watcher.out, status)
        if shown is not None:
            shown.update(status)

    how = "stop asked"
    try:
        while True:
            try:
                status = watcher.cycle(publish)
            except Exception as exc:  # a fault of ours must not end a watch
                status = replace(
                    last[0] or watcher._status({}, set(), note=""),
                    problems=(_internal_text("looking at the folder", exc),),
                )
            publish(status)
            if stop.wait(poll):
                break
    except KeyboardInterrupt:
        how = "Ctrl-C"
    finally:
        final = last[0] or watcher._status({}, set(), note="")
        counts = final.count()
        note = f"stopped ({how}); {watcher.out} holds the {counts['reduced']} runs reduced so far"
        try:
            publish(replace(final, stopped=True, note=note))
        finally:
            folder.close()
            if shown is not None:
                shown.close()


def main_watch(args) -> int:
    """The ``tunnelred watch`` command: ``args.campaign``, ``args.out``, ``args.settle``,
    ``args.poll`` (and ``args.workers`` if given). Returns the exit status (0; 2 usage error)."""
    campaign = Path(args.campaign)
    if not campaign.is_dir():
        print(f"tunnelred: error: {printable(campaign)}: no such folder", file=sys.stderr)
        return 2
    settle = getattr(args, "settle", None)
    poll = getattr(args, "poll", None)
    settle = DEFAULT_SETTLE if settle is None else float(settle)
    poll = DEFAULT_POLL if poll is None else float(poll)
    if settle < 0 or poll <= 0:
        print("tunnelred: error: --settle must be >= 0 and --poll > 0", file=sys.stderr)
        return 2
    watch(campaign, args.out, settle=settle, poll=poll, workers=getattr(args, "workers", 1) or 1)
    return 0
