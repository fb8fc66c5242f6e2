"""Surface pressure: rotating-tap azimuth, centrifugal head, phase binning, dead taps.

A tap on a spinning model sweeps the whole circle once a revolution, so every tap sees the same
Cp(θ); binning its record by azimuth gives Cp(θ) with as many samples per bin as revolutions
allow. A stationary model is covered by taps at fixed azimuths, and by several runs at different
index angles merged with :func:`merge_indexed`. Angles are in degrees (θ from the windward point,
positive with positive spin, docs/conventions.md), pressures in Pa. The integration of Cp(θ)
into CL and CD (∮Cp) is tunnelred.physics.integration; its names stay importable from here.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from statistics import NormalDist
from typing import cast

import numpy as np
import numpy.typing as npt

from tunnelred.common._arraylike import ArrayLike, arraylike
from tunnelred.physics.integration import (  # importable from here as before the split
    CpGapError,
    integrate_cp,
    quadrature_uncertainty,
)

__all__ = [
    "CpGapError",
    "BinnedCp",
    "tap_azimuth",
    "centrifugal_head",
    "pressure_coefficient",
    "tap_azimuths",
    "bin_cp",
    "azimuth_derivatives",
    "integrate_cp",
    "quadrature_uncertainty",
    "find_dead_taps",
    "merge_indexed",
    "within_turn",
    "floor_divide",
    "nanmedian_of_columns",
]


@dataclass(frozen=True)
class BinnedCp:
    """Cp(θ) binned by azimuth (see :func:`bin_cp`).

    Attributes
    ----------
    theta : ndarray, shape (bins,)
        Bin centres, (i + 0.5)·360/bins. [deg]
    mean : ndarray
        Mean Cp of the samples in each bin; NaN where the bin is empty. [-]
    std : ndarray
        Standard deviation of those samples (ddof = 1); NaN below two samples. [-]
    count : ndarray of int
        Samples in each bin. [-]
    u_mean : ndarray
        Type-A standard uncertainty of each bin mean, from the scatter between revolutions; NaN
        where fewer than two passes (revolutions × series) contribute. [-]
    thin : ndarray of bool
        Bins with fewer than ``min_count`` samples; their mean is kept but should not be trusted.
    offset : ndarray
        Mean azimuth of the bin's samples less the bin centre, d; NaN where the bin is empty.
        [deg]
    spread : ndarray
        Mean squared distance of the bin's samples from the bin centre, s² + d² (s² their
        variance); NaN where the bin is empty. [deg²]
    series_count : ndarray of int, shape (series, bins)
        Samples each series (tap) leaves in each bin. [-]
    """

    theta: np.ndarray
    mean: np.ndarray
    std: np.ndarray
    count: np.ndarray
    u_mean: np.ndarray
    thin: np.ndarray
    offset: np.ndarray
    spread: np.ndarray
    series_count: np.ndarray


@arraylike
def tap_azimuth(
    encoder_angle: ArrayLike, tap_azimuth: ArrayLike, tubing_delay: ArrayLike, omega: ArrayLike
) -> ArrayLike:
    """Azimuth θ of a tap at each sample, corrected for the delay of its tubing.

    Parameters
    ----------
    encoder_angle : float or array_like
        The model's encoder angle at the sample time, wrapped or cumulative; 0 for a stationary
        model without an encoder (or its constant index angle). [deg]
    tap_azimuth : float or array_like
        The tap's azimuth from the windward point when the encoder reads zero. [deg]
    tubing_delay : float or array_like
        Pneumatic delay τ between the tap and the transducer. [s]
    omega : float or array_like
        Spin rate, signed (positive counter-clockwise seen from +z); 0 for a stationary model.
        [rad/s]

    Returns
    -------
    float or array_like
        θ = encoder_angle + tap_azimuth − degrees(ω τ), wrapped to [0, 360). [deg]

    Notes
    -----
    The reading at time t is the pressure the tap saw at t − τ, when it stood ω τ behind its
    present azimuth. Modelling the tubing as a pure delay holds well below the first acoustic
    resonance of the line, where its phase lag grows linearly with frequency [1]_; τ is then the
    slope of that phase, measured or computed for the tubing. With ω = 0 the result is the tap's
    fixed azimuth.

    References
    ----------
    .. [1] H. Bergh and H. Tijdeman, "Theoretical and experimental results for the dynamic
       response of pressure measuring systems", NLR-TR F.238, National Aero- and Astronautical
       Research Institute, Amsterdam, 1965.

    Examples
    --------
    >>> tap_azimuth(350.0, 20.0, 0.0, 100.0)
    10.0
    >>> round(tap_azimuth(0.0, 90.0, 0.001, 2 * np.pi * 25), 6)
    81.0
    """
    return np.mod(encoder_angle + tap_azimuth - np.degrees(omega * tubing_delay), 360.0)


@arraylike
def centrifugal_head(
    density: ArrayLike, omega: ArrayLike, radius: ArrayLike, transducer_radius: ArrayLike = 0.0
) -> ArrayLike:
    """Pressure rise along the spinning tubing from the transducer out to the tap.

    Parameters
    ----------
    density : float or array_like
        Density of the air in the tubing (the test-section air). [kg/m^3]
    omega : float or array_like
        Spin rate (its sign does not matter). [rad/s]
    radius : float or array_like
        Model radius R, where the tap is. [m]
    transducer_radius : float or array_like, optional
        Radius r_t of the transducer on the spinning model; 0 on the axis. [m]

    Returns
    -------
    float or array_like
        head = ρ ω² (R² − r_t²) / 2. [Pa]

    Notes
    -----
    The air column in a tube fixed to the model turns with it as a rigid body, so its pressure
    rises outward as dp/dr = ρ ω² r; the transducer reads p_tap − head, and
    p_tap − p∞ = reading + head. Valid for incompressible air in the tube (head ≪ p, true below
    some 10 kPa of head) and a reference side at p∞ at the transducer: if the reference line also
    runs from the axis to r_t on the model, its own head ρ ω² r_t²/2 must be added, giving
    ρ ω² R²/2 whatever r_t is.

    References
    ----------
    .. [1] F. M. White, *Fluid Mechanics*, 7th ed., McGraw-Hill, 2011, §2.9 (pressure in rigid-body
       rotation) (section number from memory).

    Examples
    --------
    >>> round(centrifugal_head(1.2, 100.0, 0.05), 6)
    15.0
    """
    return 0.5 * density * omega**2 * (radius**2 - transducer_radius**2)


@arraylike
def pressure_coefficient(reading: ArrayLike, q: ArrayLike, *, head: ArrayLike = 0.0) -> ArrayLike:
    """Pressure coefficient of a tap from the transducer reading.

    Parameters
    ----------
    reading : float or array_like
        Scanner reading p_transducer − p∞. [Pa]
    q : float or array_like
        Free-stream dynamic pressure. [Pa]
    head : float or array_like, optional
        Centrifugal head of the tubing (:func:`centrifugal_head`); 0 for a stationary model. [Pa]

    Returns
    -------
    float or array_like
        Cp = (reading + head) / q. [-]

    Notes
    -----
    Cp = (p_tap − p∞)/q with p_tap − p∞ = reading + head. Wall corrections to q are applied later,
    to the binned Cp.

    References
    ----------
    .. [1] J. D. Anderson, *Fundamentals of Aerodynamics*, 6th ed., McGraw-Hill, 2017, §1.5 (the
       pressure coefficient).

    Examples
    --------
    >>> pressure_coefficient(-85.0, 100.0, head=15.0)
    -0.7
    """
    return (reading + head) / q


def _wrap_turns(raw: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``np.mod(raw, 360.0)`` bit for bit, and the whole turns F it took off, in fewer passes.

    numpy's remainder is fmod (exact) plus 360 on a negative remainder (one rounding), i.e. the
    difference raw − 360 F, F = floor(raw / 360) exactly, rounded once; 360 F is exact, so
    ``raw - 360.0 * F`` is the same number. fl(raw / 360) never falls below F and exceeds it
    only by rounding up to a whole number, where raw − 360 (F + 1) < 0: those are stepped back.
    """
    turns = np.floor(raw / 360.0)
    theta = raw - 360.0 * turns
    low = theta < 0.0
    if low.any():
        turns[low] -= 1.0
        theta[low] = raw[low] - 360.0 * turns[low]
    return theta, turns


def within_turn(theta: np.ndarray) -> np.ndarray:
    """``np.mod(theta, 360.0)``, without its division when every azimuth is in [0, 360) already.

    Parameters
    ----------
    theta : ndarray
        Azimuths, usually wrapped already (:func:`tap_azimuths`). [deg]

    Returns
    -------
    ndarray
        The same values in [0, 360): ``theta`` itself when it needs no wrapping (the remainder of
        a value in [0, 360) is that value), else ``np.mod(theta, 360.0)``. [deg]
    """
    if theta.size and theta.min() >= 0.0 and theta.max() < 360.0:
        return theta
    return np.mod(theta, 360.0)


def floor_divide(x: np.ndarray, width: float) -> np.ndarray:
    """``x // width`` bit for bit (numpy's exact floor of the quotient), in fewer passes.

    floor(fl(x / width)) is the exact floor except where the quotient rounded to a whole
    number; only those elements are divided again with numpy's floor division.

    Examples
    --------
    >>> floor_divide(np.array([360.0, 7.5]), 360.0 / 7).tolist()
    [6.0, 0.0]
    """
    ratio = x / width
    whole = np.floor(ratio)
    edge = ratio == whole
    if edge.any():
        whole[edge] = x[edge] // width
    return whole


def nanmedian_of_columns(values: np.ndarray) -> np.ndarray:
    """``np.nanmedian(values, axis=0)`` of a 2-D array, sorted once instead of column by column.

    The middle sample of a column's finite values, or the mean of the middle two, as numpy's
    median gives it; NaN for a column without a finite value (no warning).
    """
    ordered = np.sort(values, axis=0)  # NaN last
    n = np.count_nonzero(~np.isnan(values), axis=0)
    low = np.take_along_axis(ordered, np.maximum((n - 1) // 2, 0)[None, :], axis=0)[0]
    high = np.take_along_axis(ordered, np.maximum(n // 2 - (n == 0), 0)[None, :], axis=0)[0]
    median = (low + high) / 2.0
    median[n == 0] = np.nan
    return median


def _revolution_index(theta: np.ndarray) -> np.ndarray:
    """Revolution count of each sample of time-ordered azimuths (last axis is time)."""
    return np.floor(np.unwrap(theta, period=360.0, axis=-1) / 360.0).astype(np.int64)


def tap_azimuths(
    encoder_angle: npt.ArrayLike,
    tap_azimuth: npt.ArrayLike,
    tubing_delay: npt.ArrayLike,
    omega: float,
) -> tuple[np.ndarray, np.ndarray]:
    """Every tap's azimuth at every sample, and its revolution number, from one encoder record.

    Parameters
    ----------
    encoder_angle : array_like, shape (n,)
        The encoder angle at each sample, in time order, wrapped or cumulative. [deg]
    tap_azimuth, tubing_delay : array_like, shape (taps,)
        Each tap's azimuth at encoder zero [deg] and tubing delay [s] (:func:`tap_azimuth`).
    omega : float
        Spin rate, signed. [rad/s]

    Returns
    -------
    theta : ndarray, shape (taps, n)
        :func:`tap_azimuth` of each tap, wrapped to [0, 360). [deg]
    revolution : ndarray of int, shape (taps, n)
        Whole turns of each tap's unwrapped azimuth (what :func:`bin_cp` counts by default), up
        to a constant per tap, which does not change the passes. [-]

    Notes
    -----
    Every tap turns with the encoder, so one unwrap of the encoder record gives every tap's turn
    count: a tap's unwrapped azimuth is the unwrapped encoder angle plus a constant, and its
    turns are the encoder's turns plus the wraps of :func:`tap_azimuth` at that sample (read back
    from the very values binned, so a sample on a bin edge is counted consistently). Needs less
    than half a turn between successive samples, as unwrapping always does.

    Examples
    --------
    >>> theta, rev = tap_azimuths([300.0, 350.0, 40.0, 90.0], [0.0, 90.0], [0.0, 0.0], 10.0)
    >>> theta.tolist(), rev.tolist()
    ([[300.0, 350.0, 40.0, 90.0], [30.0, 80.0, 130.0, 180.0]], [[0, 0, 1, 1], [1, 1, 1, 1]])
    """
    angle = np.asarray(encoder_angle, dtype=float)
    azimuth = np.asarray(tap_azimuth, dtype=float)[:, None]
    delay = np.asarray(tubing_delay, dtype=float)[:, None]
    # The same arithmetic as tap_azimuth, so that theta is bit for bit what it gives.
    raw = angle[None, :] + azimuth - np.degrees(omega * delay)
    theta, wraps = _wrap_turns(raw)
    turns = np.rint((np.unwrap(angle, period=360.0) - angle) / 360.0).astype(np.int64)
    return theta, turns[None, :] + wraps.astype(np.int64)


def _pass_index(
    series: np.ndarray, revolution: np.ndarray, b: np.ndarray, bins: int
) -> tuple[np.ndarray, np.ndarray] | None:
    """(pass of each sample, bin of each pass): a pass is one series' stay in one bin per turn.

    Samples are in time order within each series. When each series' turn-and-bin key moves one
    way only (the azimuth never steps back across a bin edge) every pass is one stretch of
    consecutive samples, numbered in one scan; otherwise np.unique groups them. None for whole
    series whose every sample is a pass of its own.
    """
    key = revolution * bins + b
    if key.ndim == 2:
        # Whole series, one a row: steps are taken within rows, so no sample pairs across series.
        step = np.diff(key, axis=1)
        if step.size == 0 or not (step.max() > 0 and step.min() < 0):
            if step.size and np.count_nonzero(step) == step.size:
                return None
            starts = np.ones(key.shape, dtype=bool)
            np.not_equal(step, 0, out=starts[:, 1:])
            starts = starts.reshape(-1)
            return np.cumsum(starts) - 1, b.reshape(-1)[starts]
        key, series, revolution, b = (a.reshape(-1) for a in (key, series, revolution, b))
    step = np.diff(key)
    same_series = series[1:] == series[:-1]
    monotone = not (np.any(step[same_series] > 0) and np.any(step[same_series] < 0))
    if monotone:
        starts = np.concatenate(([True], (step != 0) | ~same_series))
        which = np.cumsum(starts) - 1
        return which, b[starts]
    revolution = revolution - revolution.min()
    turns = int(revolution.max()) + 1
    passes, which = np.unique((series * turns + revolution) * bins + b, return_inverse=True)
    return which.reshape(-1), passes % bins


def azimuth_derivatives(
    theta: npt.ArrayLike, values: npt.ArrayLike
) -> tuple[np.ndarray, np.ndarray]:
    """First and second derivative of a periodic curve known at sorted distinct azimuths.

    Parameters
    ----------
    theta : array_like, shape (n,)
        Distinct azimuths in [0, 360), increasing. [deg]
    values : array_like, shape (n,)
        The curve there (NaN-free). [any unit]

    Returns
    -------
    slope, curvature : ndarray, shape (n,)
        Three-point finite differences on the periodic, possibly uneven grid. [unit/deg],
        [unit/deg²]

    Notes
    -----
    With spacings h₋ and h₊ either side of a point, f' ≈ (h₋² f₊ − h₊² f₋ + (h₊² − h₋²) f) /
    (h₋ h₊ (h₋ + h₊)) and f'' ≈ 2 (h₋ f₊ + h₊ f₋ − (h₋ + h₊) f) / (h₋ h₊ (h₋ + h₊)), the
    derivatives of the parabola through the three points [1]_; on an even grid they are the
    central differences, second-order accurate. Used for the sensitivity of a binned Cp to an
    azimuth error and for the bins' offset correction, where a few per cent of the slope is
    enough.

    References
    ----------
    .. [1] B. Fornberg, "Generation of finite difference formulas on arbitrarily spaced grids",
       Math. Comp. 51 (1988) 699–706.

    Examples
    --------
    >>> theta = np.arange(0.0, 360.0, 5.0)
    >>> slope, curv = azimuth_derivatives(theta, np.sin(np.radians(theta)))
    >>> round(float(slope[0]) * 180 / np.pi, 4), round(float(curv[18]) * (180 / np.pi) ** 2, 3)
    (0.9987, -0.999)
    """
    theta = np.asarray(theta, dtype=float)
    f = np.asarray(values, dtype=float)
    if theta.size < 3:
        return np.zeros_like(f), np.zeros_like(f)
    ahead = np.roll(f, -1)
    behind = np.roll(f, 1)
    h_plus = np.mod(np.roll(theta, -1) - theta, 360.0)
    h_minus = np.mod(theta - np.roll(theta, 1), 360.0)
    scale = h_minus * h_plus * (h_minus + h_plus)
    slope = (h_minus**2 * ahead - h_plus**2 * behind + (h_plus**2 - h_minus**2) * f) / scale
    curvature = 2.0 * (h_minus * ahead + h_plus * behind - (h_minus + h_plus) * f) / scale
    return slope, curvature


def bin_cp(
    theta: npt.ArrayLike,
    cp: npt.ArrayLike,
    *,
    bins: int = 72,
    min_count: int = 5,
    revolution: npt.ArrayLike | None = None,
) -> BinnedCp:
    """Bin a rotating tap's Cp record by azimuth.

    Parameters
    ----------
    theta : array_like, shape (..., n)
        Tap azimuth of each sample (:func:`tap_azimuth`), in time order along the last axis. [deg]
    cp : array_like, shape (..., n)
        Pressure coefficient of each sample; broadcast against ``theta``. Leading axes are
        separate series (for example several taps) pooled into the same bins. NaN samples are
        dropped. [-]
    bins : int, optional
        Number of bins, uniform over [0, 360). [-]
    min_count : int, optional
        Bins with fewer samples are marked ``thin``. [-]
    revolution : array_like of int, optional
        Revolution number of each sample; by default it is counted from ``theta`` (the number of
        whole turns of the unwrapped azimuth), which needs less than half a turn between
        successive samples. [-]

    Returns
    -------
    BinnedCp

    Notes
    -----
    Sample i falls in bin floor(θ_i mod 360 / (360/bins)). ``mean`` and ``std`` are the plain
    statistics of the samples in the bin.

    ``u_mean`` treats the passes, not the samples, as the independent observations: the samples
    one pass of a tap leaves in a bin are a few milliseconds apart and see the same flow event, so
    they are strongly correlated, while passes are a revolution apart. Each pass (one revolution of
    one series) is reduced to its mean, and u_mean = s(pass means)/√(number of passes), the type-A
    evaluation of GUM §4.2.3 applied to the pass means (the method of batch means [2]_ with the
    revolution as the batch). Using std/√count instead would understate the uncertainty by the
    square root of the samples per pass. The choice assumes the pressure fluctuations forget
    themselves within a revolution; a fluctuation locked to the spin (shedding at a multiple of
    the spin rate) would break it. A bin seen on a single pass (a stationary model) has no
    between-revolution scatter and gets NaN: use the time-series statistics of the tap's record
    there instead.

    References
    ----------
    .. [1] JCGM 100:2008, *Evaluation of measurement data — Guide to the expression of uncertainty
       in measurement*, §4.2.
    .. [2] A. M. Law, *Simulation Modeling and Analysis*, 5th ed., McGraw-Hill, 2015 (the method of
       batch means) (from memory).

    Examples
    --------
    >>> theta = np.linspace(0.0, 3600.0, 7200, endpoint=False)  # ten revolutions
    >>> b = bin_cp(theta, np.cos(np.radians(theta)), bins=4)
    >>> b.theta.tolist(), b.count.tolist()
    ([45.0, 135.0, 225.0, 315.0], [1800, 1800, 1800, 1800])
    """
    theta, cp = np.broadcast_arrays(np.asarray(theta, dtype=float), np.asarray(cp, dtype=float))
    if revolution is None:
        revolution = _revolution_index(theta)
    revolution = np.broadcast_to(np.asarray(revolution, dtype=np.int64), theta.shape)
    n = theta.shape[-1] if theta.ndim else 1
    n_series = theta.size // n if n else 0
    series = np.broadcast_to(np.arange(n_series).reshape(theta.shape[:-1] + (1,)), theta.shape)
    whole = bool(theta.size and np.isfinite(theta).all() and np.isfinite(cp).all())
    if whole:
        # Every sample kept: series stay whole rows (n_series, n), views, no copies.
        theta, cp, revolution, series = (
            a.reshape(n_series, n) for a in (theta, cp, revolution, series)
        )
    else:
        keep = np.isfinite(theta) & np.isfinite(cp)
        theta, cp, revolution, series = theta[keep], cp[keep], revolution[keep], series[keep]

    width = 360.0 / bins
    centres = (np.arange(bins) + 0.5) * width
    wrapped = within_turn(theta)
    b = np.minimum((wrapped / width).astype(np.int64), bins - 1)
    flat_b, flat_cp = b.reshape(-1), cp.reshape(-1)
    count = np.bincount(flat_b, minlength=bins)
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = np.bincount(flat_b, weights=flat_cp, minlength=bins) / count
        # Two passes (mean first, then squared departures) to keep the variance accurate when the
        # mean is large against the scatter.
        departure = flat_cp - mean[flat_b]
        squares = np.bincount(flat_b, weights=departure * departure, minlength=bins)
        std = np.sqrt(squares / (count - 1))
        from_centre = wrapped.reshape(-1) - centres[flat_b]
        offset = np.bincount(flat_b, weights=from_centre, minlength=bins) / count
        np.multiply(from_centre, from_centre, out=from_centre)
        mean_square_offset = np.bincount(flat_b, weights=from_centre, minlength=bins) / count
    std[count < 2] = np.nan
    if whole:
        series_count = np.stack([np.bincount(row, minlength=bins) for row in b])
    else:
        series_count = np.bincount(series * bins + b, minlength=max(n_series, 1) * bins)
    series_count = series_count.reshape(-1, bins)[: max(n_series, 1)]

    passes = _pass_index(series, revolution, b, bins) if cp.size else None
    if passes is None and cp.size:
        # Every sample a pass of its own (a fast spin: each sample in another bin): the passes'
        # statistics are the samples', the same sums in the same order.
        n_pass, spread = count, squares
    else:
        which, pass_bin = passes or (np.zeros(0, np.int64), np.zeros(0, np.int64))
        pass_mean = np.bincount(which, weights=flat_cp) / np.bincount(which)
        n_pass = np.bincount(pass_bin, minlength=bins)
        with np.errstate(invalid="ignore", divide="ignore"):
            centre = np.bincount(pass_bin, weights=pass_mean, minlength=bins) / n_pass
            spread = np.bincount(
                pass_bin, weights=(pass_mean - centre[pass_bin]) ** 2, minlength=bins
            )
    with np.errstate(invalid="ignore", divide="ignore"):
        u_mean = np.sqrt(spread / (n_pass - 1) / n_pass)
    u_mean[n_pass < 2] = np.nan

    return BinnedCp(
        theta=(np.arange(bins) + 0.5) * width,
        mean=mean,
        std=std,
        count=count,
        u_mean=u_mean,
        thin=count < min_count,
        offset=offset,
        spread=mean_square_offset,
        series_count=series_count,
    )


def _flat_std(b: BinnedCp | npt.ArrayLike) -> float:
    """Standard deviation of a tap's whole Cp record, rebuilt from its bins."""
    if isinstance(b, BinnedCp):
        count = np.asarray(b.count, dtype=float)
        full = count > 0
        total = count[full].sum()
        if total < 2:
            return np.nan
        mean = b.mean[full]
        grand = (count[full] * mean).sum() / total
        within = np.nansum((count[full] - 1) * np.where(count[full] > 1, b.std[full], 0.0) ** 2)
        between = (count[full] * (mean - grand) ** 2).sum()
        return float(np.sqrt((within + between) / (total - 1)))
    values = np.asarray(b, dtype=float)
    finite = values[np.isfinite(values)]
    return float(np.std(finite)) if finite.size > 1 else np.nan


def find_dead_taps(
    tap_names: Sequence[str],
    tap_binned: Sequence[BinnedCp] | Sequence[npt.ArrayLike] | np.ndarray,
    *,
    tolerance: float = 0.15,
    flat_std: float = 1e-3,
    u: npt.ArrayLike | None = None,
    k: float | None = None,
    false_alarm: float = 0.01,
) -> dict[str, str]:
    """Taps to leave out of Cp(θ): flat-lined ones, and ones whose Cp departs from the others'.

    Parameters
    ----------
    tap_names : sequence of str
        The taps, in the order of ``tap_binned``.
    tap_binned : list of BinnedCp, or array_like of shape (n_taps, n_bins)
        Each tap's binned Cp on one common bin grid (or the bin means only). [-]
    tolerance : float, optional
        Largest accepted median absolute departure from the other taps' median Cp. [-]
    flat_std : float, optional
        A record whose Cp standard deviation is below this (a fraction of q) is flat-lined. [-]
    u : array_like of shape (n_taps, n_bins), optional
        Standard uncertainty of each tap's binned Cp from the errors that are the tap's own (its
        azimuth and tubing delay through the local slope of Cp, its scanner port); errors all
        taps share (q, the encoder) cancel in the comparison. None: no allowance. [-]
    k : float, optional
        Coverage factor of that allowance; by default the one that keeps the chance of flagging
        any of the n taps of a fault-free run by their own errors below ``false_alarm``. [-]
    false_alarm : float, optional
        That chance, for the default k. [-]

    Returns
    -------
    dict
        {tap name: reason}, the reason quoting the measured value and the tolerance; empty when
        every tap is good.

    Notes
    -----
    Flat line: the standard deviation of the whole record (rebuilt from the bins' counts, means
    and standard deviations; from the bin means alone for an array) below ``flat_std``, or zero. A
    rotating tap sweeps the full range of Cp every revolution and a stationary one still sees the
    turbulence, so a live tap is never that steady; a blocked or disconnected one is.

    Departure: a rotating tap sweeps the same circle as every other, so all see one Cp(θ). For
    each tap and shared bin, the gap abs(Cp_tap − median of the other taps' Cp) is reduced by k
    times its standard uncertainty, u²(gap) = u²_tap + (π/2) mean(u²_others) / n_others (the
    median of n normal values has about π/2 times the variance of their mean [2]_), and d is the
    median over the shared bins of that excess: a good tap whose azimuth is known to a few
    tenths of a degree moves its curve on a steep Cp(θ) by more than any fixed tolerance, a
    dead or leaking one departs by more than its uncertainty explains. Each of the n taps is a
    test, so the default k is the two-sided normal quantile of 1 − false_alarm/(2n) (Bonferroni
    [3]_): 2.94 for 3 taps, 3.42 for 16 at 1 %. The worst tap with d >
    ``tolerance`` is flagged and dropped from the reference, and the test is repeated, so that
    one leaking tap cannot drag the reference of the good ones. The median makes both steps
    robust to a minority of bad taps [1]_. At least three taps must remain (with two, there is
    no telling which one is wrong); taps that share no bins (a stationary model) are not
    compared.

    References
    ----------
    .. [1] P. J. Huber and E. M. Ronchetti, *Robust Statistics*, 2nd ed., Wiley, 2009, ch. 1 (the
       median as a robust estimate of location).
    .. [2] A. Stuart and J. K. Ord, *Kendall's Advanced Theory of Statistics*, vol. 1, 6th ed.,
       Arnold, 1994, §10.10 (variance of the sample median, π σ²/(2 n)) (from memory).
    .. [3] R. G. Miller, *Simultaneous Statistical Inference*, 2nd ed., Springer, 1981, ch. 1
       (the Bonferroni inequality) (from memory).

    Examples
    --------
    >>> cp = np.tile(np.cos(np.radians(np.arange(36) * 10.0)), (4, 1))
    >>> cp[2] += 0.4
    >>> print(find_dead_taps(["t1", "t2", "t3", "t4"], cp)["t3"])
    binned Cp departs from the other taps by 0.400 (median over 36 shared bins; tolerance 0.15)
    """
    names = list(tap_names)
    if len(names) != len(tap_binned):
        raise ValueError(
            f"find_dead_taps: {len(names)} tap names for {len(tap_binned)} binned records"
        )
    if names and isinstance(tap_binned[0], BinnedCp):
        binned = cast("Sequence[BinnedCp]", tap_binned)
        means = np.array([b.mean for b in binned], dtype=np.float64)
    else:
        means = np.array(tap_binned, dtype=float)
    if means.ndim != 2:
        raise ValueError(
            f"find_dead_taps: expected (n_taps, n_bins) binned Cp, found {means.shape}"
        )
    if k is None:
        k = NormalDist().inv_cdf(1.0 - false_alarm / (2.0 * max(len(names), 1)))
    own_u = np.zeros_like(means)
    if u is not None:
        own_u = np.broadcast_to(np.asarray(u, dtype=float), means.shape)

    dead: dict[str, str] = {}
    for name, record in zip(names, tap_binned, strict=True):
        std = _flat_std(record)
        if np.isfinite(std) and (std < flat_std or std == 0.0):
            dead[name] = f"flat-lined: Cp standard deviation {std:.2g} (below {flat_std:g})"

    reference = np.array([name not in dead for name in names])
    while reference.sum() >= 3:
        departure = np.full(len(names), np.nan)
        shared = np.zeros(len(names), dtype=int)
        for i in np.flatnonzero(reference):
            others = reference.copy()
            others[i] = False
            # An all-NaN bin (no other tap there) is expected and simply not compared.
            median = nanmedian_of_columns(means[others])
            spread = np.pi / 2 * np.mean(own_u[others] ** 2, axis=0) / others.sum()
            gap = np.abs(means[i] - median) - k * np.sqrt(own_u[i] ** 2 + spread)
            gap = gap[np.isfinite(gap)]
            shared[i] = gap.size
            if gap.size:
                departure[i] = np.median(gap)
        if not np.any(departure > tolerance):
            break
        worst = int(np.nanargmax(departure))
        beyond = "" if u is None else f" beyond {k:.2f} × its uncertainty"
        dead[names[worst]] = (
            f"binned Cp departs from the other taps by {departure[worst]:.3f}{beyond} "
            f"(median over {shared[worst]} shared bins; tolerance {tolerance:g})"
        )
        reference[worst] = False
    return {name: dead[name] for name in names if name in dead}


def merge_indexed(
    thetas: Sequence[npt.ArrayLike], cps: Sequence[npt.ArrayLike]
) -> tuple[np.ndarray, np.ndarray]:
    """Merge the taps of several runs at different index angles into one Cp(θ) (stationary model).

    Parameters
    ----------
    thetas : list of array_like
        Each run's tap azimuths (:func:`tap_azimuth` with ω = 0 and its index angle). [deg]
    cps : list of array_like
        Each run's Cp at those azimuths. [-]

    Returns
    -------
    theta, cp : ndarray
        All points, azimuths wrapped to [0, 360) and sorted; repeated azimuths are kept (and
        averaged by :func:`integrate_cp`). [deg], [-]

    Notes
    -----
    Indexing the model between runs (rotating it by a known angle) places the same few taps at
    new azimuths; merging assumes the runs share one flow condition.

    References
    ----------
    .. [1] J. B. Barlow, W. H. Rae and A. Pope, *Low-Speed Wind Tunnel Testing*, 3rd ed., Wiley,
       1999, ch. 4 (surface pressure measurement) (chapter from memory).

    Examples
    --------
    >>> merge_indexed([[0.0, 180.0], [-90.0, 90.0]], [[1.0, -0.5], [-1.0, -1.2]])[0].tolist()
    [0.0, 90.0, 180.0, 270.0]
    """
    if len(thetas) != len(cps):
        raise ValueError(f"merge_indexed: {len(thetas)} azimuth arrays for {len(cps)} Cp arrays")
    theta_parts = [np.ravel(np.asarray(t, dtype=float)) for t in thetas]
    cp_parts = [np.ravel(np.asarray(c, dtype=float)) for c in cps]
    for k, (t, c) in enumerate(zip(theta_parts, cp_parts, strict=True)):
        if t.shape != c.shape:
            raise ValueError(f"merge_indexed: run {k} has {t.size} azimuths but {c.size} Cp values")
    theta = np.mod(np.concatenate(theta_parts), 360.0)
    cp = np.concatenate(cp_parts)
    order = np.argsort(theta, kind="stable")
    return theta[order], cp[order]
