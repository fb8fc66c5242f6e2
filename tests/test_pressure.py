"""Tests of tunnelred.physics.pressure: tap azimuth, centrifugal head, binning, ∮Cp, dead taps.

Sources: Bessel-function integrals (M. Abramowitz and I. A. Stegun, Handbook of Mathematical
Functions, 1964, eq. 9.6.19 (number from memory): I_n(z) = (1/π)∫₀^π e^{z cos θ} cos nθ dθ) with
scipy.special; scipy.integrate.quad as the reference integrator; rigid-body rotation
dp/dr = ρω²r (F. M. White, Fluid Mechanics, 7th ed., §2.9, section from memory) integrated by
quad; GUM (JCGM 100:2008) §4.2.3 for the type-A uncertainty of a mean; potential flow (J. D.
Anderson, Fundamentals of Aerodynamics, 6th ed., §3.15) as a smooth test Cp(θ).
"""

import re
import warnings

import numpy as np
import pandas as pd
import pytest
import xarray as xr
from scipy.integrate import quad
from scipy.signal import lfilter
from scipy.special import i0, i1

from tunnelred.physics.pressure import (
    BinnedCp,
    CpGapError,
    azimuth_derivatives,
    bin_cp,
    centrifugal_head,
    find_dead_taps,
    floor_divide,
    integrate_cp,
    merge_indexed,
    nanmedian_of_columns,
    pressure_coefficient,
    tap_azimuth,
    tap_azimuths,
    within_turn,
)
from tunnelred.physics.theory import cp_surface


def _smooth_cp(theta):
    """A smooth periodic Cp(θ) with lift, drag and higher harmonics [deg] -> [-]."""
    t = np.radians(theta)
    return np.exp(np.cos(t)) + 0.3 * np.sin(2 * t) - 0.2 * np.cos(3 * t) + 0.5 * np.sin(t)


def _quad_coefficients(func):
    """(CL, CD) = ½∮ f sin, ½∮ f cos by scipy.integrate.quad, the reference integrator."""
    lift = quad(lambda t: 0.5 * func(np.degrees(t)) * np.sin(t), 0, 2 * np.pi, epsabs=1e-13)[0]
    drag = quad(lambda t: 0.5 * func(np.degrees(t)) * np.cos(t), 0, 2 * np.pi, epsabs=1e-13)[0]
    return lift, drag


# --- tap azimuth, centrifugal head, Cp -------------------------------------------------------


def test_tap_azimuth_hand_worked():
    # θ = encoder + offset − degrees(ω τ), wrapped (docs/input-format.md). Hand-worked:
    # ω = 2π·25 rad/s, τ = 2 ms → ω τ = 0.1π rad = 18°; 350 + 40 − 18 = 372 → 12°.
    # Negative spin: the delay puts the reading ahead instead: 350 + 40 + 18 = 408 → 48°.
    omega = 2 * np.pi * 25
    assert tap_azimuth(350.0, 40.0, 0.002, omega) == pytest.approx(12.0, abs=1e-9)
    assert tap_azimuth(350.0, 40.0, 0.002, -omega) == pytest.approx(48.0, abs=1e-9)


def test_tap_azimuth_stationary_and_cumulative_encoder():
    # A stationary model (ω = 0): the tap's own azimuth plus the index angle, wrapped; a
    # cumulative encoder angle (docs/input-format.md allows it) wraps to the same azimuth.
    assert tap_azimuth(0.0, -30.0, 0.05, 0.0) == pytest.approx(330.0, abs=1e-12)
    assert tap_azimuth(15.0, 350.0, 0.0, 0.0) == pytest.approx(5.0, abs=1e-12)
    assert tap_azimuth(3600.0 + 100.0, 10.0, 0.0, 0.0) == pytest.approx(110.0, abs=1e-9)
    theta = tap_azimuth(np.linspace(-720.0, 720.0, 97), np.array([[0.0], [90.0]]), 0.0, 0.0)
    assert theta.shape == (2, 97)
    assert ((theta >= 0.0) & (theta < 360.0)).all()


@pytest.mark.parametrize(
    "kind",
    [np.asarray, lambda v: pd.Series(v), lambda v: xr.DataArray(v, dims="time")],
    ids=["ndarray", "Series", "DataArray"],
)
def test_tap_azimuth_input_kinds(kind):
    # The array adapter returns the kind it was given (tunnelred.common._arraylike).
    theta = tap_azimuth(kind(np.array([0.0, 90.0, 400.0])), 10.0, 0.0, 0.0)
    assert np.asarray(theta) == pytest.approx([10.0, 100.0, 50.0], abs=1e-12)
    assert type(theta) is type(kind(np.array([0.0])))


def test_centrifugal_head_hand_worked_and_by_quadrature():
    # Rigid-body rotation (White §2.9): dp/dr = ρ ω² r. Hand-worked: ρ = 1.2 kg/m3,
    # ω = 2π·50 = 314.159 rad/s (ω² = 98 696.04), R = 0.05 m, r_t = 0.02 m:
    # ½ · 1.2 · 98 696.04 · (0.0025 − 0.0004) = 124.357 Pa (6 digits worked → rel 1e-5).
    rho, omega, R, r_t = 1.2, 2 * np.pi * 50, 0.05, 0.02
    assert centrifugal_head(rho, omega, R, r_t) == pytest.approx(124.357, rel=1e-5)
    # The same by integrating dp/dr from the transducer out to the tap with scipy quad (rel 1e-10).
    integral, _ = quad(lambda r: rho * omega**2 * r, r_t, R)
    assert centrifugal_head(rho, omega, R, r_t) == pytest.approx(integral, rel=1e-10)
    # The sign of the spin does not matter; a transducer on the axis sees ρ ω² R²/2 (150.0 Pa with
    # ω = 100 rad/s, hand-worked).
    assert centrifugal_head(rho, -omega, R, r_t) == centrifugal_head(rho, omega, R, r_t)
    assert centrifugal_head(1.2, 100.0, 0.05) == pytest.approx(15.0, rel=1e-12)


def test_pressure_coefficient_adds_the_head():
    # The transducer reads p_tap − head, so Cp = (reading + head)/q. Hand-worked: reading −85 Pa,
    # head 15 Pa, q = 100 Pa → −0.7; without the head −0.85. Rounding only → 1e-12.
    assert pressure_coefficient(-85.0, 100.0, head=15.0) == pytest.approx(-0.7, abs=1e-12)
    assert pressure_coefficient(-85.0, 100.0) == pytest.approx(-0.85, abs=1e-12)
    cp = pressure_coefficient(np.full((4, 10), 50.0), np.array([[100.0], [200.0], [50.0], [25.0]]))
    assert cp[:, 0] == pytest.approx([0.5, 0.25, 1.0, 2.0], abs=1e-12)


# --- integration -------------------------------------------------------------------------------


@pytest.mark.parametrize("n", [36, 72])
def test_integrate_uniform_against_bessel_functions(n):
    # A&S 9.6.19 (scipy.special.i0/i1): ½∮ e^{cos θ} cos θ dθ = π I1(1); ½∮ e^{cos θ} sin θ = 0;
    # ½∮ e^{sin θ} sin θ dθ = π I1(1); ½∮ e^{sin θ} cos θ = 0. The periodic trapezoid rule's error
    # here is of order I_n(1) (Trefethen & Weideman 2014, §3), below 1e-40 for n = 36, so only
    # rounding of n terms is left: 1e-12.
    theta = np.arange(n) * 360.0 / n
    t = np.radians(theta)
    CL, CD = integrate_cp(theta, np.exp(np.cos(t)))
    assert CD == pytest.approx(np.pi * i1(1.0), abs=1e-12)
    assert CL == pytest.approx(0.0, abs=1e-12)
    CL, CD = integrate_cp(theta, np.exp(np.sin(t)))
    assert CL == pytest.approx(np.pi * i1(1.0), abs=1e-12)
    assert CD == pytest.approx(0.0, abs=1e-12)


def test_integrate_uniform_i0_identity():
    # A&S 9.6.19 and the recurrence I2(1) = I0(1) − 2 I1(1) (A&S 9.6.26, from memory):
    # ½∮ e^{cos θ} cos²θ dθ = (π/2)(I0(1) + I2(1)) = π (I0(1) − I1(1)). Rounding only → 1e-12.
    theta = np.arange(48) * 7.5
    t = np.radians(theta)
    _, CD = integrate_cp(theta, np.exp(np.cos(t)) * np.cos(t))
    assert CD == pytest.approx(np.pi * (i0(1.0) - i1(1.0)), abs=1e-12)


def test_integrate_non_uniform_against_quad():
    # Random non-uniform taps (36, jittered by up to ±30 % of the spacing, widest gap 15°) on a
    # smooth periodic Cp, against scipy.integrate.quad. The periodic cubic spline's pointwise
    # error is O(h⁴) (de Boor, ch. IV: (5/384) h⁴ max|f''''| ≈ 1.5e-3 at h = 15°); integrating
    # against sin/cos averages much of the oscillating interpolation error away (measured 3e-5):
    # tolerance 1e-4, well below the 3.5e-3 a linear interpolant of the same taps errs by.
    rng = np.random.default_rng(7)
    n = 36
    theta = (np.arange(n) + rng.uniform(-0.3, 0.3, n)) * 360.0 / n
    CL, CD = integrate_cp(theta, _smooth_cp(theta))
    ref_CL, ref_CD = _quad_coefficients(_smooth_cp)
    assert CL == pytest.approx(ref_CL, abs=1e-4)
    assert CD == pytest.approx(ref_CD, abs=1e-4)


def test_integrate_non_uniform_converges():
    # Spline convergence (de Boor, ch. IV): doubling the taps must shrink the error; fourfold or
    # better is a conservative reading of O(h⁴) for random jitter.
    ref_CL, _ = _quad_coefficients(_smooth_cp)
    errors = []
    for n in (24, 48):
        rng = np.random.default_rng(3)
        theta = (np.arange(n) + rng.uniform(-0.3, 0.3, n)) * 360.0 / n
        errors.append(abs(integrate_cp(theta, _smooth_cp(theta), max_gap=40.0)[0] - ref_CL))
    assert errors[1] < errors[0] / 4


@pytest.mark.parametrize("uniform", [True, False])
def test_integrate_independent_of_order_and_angle_range(uniform):
    # Taps given in −180..180 and in shuffled order are the same taps: same (CL, CD) to rounding.
    rng = np.random.default_rng(11)
    theta = np.arange(40) * 9.0
    if not uniform:
        theta = theta + rng.uniform(-2.0, 2.0, 40)
    cp = _smooth_cp(theta)
    order = rng.permutation(40)
    signed = (theta[order] + 180.0) % 360.0 - 180.0
    assert integrate_cp(signed, cp[order]) == pytest.approx(integrate_cp(theta, cp), abs=1e-12)


def test_integrate_averages_duplicate_azimuths():
    # 0° and 360° (and −180° and 180°) are one tap position: their Cp values are averaged, so a
    # grid with both ends duplicated integrates like the grid without (exact to rounding).
    theta = np.arange(36) * 10.0
    cp = cp_surface(theta, 0.7)
    doubled_theta = np.concatenate([theta, [360.0, -180.0]])
    doubled_cp = np.concatenate([cp, [cp[0] + 0.2, cp[18] - 0.2]])
    # The duplicates carry ±0.1 changes to the two positions' means.
    expected = cp.copy()
    expected[0] += 0.1
    expected[18] -= 0.1
    assert integrate_cp(doubled_theta, doubled_cp) == pytest.approx(
        integrate_cp(theta, expected), abs=1e-12
    )


def test_integrate_drops_nan_points():
    # A NaN bin is dropped (the grid becomes non-uniform and the spline bridges it). Potential
    # flow (Anderson §3.15, CL = −2π·0.5 = −π): the spline across one 20° hole of a trigonometric
    # polynomial of degree 3 errs by less than 1e-3 (measured 1.5e-4).
    theta = np.arange(36) * 10.0
    cp = cp_surface(theta, 0.5)
    cp[7] = np.nan
    CL, CD = integrate_cp(theta, cp)
    assert CL == pytest.approx(-np.pi, abs=1e-3)
    assert CD == pytest.approx(0.0, abs=1e-3)


def test_integrate_gap_raises_with_its_angles():
    # Taps every 10° except between 100° and 150°: a 50° gap beyond max_gap = 30 raises, naming
    # both ends; the same gap through 0/360 (from 340° to 30°) names the wrapped ends.
    theta = np.array([a for a in np.arange(0.0, 360.0, 10.0) if not 100.0 < a < 150.0])
    with pytest.raises(CpGapError, match=r"from 100\.0 to 150\.0 deg") as info:
        integrate_cp(theta, _smooth_cp(theta))
    assert isinstance(info.value, ValueError)
    assert (info.value.start, info.value.end, info.value.gap) == pytest.approx((100.0, 150.0, 50.0))
    wrapped = np.arange(30.0, 341.0, 10.0)
    with pytest.raises(CpGapError, match=r"from 340\.0 to 30\.0 deg"):
        integrate_cp(wrapped, _smooth_cp(wrapped))
    # A 50° gap passes when max_gap allows it.
    integrate_cp(theta, _smooth_cp(theta), max_gap=60.0)


def test_integrate_too_few_points_raises():
    with pytest.raises(CpGapError, match="4 or more"):
        integrate_cp([0.0, 120.0, 240.0], [1.0, -1.0, -1.0], max_gap=360.0)
    # Four entries, but 0 and 360 are one azimuth: three distinct.
    with pytest.raises(CpGapError, match="found 3"):
        integrate_cp([0.0, 120.0, 240.0, 360.0], [1.0, -1.0, -1.0, 1.0], max_gap=360.0)


@pytest.mark.parametrize("uniform", [True, False])
def test_integrate_batch_matches_rows(uniform):
    # A batch (..., n) on one grid gives (...) results equal to integrating each row alone
    # (rounding only), also when rows have different missing points.
    rng = np.random.default_rng(5)
    theta = np.arange(36) * 10.0 + (0.0 if uniform else rng.uniform(-3.0, 3.0, 36))
    alphas = rng.uniform(-1.5, 1.5, (4, 3))
    cp = cp_surface(theta, alphas[..., None]) + 0.01 * rng.normal(size=(4, 3, 36))
    cp[0, 1, 5] = np.nan
    cp[2, 2, [9, 20]] = np.nan
    CL, CD = integrate_cp(theta, cp)
    assert CL.shape == CD.shape == (4, 3)
    for idx in np.ndindex(4, 3):
        assert (CL[idx], CD[idx]) == pytest.approx(integrate_cp(theta, cp[idx]), abs=1e-12)


def test_merge_indexed_stationary_runs_cover_the_circle():
    # Two runs of a stationary model with 12 taps 30° apart, indexed by 0° and 15°: merged they
    # make a uniform 15° grid; potential flow (Anderson §3.15) integrates to CL = −2π alpha
    # exactly on it (trigonometric polynomial of degree 3 < 24 points) → 1e-12.
    alpha = -0.8
    taps = np.arange(12) * 30.0
    runs = [tap_azimuth(index, taps, 0.0, 0.0) for index in (0.0, 15.0)]
    theta, cp = merge_indexed(runs, [cp_surface(t, alpha) for t in runs])
    assert np.diff(theta) == pytest.approx(np.full(23, 15.0), abs=1e-12)
    CL, CD = integrate_cp(theta, cp)
    assert CL == pytest.approx(-2 * np.pi * alpha, abs=1e-12)
    assert CD == pytest.approx(0.0, abs=1e-12)
    with pytest.raises(ValueError, match="run 1"):
        merge_indexed([[0.0], [1.0, 2.0]], [[1.0], [1.0]])


# --- binning -----------------------------------------------------------------------------------


def test_bin_cp_statistics_against_numpy():
    # Four bins of 90°; samples by hand with their revolutions. Reference: numpy's mean, std
    # (ddof = 1) and the GUM §4.2.3 standard deviation of the mean of the pass means.
    theta = np.array([10.0, 20.0, 100.0, 10.0, 20.0, 100.0, 10.0, 25.0, 100.0, 10.0])
    revolution = np.array([0, 0, 0, 1, 1, 1, 2, 2, 2, 3])
    cp = np.array([1.0, 0.8, -0.5, 0.9, 0.7, -0.7, 1.2, 1.1, -0.4, 0.6])
    b = bin_cp(theta, cp, bins=4, min_count=3, revolution=revolution)
    assert b.theta == pytest.approx([45.0, 135.0, 225.0, 315.0])
    first = np.array([1.0, 0.8, 0.9, 0.7, 1.2, 1.1, 0.6])
    second = np.array([-0.5, -0.7, -0.4])
    assert b.count.tolist() == [7, 3, 0, 0]
    assert b.mean[:2] == pytest.approx([first.mean(), second.mean()], abs=1e-14)
    assert b.std[:2] == pytest.approx([first.std(ddof=1), second.std(ddof=1)], abs=1e-14)
    # Pass means of bin 0 (revolutions 0, 1, 2, 3): 0.9, 0.8, 1.15, 0.6.
    passes = np.array([0.9, 0.8, 1.15, 0.6])
    assert b.u_mean[0] == pytest.approx(passes.std(ddof=1) / 2.0, abs=1e-14)
    assert b.u_mean[1] == pytest.approx(second.std(ddof=1) / np.sqrt(3), abs=1e-14)
    assert np.isnan(b.mean[2:]).all() and np.isnan(b.std[2:]).all() and np.isnan(b.u_mean[2:]).all()
    assert b.thin.tolist() == [False, False, True, True]


def test_bin_cp_counts_revolutions_from_theta():
    # Without ``revolution``, turns are counted from the unwrapped azimuth: on a record of known
    # revolutions (cumulative angle // 360), wrapped or cumulative θ, spinning either way, the
    # result equals the one with the revolutions given (rounding only).
    rng = np.random.default_rng(12)
    cumulative = np.cumsum(rng.uniform(0.5, 3.0, 5000))
    cp = _true_cp(cumulative) + rng.normal(0, 0.05, cumulative.size)
    known = bin_cp(cumulative % 360.0, cp, revolution=cumulative // 360.0)
    for theta in (cumulative, cumulative % 360.0):
        assert bin_cp(theta, cp).u_mean == pytest.approx(known.u_mean, abs=1e-14)
    backwards = bin_cp(-cumulative % 360.0, cp, revolution=-cumulative // 360.0)
    assert bin_cp(-cumulative % 360.0, cp).u_mean == pytest.approx(backwards.u_mean, abs=1e-14)


def test_bin_cp_pass_that_steps_back_is_one_pass():
    # Within revolution 0 the azimuth steps back across the 90° edge (80, 95, 85): the two bin-0
    # samples are one pass (one revolution of one tap), mean 0.5, as GUM §4.2.3 on the pass
    # means needs; revolution 1 gives bin 0 a second pass of 1.0 → u = |0.5 - 1.0| / 2.
    theta = np.array([80.0, 95.0, 85.0, 10.0, 100.0])
    cp = np.array([0.4, -1.0, 0.6, 1.0, -1.2])
    b = bin_cp(theta, cp, bins=4, revolution=[0, 0, 0, 1, 1])
    assert b.u_mean[0] == pytest.approx(np.std([0.5, 1.0], ddof=1) / np.sqrt(2), abs=1e-15)
    assert b.u_mean[1] == pytest.approx(np.std([-1.0, -1.2], ddof=1) / np.sqrt(2), abs=1e-15)


@pytest.mark.parametrize("omega", [1000.0, -700.0])
def test_tap_azimuths_from_one_encoder_unwrap(omega):
    # Every tap's azimuth is tap_azimuth's, bit for bit, and its turn count gives the same
    # binned Cp as unwrapping each tap's azimuth (bin_cp's default) to 1e-12: 16 taps, 4 ms
    # tubing, a 1 kHz record of a 1000 rad/s spin (0.36 turn a sample), wrapped encoder.
    rng = np.random.default_rng(3)
    t = np.arange(4000) * 1e-3
    angle = np.mod(np.degrees(omega * t) + rng.normal(0, 0.05, t.size), 360.0)
    azimuth = np.arange(16) * 22.5 + rng.normal(0, 0.3, 16)
    delay = rng.uniform(3.5e-3, 4.5e-3, 16)
    theta, turns = tap_azimuths(angle, azimuth, delay, omega)
    per_tap = np.stack(
        [tap_azimuth(angle, a, d, omega) for a, d in zip(azimuth, delay, strict=True)]
    )
    assert np.array_equal(theta, per_tap)
    cp = _true_cp(theta) + rng.normal(0, 0.05, theta.shape)
    given, counted = bin_cp(theta, cp, revolution=turns), bin_cp(theta, cp)
    for name in ("mean", "std", "u_mean", "count"):
        np.testing.assert_allclose(getattr(given, name), getattr(counted, name), rtol=1e-12)


def test_azimuth_derivatives_exact_on_a_parabola_and_periodic():
    # The three-point formulas are the derivatives of the parabola through the points
    # (Fornberg, Math. Comp. 51 (1988) 699-706): exact for a quadratic on any spacing, here away
    # from the wrap; on an even periodic grid, sin's derivative within sin(h)/h of cos.
    theta = np.array([10.0, 13.0, 20.0, 31.0, 40.0, 200.0])
    f = 0.3 + 0.02 * theta - 0.001 * theta**2
    slope, curvature = azimuth_derivatives(theta, f)
    np.testing.assert_allclose(slope[1:4], 0.02 - 0.002 * theta[1:4], rtol=1e-12)
    np.testing.assert_allclose(curvature[1:4], -0.002, rtol=1e-9)
    grid = np.arange(0.0, 360.0, 10.0)
    slope, _ = azimuth_derivatives(grid, np.sin(np.radians(grid)))
    h = np.radians(10.0)
    np.testing.assert_allclose(
        slope, np.radians(1.0) * np.cos(np.radians(grid)) * np.sin(h) / h, atol=1e-14
    )


def test_dead_tap_allowance_for_a_known_azimuth_error():
    # Potential-flow Cp at alpha = 3 (Anderson §3.15): tap t2 reads the curve 3 deg late, as a
    # tubing delay known to ±0.05 ms does at 1000 rad/s (±2.9 deg). Its departure exceeds the
    # fixed 0.15, so without an allowance it is taken for a leak; with u = |dCp/dθ| × 3 deg
    # (k = 2) it is a good tap, while a tap reading 2 in Cp high (a leak) is still found.
    theta = np.arange(72) * 5.0 + 2.5
    cp = np.stack([cp_surface(theta + shift, 3.0) for shift in (0.0, -3.0, 0.0, 0.0)])
    names = ["t1", "t2", "t3", "t4"]
    assert "t2" in find_dead_taps(names, cp)
    slope = np.abs(np.gradient(cp_surface(theta, 3.0), 5.0))
    u = np.tile(slope * 3.0, (4, 1))
    assert find_dead_taps(names, cp, u=u, k=2.0) == {}
    cp[3] += 2.0
    found = find_dead_taps(names, cp, u=u, k=2.0)
    assert list(found) == ["t4"] and "beyond 2.00 × its uncertainty" in found["t4"]
    # By default k keeps the chance of any false flag among the 4 taps at 1 % (Bonferroni):
    # the normal quantile of 1 - 0.01/8 is 3.023 (scipy.stats.norm.ppf(0.99875) = 3.0233).
    assert "beyond 3.02 × its uncertainty" in find_dead_taps(names, cp, u=u)["t4"]


def test_bin_cp_centres_and_edges():
    # Bins cover [0, 360) uniformly with centres at (i + ½)·360/bins; 360 falls in bin 0, −1 in
    # the last; NaN samples are dropped; a single pass gives NaN u_mean (no between-revolution
    # scatter).
    b = bin_cp(
        np.array([0.0, 359.999, 360.0, -1.0, 5.0]), np.array([1.0, 2.0, 3.0, 4.0, np.nan]), bins=72
    )
    assert b.theta[[0, -1]] == pytest.approx([2.5, 357.5])
    assert b.count[0] == 2 and b.count[-1] == 2 and b.count.sum() == 4
    assert isinstance(b, BinnedCp)


def _rotating_record(rng, *, spin_hz=19.37, rate=10_000.0, duration=3.0):
    """Encoder angle [deg], spin [rad/s] and time [s] of a steadily spinning model."""
    time = np.arange(int(rate * duration)) / rate
    omega = 2 * np.pi * spin_hz  # not commensurate with the sample rate, as in a real run
    return np.degrees(omega * time) % 360.0, omega, time


def _true_cp(theta):
    return cp_surface(theta, 0.5) + 0.3 * np.cos(np.radians(theta))


def test_bin_cp_uncertainty_is_honest_for_correlated_samples():
    # GUM §4.2.3 applied to pass means: with noise correlated over 2 ms (a pass through a 5° bin
    # lasts 0.7 ms) but independent between revolutions (52 ms apart), the standardised errors
    # z = (mean − truth)/u_mean over 72 bins must have a standard deviation near 1: the sample
    # standard deviation of 72 unit normals lies within 1 ± 0.25 at about 3 sigma (its standard
    # error is 1/√144). std/√count, which counts every sample as independent, would fail this.
    rng = np.random.default_rng(2)
    angle, omega, time = _rotating_record(rng)
    phi = np.exp(-1.0 / (10_000.0 * 0.002))
    noise = lfilter([np.sqrt(1 - phi**2)], [1, -phi], rng.normal(0.0, 0.1, time.size))
    b = bin_cp(angle, _true_cp(angle) + noise)
    # Truth: the bin average of the true Cp (200 points a bin).
    fine = (np.arange(72 * 200) + 0.5) * 360.0 / (72 * 200)
    truth = _true_cp(fine).reshape(72, 200).mean(axis=1)
    z = (b.mean - truth) / b.u_mean
    assert 0.75 < z.std() < 1.25
    naive = (b.mean - truth) / (b.std / np.sqrt(b.count))
    assert naive.std() > 1.5


def test_tubing_delay_shift_is_recovered():
    # A rotating tap whose tubing delays the reading by τ = 3 ms: the reading at t is the pressure
    # at the azimuth the tap had at t − τ. Binned without the correction, Cp(θ) comes out shifted
    # by ω τ in azimuth (docs/input-format.md); the shift, measured from the phase of the first
    # Fourier harmonic against the true Cp, recovers τ. With the correction the shift vanishes.
    # Noise 0.05 over 30 000 samples leaves a phase error of ~σ/(A√(N/2)) = 3e-4 rad (A = 2.02
    # the first harmonic's amplitude), 0.1 % of ω τ: tolerance 1 % of τ and 0.2° of shift.
    rng = np.random.default_rng(4)
    angle, omega, time = _rotating_record(rng)
    offset, tau = 37.0, 0.003
    reading = _true_cp(angle + offset - np.degrees(omega * tau)) + rng.normal(0, 0.05, time.size)

    def shift(binned):
        ratio = np.fft.rfft(binned.mean)[1] / np.fft.rfft(_true_cp(binned.theta))[1]
        return -np.angle(ratio)

    raw = bin_cp(tap_azimuth(angle, offset, 0.0, omega), reading)
    corrected = bin_cp(tap_azimuth(angle, offset, tau, omega), reading)
    assert shift(raw) / omega == pytest.approx(tau, rel=0.01)
    assert np.degrees(shift(corrected)) == pytest.approx(0.0, abs=0.2)


def test_bin_cp_pools_series():
    # Several taps (leading axis) pooled into one set of bins: counts add up; each tap's passes are
    # separate observations.
    rng = np.random.default_rng(6)
    angle, omega, _ = _rotating_record(rng, duration=1.0)
    offsets = np.array([[0.0], [120.0], [240.0]])
    theta = tap_azimuth(angle, offsets, 0.0, omega)
    cp = _true_cp(theta) + rng.normal(0, 0.05, theta.shape)
    pooled = bin_cp(theta, cp)
    single = [bin_cp(theta[k], cp[k]) for k in range(3)]
    assert pooled.count.tolist() == sum(s.count for s in single).tolist()
    weighted = sum(s.mean * s.count for s in single) / pooled.count
    assert pooled.mean == pytest.approx(weighted, abs=1e-12)


# --- dead taps ---------------------------------------------------------------------------------


def _tap_bins(rng, n_taps=8, *, leak=None, flat=None):
    """Binned Cp of n rotating taps on one model; optionally one leaking and one flat-lined."""
    angle, omega, time = _rotating_record(rng, duration=1.0)
    offsets = np.arange(n_taps)[:, None] * 360.0 / n_taps
    theta = tap_azimuth(angle, offsets, 0.0, omega)
    cp = _true_cp(theta) + rng.normal(0.0, 0.05, theta.shape)
    if leak is not None:
        cp[leak] += 0.30
    if flat is not None:
        cp[flat] = 0.2
    return [bin_cp(theta[k], cp[k]) for k in range(n_taps)]


def test_find_dead_taps_clean_data_flags_nothing():
    # Eight clean taps: the bin-by-bin departures are noise of 0.05/√(~140 samples), far below the
    # default tolerance 0.15 (config.Tolerances.dead_tap; common practice).
    names = [f"tap{k:02d}" for k in range(8)]
    assert find_dead_taps(names, _tap_bins(np.random.default_rng(8))) == {}


def test_find_dead_taps_finds_flat_and_leaking_taps():
    # A leaking tap reads 0.30 of q high everywhere; a flat-lined one a constant. The leak's
    # reported departure is its planted offset to within the noise (±0.02).
    names = [f"tap{k:02d}" for k in range(8)]
    dead = find_dead_taps(names, _tap_bins(np.random.default_rng(9), leak=2, flat=5))
    assert set(dead) == {"tap02", "tap05"}
    assert "flat-lined" in dead["tap05"]
    measured = float(re.search(r"by ([0-9.]+)", dead["tap02"]).group(1))
    assert measured == pytest.approx(0.30, abs=0.02)


def test_find_dead_taps_one_leak_among_three():
    # With three taps, one leak drags the plain median reference of each good tap halfway (0.25,
    # above tolerance); dropping the worst tap first must keep the good taps clean.
    rng = np.random.default_rng(10)
    bins = _tap_bins(rng, n_taps=3)
    means = np.array([b.mean for b in bins])
    means[1] += 0.5
    assert list(find_dead_taps(["a", "b", "c"], means)) == ["b"]


def test_find_dead_taps_array_input_and_no_overlap():
    # Bin-mean arrays work as well as BinnedCp; taps that share no bins (a stationary model, one
    # bin each) are not compared, and a single-bin tap is not called flat.
    cp = np.full((4, 36), np.nan)
    for k in range(4):
        cp[k, 9 * k] = 0.1 * k
    assert find_dead_taps(["a", "b", "c", "d"], cp) == {}
    with pytest.raises(ValueError, match="3 tap names"):
        find_dead_taps(["a", "b", "c"], cp)


def test_quadrature_uncertainty_covers_the_rule_error_of_sixteen_taps():
    # The forward model's Cp of a model at rest (tunnelred.demo.truth.shaped_cp, independent of
    # the reduction) at 16 taps every 22.5 deg: the periodic trapezoid rule misses CD_p = 0.9 by
    # about 0.006 and CL_p = 0 by up to 0.009, depending on the taps' phase. The u claimed for it
    # must cover both within 2u, and not be wider than the error's own order (10×).
    from tunnelred.demo.truth import shaped_cp
    from tunnelred.physics.pressure import quadrature_uncertainty

    for offset in (0.0, 5.0, 11.25):
        theta = np.arange(16) * 22.5 + offset
        cp = shaped_cp(np.radians(theta), 0.0, 0.9)
        CL, CD = integrate_cp(theta, cp)
        u = quadrature_uncertainty(theta, cp)
        assert abs(CL) <= 2 * u and abs(CD - 0.9) <= 2 * u, (offset, CL, CD, u)
        assert u <= 10 * max(abs(CL), abs(CD - 0.9)), (offset, u)
    # The N-point periodic trapezoid rule is exact for trigonometric polynomials of degree < N
    # (Trefethen and Weideman, SIAM Review 56 (2014), §3), and so are its 8-point halves for
    # potential flow plus drag, 1 − 4 sin²θ + 0.3 cos θ (degree 2): no rule error to claim.
    theta = np.arange(16) * 22.5
    x = np.radians(theta)
    assert quadrature_uncertainty(theta, 1 - 4 * np.sin(x) ** 2 + 0.3 * np.cos(x)) < 1e-12
    assert np.isnan(quadrature_uncertainty(theta[::3], np.cos(x[::3])))  # 6 points: no halves


# --- the binning's arithmetic against numpy's own -------------------------------------------


def _edges_of_turns(rng):
    """Azimuths with whole turns, their neighbours one ulp either side, tiny values, zeros."""
    k = rng.integers(-5, 6, 2000) * 360.0
    return np.concatenate(
        [
            rng.uniform(-2000.0, 2000.0, 20000),
            k,
            np.nextafter(k, np.inf),
            np.nextafter(k, -np.inf),
            k + rng.choice([1e-13, -1e-13, 1e-17, -1e-17], k.size),
            [0.0, -0.0, 1e-300, -1e-300, -5e-324],
        ]
    )


def test_tap_azimuths_wrap_bit_for_bit_at_whole_turns():
    # Reference: numpy's remainder (np.mod) and the turns it took off, on azimuths at and one ulp
    # beside whole turns, where a quotient rounds to a whole number.
    raw = _edges_of_turns(np.random.default_rng(5))
    theta, turns = tap_azimuths(raw, [0.0], [0.0], 0.0)
    reference = np.mod(raw, 360.0)
    assert np.array_equal(theta[0].view(np.int64), reference.view(np.int64))
    unwrapped = np.rint((np.unwrap(raw, period=360.0) - raw) / 360.0)
    assert np.array_equal(turns[0], unwrapped + np.rint((raw - reference) / 360.0))
    assert np.array_equal(within_turn(reference), np.mod(reference, 360.0))
    assert np.array_equal(within_turn(raw), reference)


@pytest.mark.parametrize("bins", [72, 36, 7, 13, 100])
def test_floor_divide_is_numpy_floor_division(bins):
    # Reference: numpy's floor division x // w, bit for bit, on wrapped azimuths and on every
    # bin edge and its neighbours (360 // (360/7) is 6 in exact arithmetic, 7 by the rounded
    # quotient).
    width = 360.0 / bins
    edges = np.arange(bins + 1) * width
    x = np.concatenate(
        [
            np.mod(_edges_of_turns(np.random.default_rng(bins)), 360.0),
            edges,
            np.nextafter(edges, -1.0),
            np.nextafter(edges, 400.0),
        ]
    )
    assert np.array_equal(floor_divide(x, width), x // width)


def test_nanmedian_of_columns_is_numpys():
    # Reference: np.nanmedian(axis=0) on arrays of 1-16 rows with NaNs and ties, all-NaN columns.
    rng = np.random.default_rng(8)
    for trial in range(300):
        rows, columns = rng.integers(1, 17), rng.integers(1, 80)
        a = rng.standard_normal((rows, columns))
        if trial % 3 == 0:
            a = np.round(a, 1) + 0.05  # ties, no zeros (numpy leaves the sign of a zero open)
        a[rng.random(a.shape) < rng.random() * 0.7] = np.nan
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)  # all-NaN columns
            reference = np.nanmedian(a, axis=0)
        assert np.array_equal(nanmedian_of_columns(a), reference, equal_nan=True)


def test_bin_cp_fast_spin_every_sample_a_pass():
    # A spin of more than a bin (10°) a sample: each sample is a pass of its own, so by GUM §4.2.3 a
    # bin's u_mean is the samples' standard deviation over the square root of their number.
    rng = np.random.default_rng(21)
    cumulative = np.cumsum(rng.uniform(11.0, 40.0, (3, 3000)), axis=1)
    theta = np.mod(cumulative, 360.0)
    cp = _true_cp(theta) + rng.normal(0, 0.05, theta.shape)
    b = bin_cp(theta, cp, bins=36, revolution=cumulative // 360.0)
    which = np.minimum((theta / 10.0).astype(int), 35)
    for k in (0, 7, 20, 35):
        samples = cp[which == k]
        assert b.count[k] == samples.size
        assert b.u_mean[k] == pytest.approx(samples.std(ddof=1) / np.sqrt(samples.size), rel=1e-12)
        assert b.std[k] == pytest.approx(samples.std(ddof=1), rel=1e-12)
