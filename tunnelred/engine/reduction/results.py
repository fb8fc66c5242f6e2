"""What a run's reduction returns: the outputs' names, :class:`RunResult` and how it is filled.

The propagated values and their u become the run's row of results, Cp and its u go onto the
results' theta grid, and the budgets of the headline outputs are kept.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from tunnelred.engine.quality import Flag
from tunnelred.engine.reduction.taps import PressurePoints, at_bin_centres
from tunnelred.physics import theory

#: Scalar outputs of the run-level model, in the order results list them.
RUN_OUTPUTS = (
    "T", "p_baro", "RH", "rho", "mu", "q", "U", "Re", "Mach", "omega", "alpha", "Gamma",
    "CL", "CD", "CM", "C_power", "L_D", "CL_p", "CD_p",
    "eps_solid", "eps_wake", "delta_CD_buoyancy", "delta_alpha_lift",
    "q_uncorrected", "U_uncorrected", "Re_uncorrected", "alpha_uncorrected",
    "CL_uncorrected", "CD_uncorrected", "CM_uncorrected", "C_power_uncorrected",
    "L_D_uncorrected", "CL_p_uncorrected", "CD_p_uncorrected",
    "CL_ideal", "lift_efficiency", "theta_stag_ideal",
    "theta_stag", "Cp_max", "Cp_min", "theta_Cp_min", "Cp_base",
)  # fmt: skip


#: Headline outputs whose uncertainty budgets are kept.
BUDGET_OUTPUTS = ("alpha", "CL", "CD", "CM")


@dataclass
class RunResult:
    """Everything reduced from one data run.

    ``values`` holds the per-run scalars (and the few strings: ``config``, ``start``,
    ``dead_taps``, ``flags``) named as in docs/results.md, including ``u_X`` and
    ``X_uncorrected``. ``profiles`` holds arrays on ``theta`` (``Cp``, ``u_Cp``,
    ``Cp_uncorrected``, ``Cp_count``, ``Cp_ideal``); it is empty for a run without a pressure
    log. ``inputs`` maps every file the run used (its own logs and those of its zero and tare
    runs, relative to the campaign folder) to its SHA-256.
    """

    run: str
    config: str
    values: dict[str, float | str]
    theta: np.ndarray | None = None
    profiles: dict[str, np.ndarray] = field(default_factory=dict)
    flags: tuple[Flag, ...] = ()
    budgets: pd.DataFrame | None = None
    inputs: dict[str, str] = field(default_factory=dict)


def run_values(spec, linear, measures: dict, dead_taps: list[str]) -> dict[str, float | str]:
    """The run's row of results: set points, every output with its u, and the measures."""
    values: dict[str, float | str] = {
        "config": spec.config,
        "start": spec.start.isoformat(),
        "speed_set": np.nan if spec.speed_set is None else spec.speed_set,
        "spin_set": np.nan if spec.spin_set is None else spec.spin_set,
        "provisional": bool(spec.provisional),
    }
    for name in RUN_OUTPUTS:
        values[name] = float(np.asarray(linear.values[name]).reshape(-1)[0])
        values[f"u_{name}"] = float(np.asarray(linear.u[name]).reshape(-1)[0])
    values["corr_CL_alpha"] = _safe_correlation(linear, "CL", "alpha")
    for name in ("spin_scatter", "spin_drift", "speed_drift", "temperature_drift", "zero_shift"):
        values[name] = float(np.max(measures.get(name, np.nan)))
    values["revolutions"] = float(measures.get("revolutions", np.nan))
    values["overload"] = float(np.max(measures.get("overload", np.nan)))
    values["stream_overlap"] = float(measures["stream_overlap"])
    values["dead_taps"] = ";".join(dead_taps)
    return values


def cp_profiles(points: PressurePoints | None, linear, alpha: float):
    """Cp and its u on the results' theta grid (None and {} for a run without taps)."""
    if points is None:
        return None, {}
    theta = points.grid
    # Points sharing a bin (merged index runs) are averaged there, their u as for a mean of
    # independent values.
    n = np.bincount(points.grid_index, minlength=theta.size)

    def on_grid(v, power=1):
        total = np.bincount(points.grid_index, np.asarray(v).reshape(-1) ** power, theta.size)
        with np.errstate(invalid="ignore", divide="ignore"):
            mean = np.where(n > 0, total / n, np.nan)
        return mean if power == 1 else np.sqrt(mean / n)

    profiles = {
        "Cp": on_grid(at_bin_centres(points, linear.values["Cp"])),
        "u_Cp": on_grid(linear.u["Cp"], power=2),
        "Cp_uncorrected": on_grid(at_bin_centres(points, linear.values["Cp_uncorrected"])),
        "Cp_count": points.count,
        "Cp_ideal": theory.cp_surface(theta, alpha),
    }
    return theta, profiles


def agreement_measures(measures: dict, values: dict, linear, both: bool, points) -> None:
    """The measures judged on the reduced values: Cp_max, balance/pressure lift, alpha."""
    if points is not None:
        measures["Cp_max"] = values["Cp_max"]
        if np.isfinite(values["u_Cp_max"]):
            measures["u_Cp_max"] = values["u_Cp_max"]
    if both:
        measures.update(
            CL=values["CL"],
            u_CL=values["u_CL"],
            CL_p=values["CL_p"],
            u_CL_p=values["u_CL_p"],
            corr_CL_CL_p=_safe_correlation(linear, "CL", "CL_p"),
        )
    measures["alpha"] = values["alpha"]


def budget_table(linear, values: dict, run_id: str) -> pd.DataFrame | None:
    # An exact result (alpha of a model at rest) has no variance to share out.
    budgeted = [n for n in BUDGET_OUTPUTS if np.isfinite(values[n]) and values[f"u_{n}"] > 0]
    if not budgeted:
        return None
    table = linear.budgets(budgeted)
    table.insert(0, "run", run_id)
    return table


def _safe_correlation(linear, a: str, b: str) -> float:
    try:
        value = linear.correlation(a, b)
    except (KeyError, ValueError, ZeroDivisionError):
        return float("nan")
    return float(value) if np.isfinite(value) else float("nan")
