"""Potential flow about a spinning circular cylinder, and the features of a measured Cp(θ).

Conventions (docs/conventions.md): θ is measured from the windward point (θ = 0 faces the oncoming
flow) and increases in the sense of positive spin (ω > 0 counter-clockwise seen from +z); the spin
ratio α = ωR/U is signed. Angles are in degrees at every public surface. The formulas' parameters
``theta`` (the surface azimuth [deg]) and ``alpha`` (the spin ratio [-]) are these, described here
once; they take floats, ndarrays, Series or DataArrays and broadcast (tunnelred.common._arraylike).
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

from tunnelred.common._arraylike import ArrayLike, Values, arraylike

__all__ = [
    "PRANDTL_LIMIT",
    "cp_surface",
    "lift_coefficient",
    "stagnation_angles",
    "surface_features",
]

#: Largest lift coefficient of steady potential flow with the stagnation points on the surface,
#: reached at abs(alpha) = 2 [-] (Prandtl's limit, in magnitude).
PRANDTL_LIMIT = 4 * np.pi


@arraylike
def cp_surface(theta: ArrayLike, alpha: ArrayLike) -> ArrayLike:
    """Surface pressure coefficient of potential flow about a spinning cylinder.

    Returns
    -------
    float or array_like
        Cp = (p − p∞)/q on the surface, broadcast over ``theta`` and ``alpha``. [-]

    Notes
    -----
    Uniform stream plus doublet plus a point vortex of circulation Γ = 2πωR² (the circulation that
    makes the surface speed of the flow match the wall's at the mean, the ideal Magnus model). The
    surface speed is U(α + 2 sin θ), so Bernoulli gives

        Cp = 1 − (α + 2 sin θ)².

    Inviscid and attached: a real cylinder separates, so measured Cp departs from this on the
    leeward side at any α; the comparison is most telling on the windward half.

    References
    ----------
    .. [1] J. D. Anderson, *Fundamentals of Aerodynamics*, 6th ed., McGraw-Hill, 2017, §3.15
       (lifting flow over a cylinder), written here in the azimuth of docs/conventions.md.

    Examples
    --------
    >>> cp_surface([0.0, 90.0, -90.0], 0.0).tolist()
    [1.0, -3.0, -3.0]
    """
    return 1.0 - (alpha + 2.0 * np.sin(np.radians(theta))) ** 2


@arraylike
def lift_coefficient(alpha: ArrayLike) -> ArrayLike:
    """Ideal (Kutta–Joukowski) lift coefficient of a spinning cylinder.

    Returns
    -------
    float or array_like
        CL = L′/(q d), lift along +y. [-]

    Notes
    -----
    L′ = −ρUΓ with Γ = 2πωR² gives CL = −2πα. Inviscid; beyond abs(α) = 2 the stagnation points
    leave the surface and the steady attached picture behind Prandtl's 4π limit no longer holds.

    References
    ----------
    .. [1] J. D. Anderson, *Fundamentals of Aerodynamics*, 6th ed., McGraw-Hill, 2017, §3.16
       (the Kutta–Joukowski theorem).

    Examples
    --------
    >>> round(lift_coefficient(1.0), 6)
    -6.283185
    """
    return -2.0 * np.pi * alpha


@arraylike
def stagnation_angles(alpha: ArrayLike) -> tuple[ArrayLike, ArrayLike]:
    """Azimuths of the two potential-flow stagnation points on the surface.

    Returns
    -------
    front : float or array_like
        The stagnation point on the windward half, −asin(α/2), in [−90, 90]; NaN where
        abs(α) > 2. [deg]
    rear : float or array_like
        The one on the leeward half, 180 + asin(α/2), in [90, 270]; NaN where abs(α) > 2. [deg]

    Notes
    -----
    The surface speed U(α + 2 sin θ) vanishes where sin θ = −α/2. With positive spin both points
    move against the spin (to negative θ for the front one). At abs(α) = 2 they merge at
    θ = −90° (α = 2; rear = 270°, the same point) or +90° (α = −2), where abs(CL) = 4π; above it the
    stagnation point leaves the surface and both results are NaN.

    References
    ----------
    .. [1] J. D. Anderson, *Fundamentals of Aerodynamics*, 6th ed., McGraw-Hill, 2017, §3.15.

    Examples
    --------
    >>> front, rear = stagnation_angles(1.0)
    >>> round(front, 6), round(rear, 6)
    (-30.0, 210.0)
    """
    half = alpha / 2.0
    on_surface = np.abs(half) <= 1.0
    shift = np.degrees(np.arcsin(np.where(on_surface, half, np.nan)))
    return -shift, 180.0 + shift


def _wrap180(theta: np.ndarray) -> np.ndarray:
    """Angles in (−180, 180] [deg]."""
    return 180.0 - np.mod(180.0 - theta, 360.0)


def _parabolic_peak(
    theta: np.ndarray, values: np.ndarray, index: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Vertex of the parabola through the bin at ``index`` and its periodic neighbours.

    ``theta`` (n,) sorted in [0, 360); ``values`` (..., n) with no NaN at ``index``; ``index``
    (...,). Where a neighbour is NaN or the three points are collinear, the bin itself is returned.
    """
    n = theta.size
    left, right = (index - 1) % n, (index + 1) % n
    y0 = np.take_along_axis(values, index[..., None], -1)[..., 0]
    dl = np.take_along_axis(values, left[..., None], -1)[..., 0] - y0
    dr = np.take_along_axis(values, right[..., None], -1)[..., 0] - y0
    # Neighbour offsets taken around the circle, so a peak beside 0/360 is fitted like any other.
    a = -np.mod(theta[index] - theta[left], 360.0)
    b = np.mod(theta[right] - theta[index], 360.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        c2 = (dr / b - dl / a) / (b - a)
        c1 = dl / a - c2 * a
        offset = np.clip(-c1 / (2.0 * c2), a, b)
        peak = y0 - c1**2 / (4.0 * c2)
    usable = np.isfinite(offset) & np.isfinite(peak) & (c2 != 0.0)
    return (
        np.where(usable, theta[index] + offset, theta[index]),
        np.where(usable, peak, y0),
    )


def surface_features(
    theta: npt.ArrayLike, cp: npt.ArrayLike, *, base_arc: tuple[float, float] = (160.0, 200.0)
) -> dict[str, Values]:
    """Stagnation angle, extreme and base pressures of a binned Cp(θ).

    Parameters
    ----------
    theta : array_like, shape (n,)
        Azimuths of the bins (any grid, any order, 0..360 or −180..180), no two alike. [deg]
    cp : array_like, shape (..., n)
        Pressure coefficient at ``theta``; NaN marks an empty bin. Leading axes are a batch (for
        example Monte Carlo draws) and are kept in the results. [-]
    base_arc : (float, float), optional
        Leeward arc, from its first to its second angle in the sense of increasing θ, over which
        the base pressure is averaged; it may wrap through 0/360. [deg]

    Returns
    -------
    dict
        ``theta_stag`` [deg] front stagnation angle, in (−180, 180]; ``Cp_max`` [-] Cp there;
        ``Cp_min`` [-] the lowest Cp; ``theta_Cp_min`` [deg] where it lies, in (−180, 180];
        ``Cp_base`` [-] the mean of the bins whose azimuths lie in ``base_arc`` (NaN if none).
        Floats for a single Cp(θ), arrays of the batch shape otherwise.

    Notes
    -----
    The front stagnation point is the largest Cp on the windward half (cos θ ≥ 0): the rear one,
    which in potential flow also reaches Cp = 1, is washed out by separation on a real cylinder,
    and restricting the search keeps the two from being confused. The extreme is refined by the
    vertex of the parabola through the extreme bin and its two neighbours (periodically, on a
    non-uniform grid too), so the estimate is not quantised to the bin width; the vertex is kept
    within the neighbours' span. ``Cp_max`` and ``Cp_min`` are the vertex values. ``Cp_base`` is
    an unweighted mean of the bins in the arc, exact for a uniform grid.

    References
    ----------
    .. [1] W. H. Press, S. A. Teukolsky, W. T. Vetterling and B. P. Flannery, *Numerical Recipes*,
       3rd ed., Cambridge University Press, 2007, §10.3 (the vertex of the parabola through three
       points).

    Examples
    --------
    >>> theta = np.arange(72) * 5.0 + 2.5
    >>> f = surface_features(theta, cp_surface(theta, 0.0))
    >>> round(f["theta_stag"], 3), round(f["Cp_max"], 3), round(f["Cp_base"], 3)
    (0.0, 1.0, 0.844)
    """
    theta = np.mod(np.asarray(theta, dtype=float), 360.0)
    cp = np.asarray(cp, dtype=float)
    if theta.ndim != 1 or cp.shape[-1:] != theta.shape:
        raise ValueError(
            f"surface_features: theta must be 1-D and match cp's last axis; "
            f"found theta {theta.shape}, cp {cp.shape}"
        )
    if theta.size < 3:
        raise ValueError(f"surface_features: need at least 3 bins, found {theta.size}")
    order = np.argsort(theta)
    theta, cp = theta[order], cp[..., order]
    if np.any(np.diff(theta) == 0.0):
        raise ValueError("surface_features: two bins share one azimuth (after wrapping to 0..360)")

    finite = np.isfinite(cp)
    windward = np.cos(np.radians(theta)) >= 0.0
    stag_candidates = np.where(finite & windward, cp, -np.inf)
    i_max = np.argmax(stag_candidates, axis=-1)
    i_min = np.argmin(np.where(finite, cp, np.inf), axis=-1)
    theta_stag, cp_max = _parabolic_peak(theta, cp, i_max)
    # The minimum is the maximum of −Cp.
    theta_cp_min, neg_min = _parabolic_peak(theta, -cp, i_min)
    none_windward = ~np.any(finite & windward, axis=-1)
    none_at_all = ~np.any(finite, axis=-1)

    start, end = (float(a) for a in base_arc)
    span = np.mod(end - start, 360.0)
    if span == 0.0:
        raise ValueError(f"surface_features: base_arc {base_arc} encloses no angle")
    in_arc = np.mod(theta - start, 360.0) <= span
    arc_values = np.where(in_arc & finite, cp, 0.0)
    arc_count = np.sum(in_arc & finite, axis=-1)
    with np.errstate(invalid="ignore", divide="ignore"):
        cp_base = np.sum(arc_values, axis=-1) / arc_count

    features = {
        "theta_stag": np.where(none_windward, np.nan, _wrap180(theta_stag)),
        "Cp_max": np.where(none_windward, np.nan, cp_max),
        "Cp_min": np.where(none_at_all, np.nan, -neg_min),
        "theta_Cp_min": np.where(none_at_all, np.nan, _wrap180(theta_cp_min)),
        "Cp_base": np.where(arc_count > 0, cp_base, np.nan),
    }
    return {k: (v.item() if v.ndim == 0 else v) for k, v in features.items()}
