"""The results section (coefficient tables, figures, surface pressure) and the configuration
comparison.
"""

from __future__ import annotations

import importlib
import importlib.util
from xml.sax.saxutils import escape

import numpy as np
from matplotlib.figure import Figure

from tunnelred.products import plotting
from tunnelred.products.report.data import (
    PROVISIONAL_MARK,
    ReportData,
    run_config,
    run_mark,
    run_provisional,
)
from tunnelred.products.report.formatting import RPM, K, fixed, format_uncertain
from tunnelred.products.report.layout import FIGURE_ROOM, Builder, axes

_COMPARISON = "Configuration comparison"
PROVISIONAL_NOTE = (
    f" {PROVISIONAL_MARK} marks a provisional run: reduced while the test ran, before its closing"
    " zero was taken; not a final result (see Summary)."
)


def _value_table(b: Builder, data: ReportData, names: list[str], caption: str) -> None:
    """Value ± U (k = 2) of ``names`` for every run that has the last of them; flagged runs †,
    provisional ones ‡."""
    header = ["run", "config", "rpm"] + [_HEADS[n] for n in names]
    rows = []
    has = np.isfinite(data.column(names[-1]))
    rpm = data.column("omega") * RPM
    for i, run in enumerate(data.runs):
        if not has[i]:
            continue
        cells = [format_uncertain(data.column(n)[i], K * data.column(f"u_{n}")[i]) for n in names]
        rows.append([run + run_mark(data.ds, i), run_config(data, i), fixed(rpm[i], 0),
                     *cells])  # fmt: skip
    b.table(header, rows, [0.75, 0.7, 0.55] + [1.45] * len(names), caption=caption)


_HEADS = {
    "alpha": "α",
    "CL": "CL",
    "CD": "CD",
    "CM": "CM",
    "C_power": "C_power",
    "CL_p": "CL_p",
    "CD_p": "CD_p",
}

_FIGURE_NOTE = (
    " Filled: wall-corrected, bars ± U (k = 2); ringed: flagged runs (left out of the lines); "
    "solid lines join a sweep of increasing spin, dotted ones a sweep of decreasing spin."
)


def results_section(b: Builder, data: ReportData, runs: list[str]) -> None:
    ds = data.ds
    b.section("Results")
    b.add(
        b.p(
            "Wall-corrected coefficients on q·d·b (CM on q·d·b·R), with the measured spin rate. "
            "Each cell is the value and its expanded uncertainty U = k·u with k = 2, rounded to "
            "U's second significant digit. † marks a flagged run (see Quality flags)."
            + (PROVISIONAL_NOTE if run_provisional(ds).any() else ""),
            "intro",
        )
    )
    _value_table(
        b,
        data,
        ["alpha", "CL", "CD", "CM", "C_power"],
        f"{b.next_table()} Balance coefficients against spin ratio; value ± expanded "
        "uncertainty (k = 2).",
    )
    if np.isfinite(data.column("CL_p")).any():
        _value_table(
            b,
            data,
            ["alpha", "CL_p", "CD_p"],
            f"{b.next_table()} Coefficients from the mid-span surface pressure (∮Cp); "
            "value ± expanded uncertainty (k = 2).",
        )
    b.subsection("Figures", FIGURE_ROOM)
    for name, what in (
        ("CL", "Lift coefficient against spin ratio; the line is potential flow, CL = −2πα."),
        ("CD", "Drag coefficient against spin ratio."),
        ("CM", "Torque coefficient against spin ratio."),
        ("C_power", "Power coefficient against spin ratio."),
        ("L_D", "Lift-to-drag ratio against spin ratio."),
    ):
        if name in ds and np.isfinite(data.column(name)).any():
            ax = plotting.plot_coefficient(ds, name, ax=axes(), uncorrected=name != "L_D")
            note = _FIGURE_NOTE + (" Hollow: before wall corrections." if name != "L_D" else "")
            b.figure(ax.figure, f"{b.next_figure()} {what}{note}")
    if np.isfinite(data.column("CL")).any() and np.isfinite(data.column("CD")).any():
        ax = plotting.plot_drag_polar(ds, ax=axes())
        b.figure(ax.figure, f"{b.next_figure()} Drag polar, CL against CD.{_FIGURE_NOTE}")
    if (np.isfinite(data.column("CL")) & np.isfinite(data.column("CL_p"))).any():
        ax = plotting.plot_pressure_lift(ds, ax=axes())
        b.figure(ax.figure, f"{b.next_figure()} Lift from the mid-span surface pressure against "
                 "lift from the balance; the dashed line is equality. The pressure sees one "
                 "section, the balance the whole span.")  # fmt: skip
    _surface_pressure(b, data, runs)


def comparison_section(b: Builder, data: ReportData) -> None:
    """The configuration comparison of tunnelred.products.compare, with figures."""
    ds = data.ds
    if len({str(c) for c in data.table.get("config", [])}) < 2:
        return
    if importlib.util.find_spec("tunnelred.products.compare") is None:
        return
    compare = importlib.import_module("tunnelred.products.compare")
    table = compare.comparison_section_data(ds)
    if table is None or len(table) == 0:
        return
    b.section(_COMPARISON)
    b.add(
        b.p(
            "Differences between configurations at the spin ratios both measured, sweep leg by "
            "sweep leg at each tunnel speed (tunnelred.products.compare): points paired within "
            f"Δα ≤ {compare.PAIR_TOLERANCE:g}, each moved to the pair's mean α along its own "
            "slope; ΔX = X(configuration) − X(reference), with its expanded uncertainty (k = 2). "
            "Flagged runs are left out. A difference marked * exceeds its expanded uncertainty.",
            "intro",
        )
    )
    rows = []
    for row in table.itertuples(index=False):
        cells = [str(row.config), str(row.reference), fixed(row.speed, 1), str(row.leg)]
        cells.append(fixed(row.alpha, 2))
        for x in ("CL", "CD"):
            text = format_uncertain(getattr(row, f"d{x}"), K * getattr(row, f"u_d{x}"))
            cells.append(text + (" *" if getattr(row, f"sig_d{x}") else ""))
        rows.append(cells)
    b.table(
        ["config", "reference", "U [m/s]", "leg", "α", "ΔCL", "ΔCD"],
        rows,
        [1.0, 1.0, 0.8, 0.6, 0.6, 1.5, 1.5],
        caption=f"{b.next_table()} Configuration differences of CL and CD; value ± expanded "
        "uncertainty (k = 2); * marks a difference larger than its expanded uncertainty.",
    )
    for name in ("CL", "CD"):
        for by, what in (("speed", "tunnel speed"), ("re", "Reynolds number")):
            if len(plotting.group_runs(ds, by)) < 2 or not np.isfinite(data.column(name)).any():
                continue
            ax = plotting.plot_comparison(ds, name, by=by, ax=axes())
            b.figure(ax.figure, f"{b.next_figure()} {name} by {what}: colour the {what}, marker "
                     f"the configuration.{_FIGURE_NOTE}")  # fmt: skip


def _surface_pressure(b: Builder, data: ReportData, runs: list[str]) -> None:
    b.subsection("Surface pressure", FIGURE_ROOM)
    if "Cp" not in data.ds or not runs:
        b.add(b.p("No run had a pressure log."))
        return
    b.add(
        b.p(
            "Measured Cp(θ) at mid-span of representative runs (the smallest, a middle and the "
            "largest spin ratio), cartesian and polar, against potential flow Cp = 1 − (α + 2 sin "
            "θ)² at the run's corrected α. θ is measured from the windward point, positive in the "
            "sense of positive spin. The band Cp ± U (k = 2) is narrow at the scale of Cp; the "
            "strip below each plot shows its half-width U(Cp).",
            "intro",
        )
    )
    for run in runs:
        fig = plotting.plot_cp_pair(data.ds, run, fig=Figure(figsize=(9.6, 4.4),
                                                            layout="constrained"))  # fmt: skip
        b.figure(fig, f"{b.next_figure()} Surface pressure of run {escape(run)}: measured with "
                 "its k = 2 band, potential flow dashed.")  # fmt: skip
