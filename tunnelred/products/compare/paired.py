"""Differences at measured spin ratios: points of two sweeps paired within a tolerance in α.

Where two sweeps were measured at (nearly) the same spin ratios — the up and down legs of one
sweep, or two configurations run at the same set points — their difference needs no curve
between set points at all: each measured point of one sweep is paired with the nearest point of
the other, and Δ is stated at the pair's mean α, each side moved there along its own local slope
by at most half the tolerance. :func:`hysteresis` (up minus down) and the campaign tables use
this by default; :func:`tunnelred.products.compare.grid.difference` interpolates onto a grid
instead.
"""

from __future__ import annotations

import numpy as np

from tunnelred.products.compare.grid import (
    Difference,
    curve_difference,
    difference,
    interpolate,
    point_runs,
    points,
    run_errors,
)
from tunnelred.products.compare.sweeps import Sweep

__all__ = [
    "METHODS",
    "PAIR_TOLERANCE",
    "difference_by_method",
    "hysteresis",
    "paired_difference",
    "paired_points",
]

#: How differences are formed: at paired measured points, or on an interpolated grid.
METHODS = ("paired", "grid")

#: Largest |α_a − α_b| of two measured points that are compared as one spin ratio. The measured
#: α of one set rpm wanders by the speed's set-point error and the wall correction (up to 0.03
#: between the legs of the demo at α ≈ 3); each side is moved to the pair's mean α along its
#: local slope, with the interpolation error of that move in u, so the tolerance only bounds
#: how far. [-]
PAIR_TOLERANCE = 0.05


def _measured(sweep: Sweep, name: str, include_flagged: bool):
    """Each point's mean α (sorted) and the runs averaged into it."""
    _, _, alpha, _, _, usable = run_errors(sweep, name, include_flagged=include_flagged)
    P = points(sweep, usable)
    point_alpha = P @ alpha
    order = np.argsort(point_alpha)
    runs = point_runs(sweep, P)
    return point_alpha[order], [runs[k] for k in order]


def paired_points(
    a: Sweep,
    b: Sweep,
    name: str,
    *,
    tolerance: float = PAIR_TOLERANCE,
    include_flagged: bool = False,
) -> tuple[np.ndarray, np.ndarray]:
    """The measured α of the points of a and b that pair: mutual nearest, within ``tolerance``.

    A pair whose two points are the same runs (the turning point both legs share) measures
    nothing and is left out.

    Examples
    --------
    >>> import pandas as pd
    >>> from tunnelred.products.compare.sweeps import find_sweeps
    >>> df = pd.DataFrame({"run": list("abcdef"), "config": ["A"] * 3 + ["B"] * 3,
    ...     "speed_set": 20.0, "spin_set": [0, 300, 600, 0, 300, 500],
    ...     "alpha": [0.0, 0.25, 0.5, 0.0, 0.26, 0.42], "u_alpha": 0.0, "CL": 0.0, "u_CL": 0.1})
    >>> a, b = find_sweeps(df)
    >>> [x.tolist() for x in paired_points(a, b, "CL")]
    [[0.0, 0.25], [0.0, 0.26]]
    """
    alpha_a, runs_a = _measured(a, name, include_flagged)
    alpha_b, runs_b = _measured(b, name, include_flagged)
    if alpha_a.size == 0 or alpha_b.size == 0:
        return np.array([]), np.array([])
    distance = np.abs(alpha_a[:, None] - alpha_b[None, :])
    nearest_b = np.argmin(distance, axis=1)
    nearest_a = np.argmin(distance, axis=0)
    keep = [
        (i, j)
        for i, j in enumerate(nearest_b)
        if nearest_a[j] == i and distance[i, j] <= tolerance and runs_a[i] != runs_b[j]
    ]
    ia = np.array([i for i, _ in keep], dtype=int)
    ib = np.array([j for _, j in keep], dtype=int)
    return alpha_a[ia], alpha_b[ib]


def paired_difference(
    a: Sweep,
    b: Sweep,
    name: str,
    *,
    tolerance: float = PAIR_TOLERANCE,
    include_flagged: bool = False,
) -> Difference:
    """The difference a − b of one coefficient at the measured spin ratios the sweeps share.

    Parameters
    ----------
    a, b, name, include_flagged
        As in :func:`tunnelred.products.compare.grid.difference`.
    tolerance : float
        Points of a and b are paired when their measured α differ by at most this
        (:data:`PAIR_TOLERANCE`). [-]

    Returns
    -------
    Difference
        One entry a pair (:func:`paired_points`), at the mean α of the pair, with ``alpha_a``
        and ``alpha_b`` the two measured α; ``method`` ``"paired"``.

    Notes
    -----
    Each side's value at the pair's mean ᾱ is its own point moved along its sweep's curve
    (:func:`tunnelred.products.compare.grid.interpolate`, which extends an end segment by up to
    half the tolerance), so Δ = C_a − C_b − s (α_a − α_b) to first order, s the local slope,
    and no value is taken from between two set points. u(Δ) is the first-order propagation
    through every run's C and α (shared runs cancel), plus the error of the move: for a point
    moved by δ = |ᾱ − α_i| along a segment of length h, ½|C''| δ (h − δ) (the remainder of linear
    interpolation), with |C''| the larger second divided difference of either sweep near the
    point — under the hypothesis of no difference both sweeps follow one curve, so the one that
    resolves its curvature better states it for both. Repeats at one set point are one point
    (their mean), as on a grid.

    References
    ----------
    .. [1] JCGM 100:2008 (GUM), §5.2 (correlated input quantities).
    .. [2] ISO 13528:2022 (E_n numbers: a difference judged against its expanded uncertainty).

    Examples
    --------
    >>> import pandas as pd
    >>> from tunnelred.products.compare.sweeps import find_sweeps
    >>> df = pd.DataFrame({"run": list("abcdef"), "config": ["A"] * 3 + ["B"] * 3,
    ...     "speed_set": 20.0, "spin_set": [0, 300, 600] * 2,
    ...     "alpha": [0.0, 0.25, 0.5, 0.0, 0.27, 0.5], "u_alpha": 0.0,
    ...     "CL": [0.0, -1.5, -3.0, 0.0, -1.08, -2.0], "u_CL": 0.1})
    >>> a, b = find_sweeps(df)
    >>> d = paired_difference(b, a, "CL")  # 0.25 and 0.27 pair, each moved to 0.26
    >>> d.alpha.tolist(), d.delta.round(6).tolist(), d.significant.tolist()
    ([0.0, 0.26, 0.5], [0.0, 0.52, 1.0], [False, True, True])
    """
    alpha_a, alpha_b = paired_points(
        a, b, name, tolerance=tolerance, include_flagged=include_flagged
    )
    where = 0.5 * (alpha_a + alpha_b)
    # Each side moves by at most tolerance/2 and never bridges a segment (max_gap 0).
    options = dict(max_gap=0.0, reach=0.5 * tolerance, include_flagged=include_flagged)
    ca = interpolate(a, name, where, **options)
    cb = interpolate(b, name, where, **options)
    return curve_difference(
        ca, cb, method="paired", alpha_a=alpha_a, alpha_b=alpha_b, shared_curvature=True
    )


def hysteresis(sweep_up: Sweep, sweep_down: Sweep, name: str, **options) -> Difference:
    """Up leg minus down leg of one coefficient.

    Parameters
    ----------
    sweep_up, sweep_down : Sweep
        Two legs of one configuration and speed (:func:`find_sweeps`).
    name : str
        The coefficient.
    **options
        ``method``, ``tolerance``, ``grid``, ``max_gap``, ``include_flagged``: those of
        :func:`difference_by_method`.

    Returns
    -------
    Difference

    Notes
    -----
    The runs at the turning point belong to both legs: as one point of both they pair with
    themselves and are left out; on a grid their errors cancel in Δ. A down leg usually visits
    fewer set points than the up leg; pairing compares only the ones it visited, where a grid
    would have to interpolate the sparse leg across its wide steps.

    Examples
    --------
    >>> import pandas as pd
    >>> from tunnelred.products.compare.sweeps import find_sweeps
    >>> df = pd.DataFrame({"run": list("abcde"), "config": "A", "speed_set": 20.0,
    ...     "spin_set": [0, 300, 600, 300, 0], "alpha": [0.0, 0.25, 0.5, 0.25, 0.0],
    ...     "u_alpha": 0.0, "CL": [0.0, -1.5, -3.0, -1.9, -0.4], "u_CL": 0.1,
    ...     "start": pd.date_range("2031-05-01T10:00", periods=5, freq="h")})
    >>> up, down = find_sweeps(df)
    >>> h = hysteresis(up, down, "CL")
    >>> h.alpha.tolist(), h.delta.round(6).tolist()
    ([0.0, 0.25], [0.4, 0.4])
    """
    return difference_by_method(sweep_up, sweep_down, name, **options)


def difference_by_method(
    a: Sweep,
    b: Sweep,
    name: str,
    *,
    method: str = "paired",
    tolerance: float = PAIR_TOLERANCE,
    grid=None,
    max_gap: float | None = None,
    include_flagged: bool = False,
) -> Difference:
    """a − b by ``method``: :func:`paired_difference` or, on a grid, :func:`difference`.

    ``"paired"``: at the spin ratios both sweeps measured, paired within ``tolerance``;
    ``"grid"``: on an α grid (``grid`` and ``max_gap``). ``include_flagged``: use runs that
    raised a quality flag.
    """
    if method == "paired":
        return paired_difference(a, b, name, tolerance=tolerance, include_flagged=include_flagged)
    if method == "grid":
        return difference(a, b, name, grid=grid, max_gap=max_gap, include_flagged=include_flagged)
    raise ValueError(f"method must be one of {METHODS}, not {method!r}")
