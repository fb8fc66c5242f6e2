"""The views of a watch: the text rendering the terminal and plain-line views share
(`render_lines`), `TerminalView` and the notebook's `LiveView`.
"""

from __future__ import annotations

import math
import shutil
import sys
from pathlib import Path

from tunnelred.common.text import printable
from tunnelred.live.status import (
    COMPLETE,
    FAILED,
    FIGURE_FILE,
    FLAGGED,
    REDUCED,
    TRUNCATED,
    WAITING,
    RunLine,
    Status,
    read_status,
)

# Rows of the latest runs the views show.
_LATEST = 12


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
        figure = self.out_dir / "figures" / FIGURE_FILE
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
