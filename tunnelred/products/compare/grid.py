"""Curves on an α grid and their differences, every value a linear combination of run errors.

Coefficients of a sweep are interpolated onto a grid of spin ratio α (:func:`on_grid`), with the
uncertainty of α carried along the curve and the interpolation error (from the local curvature)
in u; no grid point lies between two measured points farther apart than a stated gap. Two sweeps
on one grid give a :class:`Difference`, significant at k = 2 where |Δ| > 2u(Δ).

Every grid value is kept as a linear combination of the runs' own errors (their sensitivity
coefficients), so a difference of two curves that share runs — a sweep with itself, or the two
legs of a sweep at their common turning point — lets the shared errors cancel exactly instead of
adding them as if independent. Differences at measured spin ratios, paired within a tolerance,
are :mod:`tunnelred.products.compare.paired`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from tunnelred.physics.interpolation import curvature_at_points
from tunnelred.products.compare.sweeps import Sweep, gap_limit, point_alpha
from tunnelred.products.plotting import COVERAGE_FACTOR

__all__ = [
    "Difference",
    "GridCurve",
    "alpha_grid",
    "curve_difference",
    "difference",
    "interpolate",
    "on_grid",
    "point_runs",
    "points",
    "run_errors",
]


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
        Interpolated coefficient and its standard uncertainty (k = 1), the interpolation error
        included; NaN where not covered. [-]
    covered : numpy.ndarray of bool
        True where the grid point lies inside the sweep's measured α range, between measured
        points no farther apart than the gap allowed (or on a measured point), and the
        interpolation error can be stated.
    runs : tuple of str
        The sweep's run ids.
    sensitivity : numpy.ndarray, shape (grid, runs, 2)
        ∂value/∂C_i and ∂value/∂α_i of every grid value to every run's coefficient and α.
    run_u : numpy.ndarray, shape (runs, 2)
        u(C_i) and u(α_i); 0 for runs left out (a NaN value, or flagged).
    run_r : numpy.ndarray, shape (runs,)
        Correlation coefficient of C_i with α_i.
    curvature : numpy.ndarray
        |C''| taken for the segment of each grid point: the larger of the second divided
        differences at its two ends (NaN where the sweep has fewer than three points). [-]
    spread : numpy.ndarray
        ½ |g − α₁| |α₂ − g| of each grid point g in its segment (α₁, α₂); 0 on a measured point.
    u_interp : numpy.ndarray
        The interpolation error taken as a standard uncertainty, curvature × spread. [-]
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
    curvature: np.ndarray
    spread: np.ndarray
    u_interp: np.ndarray


@dataclass(frozen=True, eq=False)
class Difference:
    """Δ = a − b of one coefficient, on a common α grid or at paired measured spin ratios.

    Attributes
    ----------
    a, b, name : str
        Keys of the two sweeps and the coefficient.
    alpha : numpy.ndarray
        Where Δ is stated: the grid, or the mean α of each pair of measured points. [-]
    delta, u : numpy.ndarray
        The difference and its standard uncertainty; NaN where not covered. [-]
    covered : numpy.ndarray of bool
        Both sweeps cover the point.
    significant : numpy.ndarray of bool
        Covered and |Δ| > k u(Δ).
    alpha_a, alpha_b : numpy.ndarray
        The measured α of the paired points of a and b (``method="paired"``); the grid itself
        for ``"grid"``. [-]
    u_interp : numpy.ndarray
        The part of u(Δ) from interpolation (both curves' curvature terms in quadrature). [-]
    method : str
        ``"grid"`` (:func:`difference`) or ``"paired"``
        (:func:`tunnelred.products.compare.paired.paired_difference`).
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
    alpha_a: np.ndarray
    alpha_b: np.ndarray
    u_interp: np.ndarray
    method: str = "grid"
    k: float = COVERAGE_FACTOR


# ---------------------------------------------------------------------------------------------
# Curves on a grid, differences


def run_errors(sweep: Sweep, name: str, *, include_flagged: bool = True):
    """C, u(C), α, u(α), r of every run of the sweep, and which runs are usable for ``name``.

    With ``include_flagged=False`` a run that raised a quality flag is not usable.
    """
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
    if not include_flagged and "flagged" in arrays:
        usable &= ~np.asarray(arrays["flagged"], dtype=bool)
    zero = ~usable
    return (
        np.where(zero, 0.0, value),
        np.where(zero, 0.0, u_value),
        np.where(zero, 0.0, alpha),
        np.where(zero, 0.0, u_alpha),
        np.where(zero, 0.0, r),
        usable,
    )


def points(sweep: Sweep, usable: np.ndarray) -> np.ndarray:
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


def alpha_grid(
    *sweeps: Sweep,
    name: str | None = None,
    step: float | None = None,
    include_flagged: bool = True,
) -> np.ndarray:
    """A common α grid over the overlap of the sweeps' measured α ranges.

    Parameters
    ----------
    *sweeps : Sweep
    name : str, optional
        Use only the runs that have this coefficient.
    step : float, optional
        Grid step; default the median spacing of the most finely spaced sweep, rounded down to
        1, 2 or 5 × 10ⁿ. [-]
    include_flagged : bool
        Count flagged runs among the measured points.

    Returns
    -------
    numpy.ndarray
        Multiples of the step inside the overlap (empty when the ranges do not overlap).

    Examples
    --------
    >>> import pandas as pd
    >>> from tunnelred.products.compare.sweeps import find_sweeps
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
            usable &= run_errors(sweep, name, include_flagged=include_flagged)[-1]
        measured = np.sort(points(sweep, usable) @ np.where(usable, alpha, 0.0))
        if measured.size < 2:
            return np.array([])
        low, high = max(low, measured[0]), min(high, measured[-1])
        spacing = min(spacing, float(np.median(np.diff(measured))))
    if not high >= low or not spacing > 0:
        return np.array([])
    step = _nice_step(spacing) if step is None else float(step)
    first, last = math.ceil(low / step - 1e-9), math.floor(high / step + 1e-9)
    # Multiples of the step, rounded so that 0.1 × 3 prints and matches as 0.3.
    grid = np.round(np.arange(first, last + 1) * step, 12)
    return grid[(grid >= low) & (grid <= high)]


def point_runs(sweep: Sweep, P: np.ndarray) -> list[frozenset[str]]:
    """The run ids averaged into each point (row) of the averaging matrix ``P``."""
    return [frozenset(sweep.runs[j] for j in np.flatnonzero(row)) for row in P]


def interpolate(
    sweep: Sweep,
    name: str,
    grid,
    *,
    max_gap: float | None = None,
    reach: float = 0.0,
    include_flagged: bool = False,
) -> GridCurve:
    """The sweep's piecewise-linear curve at ``grid``, covering what the data support.

    A grid point is covered when it lies in the measured α range widened by ``reach`` on both
    sides (beyond the ends the end segment is extended), and either its segment is no wider
    than ``max_gap`` or it lies within ``reach`` of a measured point, and the interpolation error
    can be stated (it is 0 on a measured point). Where it cannot (a sweep of two points), the
    value is given with ``u_interp`` and ``u`` NaN: :func:`on_grid` leaves such points
    uncovered, :func:`curve_difference` may take the curvature from the other curve.
    """
    grid = np.atleast_1d(np.asarray(grid, dtype=float))
    value, u_value, alpha, u_alpha, r, usable = run_errors(
        sweep, name, include_flagged=include_flagged
    )
    n = len(sweep.runs)
    sensitivity = np.zeros((grid.size, n, 2))
    curve, u = np.full(grid.size, np.nan), np.full(grid.size, np.nan)
    curvature, spread = np.full(grid.size, np.nan), np.full(grid.size, np.nan)
    u_interp = np.full(grid.size, np.nan)
    P = points(sweep, usable)
    covered = np.zeros(grid.size, dtype=bool)
    if P.shape[0] >= 2:
        point_alpha, point_value = P @ alpha, P @ value
        order = np.argsort(point_alpha)
        pa, pv, Ps = point_alpha[order], point_value[order], P[order]
        finite = np.isfinite(grid)
        g_all = np.where(finite, grid, pa[0])
        i = np.clip(np.searchsorted(pa, g_all, side="right") - 1, 0, pa.size - 2)
        span = pa[i + 1] - pa[i]
        limit = gap_limit([pa], max_gap)
        nearest = np.min(np.abs(g_all[:, None] - pa[None, :]), axis=1)
        kappa_points = curvature_at_points(pa, pv)
        # The larger curvature of the segment's two ends (fmax: NaN only where both are).
        kappa = np.fmax(kappa_points[i], kappa_points[i + 1])
        half_product = 0.5 * np.abs(g_all - pa[i]) * np.abs(pa[i + 1] - g_all)
        interp = np.where(half_product == 0.0, 0.0, kappa * half_product)
        covered = (
            finite
            & (g_all >= pa[0] - reach)
            & (g_all <= pa[-1] + reach)
            & ((span <= limit) | (nearest <= reach))
        )
        i, span, g = i[covered], span[covered], g_all[covered]
        w = (pa[i + 1] - g) / span
        slope = (pv[i + 1] - pv[i]) / span
        curve[covered] = w * pv[i] + (1.0 - w) * pv[i + 1]
        weights = w[:, None] * Ps[i] + (1.0 - w)[:, None] * Ps[i + 1]
        sensitivity[covered, :, 0] = weights
        sensitivity[covered, :, 1] = -slope[:, None] * weights
        run_u = np.column_stack([u_value, u_alpha])
        curvature[covered], spread[covered] = kappa[covered], half_product[covered]
        u_interp[covered] = interp[covered]
        u[covered] = np.sqrt(_variance(sensitivity[covered], run_u, r) + interp[covered] ** 2)
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
        curvature=curvature,
        spread=spread,
        u_interp=u_interp,
    )


def on_grid(
    sweep: Sweep, name: str, grid, *, max_gap: float | None = None, include_flagged: bool = False
) -> GridCurve:
    """A sweep's coefficient interpolated onto an α grid, with its uncertainty band.

    Parameters
    ----------
    sweep : Sweep
    name : str
        The coefficient (``"CL"``, ``"CD"``, ``"CM"``, ``"C_power"``, …); ``u_<name>`` must exist.
    grid : array_like
        Spin ratios to evaluate at. [-]
    max_gap : float, optional
        No grid point is covered between two measured points farther apart than this in α
        (a measured point itself always is); default :func:`gap_limit` of the sweep's own
        points, 1.5 × their median step. [-]
    include_flagged : bool
        Use runs that raised a quality flag (left out by default, as from the sweep lines of
        the figures).

    Returns
    -------
    GridCurve
        Values and standard uncertainties, NaN where not covered (``covered`` False).

    Notes
    -----
    Repeats at one set spin rate are first averaged into one point (mean C, mean α). Between
    neighbouring points 1 and 2 in α the curve is piecewise linear,
    C(g) = w C₁ + (1 − w) C₂ with w = (α₂ − g)/(α₂ − α₁). Each point's α is itself uncertain,
    which moves the point along the curve, so with the local (segment) slope
    s = (C₂ − C₁)/(α₂ − α₁) a point's effective uncertainty at fixed α is

        u_eff² = u_C² + s² u_α² − 2 s r u_C u_α,

    r the correlation of C with α within the run (``corr_<name>_alpha``; 0 when the results do
    not give it). The runs are independent, so u²(C(g)) = w² u²_eff,1 + (1 − w)² u²_eff,2 + u_i².
    The first terms are the first-order (GUM) propagation of C(g) through C₁, C₂, α₁ and α₂
    exactly, including the dependence of w on α₁ and α₂. At a grid point on a run, the slope is
    that of the segment to its right (to its left at the last point).

    u_i is the interpolation error. A straight line through two points of a curve C misses it
    by ½ C''(ξ) (g − α₁)(α₂ − g) for some ξ in the segment (the remainder of linear
    interpolation); u_i takes that with |C''| the larger of the second divided differences at
    the segment's two ends, as a standard uncertainty (it is 0 on a measured point, and a sweep
    with fewer than three points cannot state it, so it covers only its measured points). A
    curvature that the points do not resolve is not seen by a divided difference, which is why
    no grid point is covered in a segment wider than ``max_gap``.

    Being first order, the band holds while u(α) is small against the α spacing of neighbouring
    set points: by Monte Carlo on a straight line, u(α) at 2.4 % of the spacing leaves the
    sampled variance within 2 % of the band's, at 12 % it is up to 16 % off (larger between
    runs, smaller next to one).

    Type-B components shared between runs (balance calibration, geometry) are treated as
    independent, which over-states u of an interpolated value slightly and cancels nothing in a
    difference. Nothing is extrapolated: outside the measured α range the curve is NaN; a sweep
    with fewer than two set points covers nothing.

    References
    ----------
    .. [1] JCGM 100:2008, *Evaluation of measurement data — Guide to the expression of
       uncertainty in measurement* (GUM), §5.2 (correlated input quantities).
    .. [2] R. L. Burden and J. D. Faires, *Numerical Analysis*, 9th ed., Brooks/Cole, 2011,
       Theorem 3.3 (the error of polynomial interpolation) and §3.3 (divided differences).

    Examples
    --------
    >>> import pandas as pd
    >>> from tunnelred.products.compare.sweeps import find_sweeps
    >>> df = pd.DataFrame({"run": ["a", "b", "c"], "config": "bare", "speed_set": 20.0,
    ...     "spin_set": [0, 300, 600], "alpha": [0.0, 0.25, 0.5], "u_alpha": 0.0,
    ...     "CL": [0.0, -1.5, -3.0], "u_CL": 0.1})
    >>> curve = on_grid(find_sweeps(df)[0], "CL", [0.125, 0.75])
    >>> curve.value.tolist(), curve.covered.tolist()
    ([-0.75, nan], [True, False])
    >>> round(float(curve.u[0]), 4)  # sqrt(0.5² + 0.5²) × 0.1; a straight line: no curvature
    0.0707
    """
    curve = interpolate(sweep, name, grid, max_gap=max_gap, include_flagged=include_flagged)
    stated = curve.covered & np.isfinite(curve.u_interp)
    return replace(
        curve,
        covered=stated,
        value=np.where(stated, curve.value, np.nan),
        u=np.where(stated, curve.u, np.nan),
        u_interp=np.where(stated, curve.u_interp, np.nan),
    )


def curve_difference(
    ca: GridCurve,
    cb: GridCurve,
    *,
    method: str = "grid",
    alpha=None,
    alpha_a=None,
    alpha_b=None,
    shared_curvature: bool = False,
) -> Difference:
    """Δ = ca − cb of two curves evaluated at the same points.

    A run in both curves is one measurement: its sensitivities subtract, so its errors cancel;
    where the two values are the same combination of the same runs, so do their interpolation
    errors. Otherwise the two interpolation errors add in quadrature. With ``shared_curvature``
    (two curves of one truth, as under the hypothesis of no difference), each curve's
    interpolation error takes the larger curvature of the two.
    """
    runs = list(dict.fromkeys(ca.runs + cb.runs))
    index = {run: k for k, run in enumerate(runs)}
    ia = np.array([index[run] for run in ca.runs], dtype=int)
    ib = np.array([index[run] for run in cb.runs], dtype=int)
    sensitivity = np.zeros((ca.alpha.size, len(runs), 2))
    run_u = np.zeros((len(runs), 2))
    run_r = np.zeros(len(runs))
    np.add.at(sensitivity, (slice(None), ia), ca.sensitivity)
    np.subtract.at(sensitivity, (slice(None), ib), cb.sensitivity)
    run_u[ia], run_r[ia] = ca.run_u, ca.run_r
    run_u[ib], run_r[ib] = cb.run_u, cb.run_r
    interp_a, interp_b = ca.u_interp, cb.u_interp
    if shared_curvature:
        kappa = np.fmax(ca.curvature, cb.curvature)
        interp_a = np.where(ca.spread == 0.0, 0.0, kappa * ca.spread)
        interp_b = np.where(cb.spread == 0.0, 0.0, kappa * cb.spread)
    u_interp = np.hypot(interp_a, interp_b)
    # The same combination of the same runs (a curve with itself) misses the truth alike.
    u_interp = np.where(np.all(sensitivity == 0.0, axis=(1, 2)), 0.0, u_interp)
    covered = ca.covered & cb.covered & np.isfinite(u_interp)
    delta = np.where(covered, ca.value - cb.value, np.nan)
    variance = _variance(sensitivity, run_u, run_r) + u_interp**2
    u = np.where(covered, np.sqrt(np.where(covered, variance, 0.0)), np.nan)
    significant = covered & (np.abs(np.nan_to_num(delta)) > COVERAGE_FACTOR * np.nan_to_num(u))
    where = ca.alpha if alpha is None else np.asarray(alpha, dtype=float)
    return Difference(
        a=ca.key,
        b=cb.key,
        name=ca.name,
        alpha=where,
        delta=delta,
        u=u,
        covered=covered,
        significant=significant,
        alpha_a=where if alpha_a is None else np.asarray(alpha_a, dtype=float),
        alpha_b=where if alpha_b is None else np.asarray(alpha_b, dtype=float),
        u_interp=np.where(covered, u_interp, np.nan),
        method=method,
    )


def difference(
    a: Sweep,
    b: Sweep,
    name: str,
    *,
    grid=None,
    max_gap: float | None = None,
    include_flagged: bool = False,
) -> Difference:
    """The difference a − b of one coefficient of two sweeps on a common α grid.

    Parameters
    ----------
    a, b : Sweep
        The sweep and the reference it is compared with.
    name : str
        The coefficient.
    grid : array_like, optional
        Spin ratios; default :func:`alpha_grid` over the overlap of the two sweeps. [-]
    max_gap : float, optional
        No grid point between two measured points of either sweep farther apart than this;
        default :func:`gap_limit` of the two sweeps (1.5 × the finer one's median step). [-]
    include_flagged : bool
        Use runs that raised a quality flag.

    Returns
    -------
    Difference
        Δ, u(Δ), and where |Δ| > 2 u(Δ) (k = 2); ``method`` ``"grid"``.

    Notes
    -----
    Both curves are interpolated as in :func:`on_grid`, interpolation error in u; each grid
    value is a linear combination of its runs' errors (δC_i, δα_i). Δ is the difference of those
    combinations: a run that belongs to both sweeps is one measurement, so its errors cancel
    instead of adding, and a sweep minus itself gives Δ = 0 with u(Δ) = 0 and nothing
    significant. The interpolation errors of the two curves add in quadrature (they do not
    cancel: the two sweeps are sampled at different α). Runs of different sweeps are taken as
    independent (conservative where they share type-B components). Where the sweeps were
    measured at the same spin ratios, :func:`tunnelred.products.compare.paired.paired_difference`
    needs no interpolation across a segment at all.

    References
    ----------
    .. [1] JCGM 100:2008 (GUM), §5.2 (correlated input quantities).
    .. [2] ISO 13528:2022, *Statistical methods for use in proficiency testing by interlaboratory
       comparison* (E_n numbers: a difference judged against its expanded uncertainty).

    Examples
    --------
    >>> import pandas as pd
    >>> from tunnelred.products.compare.sweeps import find_sweeps
    >>> df = pd.DataFrame({"run": list("abcd"), "config": ["A", "A", "B", "B"],
    ...     "speed_set": 20.0, "spin_set": [0, 600, 0, 600], "alpha": [0.0, 0.5, 0.0, 0.5],
    ...     "u_alpha": 0.0, "CL": [0.0, -3.0, 0.0, -2.0], "u_CL": 0.1})
    >>> a, b = find_sweeps(df)
    >>> d = difference(b, a, "CL", grid=[0.5])
    >>> round(float(d.delta[0]), 6), round(float(d.u[0]), 4), bool(d.significant[0])
    (1.0, 0.1414, True)
    """
    if grid is None:
        grid = alpha_grid(a, b, name=name, include_flagged=include_flagged)
    limit = gap_limit([point_alpha(a), point_alpha(b)], max_gap)
    options = dict(max_gap=limit, include_flagged=include_flagged)
    return curve_difference(on_grid(a, name, grid, **options), on_grid(b, name, grid, **options))
