"""Repeatability of repeat runs and the characteristic figures of a sweep, each with its u."""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
import pandas as pd

from tunnelred.products.compare.grid import run_errors
from tunnelred.products.compare.sweeps import (
    Sweep,
    find_sweeps,
    has_coefficient,
    numeric_column,
    results_table,
    set_points,
)

__all__ = ["COMPARED", "FIGURES", "characteristics", "characteristics_table", "repeatability"]

#: The coefficients compared by default.
COMPARED: tuple[str, ...] = ("CL", "CD", "CM", "C_power")

_IDEAL_SLOPE = -2.0 * math.pi  # dCL/dα in potential flow (Kutta–Joukowski, docs/conventions.md)

# The figures of characteristics() that carry an uncertainty `u_<figure>` and so can be differenced.
FIGURES = (
    "dCL_dalpha",
    "dCL_dalpha_ratio",
    "CL_peak",
    "alpha_CL_peak",
    "CD_min",
    "alpha_CD_min",
    "L_D_peak",
    "alpha_L_D_peak",
    "alpha_power",
)


# ---------------------------------------------------------------------------------------------
# Repeatability and characteristic figures


def repeatability(
    results,
    *,
    by: Sequence[str] = ("config", "speed_set", "spin_set"),
    pool_by: Sequence[str] = ("config", "speed_set"),
    names: Sequence[str] = COMPARED,
    speed_resolution: float = 0.5,
    spin_resolution: float = 10.0,
) -> pd.DataFrame:
    """Scatter of repeat runs against their stated uncertainty, pooled over set points.

    Parameters
    ----------
    results : xarray.Dataset or pandas.DataFrame
        Campaign results.
    by : sequence of str
        Columns that define one set point; ``speed_set`` and ``spin_set`` are rounded (to
        ``speed_resolution`` [m/s] and ``spin_resolution`` [rpm]; the measured U or ω stands in
        for a missing set point).
    pool_by : sequence of str
        Set points are pooled within these columns (a subset of ``by``).
    names : sequence of str
        Coefficients assessed; one missing from the results is skipped.

    Returns
    -------
    pandas.DataFrame
        One row per pool and coefficient: the ``pool_by`` columns, ``quantity``, ``set_points``
        (with two or more runs), ``runs``, ``dof``, ``s_pooled``, ``u_stated``, ``ratio``
        (s_pooled / u_stated) and ``p_value`` (chance of a scatter at least this large if the
        stated u were the whole truth).

    Notes
    -----
    With n_i runs and sample variance s_i² at set point i (groups of one are left out),

        s_p² = Σ (n_i − 1) s_i² / Σ (n_i − 1),  ν = Σ (n_i − 1),

    and the stated uncertainty is pooled with the same weights from the mean u² of each group,
    u_stated² = Σ (n_i − 1) mean(u²)_i / ν, so ratio ≈ 1 when the stated u accounts for the run-
    to-run scatter. The test statistic χ² = Σ (n_i − 1) s_i² / mean(u²)_i follows χ²(ν) when
    each set point's runs are normal with the stated u (exact when the runs of a set point share
    one u); ``p_value`` is its upper tail. A ratio well above 1 with a small p-value points at an
    unsteadiness or a drift the per-run u does not contain; a ratio well below 1 at type-B terms
    (shared by all repeats) that scatter cannot reveal.

    References
    ----------
    .. [1] ISO 5725-2:2019, *Accuracy (trueness and precision) of measurement methods and
       results — Part 2: Basic method for the determination of repeatability and
       reproducibility* (pooled repeatability variance).
    .. [2] JCGM 100:2008 (GUM), type A evaluation (pooled estimate of variance).

    Examples
    --------
    >>> df = pd.DataFrame({"run": list("abcd"), "config": "A", "speed_set": 20.0,
    ...     "spin_set": [0, 0, 600, 600], "CL": [0.0, 0.2, -3.0, -3.2], "u_CL": 0.1})
    >>> row = repeatability(df, names=["CL"]).iloc[0]
    >>> int(row.dof), round(float(row.s_pooled), 4), round(float(row.ratio), 3)
    (2, 0.1414, 1.414)
    """
    from scipy import stats  # here only: importing it costs ~0.3 s, and drawing needs none

    missing = [c for c in pool_by if c not in by]
    if missing:
        raise ValueError(f"pool_by must be a subset of by; {missing} are not in {list(by)}")
    table = results_table(results)
    speed, spin = set_points(table, speed_resolution, spin_resolution)
    table = table.assign(speed_set=speed, spin_set=spin)
    columns = [*pool_by, "quantity", "set_points", "runs", "dof", "s_pooled", "u_stated"]
    columns += ["ratio", "p_value"]
    rows = []
    for name in names:
        if name not in table or f"u_{name}" not in table:
            continue
        values = table.assign(
            _x=numeric_column(table, name), _u2=numeric_column(table, f"u_{name}") ** 2
        )
        values = values.dropna(subset=[*by, "_x", "_u2"])
        groups = values.groupby(list(by), sort=False).agg(
            n=("_x", "size"), s2=("_x", "var"), u2=("_u2", "mean")
        )
        groups = groups[groups["n"] >= 2].reset_index()
        if groups.empty:
            continue
        groups["dof"] = groups["n"] - 1
        groups["ss"] = groups["dof"] * groups["s2"]
        groups["su"] = groups["dof"] * groups["u2"]
        groups["chi2"] = groups["ss"] / groups["u2"]
        pooled = groups.groupby(list(pool_by), sort=False).agg(
            set_points=("n", "size"),
            runs=("n", "sum"),
            dof=("dof", "sum"),
            ss=("ss", "sum"),
            su=("su", "sum"),
            chi2=("chi2", "sum"),
        )
        pooled = pooled.reset_index()
        pooled["quantity"] = name
        pooled["s_pooled"] = np.sqrt(pooled["ss"] / pooled["dof"])
        pooled["u_stated"] = np.sqrt(pooled["su"] / pooled["dof"])
        with np.errstate(divide="ignore", invalid="ignore"):
            pooled["ratio"] = pooled["s_pooled"] / pooled["u_stated"]
        pooled["p_value"] = stats.chi2.sf(pooled["chi2"], pooled["dof"])
        rows.append(pooled[columns])
    if not rows:
        return pd.DataFrame(columns=columns)
    return pd.concat(rows, ignore_index=True)


def _extreme(sweep: Sweep, name: str, pick) -> tuple[float, float, float, float]:
    """The run that ``pick`` chooses among finite values of ``name``: X, u(X), α, u(α)."""
    arrays = sweep.arrays
    if name not in arrays:
        return (np.nan,) * 4
    x = np.asarray(arrays[name], dtype=float)
    usable = np.flatnonzero(np.isfinite(x))
    if usable.size == 0:
        return (np.nan,) * 4
    i = usable[pick(x[usable])]

    def get(key):
        return float(arrays[key][i]) if key in arrays else np.nan

    return float(x[i]), get(f"u_{name}"), get("alpha"), get("u_alpha")


def _lift_slope(sweep: Sweep, slope_range: tuple[float, float]) -> tuple[float, float, int]:
    """Weighted least-squares dCL/dα over |α| in the range, by effective variance."""
    if not has_coefficient(sweep, "CL"):
        return np.nan, np.nan, 0
    value, u_value, alpha, u_alpha, r, usable = run_errors(sweep, "CL")
    low, high = slope_range
    sel = usable & (np.abs(alpha) >= low) & (np.abs(alpha) <= high)
    x, y, ux, uy, r = alpha[sel], value[sel], u_alpha[sel], u_value[sel], r[sel]
    if np.unique(x).size < 2:
        return np.nan, np.nan, int(sel.sum())
    slope = 0.0
    for _ in range(50):
        variance = uy**2 + slope**2 * ux**2 - 2.0 * slope * r * ux * uy
        if not np.all(variance > 0):
            return np.nan, np.nan, int(sel.sum())
        w = 1.0 / variance
        s, sx, sy = w.sum(), (w * x).sum(), (w * y).sum()
        sxx, sxy = (w * x * x).sum(), (w * x * y).sum()
        det = s * sxx - sx**2
        new = (s * sxy - sx * sy) / det
        converged = abs(new - slope) <= 1e-12 * max(abs(new), 1.0)
        slope = new
        if converged:
            break
    return float(slope), float(math.sqrt(s / det)), int(sel.sum())


def _power_crossing(sweep: Sweep, level: float) -> tuple[float, float]:
    """α where C_power crosses ``level`` (linear between runs), nearest α = 0, with u."""
    if "C_power" not in sweep.arrays or "u_C_power" not in sweep.arrays:
        return np.nan, np.nan
    value, u_value, alpha, u_alpha, r, usable = run_errors(sweep, "C_power")
    order = np.flatnonzero(usable)[np.argsort(alpha[usable])]
    p, a, up, ua, r = value[order] - level, alpha[order], u_value[order], u_alpha[order], r[order]
    crossing = np.flatnonzero((p[:-1] * p[1:] <= 0) & ((p[:-1] != 0) | (p[1:] != 0)))
    if crossing.size == 0:
        return np.nan, np.nan
    t = -p[crossing] / (p[crossing + 1] - p[crossing])
    at = a[crossing] + t * (a[crossing + 1] - a[crossing])
    k = int(np.argmin(np.abs(at)))
    i, t, at = crossing[k], t[k], at[k]
    slope = (p[i + 1] - p[i]) / (a[i + 1] - a[i])
    # α* = (1 − t)(α₁ − δP₁/m) + t(α₂ − δP₂/m) to first order, m the segment slope.
    terms = [
        weight**2 * (ua[j] ** 2 + (up[j] / slope) ** 2 - 2.0 * r[j] * ua[j] * up[j] / slope)
        for weight, j in ((1.0 - t, i), (t, i + 1))
    ]
    return float(at), float(math.sqrt(max(sum(terms), 0.0)))


def characteristics(
    sweep: Sweep,
    *,
    slope_range: tuple[float, float] = (0.0, 0.5),
    power_level: float | None = None,
) -> dict:
    """Characteristic figures of a sweep, each with its standard uncertainty.

    Parameters
    ----------
    sweep : Sweep
    slope_range : (float, float)
        |α| range of the lift-slope fit (both ends included). [-]
    power_level : float, optional
        Power coefficient whose crossing is reported; the crossing is left out when None. [-]

    Returns
    -------
    dict
        ``key``, ``config``, ``speed`` [m/s], ``Re``, ``leg``, ``runs``; and each figure X with
        ``u_X``: ``dCL_dalpha`` (with ``dCL_dalpha_runs`` fitted and ``dCL_dalpha_ratio`` to the
        ideal −2π), ``CL_peak`` (the largest |CL|, signed) and ``alpha_CL_peak``, ``CD_min`` and
        ``alpha_CD_min``, ``L_D_peak`` (the largest |L/D|, signed) and ``alpha_L_D_peak``;
        with ``power_level``, ``power_level`` and ``alpha_power``.

    Notes
    -----
    *Lift slope*: the straight line CL = a + b α through the runs with |α| in ``slope_range``,
    by weighted least squares with the effective variance u²(CL) + b² u²(α) − 2 b r u(CL) u(α)
    of each run (iterated on b to convergence), so the uncertainty of α is counted along the
    line; u(b) = √(Σw / det) from the stated u, not scaled by the scatter (see
    :func:`repeatability`). Potential flow gives b = −2π exactly (Kutta–Joukowski);
    ``dCL_dalpha_ratio`` = b / (−2π).

    *Peaks*: the run with the largest |CL|, the smallest CD, the largest |L/D|; its value and α
    with their u. They are the measured extremes, not a fitted peak, so a coarse sweep under-
    states a sharp one.

    *Power crossing*: between neighbouring runs in α, the α where C_power − level changes sign,
    linear in each segment; of several crossings the one nearest α = 0 (the first as the spin
    grows). With the segment slope m and t the fraction along it,
    u²(α*) = Σ_j w_j² (u²(α_j) + u²(P_j)/m² − 2 r_j u(α_j) u(P_j)/m), w = (1 − t, t). NaN when
    C_power never reaches the level within the sweep.

    References
    ----------
    .. [1] J. Orear, "Least squares when both variables have uncertainties", American Journal of
       Physics 50, 912–916 (1982) (effective variance).
    .. [2] J. D. Anderson, *Fundamentals of Aerodynamics*, 6th ed., McGraw-Hill, 2017, §3.16
       (lifting flow over a cylinder; L' = ρ U Γ).

    Examples
    --------
    >>> alpha = np.array([0.0, 0.1, 0.2, 0.3])
    >>> df = pd.DataFrame({"run": list("abcd"), "config": "A", "speed_set": 20.0,
    ...     "spin_set": [0, 100, 200, 300], "alpha": alpha, "u_alpha": 0.002,
    ...     "CL": -2 * np.pi * alpha, "u_CL": 0.01})
    >>> figures = characteristics(find_sweeps(df)[0])
    >>> round(figures["dCL_dalpha_ratio"], 9)
    1.0
    """
    slope, u_slope, fitted = _lift_slope(sweep, slope_range)
    out = {
        "key": sweep.key,
        "config": sweep.config,
        "speed": sweep.speed,
        "Re": sweep.Re,
        "leg": sweep.leg,
        "runs": len(sweep.runs),
        "dCL_dalpha": slope,
        "u_dCL_dalpha": u_slope,
        "dCL_dalpha_runs": fitted,
        "dCL_dalpha_ratio": slope / _IDEAL_SLOPE,
        "u_dCL_dalpha_ratio": u_slope / abs(_IDEAL_SLOPE),
    }
    for figure, name, pick in (
        ("CL_peak", "CL", lambda x: np.argmax(np.abs(x))),
        ("CD_min", "CD", np.argmin),
        ("L_D_peak", "L_D", lambda x: np.argmax(np.abs(x))),
    ):
        x, ux, a, ua = _extreme(sweep, name, pick)
        out |= {figure: x, f"u_{figure}": ux, f"alpha_{figure}": a, f"u_alpha_{figure}": ua}
    if power_level is not None:
        at, u_at = _power_crossing(sweep, float(power_level))
        out |= {"power_level": float(power_level), "alpha_power": at, "u_alpha_power": u_at}
    return out


def characteristics_table(
    results,
    *,
    by: str = "config",
    slope_range: tuple[float, float] = (0.0, 0.5),
    power_level: float | None = None,
) -> pd.DataFrame:
    """:func:`characteristics` of every sweep, one row a sweep.

    Parameters
    ----------
    results : xarray.Dataset or pandas.DataFrame
    by : {"config", "speed", "re"}
        How sweeps are grouped (:func:`find_sweeps`).
    slope_range : (float, float)
        |α| range of the lift-slope fit. [-]
    power_level : float, optional
        Power coefficient whose crossing is reported. [-]

    Returns
    -------
    pandas.DataFrame
    """
    rows = [
        characteristics(s, slope_range=slope_range, power_level=power_level)
        for s in find_sweeps(results, by=by)
    ]
    return pd.DataFrame(rows)
