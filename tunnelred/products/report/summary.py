"""The summary section: the campaign in one paragraph, each sweep's findings, the flags raised."""

from __future__ import annotations

from xml.sax.saxutils import escape

import numpy as np

from tunnelred.products.report.data import (
    PROVISIONAL_MARK,
    ReportData,
    run_flags,
    run_provisional,
)
from tunnelred.products.report.formatting import K, fixed, format_uncertain
from tunnelred.products.report.layout import Builder


def _efficiency_half(alpha: np.ndarray, efficiency: np.ndarray) -> float:
    """The first |α|, going up from 0, where the lift efficiency passes through 50 %.

    Lift efficiency is CL / (−2πα), the lift as a fraction of potential flow's. The crossing is
    taken either way (rising or falling), linear between neighbouring runs, and NaN when the
    efficiency stays on one side of 50 % over the whole sweep.
    """
    usable = np.isfinite(alpha) & np.isfinite(efficiency) & (np.abs(alpha) > 0)
    a, e = np.abs(alpha[usable]), efficiency[usable]
    order = np.argsort(a, kind="stable")
    a, e = a[order], e[order] - 0.5
    cross = np.flatnonzero(np.sign(e[:-1]) * np.sign(e[1:]) <= 0)
    if cross.size == 0:
        return np.nan
    i = cross[0]
    if e[i] == e[i + 1]:
        return float(a[i])
    return float(a[i] + (a[i + 1] - a[i]) * e[i] / (e[i] - e[i + 1]))


def _efficiency_text(alpha: np.ndarray, efficiency: np.ndarray) -> str:
    """The summary's lift-efficiency cell: the |α| of 50 %, or why there is none, and the peak."""
    usable = np.isfinite(alpha) & np.isfinite(efficiency) & (np.abs(alpha) > 0)
    if not usable.any():
        return "–"
    peak = int(np.argmax(np.where(usable, efficiency, -np.inf)))
    peak_text = f"peak {100 * efficiency[peak]:.0f} % at α {fixed(abs(alpha[peak]), 2)}"
    half = _efficiency_half(alpha, efficiency)
    if np.isfinite(half):
        return f"50 % at |α| {fixed(half, 2)}; {peak_text}"
    side = "below" if efficiency[peak] < 0.5 else "above"
    return f"{side} 50 % throughout; {peak_text}"


def _findings(data: ReportData) -> list[list[str]]:
    """One row per sweep: lift slope, max |CL|, min CD, max |L/D|, α at lift efficiency 50 %."""
    from tunnelred.products import compare

    rows = []
    sweeps = compare.find_sweeps(data.ds)
    for sweep in sweeps:
        if np.unique(sweep.arrays["spin_point"]).size < 3:
            continue  # a retake of one or two points is no sweep to characterise
        c = compare.characteristics(sweep)
        arrays = sweep.arrays
        efficiency = _efficiency_text(
            np.asarray(arrays.get("alpha", []), dtype=float),
            np.asarray(arrays.get("lift_efficiency", np.full(len(sweep.runs), np.nan)), float),
        )
        rows.append(
            [
                sweep.key,
                format_uncertain(c["dCL_dalpha"], K * c["u_dCL_dalpha"]),
                format_uncertain(c["CL_peak"], K * c["u_CL_peak"])
                + f" at α {fixed(c['alpha_CL_peak'], 2)}",
                format_uncertain(c["CD_min"], K * c["u_CD_min"])
                + f" at α {fixed(c['alpha_CD_min'], 2)}",
                format_uncertain(c["L_D_peak"], K * c["u_L_D_peak"])
                + f" at α {fixed(c['alpha_L_D_peak'], 2)}",
                efficiency,
            ]
        )
    return rows


def summary_section(b: Builder, data: ReportData) -> None:
    ds = data.ds
    b.section("Summary")
    alpha = data.column("alpha")
    configs, speeds = data.groups("config"), data.groups("speed")
    b.add(
        b.p(
            f"{ds.sizes['run']} data runs in {len(configs)} configuration(s) at "
            f"{len(speeds)} tunnel speed(s); spin ratio from {fixed(np.nanmin(alpha), 3)} to "
            f"{fixed(np.nanmax(alpha), 3)}. Coefficients are wall-corrected; error bars and "
            f"tabulated uncertainties are expanded uncertainties with coverage factor k = 2.",
            "intro",
        )
    )
    rows = _findings(data)
    if rows:
        b.table(
            ["sweep", "dCL/dα", "max |CL|", "min CD", "max |L/D|", "lift efficiency"],
            rows,
            [1.5, 1.1, 1.6, 1.6, 1.6, 1.5],
            caption=f"{b.next_table()} Findings of each sweep (configuration | speed | "
            "direction of the spin steps); values ± expanded uncertainty (k = 2). dCL/dα: "
            "weighted straight line through |α| ≤ 0.5 (potential flow: −2π = −6.283). Lift "
            "efficiency: CL / (−2πα), the lift as a fraction of potential flow's; the |α| where it "
            "passes 50 %, or the side of 50 % it stays on, and its peak.",
        )
    flagged = [(r, f) for r, f in zip(data.runs, run_flags(ds), strict=True) if f]
    if flagged:
        b.add(
            b.p(
                f"<b>Flags.</b> {len(flagged)} run(s) raised quality flags (reasons under "
                "Quality flags): "
                + ", ".join(f"{escape(r)} ({escape(f.replace(';', ', '))})" for r, f in flagged)
                + ".",
                markup=True,
            )
        )
    else:
        b.add(b.p("No run raised a quality flag."))
    provisional = [r for r, p in zip(data.runs, run_provisional(ds), strict=True) if p]
    if provisional:
        b.add(
            b.p(
                f"<b>Provisional results.</b> {len(provisional)} run(s) are provisional "
                f"({PROVISIONAL_MARK} in the tables): "
                + ", ".join(escape(r) for r in provisional)
                + ". tunnelred watch reduced them while the test ran, before their closing "
                "wind-off zero was taken: from the opening zero alone, the zero's unobserved "
                "drift taken into their uncertainty, and the zero shift not yet judged "
                "(docs/live.md). They are not final: reduce the campaign again with tunnelred "
                "reduce once the test is complete before this report is issued.",
                markup=True,
            )
        )
