"""The sections on how the numbers were made: data reduction (formulas, wall corrections) and the
uncertainty statement with its budgets.
"""

from __future__ import annotations

from xml.sax.saxutils import escape

import numpy as np

from tunnelred.physics import corrections
from tunnelred.products import plotting
from tunnelred.products.report.data import ReportData, run_config
from tunnelred.products.report.formatting import K, fixed, number_text
from tunnelred.products.report.layout import Builder

_BUDGET_ROWS = 6  # contributors listed per output


def reduction_section(b: Builder, data: ReportData) -> None:
    b.section("Data reduction")
    b.add(
        b.p(
            "Forces and torque from the balance, in wind axes after the zero and spin tare are "
            "removed: L (along y), D (along x), T (about z). With the dynamic pressure q, the "
            "free-stream speed U = √(2q/ρ), diameter d, span b and radius R = d/2:",
            "intro",
        )
    )
    for formula in (
        "CL = L / (q·d·b),   CD = D / (q·d·b),   CM = T / (q·d·b·R),   "
        "C_power = T·ω / (q·U·d·b),   L/D = CL / CD",
        "α = ωR / U,   Re = ρ·U·d / μ,   Cp = (p − p∞) / q",
        "from the surface pressure at mid-span: CL_p = ½∮Cp sin θ dθ,   CD_p = ½∮Cp cos θ dθ",
    ):
        b.add(b.p(formula, "formula"))
    b.subsection("Wall corrections")
    methods = data.methods
    method = methods.get("blockage")
    if method in corrections.METHODS:
        summary = corrections.correction_summary(
            method,
            lift_interference=bool(methods.get("lift_interference")),
            buoyancy=bool(methods.get("buoyancy", False)),
            blockage_factor=methods.get("maskell_factor"),
        )
        b.add(b.p("The corrections applied to every run, in the order they act:"))
        for line in summary.splitlines():
            name, _, formula = line.partition(": ")
            b.add(b.p(f"<b>{escape(name)}</b>: {escape(formula)}", markup=True))
    else:
        b.add(b.p("The results do not record the correction methods used."))
    show_lift = bool(methods.get("lift_interference"))
    header = ["run", "config", "ε_solid", "ε_wake", "ΔCD buoyancy"]
    names = ["eps_solid", "eps_wake", "delta_CD_buoyancy"]
    if show_lift:
        header.append("Δα lift")
        names.append("delta_alpha_lift")
    cols = [data.column(n) for n in names]
    rows = [
        [run, run_config(data, i), *(fixed(c[i], 5) for c in cols)]
        for i, run in enumerate(data.runs)
    ]
    b.table(
        header,
        rows,
        [1.3, 1.1] + [1.0] * len(names),
        caption=f"{b.next_table()} Size of the wall corrections: solid- and wake-blockage velocity "
        "increments and the horizontal-buoyancy drag coefficient removed.",
    )


#: Readable names and units of the budget inputs (the names the run model gives them).
BUDGET_INPUTS: dict[str, tuple[str, str]] = {
    "dp": ("pitot pressure difference, time average (transducer noise)", "Pa"),
    "dp_spec": ("pitot transducer", "Pa"),
    "dp_flow": ("flow unsteadiness over the record (coefficients' q)", "Pa"),
    "T": ("air temperature, time average", "K"),
    "T_spec": ("thermometer", "K"),
    "p": ("barometric pressure, time average", "Pa"),
    "p_spec": ("barometer", "Pa"),
    "RH": ("relative humidity, time average", "–"),
    "RH_spec": ("hygrometer", "–"),
    "omega": ("spin rate, time average", "rad/s"),
    "omega_spec": ("spin-rate sensor, relative", "–"),
    "Fx": ("balance Fx, time average", "N"),
    "Fy": ("balance Fy, time average", "N"),
    "Mz": ("balance Mz, time average", "N·m"),
    "Fx_spec": ("balance Fx specification", "N"),
    "Fy_spec": ("balance Fy specification", "N"),
    "Mz_spec": ("balance Mz specification", "N·m"),
    "Fx_tare": ("spin tare Fx", "N"),
    "Fy_tare": ("spin tare Fy", "N"),
    "Mz_tare": ("spin tare Mz", "N·m"),
    "Fx_tare_interp": ("spin tare Fx, interpolation in spin rate", "N"),
    "Fy_tare_interp": ("spin tare Fy, interpolation in spin rate", "N"),
    "Mz_tare_interp": ("spin tare Mz, interpolation in spin rate", "N·m"),
    "calibration": ("balance calibration factor", "–"),
    "calibration_coefficients": (
        "balance calibration coefficients (with covariance)",
        "per channel unit",
    ),
    "alignment": ("balance alignment angle", "deg"),
    "flow_angle": ("flow angularity", "deg"),
    "height": ("test-section height", "m"),
    "width": ("test-section width", "m"),
    "diameter": ("model diameter", "m"),
    "span": ("model span", "m"),
    "dpdx": ("empty-tunnel static-pressure gradient", "Pa/m"),
    "p_bin": ("tap pressure, per azimuth bin", "Pa"),
    "p_scanner": ("pressure scanner, per tap", "Pa"),
    "tap_azimuth": ("tap azimuth, per tap (installed, tubing delay)", "deg"),
    "encoder": ("encoder zero", "deg"),
    "quadrature_CL_p": ("CL_p quadrature (rule error at the points' spacing)", "-"),
    "quadrature_CD_p": ("CD_p quadrature (rule error at the points' spacing)", "-"),
}


def budget_label(name: str) -> tuple[str, str]:
    """The readable name and unit of a budget input (its own name, no unit, if unknown)."""
    if name in BUDGET_INPUTS:
        return BUDGET_INPUTS[name]
    base, _, tail = name.partition("_")
    if tail == "spec" and base in BUDGET_INPUTS:
        return f"{BUDGET_INPUTS[base][0]} (instrument)", BUDGET_INPUTS[base][1]
    return name, ""


_STATED = ("alpha", "CL", "CD", "CM")


def _budget_runs(data: ReportData) -> list[str]:
    """A low, a mid and a high spin-ratio run among those with a budget (unflagged preferred)."""
    have = set(data.budgets["run"].astype(str)) if "run" in data.budgets else set()
    if not have:
        return []
    sub = data.ds.isel(run=[i for i, r in enumerate(data.runs) if r in have])
    return plotting.representative_runs(sub.drop_vars("Cp", errors="ignore"), 3)


def uncertainty_section(b: Builder, data: ReportData) -> None:
    b.section("Uncertainty statement")
    b.add(
        b.p(
            "Uncertainties are evaluated by linear propagation of the standard uncertainties of "
            "every input through the run's reduction model (JCGM 100:2008, the GUM): type A from "
            "the time series of each run (with the effective number of independent samples), type "
            "B from the declared uncertainties of the instruments, geometry and tunnel. The "
            "expanded uncertainty is U = k·u with coverage factor k = 2, which for a normal "
            "distribution gives a coverage probability of about 95 %. Every tabulated ± and every "
            "error bar in this report is such an expanded uncertainty.",
            "intro",
        )
    )
    rows = []
    for label, idx in plotting.group_runs(data.ds, "config"):
        row = [label or "(all runs)"]
        for name in _STATED:
            u = K * data.column(f"u_{name}")[idx]
            u = u[np.isfinite(u)]
            row.append(f"{number_text(u.min(), 2)} to {number_text(u.max(), 2)}" if u.size else "–")
        rows.append(row)
    b.table(
        ["configuration", "U(α)", "U(CL)", "U(CD)", "U(CM)"],
        rows,
        [1.2, 1.2, 1.2, 1.2, 1.2],
        caption=f"{b.next_table()} Range of the expanded uncertainty (k = 2) over the runs of "
        "each configuration.",
    )
    for run in _budget_runs(data):
        _budget_table(b, data, run)


def _budget_table(b: Builder, data: ReportData, run: str) -> None:
    """One run's budget: the inputs with the largest shares, their share of each output."""
    mine = data.budgets[data.budgets["run"].astype(str) == run]
    if mine.empty:
        return
    share = mine.pivot_table(index="input", columns="output", values="share", aggfunc="sum")
    first = mine.drop_duplicates("input").set_index("input")
    top = share.max(axis=1).sort_values(ascending=False).head(_BUDGET_ROWS + 2).index
    i = data.runs.index(run)
    rows = []
    for name in top:
        label, unit = budget_label(str(name))
        kind = str(first.loc[name, "kind"]) if "kind" in first else ""
        row = [label, unit, kind if kind != "nan" else "", number_text(first.loc[name, "value"]),
               number_text(first.loc[name, "u"], 2)]  # fmt: skip
        for output in _STATED:
            value = share.loc[name, output] if output in share else np.nan
            row.append(fixed(100 * value, 1))
        rows.append(row)
    totals = ["combined: U (k = 2)", "", "", "", ""]
    totals += [number_text(K * data.column(f"u_{o}")[i], 2) for o in _STATED]
    rows.append(totals)
    b.table(
        [
            "input",
            "unit",
            "type",
            "value",
            "u",
            "share of u²(α) [%]",
            "CL [%]",
            "CD [%]",
            "CM [%]",
        ],  # fmt: skip
        rows,
        [2.4, 0.6, 0.45, 0.9, 0.8, 0.8, 0.6, 0.6, 0.6],
        caption=f"{b.next_table()} Uncertainty budget of run {escape(run)} (α = "
        f"{fixed(data.column('alpha')[i], 2)}, {escape(run_config(data, i))}): the inputs that "
        "contribute most, with their share of the variance of each output; last row: the "
        "expanded uncertainty of each output.",
    )
