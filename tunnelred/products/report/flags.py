"""The quality-flags section: each raised flag with its reason, the runs that could not be reduced,
the spin-ratio scatter.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from tunnelred.engine import quality
from tunnelred.engine.quality import FLAG_NAMES
from tunnelred.products import plotting
from tunnelred.products.report.data import ReportData, run_flags
from tunnelred.products.report.layout import LINE_ROOM, TABLE_ROOM, WIDTH, Builder, axes


def _flag_reasons(data: ReportData, i: int, names: list[str]) -> dict[str, str]:
    """Why each raised flag was raised, as the results record it (``flag_reasons``)."""
    stored = quality.parse_flag_reasons(data.table["flag_reasons"].iloc[i])
    return {name: stored.get(name, "") for name in names}


def quality_section(b: Builder, data: ReportData) -> None:
    b.section("Quality flags")
    b.add(
        b.p(
            "A flag never removes a run: it marks a run whose steadiness, zeros, loads or "
            "agreement break a tolerance of campaign.toml, so that it is looked at before its "
            "numbers are used.",
            "intro",
        )
    )
    rows = []
    for i, (run, flags) in enumerate(zip(data.runs, run_flags(data.ds), strict=True)):
        names = [n for n in flags.split(";") if n]
        reasons = _flag_reasons(data, i, names)
        for name in sorted(names, key=lambda n: FLAG_NAMES.index(n) if n in FLAG_NAMES else 99):
            extra = ""
            if name == "dead_tap" and "dead_taps" in data.table:
                extra = f": {data.table['dead_taps'].iloc[i]}"
            rows.append([run, name, reasons.get(name, "") + extra])
    if rows:
        b.table(
            ["run", "flag", "reason"],
            rows,
            [1.0, 1.3, 4.5],
            caption=f"{b.next_table()} Raised quality flags and their reasons.",
        )
    else:
        b.add(b.p("No run raised a quality flag."))
    _failed_runs(b, data)
    # The figure after the short lists, so that a one-line list never takes a page of its own.
    if "spin_scatter" in data.ds and np.isfinite(data.column("spin_scatter")).any():
        # A low strip: one measure along the runs needs no more height, and it fits below
        # the flag table instead of taking a page of its own.
        ax = plotting.plot_steadiness(data.ds, "spin_scatter", ax=axes((7.2, 2.4)))
        b.figure(ax.figure, f"{b.next_figure()} Spin-ratio scatter of every run against its "
                 "tolerance; flagged runs labelled.", width=0.85 * WIDTH)  # fmt: skip


def _failed_runs(b: Builder, data: ReportData) -> None:
    failures = data.failures
    b.subsection("Runs that could not be reduced", LINE_ROOM if failures.empty else TABLE_ROOM)
    if failures.empty:
        b.add(b.p("Every data run was reduced."))
        return
    rows = []
    for row in failures.itertuples(index=False):
        where = "" if pd.isna(row.file) else str(row.file)
        if where and not pd.isna(row.line):
            where += f", line {int(row.line)}"
        rows.append([str(row.run), where, str(row.reason)])
    b.table(
        ["run", "where", "reason"],
        rows,
        [1.0, 1.8, 4.0],
        caption=f"{b.next_table()} Failed runs (failures.csv): none of their numbers enter "
        "this report.",
    )
