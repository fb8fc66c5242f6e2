"""Comparisons of sweeps, configurations and campaigns, every difference with its uncertainty.

A *sweep* is the runs of one configuration at one nominal speed (or in one Reynolds-number band),
taken as one leg of set spin rates: a leg is a maximal monotonic stretch of set spin rate in run
(``start``) order, so a campaign that steps the spin up and back down gives an ``"up"`` and a
``"down"`` sweep, whose difference is the hysteresis. Coefficients of a sweep are interpolated onto
a grid of spin ratio α (:func:`on_grid`), with the uncertainty of α carried along the curve; two
sweeps on one grid give a :class:`Difference`, significant at k = 2 where |Δ| > 2u(Δ).

Every grid value is kept as a linear combination of the runs' own errors (their sensitivity
coefficients), so a difference of two curves that share runs — a sweep with itself, or the two
legs of a sweep at their common turning point — lets the shared errors cancel exactly instead of
adding them as if independent.

The functions take the results as an ``xarray.Dataset`` (:func:`tunnelred.products.store.read_results`)
or a ``pandas.DataFrame`` with the names of docs/results.md.
"""

from __future__ import annotations

import math
import re
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
import xarray as xr
from matplotlib.axes import Axes
from matplotlib.figure import Figure
from scipy import stats

from tunnelred.common.errors import InputError
from tunnelred.products.plotting import (
    COEFFICIENT_LABELS,
    COVERAGE_FACTOR,
    HOUSE_STYLE,
    house_style,
)
from tunnelred.products.store import atomic_path, read_results, run_table, write_csv

__all__ = [
    "COVERAGE_FACTOR",
    "COMPARED",
    "Sweep",
    "GridCurve",
    "Difference",
    "find_sweeps",
    "alpha_grid",
    "on_grid",
    "difference",
    "hysteresis",
    "repeatability",
    "characteristics",
    "characteristics_table",
    "comparison_table",
    "comparison_section_data",
    "plot_sweeps",
    "plot_difference",
    "run_compare",
]

#: The coefficients compared by default.
COMPARED: tuple[str, ...] = ("CL", "CD", "CM", "C_power")

_BY = ("config", "speed", "re")
_IDEAL_SLOPE = -2.0 * math.pi  # dCL/dα in potential flow (Kutta–Joukowski, DESIGN.md §4)
_RPM_PER_RAD_S = 60.0 / (2.0 * math.pi)

# The figures of characteristics() that carry an uncertainty `u_<figure>` and so can be differenced.
_FIGURES = (
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

_COMPARISON_COLUMNS = (
    "kind",
    "a",
    "b",
    "config_a",
    "config_b",
    "speed_a",
    "speed_b",
    "Re_a",
    "Re_b",
    "leg_a",
    "leg_b",
    "quantity",
    "alpha",
    "delta",
    "u_delta",
    "U_delta",
    "significant",
)


@dataclass(frozen=True, eq=False)
class Sweep:
    """One leg of a spin sweep: runs of one configuration at one nominal speed or Re band.

    Equality is identity: two Sweep objects are the same sweep only if they are one object
    (runs shared between different sweeps are recognised by their run ids instead).

    Attributes
    ----------
    key : str
        Unique label, e.g. ``"bare | 20 m/s | up"`` (a second up leg is ``"up 2"``).
    config : str
        Configuration label.
    speed : float
        Nominal speed: the set speed rounded, else the measured one (median over the band when
        grouped by Re). [m/s]
    Re : float
        Nominal Reynolds number: the band's median when grouped by Re, else the sweep's median. [-]
    runs : tuple of str
        Run ids, ordered by set spin rate (repeats in run order).
    leg : str
        ``"up"`` or ``"down"`` (direction of the set spin rate in time), ``"single"`` when the
        group never reverses.
    leg_index : int
        1 for the first leg of its direction in the group, 2 for the second, …
    arrays : dict of str to numpy.ndarray
        Every numeric result column for these runs, in the order of ``runs``, plus ``spin_point``
        [rpm] (the rounded set spin rate that identifies repeats) and ``order`` (position in run
        order across the whole results).
    """

    key: str
    config: str
    speed: float
    Re: float
    runs: tuple[str, ...]
    leg: str
    leg_index: int
    arrays: dict[str, np.ndarray]


@dataclass(frozen=True, eq=False)
class GridCurve:
    """A sweep's coefficient on an α grid, with its standard uncertainty.

    Attributes
    ----------
    key, name : str
        The sweep's key and the coefficient.
    alpha : numpy.ndarray
        The grid. [-]
    value, u : numpy.ndarray
        Interpolated coefficient and its standard uncertainty (k = 1); NaN where not covered. [-]
    covered : numpy.ndarray of bool
        True where the grid point lies inside the sweep's measured α range.
    runs : tuple of str
        The sweep's run ids.
    sensitivity : numpy.ndarray, shape (grid, runs, 2)
        ∂value/∂C_i and ∂value/∂α_i of every grid value to every run's coefficient and α.
    run_u : numpy.ndarray, shape (runs, 2)
        u(C_i) and u(α_i); 0 for runs left out (a NaN value).
    run_r : numpy.ndarray, shape (runs,)
        Correlation coefficient of C_i with α_i.
    """

    key: str
    name: str
    alpha: np.ndarray
    value: np.ndarray
    u: np.ndarray
    covered: np.ndarray
    runs: tuple[str, ...]
    sensitivity: np.ndarray
    run_u: np.ndarray
    run_r: np.ndarray


@dataclass(frozen=True, eq=False)
class Difference:
    """Δ = a − b of one coefficient on a common α grid.

    Attributes
    ----------
    a, b, name : str
        Keys of the two sweeps and the coefficient.
    alpha : numpy.ndarray
        The grid. [-]
    delta, u : numpy.ndarray
        The difference and its standard uncertainty; NaN where either sweep does not cover. [-]
    covered : numpy.ndarray of bool
        Both sweeps cover the grid point.
    significant : numpy.ndarray of bool
        Covered and |Δ| > k u(Δ).
    k : float
        Coverage factor of the test (2).
    """

    a: str
    b: str
    name: str
    alpha: np.ndarray
    delta: np.ndarray
    u: np.ndarray
    covered: np.ndarray
    significant: np.ndarray
    k: float = COVERAGE_FACTOR


# ---------------------------------------------------------------------------------------------
# Results in, sweeps out


def _table(results) -> pd.DataFrame:
    """Results as a DataFrame with a ``run`` column of str, one row a run."""
    if isinstance(results, xr.Dataset):
        table = run_table(results)
    elif isinstance(results, pd.DataFrame):
        table = results if "run" in results.columns else results.rename_axis("run").reset_index()
        table = table.copy()
    else:
        raise TypeError(f"results must be an xarray.Dataset or a pandas.DataFrame, not {results!r}")
    table["run"] = table["run"].astype(str)
    if "config" not in table:
        table["config"] = ""
    table["config"] = table["config"].fillna("").astype(str)
    return table


def _column(table: pd.DataFrame, name: str) -> np.ndarray:
    if name not in table:
        return np.full(len(table), np.nan)
    return pd.to_numeric(table[name], errors="coerce").to_numpy(dtype=float)


def _in_run_order(table: pd.DataFrame) -> pd.DataFrame:
    """Rows sorted by ``start`` (runs without a start time keep their place after the others)."""
    if "start" in table:
        start = pd.to_datetime(table["start"], utc=True, errors="coerce", format="ISO8601")
        seconds = (start - pd.Timestamp(0, tz="UTC")).dt.total_seconds().to_numpy(dtype=float)
        table = table.iloc[np.argsort(seconds, kind="stable")]
    table = table.reset_index(drop=True)
    table["order"] = np.arange(len(table))
    return table


def _set_points(
    table: pd.DataFrame, speed_resolution: float, spin_resolution: float
) -> tuple[np.ndarray, np.ndarray]:
    """Nominal speed [m/s] and set spin rate [rpm]: set points rounded, else measured values."""
    speed = _column(table, "speed_set")
    speed = np.where(np.isfinite(speed), speed, _column(table, "U"))
    spin = _column(table, "spin_set")
    spin = np.where(np.isfinite(spin), spin, _column(table, "omega") * _RPM_PER_RAD_S)
    return (
        np.round(speed / speed_resolution) * speed_resolution,
        np.round(spin / spin_resolution) * spin_resolution,
    )


def _re_bands(reynolds: np.ndarray, tolerance: float) -> tuple[np.ndarray, np.ndarray]:
    """Band number of every run (−1 without Re) and each band's median Re.

    A band holds the runs within ``tolerance`` of its lowest Re, taken in increasing Re, the same
    rule as tunnelred.products.plotting.group_runs.
    """
    band = np.full(reynolds.size, -1)
    finite = np.flatnonzero(np.isfinite(reynolds))
    lowest = np.nan
    current = -1
    for i in finite[np.argsort(reynolds[finite], kind="stable")]:
        if current < 0 or reynolds[i] > lowest * (1.0 + tolerance):
            current += 1
            lowest = reynolds[i]
        band[i] = current
    medians = np.array([np.median(reynolds[band == b]) for b in range(current + 1)])
    return band, medians


def _legs(spin: np.ndarray) -> list[tuple[str, np.ndarray]]:
    """Legs of a time-ordered sequence of set spin rates: (direction, positions) each.

    Runs at one set point in a row form a plateau; the plateaus change monotonically within a
    leg, and the plateau where the direction reverses belongs to both legs.
    """
    changes = np.flatnonzero(np.diff(spin) != 0)
    plateau = np.concatenate([[0], np.cumsum(np.diff(spin) != 0)])
    levels = spin[np.concatenate([[0], changes + 1])]
    if levels.size == 1:
        return [("single", np.arange(spin.size))]
    step = np.sign(np.diff(levels))
    leg_of_step = np.concatenate([[0], np.cumsum(step[1:] != step[:-1])])
    n_legs = int(leg_of_step[-1]) + 1
    legs = []
    for k in range(n_legs):
        steps = np.flatnonzero(leg_of_step == k)
        members = np.flatnonzero((plateau >= steps[0]) & (plateau <= steps[-1] + 1))
        direction = "single" if n_legs == 1 else ("up" if step[steps[0]] > 0 else "down")
        legs.append((direction, members))
    return legs


def find_sweeps(
    results,
    *,
    by: str = "config",
    speed_resolution: float = 0.5,
    spin_resolution: float = 10.0,
    re_tolerance: float = 0.05,
) -> list[Sweep]:
    """Group the results into sweeps: one configuration, one nominal speed (or Re band), one leg.

    Parameters
    ----------
    results : xarray.Dataset or pandas.DataFrame
        Campaign results: ``run``, ``config``, ``start``, ``speed_set`` [m/s], ``spin_set`` [rpm],
        ``U`` [m/s], ``omega`` [rad/s], ``Re``, and the coefficients with their ``u_``.
    by : {"config", "speed", "re"}
        ``"config"`` and ``"speed"`` group by configuration and nominal speed; ``"re"`` by
        configuration and Reynolds-number band (bands shared by all configurations, so sweeps of
        different configurations at one Re can be matched).
    speed_resolution : float
        Set speeds are rounded to this step. [m/s]
    spin_resolution : float
        Set spin rates are rounded to this step to recognise repeats. [rpm]
    re_tolerance : float
        A Re band holds the runs within this fraction of its lowest Re (``by="re"``). [-]

    Returns
    -------
    list of Sweep
        In order of each group's first run, then leg by leg in time.

    Notes
    -----
    Run order is ``start`` order. A leg is a maximal monotonic stretch of the set spin rate in
    run order: consecutive runs at one set point (repeats) stay in their leg, and the runs at the
    turning point, where the direction reverses, belong to both legs (they are the same runs,
    which :func:`difference` recognises). A group that never reverses is one ``"single"`` leg. A
    campaign that visits spin rates in random order gives many short legs: sort such runs by
    spin rate yourself, one group at a time, before comparing.

    A run without a set speed uses its measured speed U, one without a set spin rate its
    measured ω (in rpm), both rounded as the set points; runs with neither are left out. The
    rounding steps are those of :func:`tunnelred.engine.quality.repeat_disagreement`.

    Examples
    --------
    >>> df = pd.DataFrame({"run": list("abcde"), "config": "bare", "speed_set": 20.0,
    ...                    "spin_set": [0, 300, 600, 300, 0],
    ...                    "start": pd.date_range("2031-05-01", periods=5, freq="h")})
    >>> [(s.leg, s.runs) for s in find_sweeps(df)]
    [('up', ('a', 'b', 'c')), ('down', ('e', 'd', 'c'))]
    """
    if by not in _BY:
        raise ValueError(f"by must be one of {_BY}, not {by!r}")
    table = _in_run_order(_table(results))
    speed, spin = _set_points(table, speed_resolution, spin_resolution)
    reynolds = _column(table, "Re")
    if by == "re":
        band, band_re = _re_bands(reynolds, re_tolerance)
        level = np.where(band >= 0, band, np.nan)
    else:
        level = speed
    usable = np.isfinite(level) & np.isfinite(spin)
    numeric = [
        c
        for c in table.columns
        if pd.api.types.is_numeric_dtype(table[c]) or pd.api.types.is_bool_dtype(table[c])
    ]
    frame = table.assign(_level=level, spin_point=spin)[usable]
    sweeps: list[Sweep] = []
    for (config, lev), group in frame.groupby(["config", "_level"], sort=False):
        rows = group.index.to_numpy()
        if by == "re":
            nominal_re = float(band_re[int(lev)])
            nominal_speed = float(np.median(speed[rows]))
            where = f"Re {nominal_re:.3g}"
        else:
            nominal_re = (
                float(np.nanmedian(reynolds[rows])) if np.isfinite(reynolds[rows]).any() else np.nan
            )
            nominal_speed = float(lev)
            where = f"{nominal_speed:g} m/s"
        seen: dict[str, int] = {}
        for direction, members in _legs(spin[rows]):
            seen[direction] = seen.get(direction, 0) + 1
            label = direction if seen[direction] == 1 else f"{direction} {seen[direction]}"
            picked = rows[members]
            picked = picked[np.lexsort((picked, spin[picked]))]
            arrays = {c: frame.loc[picked, c].to_numpy() for c in [*numeric, "spin_point"]}
            sweeps.append(
                Sweep(
                    key=f"{config} | {where} | {label}",
                    config=str(config),
                    speed=nominal_speed,
                    Re=nominal_re,
                    runs=tuple(table.loc[picked, "run"]),
                    leg=direction,
                    leg_index=seen[direction],
                    arrays=arrays,
                )
            )
    return sweeps


# ---------------------------------------------------------------------------------------------
# Curves on a grid, differences


def _run_errors(sweep: Sweep, name: str):
    """C, u(C), α, u(α), r of every run of the sweep, and which runs are usable for ``name``."""
    arrays = sweep.arrays
    if name not in arrays or f"u_{name}" not in arrays:
        raise KeyError(f"the results have no {name!r} with its u_{name}")
    n = len(sweep.runs)

    def get(key):
        return np.asarray(arrays[key], dtype=float) if key in arrays else np.full(n, np.nan)

    value, u_value = get(name), get(f"u_{name}")
    alpha, u_alpha = get("alpha"), get("u_alpha")
    r = np.nan_to_num(get(f"corr_{name}_alpha"), nan=0.0)
    usable = np.isfinite(value) & np.isfinite(u_value) & np.isfinite(alpha) & np.isfinite(u_alpha)
    zero = ~usable
    return (
        np.where(zero, 0.0, value),
        np.where(zero, 0.0, u_value),
        np.where(zero, 0.0, alpha),
        np.where(zero, 0.0, u_alpha),
        np.where(zero, 0.0, r),
        usable,
    )


def _points(sweep: Sweep, usable: np.ndarray) -> np.ndarray:
    """Averaging matrix P (points × runs): repeats at one set spin rate make one point."""
    spin = np.asarray(sweep.arrays["spin_point"], dtype=float)
    levels, inverse = np.unique(spin[usable], return_inverse=True)
    P = np.zeros((levels.size, spin.size))
    P[inverse, np.flatnonzero(usable)] = 1.0
    return P / np.maximum(P.sum(axis=1, keepdims=True), 1.0)


def _variance(sensitivity: np.ndarray, run_u: np.ndarray, run_r: np.ndarray) -> np.ndarray:
    """Σ_i c_C² u_C² + c_α² u_α² + 2 c_C c_α r u_C u_α over runs (runs independent)."""
    c_value, c_alpha = sensitivity[..., 0], sensitivity[..., 1]
    u_value, u_alpha = run_u[:, 0], run_u[:, 1]
    terms = (
        (c_value * u_value) ** 2
        + (c_alpha * u_alpha) ** 2
        + 2.0 * c_value * c_alpha * run_r * u_value * u_alpha
    )
    # Rounding can leave a tiny negative sum where correlated terms cancel.
    return np.maximum(terms.sum(axis=-1), 0.0)


def _nice_step(step: float) -> float:
    """The largest of 1, 2, 5 × 10ⁿ not above ``step``."""
    exponent = math.floor(math.log10(step))
    mantissa = step / 10.0**exponent
    return (5.0 if mantissa >= 5.0 else 2.0 if mantissa >= 2.0 else 1.0) * 10.0**exponent


def alpha_grid(*sweeps: Sweep, name: str | None = None, step: float | None = None) -> np.ndarray:
    """A common α grid over the overlap of the sweeps' measured α ranges.

    Parameters
    ----------
    *sweeps : Sweep
    name : str, optional
        Use only the runs that have this coefficient.
    step : float, optional
        Grid step; default the median spacing of the most finely spaced sweep, rounded down to
        1, 2 or 5 × 10ⁿ. [-]

    Returns
    -------
    numpy.ndarray
        Multiples of the step inside the overlap (empty when the ranges do not overlap).

    Examples
    --------
    >>> df = pd.DataFrame({"run": list("abc"), "config": "bare", "speed_set": 20.0,
    ...                    "spin_set": [0, 300, 600], "alpha": [0.0, 0.26, 0.52]})
    >>> alpha_grid(*find_sweeps(df)).tolist()
    [0.0, 0.2, 0.4]
    """
    low, high, spacing = -np.inf, np.inf, np.inf
    for sweep in sweeps:
        alpha = np.asarray(sweep.arrays.get("alpha", np.full(len(sweep.runs), np.nan)), float)
        usable = np.isfinite(alpha)
        if name is not None:
            usable &= _run_errors(sweep, name)[-1]
        points = np.sort(_points(sweep, usable) @ np.where(usable, alpha, 0.0))
        if points.size < 2:
            return np.array([])
        low, high = max(low, points[0]), min(high, points[-1])
        spacing = min(spacing, float(np.median(np.diff(points))))
    if not high >= low or not spacing > 0:
        return np.array([])
    step = _nice_step(spacing) if step is None else float(step)
    first, last = math.ceil(low / step - 1e-9), math.floor(high / step + 1e-9)
    # Multiples of the step, rounded so that 0.1 × 3 prints and matches as 0.3.
    grid = np.round(np.arange(first, last + 1) * step, 12)
    return grid[(grid >= low) & (grid <= high)]


def on_grid(sweep: Sweep, name: str, grid) -> GridCurve:
    """A sweep's coefficient interpolated onto an α grid, with its uncertainty band.

    Parameters
    ----------
    sweep : Sweep
    name : str
        The coefficient (``"CL"``, ``"CD"``, ``"CM"``, ``"C_power"``, …); ``u_<name>`` must exist.
    grid : array_like
        Spin ratios to evaluate at. [-]

    Returns
    -------
    GridCurve
        Values and standard uncertainties, NaN outside the sweep's α range (``covered`` False).

    Notes
    -----
    Repeats at one set spin rate are first averaged into one point (mean C, mean α). Between
    neighbouring points 1 and 2 in α the curve is piecewise linear,
    C(g) = w C₁ + (1 − w) C₂ with w = (α₂ − g)/(α₂ − α₁). Each point's α is itself uncertain,
    which moves the point along the curve, so with the local (segment) slope
    s = (C₂ − C₁)/(α₂ − α₁) a point's effective uncertainty at fixed α is

        u_eff² = u_C² + s² u_α² − 2 s r u_C u_α,

    r the correlation of C with α within the run (``corr_<name>_alpha``; 0 when the results do
    not give it). The runs are independent, so u²(C(g)) = w² u²_eff,1 + (1 − w)² u²_eff,2. This
    is the first-order (GUM) propagation of C(g) through C₁, C₂, α₁ and α₂ exactly, including
    the dependence of w on α₁ and α₂. At a grid point on a run, the slope is that of the segment
    to its right (to its left at the last point).

    Being first order, the band holds while u(α) is small against the α spacing of neighbouring
    set points: by Monte Carlo on a straight line, u(α) at 2.4 % of the spacing leaves the
    sampled variance within 2 % of the band's, at 12 % it is up to 16 % off (larger between
    runs, smaller next to one).

    Assumptions: the curve is linear between neighbouring set points (a curvature error of order
    C''Δα²/8 is not in u); type-B components shared between runs (balance calibration, geometry)
    are treated as independent, which over-states u of an interpolated value slightly and
    cancels nothing in a difference. Nothing is extrapolated: outside the measured α range the
    curve is NaN; a sweep with fewer than two set points covers nothing.

    References
    ----------
    .. [1] JCGM 100:2008, *Evaluation of measurement data — Guide to the expression of
       uncertainty in measurement* (GUM), §5.2 (correlated input quantities).

    Examples
    --------
    >>> df = pd.DataFrame({"run": ["a", "b"], "config": "bare", "speed_set": 20.0,
    ...     "spin_set": [0, 600], "alpha": [0.0, 0.5], "u_alpha": [0.0, 0.0],
    ...     "CL": [0.0, -3.0], "u_CL": [0.1, 0.1]})
    >>> curve = on_grid(find_sweeps(df)[0], "CL", [0.25, 0.75])
    >>> curve.value.tolist(), curve.covered.tolist()
    ([-1.5, nan], [True, False])
    >>> round(float(curve.u[0]), 4)  # sqrt(0.5² + 0.5²) × 0.1
    0.0707
    """
    grid = np.atleast_1d(np.asarray(grid, dtype=float))
    value, u_value, alpha, u_alpha, r, usable = _run_errors(sweep, name)
    n = len(sweep.runs)
    sensitivity = np.zeros((grid.size, n, 2))
    curve = np.full(grid.size, np.nan)
    u = np.full(grid.size, np.nan)
    P = _points(sweep, usable)
    covered = np.zeros(grid.size, dtype=bool)
    if P.shape[0] >= 2:
        point_alpha, point_value = P @ alpha, P @ value
        order = np.argsort(point_alpha)
        pa, pv, Ps = point_alpha[order], point_value[order], P[order]
        covered = np.isfinite(grid) & (grid >= pa[0]) & (grid <= pa[-1])
        g = grid[covered]
        i = np.clip(np.searchsorted(pa, g, side="right") - 1, 0, pa.size - 2)
        span = pa[i + 1] - pa[i]
        w = (pa[i + 1] - g) / span
        slope = (pv[i + 1] - pv[i]) / span
        curve[covered] = w * pv[i] + (1.0 - w) * pv[i + 1]
        weights = w[:, None] * Ps[i] + (1.0 - w)[:, None] * Ps[i + 1]
        sensitivity[covered, :, 0] = weights
        sensitivity[covered, :, 1] = -slope[:, None] * weights
        run_u = np.column_stack([u_value, u_alpha])
        u[covered] = np.sqrt(_variance(sensitivity[covered], run_u, r))
    return GridCurve(
        key=sweep.key,
        name=name,
        alpha=grid,
        value=curve,
        u=u,
        covered=covered,
        runs=sweep.runs,
        sensitivity=sensitivity,
        run_u=np.column_stack([u_value, u_alpha]),
        run_r=r,
    )


def _curve_difference(ca: GridCurve, cb: GridCurve) -> Difference:
    runs = list(dict.fromkeys(ca.runs + cb.runs))
    index = {run: k for k, run in enumerate(runs)}
    ia = np.array([index[run] for run in ca.runs], dtype=int)
    ib = np.array([index[run] for run in cb.runs], dtype=int)
    sensitivity = np.zeros((ca.alpha.size, len(runs), 2))
    run_u = np.zeros((len(runs), 2))
    run_r = np.zeros(len(runs))
    # A run in both curves is one measurement: its sensitivities subtract, so its errors cancel.
    np.add.at(sensitivity, (slice(None), ia), ca.sensitivity)
    np.subtract.at(sensitivity, (slice(None), ib), cb.sensitivity)
    run_u[ia], run_r[ia] = ca.run_u, ca.run_r
    run_u[ib], run_r[ib] = cb.run_u, cb.run_r
    covered = ca.covered & cb.covered
    delta = np.where(covered, ca.value - cb.value, np.nan)
    u = np.where(covered, np.sqrt(_variance(sensitivity, run_u, run_r)), np.nan)
    significant = covered & (np.abs(np.nan_to_num(delta)) > COVERAGE_FACTOR * np.nan_to_num(u))
    return Difference(
        a=ca.key,
        b=cb.key,
        name=ca.name,
        alpha=ca.alpha,
        delta=delta,
        u=u,
        covered=covered,
        significant=significant,
    )


def difference(a: Sweep, b: Sweep, name: str, *, grid=None) -> Difference:
    """The difference a − b of one coefficient of two sweeps on a common α grid.

    Parameters
    ----------
    a, b : Sweep
        The sweep and the reference it is compared with.
    name : str
        The coefficient.
    grid : array_like, optional
        Spin ratios; default :func:`alpha_grid` over the overlap of the two sweeps. [-]

    Returns
    -------
    Difference
        Δ, u(Δ), and where |Δ| > 2 u(Δ) (k = 2).

    Notes
    -----
    Both curves are interpolated as in :func:`on_grid`; each grid value is a linear combination
    of its runs' errors (δC_i, δα_i). Δ is the difference of those combinations: a run that
    belongs to both sweeps is one measurement, so its errors cancel instead of adding, and a
    sweep minus itself gives Δ = 0 with u(Δ) = 0 and nothing significant. Runs of different
    sweeps are taken as independent (conservative where they share type-B components).

    References
    ----------
    .. [1] JCGM 100:2008 (GUM), §5.2 (correlated input quantities).
    .. [2] ISO 13528:2022, *Statistical methods for use in proficiency testing by interlaboratory
       comparison* (E_n numbers: a difference judged against its expanded uncertainty).

    Examples
    --------
    >>> df = pd.DataFrame({"run": list("abcd"), "config": ["A", "A", "B", "B"],
    ...     "speed_set": 20.0, "spin_set": [0, 600, 0, 600], "alpha": [0.0, 0.5, 0.0, 0.5],
    ...     "u_alpha": 0.0, "CL": [0.0, -3.0, 0.0, -2.0], "u_CL": 0.1})
    >>> a, b = find_sweeps(df)
    >>> d = difference(b, a, "CL", grid=[0.5])
    >>> round(float(d.delta[0]), 6), round(float(d.u[0]), 4), bool(d.significant[0])
    (1.0, 0.1414, True)
    """
    if grid is None:
        grid = alpha_grid(a, b, name=name)
    return _curve_difference(on_grid(a, name, grid), on_grid(b, name, grid))


def hysteresis(sweep_up: Sweep, sweep_down: Sweep, name: str, *, grid=None) -> Difference:
    """Up leg minus down leg of one coefficient, on the overlap of their α ranges.

    Parameters
    ----------
    sweep_up, sweep_down : Sweep
        Two legs of one configuration and speed (:func:`find_sweeps`).
    name : str
        The coefficient.
    grid : array_like, optional
        Spin ratios; default :func:`alpha_grid` over the overlap. [-]

    Returns
    -------
    Difference

    Notes
    -----
    As :func:`difference`: the runs at the turning point belong to both legs and their errors
    cancel in Δ there, so hysteresis is judged on the runs that differ.

    Examples
    --------
    >>> df = pd.DataFrame({"run": list("abc"), "config": "A", "speed_set": 20.0,
    ...     "spin_set": [0, 600, 0], "alpha": [0.0, 0.5, 0.0], "u_alpha": 0.0,
    ...     "CL": [0.0, -3.0, -0.4], "u_CL": 0.1,
    ...     "start": ["2031-05-01T10:00", "2031-05-01T11:00", "2031-05-01T12:00"]})
    >>> up, down = find_sweeps(df)
    >>> hysteresis(up, down, "CL", grid=[0.0, 0.5]).delta.tolist()
    [0.4, 0.0]
    """
    return difference(sweep_up, sweep_down, name, grid=grid)


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
    missing = [c for c in pool_by if c not in by]
    if missing:
        raise ValueError(f"pool_by must be a subset of by; {missing} are not in {list(by)}")
    table = _table(results)
    speed, spin = _set_points(table, speed_resolution, spin_resolution)
    table = table.assign(speed_set=speed, spin_set=spin)
    columns = [*pool_by, "quantity", "set_points", "runs", "dof", "s_pooled", "u_stated"]
    columns += ["ratio", "p_value"]
    rows = []
    for name in names:
        if name not in table or f"u_{name}" not in table:
            continue
        values = table.assign(_x=_column(table, name), _u2=_column(table, f"u_{name}") ** 2)
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
    if not _has(sweep, "CL"):
        return np.nan, np.nan, 0
    value, u_value, alpha, u_alpha, r, usable = _run_errors(sweep, "CL")
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
    value, u_value, alpha, u_alpha, r, usable = _run_errors(sweep, "C_power")
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


# ---------------------------------------------------------------------------------------------
# Campaign-level comparison


def _pairs(sweeps: list[Sweep], by: str, reference) -> list[tuple[Sweep, Sweep]]:
    """(sweep, reference sweep) pairs: configurations at one speed or Re band, or speeds of one
    configuration; legs of the same direction and number, or any leg against a single one."""
    if by == "speed":
        match, compared = (lambda s: s.config), (lambda s: s.speed)
    elif by == "re":
        match, compared = (lambda s: s.Re), (lambda s: s.config)
    else:
        match, compared = (lambda s: s.speed), (lambda s: s.config)
    groups: dict = {}
    for sweep in sweeps:
        groups.setdefault(match(sweep), []).append(sweep)
    pairs = []
    for members in groups.values():
        values = list(dict.fromkeys(compared(s) for s in members))
        base = reference if reference in values else values[0]
        for s in members:
            if compared(s) == base:
                continue
            for ref in members:
                if compared(ref) != base:
                    continue
                if (s.leg, s.leg_index) == (ref.leg, ref.leg_index) or "single" in (s.leg, ref.leg):
                    pairs.append((s, ref))
    return pairs


def _hysteresis_pairs(sweeps: list[Sweep]) -> list[tuple[Sweep, Sweep]]:
    groups: dict = {}
    for sweep in sweeps:
        groups.setdefault((sweep.config, sweep.speed, sweep.Re), []).append(sweep)
    pairs = []
    for members in groups.values():
        ups = {s.leg_index: s for s in members if s.leg == "up"}
        downs = {s.leg_index: s for s in members if s.leg == "down"}
        pairs += [(ups[i], downs[i]) for i in ups if i in downs]
    return pairs


def _difference_rows(kind: str, a: Sweep, b: Sweep, d: Difference) -> pd.DataFrame:
    keep = d.covered
    return pd.DataFrame(
        {
            "kind": kind,
            "a": a.key,
            "b": b.key,
            "config_a": a.config,
            "config_b": b.config,
            "speed_a": a.speed,
            "speed_b": b.speed,
            "Re_a": a.Re,
            "Re_b": b.Re,
            "leg_a": a.leg,
            "leg_b": b.leg,
            "quantity": d.name,
            "alpha": d.alpha[keep],
            "delta": d.delta[keep],
            "u_delta": d.u[keep],
            "U_delta": d.k * d.u[keep],
            "significant": d.significant[keep],
        }
    )


def _figure_rows(kind: str, a: Sweep, b: Sweep, fa: dict, fb: dict) -> pd.DataFrame:
    names = [f for f in _FIGURES if f in fa and f in fb]
    delta = np.array([fa[f] - fb[f] for f in names], dtype=float)
    u = np.hypot([fa[f"u_{f}"] for f in names], [fb[f"u_{f}"] for f in names])
    return pd.DataFrame(
        {
            "kind": kind,
            "a": a.key,
            "b": b.key,
            "config_a": a.config,
            "config_b": b.config,
            "speed_a": a.speed,
            "speed_b": b.speed,
            "Re_a": a.Re,
            "Re_b": b.Re,
            "leg_a": a.leg,
            "leg_b": b.leg,
            "quantity": names,
            "alpha": np.nan,
            "delta": delta,
            "u_delta": u,
            "U_delta": COVERAGE_FACTOR * u,
            "significant": np.abs(delta) > COVERAGE_FACTOR * u,
        }
    )


def _has(sweep: Sweep, name: str) -> bool:
    return (
        name in sweep.arrays
        and f"u_{name}" in sweep.arrays
        and bool(np.isfinite(np.asarray(sweep.arrays[name], dtype=float)).any())
    )


def comparison_table(
    results,
    *,
    by: str = "config",
    names: Sequence[str] = COMPARED,
    reference=None,
    slope_range: tuple[float, float] = (0.0, 0.5),
    power_level: float | None = None,
) -> pd.DataFrame:
    """Every comparison of the campaign as one long table: curve differences and figure differences.

    Parameters
    ----------
    results : xarray.Dataset or pandas.DataFrame
    by : {"config", "speed", "re"}
        ``"config"``: each configuration against the reference configuration at the same
        nominal speed; ``"speed"``: each speed of a configuration against its reference speed;
        ``"re"``: each configuration against the reference one in the same Re band.
    names : sequence of str
        Coefficients compared; one missing from the results is skipped.
    reference : str or float, optional
        The reference configuration (``by="config"`` or ``"re"``) or speed [m/s]
        (``by="speed"``); default the first in run order within each group.
    slope_range, power_level
        As :func:`characteristics`.

    Returns
    -------
    pandas.DataFrame
        One row per difference: ``kind`` (``by``, or ``"hysteresis"`` for up minus down legs of
        one sweep), ``a``, ``b`` (sweep keys; Δ = a − b), ``config_a``, ``config_b``,
        ``speed_a``, ``speed_b`` [m/s], ``Re_a``, ``Re_b``, ``leg_a``, ``leg_b``, ``quantity``,
        ``alpha`` (the grid point; NaN for a characteristic figure), ``delta``, ``u_delta``
        (k = 1), ``U_delta`` (k = 2) and ``significant`` (|Δ| > U_delta). Curve rows lie on the
        :func:`alpha_grid` of each pair's overlap; figure rows hold the differences of
        :func:`characteristics` (the two sweeps share no runs, so their u add in quadrature).

    Notes
    -----
    Legs are paired by direction and number (up with up, down with down); a ``"single"`` leg
    pairs with any leg of the other side.

    Examples
    --------
    >>> df = pd.DataFrame({"run": list("abcd"), "config": ["A", "A", "B", "B"],
    ...     "speed_set": 20.0, "spin_set": [0, 600, 0, 600], "alpha": [0.0, 0.5, 0.0, 0.5],
    ...     "u_alpha": 0.0, "CL": [0.0, -3.0, 0.0, -2.0], "u_CL": 0.1})
    >>> table = comparison_table(df, names=["CL"])
    >>> table[table.quantity == "CL"][["alpha", "delta"]].round(6).values.tolist()
    [[0.0, 0.0], [0.5, 1.0]]
    """
    sweeps = find_sweeps(results, by=by)
    parts = []
    figures = {
        s.key: characteristics(s, slope_range=slope_range, power_level=power_level) for s in sweeps
    }
    for kind, pairs in (
        (by, _pairs(sweeps, by, reference)),
        ("hysteresis", _hysteresis_pairs(sweeps)),
    ):
        for a, b in pairs:
            for name in names:
                if _has(a, name) and _has(b, name):
                    parts.append(_difference_rows(kind, a, b, difference(a, b, name)))
            if kind != "hysteresis":
                parts.append(_figure_rows(kind, a, b, figures[a.key], figures[b.key]))
    parts = [p for p in parts if not p.empty]
    if not parts:
        return pd.DataFrame(columns=list(_COMPARISON_COLUMNS))
    return pd.concat(parts, ignore_index=True)[list(_COMPARISON_COLUMNS)]


def comparison_section_data(results, *, reference: str | None = None) -> pd.DataFrame:
    """ΔCL and ΔCD between configurations per α grid point, for the report's comparison section.

    Parameters
    ----------
    results : xarray.Dataset or pandas.DataFrame
    reference : str, optional
        The reference configuration; default the first in run order at each speed.

    Returns
    -------
    pandas.DataFrame
        Columns ``config``, ``reference``, ``speed`` [m/s], ``leg``, ``alpha``, and for X in CL,
        CD: ``dX`` (config − reference), ``u_dX`` (k = 1) and ``sig_dX`` (|ΔX| > 2u). Empty
        (with these columns) when the campaign has a single configuration.

    Examples
    --------
    >>> df = pd.DataFrame({"run": list("ab"), "config": "A", "speed_set": 20.0,
    ...     "spin_set": [0, 600], "alpha": [0.0, 0.5], "u_alpha": 0.0,
    ...     "CL": [0.0, -3.0], "u_CL": 0.1, "CD": 1.0, "u_CD": 0.05})
    >>> comparison_section_data(df).empty
    True
    """
    columns = ["config", "reference", "speed", "leg", "alpha"]
    columns += [f"{p}{x}" for x in ("CL", "CD") for p in ("d", "u_d", "sig_d")]
    table = comparison_table(results, by="config", names=("CL", "CD"), reference=reference)
    curves = table[(table["kind"] == "config") & table["alpha"].notna()]
    if curves.empty:
        return pd.DataFrame(columns=columns)
    keys = ["config_a", "config_b", "speed_a", "leg_a", "alpha"]
    wide = curves.pivot_table(
        index=keys, columns="quantity", values=["delta", "u_delta", "significant"], aggfunc="first"
    )
    out = pd.DataFrame(index=wide.index).reset_index()
    out.columns = columns[:5]
    for x in ("CL", "CD"):
        for prefix, source in (("d", "delta"), ("u_d", "u_delta"), ("sig_d", "significant")):
            if (source, x) in wide.columns:
                out[f"{prefix}{x}"] = wide[(source, x)].to_numpy()
            else:
                out[f"{prefix}{x}"] = np.nan
    for x in ("CL", "CD"):
        out[f"sig_d{x}"] = out[f"sig_d{x}"].fillna(False).astype(bool)
    return out[columns]


# ---------------------------------------------------------------------------------------------
# Figures and the command


def _axes(ax: Axes | None) -> Axes:
    if ax is not None:
        return ax
    return Figure(figsize=(6.4, 4.4), layout="constrained").add_subplot()


def plot_sweeps(sweeps: Sequence[Sweep], name: str, *, ax: Axes | None = None) -> Axes:
    """Sweeps of one coefficient overlaid: the runs, and each curve with its k = 2 band.

    Parameters
    ----------
    sweeps : sequence of Sweep
    name : str
        The coefficient.
    ax : matplotlib.axes.Axes, optional
        Where to draw; a new one when None.

    Returns
    -------
    matplotlib.axes.Axes
        One line (labelled with the sweep key) and one band per sweep that has ``name``.
    """
    k = COVERAGE_FACTOR
    with house_style():
        ax = _axes(ax)
        for i, sweep in enumerate(s for s in sweeps if _has(s, name)):
            style = HOUSE_STYLE[i % len(HOUSE_STYLE)]
            alpha = np.asarray(sweep.arrays["alpha"], dtype=float)
            lo, hi = np.nanmin(alpha), np.nanmax(alpha)
            curve = on_grid(sweep, name, np.linspace(lo, hi, 101))
            ax.fill_between(
                curve.alpha,
                curve.value - k * curve.u,
                curve.value + k * curve.u,
                color=style.color,
                alpha=0.2,
                linewidth=0,
            )
            ax.plot(
                curve.alpha,
                curve.value,
                color=style.color,
                linestyle=style.linestyle,
                label=sweep.key,
            )
            ax.plot(
                alpha,
                np.asarray(sweep.arrays[name], dtype=float),
                color=style.color,
                marker=style.marker,
                linestyle="none",
            )
        ax.set_xlabel(COEFFICIENT_LABELS["alpha"])
        ax.set_ylabel(COEFFICIENT_LABELS.get(name, name))
        ax.set_title(f"{name}: sweeps, bands k = 2")
        if ax.get_legend_handles_labels()[0]:
            ax.legend(loc="best")
    return ax


def plot_difference(d: Difference, *, ax: Axes | None = None) -> Axes:
    """A difference against α with its k = 2 band; significant points filled, others open.

    Parameters
    ----------
    d : Difference
    ax : matplotlib.axes.Axes, optional

    Returns
    -------
    matplotlib.axes.Axes
        Artists labelled ``"significant (k = 2)"`` and ``"not significant"``.
    """
    style = HOUSE_STYLE[0]
    k = d.k
    with house_style():
        ax = _axes(ax)
        ax.axhline(0.0, color="#777777", linewidth=0.8)
        ax.fill_between(
            d.alpha, d.delta - k * d.u, d.delta + k * d.u, color=style.color, alpha=0.2, linewidth=0
        )
        ax.plot(d.alpha, d.delta, color=style.color, linestyle=style.linestyle)
        sig, plain = d.significant, d.covered & ~d.significant
        ax.plot(
            d.alpha[sig],
            d.delta[sig],
            linestyle="none",
            marker=style.marker,
            color=style.color,
            label=f"significant (k = {k:g})",
        )
        ax.plot(
            d.alpha[plain],
            d.delta[plain],
            linestyle="none",
            marker=style.marker,
            markerfacecolor="white",
            color=style.color,
            label="not significant",
        )
        ax.set_xlabel(COEFFICIENT_LABELS["alpha"])
        ax.set_ylabel(f"Δ{d.name}")
        ax.set_title(f"Δ{d.name} = [{d.a}] − [{d.b}]", fontsize=8)
        ax.legend(loc="best")
    return ax


def _slug(text: str) -> str:
    return re.sub(r"[^A-Za-z0-9.]+", "-", text).strip("-") or "x"


def _save(ax: Axes, path: Path) -> Path:
    with atomic_path(path) as tmp:
        ax.figure.savefig(tmp, format="png", dpi=150)
    return path


def _read_folder(path: Path) -> pd.DataFrame:
    if (path / "results.nc").is_file():
        return _table(read_results(path))
    if (path / "results.csv").is_file():
        return _table(pd.read_csv(path / "results.csv"))
    raise InputError.single(
        path,
        None,
        None,
        "a results folder holding results.nc or results.csv",
        "neither" if path.is_dir() else "no such folder",
        "Reduce the campaign first: tunnelred reduce CAMPAIGN -o OUT.",
    )


def _combined(out_dirs: Sequence[Path]) -> pd.DataFrame:
    """One table of several results folders, run ids and configurations prefixed by folder."""
    tables = [_read_folder(p) for p in out_dirs]
    if len(tables) == 1:
        return tables[0]
    labels: list[str] = []
    for p in out_dirs:
        label = p.resolve().name
        while label in labels:
            label = f"{label}+"
        labels.append(label)
    prefixed = [
        t.assign(campaign=label, run=label + ":" + t["run"], config=label + ":" + t["config"])
        for label, t in zip(labels, tables, strict=True)
    ]
    return pd.concat(prefixed, ignore_index=True)


def run_compare(
    out_dirs,
    *,
    by: str = "config",
    dest,
    names: Sequence[str] = COMPARED,
    power_level: float | None = None,
) -> dict[str, Path]:
    """Compare the runs of one or several results folders and write tables and figures.

    Parameters
    ----------
    out_dirs : path-like or sequence of path-like
        Results folders of ``tunnelred reduce`` (results.nc, else results.csv).
    by : {"config", "speed", "re"}
        What is compared (:func:`comparison_table`).
    dest : path-like
        Output folder; made if missing.
    names : sequence of str
        Coefficients compared.
    power_level : float, optional
        Power coefficient whose crossing α is reported. [-]

    Returns
    -------
    dict of str to Path
        Name relative to ``dest`` → path: ``comparison.csv`` (:func:`comparison_table`),
        ``characteristics.csv`` (:func:`characteristics_table`), ``figures/sweeps_*.png`` (one a
        compared group and coefficient) and ``figures/delta_*.png`` (one a compared pair and
        coefficient). Every file is written atomically.

    Notes
    -----
    With several folders (several campaigns or tunnel entries), run ids and configuration labels
    are prefixed with the folder's name (``entry1:bare``), so that the same configuration in two
    entries is compared like two configurations; the column ``campaign`` keeps the folder name.
    A folder without results raises :class:`tunnelred.common.errors.InputError`.
    """
    if isinstance(out_dirs, str | Path):
        out_dirs = [out_dirs]
    folders = [Path(p) for p in out_dirs]
    if by not in _BY:
        raise ValueError(f"by must be one of {_BY}, not {by!r}")
    table = _combined(folders)
    dest = Path(dest)
    written: dict[str, Path] = {}
    comparison = comparison_table(table, by=by, names=names, power_level=power_level)
    written["comparison.csv"] = write_csv(comparison, dest / "comparison.csv")
    figures = characteristics_table(table, by=by, power_level=power_level)
    written["characteristics.csv"] = write_csv(figures, dest / "characteristics.csv")
    sweeps = find_sweeps(table, by=by)
    groups: dict[str, list[Sweep]] = {}
    for sweep in sweeps:
        label = (
            sweep.config
            if by == "speed"
            else (f"Re {sweep.Re:.3g}" if by == "re" else f"{sweep.speed:g} m/s")
        )
        groups.setdefault(label, []).append(sweep)
    for label, members in groups.items():
        for name in names:
            if any(_has(s, name) for s in members):
                rel = f"figures/sweeps_{name}_{_slug(label)}.png"
                written[rel] = _save(plot_sweeps(members, name), dest / rel)
    by_key = {s.key: s for s in sweeps}
    pairs = comparison[comparison["alpha"].notna()][["kind", "a", "b", "quantity"]]
    for kind, a, b, name in pairs.drop_duplicates().itertuples(index=False):
        d = difference(by_key[a], by_key[b], name)
        rel = f"figures/delta_{name}_{_slug(a)}_minus_{_slug(b)}.png"
        if kind == "hysteresis":
            rel = f"figures/hysteresis_{name}_{_slug(a)}.png"
        written[rel] = _save(plot_difference(d), dest / rel)
    return written
