"""The "Pre-test uncertainty analysis" section, when a plan sits beside the results.

The plan (``tunnelred plan``, docs/plan.md) is read from OUT/plan/ (or OUT itself). The
section states its assumptions, tabulates each point's predicted loads, correction size and
expanded uncertainties beside those the reduction achieved at the same set point, lists its
warnings and shows the predicted U(CL) against spin ratio.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from tunnelred.products.plan.core import SAFETY
from tunnelred.products.plan.figures import plot_uncertainty
from tunnelred.products.report.data import ReportData
from tunnelred.products.report.layout import Builder, axes

#: Results at a plan's point: same configuration, set speed within this fraction, spin ratio
#: within this absolute difference.
SPEED_MATCH = 0.02
ALPHA_MATCH = 0.05


def _number(x, digits: int = 2) -> str:
    return "–" if x is None or not np.isfinite(x) else f"{x:.{digits}g}"


def achieved(data: ReportData, row) -> tuple[float, int]:
    """Median U(CL) = 2 u_CL over the reduced runs at the plan point's set point, and how many."""
    ds = data.ds
    config = ds["config"].to_numpy().astype(str)
    speed = ds["speed_set"].to_numpy().astype(float)
    alpha = ds["alpha"].to_numpy().astype(float)
    match = (
        (config == str(row["config"]))
        & (np.abs(speed - float(row["speed_set"])) <= SPEED_MATCH * float(row["speed_set"]))
        & (np.abs(alpha - float(row["alpha"])) <= ALPHA_MATCH)
    )
    u = ds["u_CL"].to_numpy().astype(float)[match]
    u = u[np.isfinite(u)]
    return (float(2.0 * np.median(u)) if u.size else float("nan")), int(u.size)


def plan_section(b: Builder, data: ReportData, plan: tuple[pd.DataFrame, dict]) -> None:
    table, assumptions = plan
    b.section("Pre-test uncertainty analysis")
    noise = assumptions.get("noise", {})
    air = assumptions.get("air", {})
    b.add(
        b.p(
            f"Before the test, {len(table)} planned points were predicted with the reduction's "
            "own uncertainty model (tunnelred plan, docs/plan.md) from the instruments' declared "
            "uncertainties, the coefficients of a stated prior "
            f"({assumptions.get('prior_description', assumptions.get('prior', '?'))}) and "
            f"stated noise levels: turbulence {noise.get('turbulence', float('nan')):g} "
            f"(correlation time {noise.get('turbulence_time', float('nan')):g} s), balance "
            f"noise {noise.get('balance_noise', float('nan')):g} of full scale, spin jitter "
            f"{noise.get('spin_jitter', float('nan')):g}; air at "
            f"{air.get('T', float('nan')):g} K, {air.get('p_baro', float('nan')):g} Pa. "
            "Expanded uncertainties U are k = 2. The achieved U(CL) is the median over the "
            f"reduced runs at the same configuration, set speed (within {100 * SPEED_MATCH:g} "
            f"%) and spin ratio (within {ALPHA_MATCH:g})."
        )
    )
    rows = []
    for _, row in table.iterrows():
        got, n = achieved(data, row)
        rows.append(
            [
                str(row["point"]),
                str(row["config"]),
                _number(row["speed_set"], 3),
                _number(row["alpha"], 3),
                _number(row["rpm"], 4),
                _number(100 * row["load_fraction_max"], 2),
                _number(100 * row["eps_total"], 2),
                _number(row["Uk2_CL"]),
                _number(row["Uk2_CD"]),
                _number(row["Uk2_CM"]),
                f"{_number(got)} ({n})" if n else "not run",
            ]
        )
    b.table(
        ["point", "config", "U set [m/s]", "α", "rpm", "peak load [% FS]", "ε [%]",
         "U(CL) planned", "U(CD) planned", "U(CM) planned", "U(CL) achieved (runs)"],
        rows,
        [0.8, 0.8, 0.7, 0.6, 0.7, 0.8, 0.6, 0.8, 0.8, 0.8, 1.1],
        caption=f"{b.next_table()} Planned points: predicted loads, blockage and expanded "
        "uncertainties, and the U(CL) the reduction achieved.",
        compact=True,
    )  # fmt: skip
    warned = [(str(r["point"]), str(r["warnings"])) for _, r in table.iterrows()
              if isinstance(r["warnings"], str) and r["warnings"]]  # fmt: skip
    if warned:
        b.add(b.p("The plan warned of:"))
        for point, text in warned:
            b.add(b.p(f"{point}: {text}", "small"))
    else:
        b.add(b.p("The plan raised no warning."))
    if "SPIN LIMIT" in " ".join(text for _, text in warned):
        b.add(b.p(SAFETY))
    ax = plot_uncertainty(table, "CL", ax=axes())
    b.figure(ax.figure, f"{b.next_figure()} Predicted expanded uncertainty of CL (k = 2) against "
             "spin ratio, per configuration and speed, from the pre-test analysis.")  # fmt: skip
