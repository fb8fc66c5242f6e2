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

The folder layout and the rule are described in docs/live.md. This module holds the loop
(:func:`watch`); one look at the folder is tunnelred.live.snapshot, the files as written
tunnelred.live.folder, the state tunnelred.live.status, the views tunnelred.live.views and
tunnelred.live.figure; their public names are importable from here.
"""

from __future__ import annotations

import sys
import threading
import time
from dataclasses import replace
from pathlib import Path

from tunnelred.common.errors import Terminated
from tunnelred.common.text import printable
from tunnelred.live.figure import live_figure
from tunnelred.live.snapshot import Watcher
from tunnelred.live.status import RunLine, Status, internal_text, read_status, write_status
from tunnelred.live.views import LiveView, TerminalView, render_lines

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
    watcher = Watcher(
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
        write_status(watcher.out, status)
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
                    problems=(internal_text("looking at the folder", exc),),
                )
            publish(status)
            if stop.wait(poll):
                break
    except Terminated:
        # the command's SIGTERM: OUT is left whole as for Ctrl-C, and the command ends with 143
        how = "SIGTERM"
        raise
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
    ``args.poll`` (and ``args.workers`` if given). Returns the exit status (0, also after Ctrl-C;
    2 usage error); the command's SIGTERM (:class:`Terminated`) goes through, for its 143."""
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
