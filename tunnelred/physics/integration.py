"""∮Cp: the pressure lift and drag of a measured Cp(θ), and the quadrature's own error.

CL = ½∮Cp sin θ dθ and CD = ½∮Cp cos θ dθ from Cp at tap or bin azimuths (the periodic trapezoid
rule on a uniform grid, a periodic cubic spline otherwise), refused with :class:`CpGapError` when
the taps leave too wide a stretch of the circumference without data. Angles in degrees
(docs/conventions.md). The names stay importable from tunnelred.physics.pressure.
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

from tunnelred.common._arraylike import Values

__all__ = ["CpGapError", "integrate_cp", "quadrature_uncertainty"]

# Gauss-Legendre nodes per spline interval: the integrand (cubic times sine) is then integrated to
# rounding error, since the rule is exact for polynomials of degree 15.
_GAUSS_NODES, _GAUSS_WEIGHTS = np.polynomial.legendre.leggauss(8)

# Azimuths closer than this are one tap position (e.g. 0 and 360, or -180 and 180) [deg].
_SAME_AZIMUTH = 1e-9


class CpGapError(ValueError):
    """The taps leave too wide a stretch of the circumference without data to integrate Cp.

    ``start`` and ``end`` [deg] bound the widest gap (``end`` may be below ``start`` when the gap
    wraps through 0/360); ``gap`` is its width [deg]. All three are NaN when there are simply too
    few taps.
    """

    def __init__(self, message: str, start: float = np.nan, end: float = np.nan):
        self.start = start
        self.end = end
        self.gap = float(np.mod(end - start, 360.0)) if np.isfinite(start) else np.nan
        super().__init__(message)


def _distinct_azimuths(theta: np.ndarray, cp: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Azimuths wrapped to [0, 360), sorted, duplicates merged by averaging their Cp (..., m)."""
    wrapped = np.mod(theta, 360.0)
    wrapped[wrapped > 360.0 - _SAME_AZIMUTH] = 0.0
    order = np.argsort(wrapped, kind="stable")
    wrapped, cp = wrapped[order], cp[..., order]
    new = np.concatenate(([True], np.diff(wrapped) > _SAME_AZIMUTH))
    group = np.cumsum(new) - 1
    members = np.zeros((wrapped.size, group[-1] + 1 if group.size else 0))
    members[np.arange(wrapped.size), group] = 1.0
    averaged = (cp @ members) / members.sum(axis=0)
    return wrapped[new], averaged


def _integrate_distinct(
    theta: np.ndarray, cp: np.ndarray, max_gap: float
) -> tuple[np.ndarray, np.ndarray]:
    """(CL, CD) of Cp (B, m) at sorted distinct azimuths theta (m,) in [0, 360)."""
    if theta.size < 4:
        raise CpGapError(f"need Cp at 4 or more distinct azimuths to integrate, found {theta.size}")
    ends = np.append(theta[1:], theta[0] + 360.0)
    gaps = ends - theta
    widest = int(np.argmax(gaps))
    if gaps[widest] > max_gap + _SAME_AZIMUTH:
        start, end = theta[widest], np.mod(ends[widest], 360.0)
        raise CpGapError(
            f"no pressure data from {start:.1f} to {end:.1f} deg, a gap of {gaps[widest]:.1f} deg "
            f"(max_gap {max_gap:g} deg); add taps or index angles there, or raise max_tap_gap",
            float(start),
            float(end),
        )
    x = np.radians(theta)
    if np.allclose(gaps, 360.0 / theta.size, rtol=0.0, atol=1e3 * _SAME_AZIMUTH):
        # Periodic trapezoid rule: spectrally accurate for smooth periodic integrands.
        h = 2.0 * np.pi / theta.size
        return 0.5 * h * cp @ np.sin(x), 0.5 * h * cp @ np.cos(x)
    knots = np.append(x, x[0] + 2.0 * np.pi)
    from scipy.interpolate import CubicSpline  # scipy.interpolate costs 0.6 s to import

    spline = CubicSpline(
        knots, np.concatenate([cp, cp[:, :1]], axis=-1), axis=-1, bc_type="periodic"
    )
    half = 0.5 * np.diff(knots)
    nodes = (0.5 * (knots[:-1] + knots[1:]))[:, None] + half[:, None] * _GAUSS_NODES
    weights = (half[:, None] * _GAUSS_WEIGHTS).ravel()
    nodes = nodes.ravel()
    values = spline(nodes) * weights
    return 0.5 * values @ np.sin(nodes), 0.5 * values @ np.cos(nodes)


def integrate_cp(
    theta: npt.ArrayLike, cp: npt.ArrayLike, *, max_gap: float = 30.0
) -> tuple[Values, Values]:
    """Lift and drag coefficients from the surface pressure, CL = ½∮Cp sin θ dθ, CD = ½∮Cp cos θ dθ.

    Parameters
    ----------
    theta : array_like, shape (n,)
        Tap or bin azimuths, in any order and range (0..360, −180..180); repeated azimuths have
        their Cp averaged. [deg]
    cp : array_like, shape (..., n)
        Pressure coefficient at ``theta``; leading axes are a batch (Monte Carlo draws, runs)
        integrated in one call. NaN points are dropped first (row by row). [-]
    max_gap : float, optional
        Widest azimuth gap without data accepted, the wrap through 0/360 included. [deg]

    Returns
    -------
    CL, CD : float or ndarray of the batch shape
        Pressure lift (along +y) and drag (along +x) coefficients on the diameter. [-]

    Raises
    ------
    CpGapError
        A gap wider than ``max_gap`` (the message names its start and end angles), or fewer than
        four distinct azimuths.

    Notes
    -----
    On a uniform grid the periodic trapezoid rule is used: for a smooth periodic Cp it converges
    geometrically with the number of points [1]_. Otherwise Cp is interpolated by a periodic cubic
    spline [2]_ and the spline times sin θ (cos θ) is integrated to rounding error by 8-point
    Gauss–Legendre quadrature on each interval; the spline's own error is O(h⁴) in the largest
    spacing h. Bin means are averages over their bin: that attenuates the first harmonic, which
    alone carries CL and CD, by sin(h/2)/(h/2) (0.03 % for 72 bins); the reduction corrects its
    bins to their centres first (docs/methods.md, bin offset).

    References
    ----------
    .. [1] L. N. Trefethen and J. A. C. Weideman, "The exponentially convergent trapezoidal rule",
       SIAM Review 56 (2014) 385–458.
    .. [2] C. de Boor, *A Practical Guide to Splines*, revised ed., Springer, 2001, ch. IV
       (periodic cubic spline interpolation), as implemented by scipy.interpolate.CubicSpline.

    Examples
    --------
    >>> theta = np.arange(36) * 10.0
    >>> CL, CD = integrate_cp(theta, 1 - (0.5 + 2 * np.sin(np.radians(theta))) ** 2)
    >>> round(CL / np.pi, 12), abs(round(CD, 12))
    (-1.0, 0.0)
    """
    theta = np.asarray(theta, dtype=float)
    cp = np.asarray(cp, dtype=float)
    if theta.ndim != 1 or cp.shape[-1:] != theta.shape:
        raise ValueError(
            f"integrate_cp: theta must be 1-D and match cp's last axis; "
            f"found theta {theta.shape}, cp {cp.shape}"
        )
    batch = cp.shape[:-1]
    rows = cp.reshape(-1, theta.size)
    missing = ~np.isfinite(rows) | ~np.isfinite(theta)
    CL = np.empty(rows.shape[0])
    CD = np.empty(rows.shape[0])
    # Rows sharing one pattern of missing points share the grid: integrate each pattern once.
    patterns, which = np.unique(missing, axis=0, return_inverse=True)
    for k, pattern in enumerate(patterns):
        here = which.ravel() == k
        grid, values = _distinct_azimuths(theta[~pattern], rows[here][:, ~pattern])
        CL[here], CD[here] = _integrate_distinct(grid, values, max_gap)
    if not batch:
        return float(CL[0]), float(CD[0])
    return CL.reshape(batch), CD.reshape(batch)


def quadrature_uncertainty(theta: npt.ArrayLike, cp: npt.ArrayLike) -> float:
    """Standard uncertainty of CL and of CD from :func:`integrate_cp` for the rule's own error.

    Parameters
    ----------
    theta : array_like, shape (n,)
        The azimuths integrated (as for :func:`integrate_cp`; NaN points are dropped). [deg]
    cp : array_like, shape (n,)
        Cp at ``theta``. [-]

    Returns
    -------
    float
        u, the same for CL and for CD [-]; NaN with fewer than 8 distinct azimuths (the halves
        below cannot be integrated).

    Notes
    -----
    The points are split into two interleaved halves (every other azimuth) and each half is
    integrated alone. On a uniform grid the full rule is the mean of the two halves, so their
    difference measures the aliasing the coarser rule suffers, of harmonics N/2 ± 1 of Cp; the
    full rule's error comes from harmonics N ± 1. A separated-flow Cp has slope breaks at
    separation, so its Fourier coefficients fall as k⁻² and the rule converges as N⁻²
    (common practice); Richardson's estimate then bounds the full rule's error by a quarter of
    the halves' error, a = |ΔC|/4 with ΔC = (C_even − C_odd)/2 the vector (ΔCL, ΔCD), since
    the error turns between lift and drag with the taps' phase. Read as a rectangular bound,
    u = a/√3 (JCGM 100:2008 §4.3.7). Noise of the readings enters ΔC too, which errs on the
    wide side.
    """
    theta = np.asarray(theta, dtype=float)
    cp = np.asarray(cp, dtype=float)
    keep = np.isfinite(theta) & np.isfinite(cp)
    grid, values = _distinct_azimuths(theta[keep], cp[keep][None, :])
    if grid.size < 8:
        return float("nan")
    halves = [_integrate_distinct(grid[k::2], values[:, k::2], np.inf) for k in (0, 1)]
    d_cl = 0.5 * float(halves[0][0][0] - halves[1][0][0])
    d_cd = 0.5 * float(halves[0][1][0] - halves[1][1][0])
    return float(np.hypot(d_cl, d_cd) / 4.0 / np.sqrt(3.0))
