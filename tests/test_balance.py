"""Tests of tunnelred.physics.balance against numpy.linalg, closed forms worked by hand, and
Kutta–Joukowski potential flow (J. D. Anderson, Fundamentals of Aerodynamics, 6th ed., §3.16)."""

from __future__ import annotations

import doctest
import math

import numpy as np
import pandas as pd
import pytest
import xarray as xr

from tunnelred.physics import balance
from tunnelred.physics.balance import (
    TareRangeError,
    balance_to_wind,
    force_coefficients,
    interpolate_zero,
    loads_from_signals,
    overload_fraction,
    signals_from_loads,
    tare_loads,
)

# An invented 3-channel balance [N/V, N/V, N m/V] with a few per cent cross-talk.
K3 = np.array([[250.0, 6.0, -1.5], [-4.0, 180.0, 2.5], [0.3, -0.2, 3.2]])


def _second_order_by_hand(s):
    """The six products of a 3-channel balance, written out in the order docs/input-format.md
    prescribes (s11, s12, s13, s22, s23, s33), independently of the module's index helper."""
    s1, s2, s3 = s[..., 0], s[..., 1], s[..., 2]
    return np.stack([s1 * s1, s1 * s2, s1 * s3, s2 * s2, s2 * s3, s3 * s3], axis=-1)


def test_examples_in_docstrings_run():
    # The docstring Examples are part of the documentation; each must hold as written.
    result = doctest.testmod(balance, optionflags=doctest.NORMALIZE_WHITESPACE)
    assert result.attempted >= 7
    assert result.failed == 0


# --- calibration --------------------------------------------------------------------------


def test_linear_calibration_matches_numpy_matmul_and_inverse():
    rng = np.random.default_rng(7)
    signals = rng.uniform(-0.04, 0.04, size=(200, 3))
    loads = loads_from_signals(signals, K3)
    # Reference: numpy's matrix product; one dot product of 3 terms → rel 1e-14 (rounding only).
    np.testing.assert_allclose(loads, signals @ K3.T, rtol=1e-14, atol=1e-14)
    # Reference: numpy.linalg.inv of the matrix; a well-conditioned 3 x 3 (cond ≈ 80) loses at
    # most ~2 digits to rounding → rtol 1e-12.
    expected = loads @ np.linalg.inv(K3).T
    np.testing.assert_allclose(signals_from_loads(loads, K3), expected, rtol=1e-12, atol=1e-15)
    np.testing.assert_allclose(signals_from_loads(loads, K3), signals, rtol=1e-12, atol=1e-15)


def test_linear_inverse_matches_numpy_solve_for_a_batch_of_matrices():
    # Monte Carlo use: a batch of perturbed calibrations, each with its own load set.
    rng = np.random.default_rng(3)
    matrices = K3 * (1.0 + 0.01 * rng.standard_normal((4, 3, 3)))
    loads = rng.uniform(-10.0, 10.0, size=(4, 3))
    got = signals_from_loads(loads, matrices)
    for b in range(4):
        # Reference: numpy.linalg.solve matrix by matrix; rtol 1e-12 as above.
        np.testing.assert_allclose(got[b], np.linalg.solve(matrices[b], loads[b]), rtol=1e-12)


def test_inverse_broadcasts_over_loads_and_matrices():
    # Loads on a (2, 5) grid through one matrix, and one load set through a batch of 4
    # perturbed second-order calibrations: the signals found must give the loads back through
    # the forward calibration (numpy matmul reference above). Loads ~10 N → atol 1e-11 N.
    rng = np.random.default_rng(9)
    loads = rng.uniform(-10.0, 10.0, size=(2, 5, 3))
    signals = signals_from_loads(loads, K3)
    assert signals.shape == (2, 5, 3)
    np.testing.assert_allclose(signals @ K3.T, loads, atol=1e-11)
    matrices = K3 * (1.0 + 0.01 * rng.standard_normal((4, 3, 3)))
    seconds = 0.75 * np.abs(K3).max(axis=1, keepdims=True) * rng.standard_normal((4, 3, 6))
    one_load = np.array([8.0, -5.0, 0.1])
    signals = signals_from_loads(one_load, matrices, seconds)
    assert signals.shape == (4, 3)
    back = np.einsum("brn,bn->br", matrices, signals) + np.einsum(
        "brm,bm->br", seconds, _second_order_by_hand(signals)
    )
    np.testing.assert_allclose(back, np.broadcast_to(one_load, (4, 3)), atol=1e-11)


def test_zero_loads_give_zero_signals():
    # F = 0 is met by s = 0 exactly for any calibration with no constant term (by the form).
    second = np.ones((3, 6))
    np.testing.assert_array_equal(signals_from_loads(np.zeros((3, 3)), K3, second), 0.0)


def test_a_missing_load_gives_missing_signals_only_there():
    loads = np.array([[5.0, 1.0, 0.1], [np.nan, 1.0, 0.1]])
    signals = signals_from_loads(loads, K3, np.full((3, 6), 10.0))
    assert np.all(np.isfinite(signals[0])) and np.all(np.isnan(signals[1]))
    # The good row still inverts: back through the forward calibration, rounding only.
    np.testing.assert_allclose(
        loads_from_signals(signals[0], K3, np.full((3, 6), 10.0)), loads[0], atol=1e-12
    )


def test_second_order_products_follow_the_documented_order():
    rng = np.random.default_rng(11)
    second = rng.normal(scale=40.0, size=(3, 6))
    signals = rng.uniform(-0.04, 0.04, size=(50, 3))
    expected = signals @ K3.T + _second_order_by_hand(signals) @ second.T
    # Same arithmetic in a different order: rounding only → rtol 1e-13.
    np.testing.assert_allclose(
        loads_from_signals(signals, K3, second), expected, rtol=1e-13, atol=1e-14
    )


def test_second_order_inverse_recovers_a_quadratic_root_worked_by_hand():
    # Fx = 100 s1 + 1000 s1**2 only. Fx = 2.4 N: 1000 s^2 + 100 s - 2.4 = 0, roots
    # s = (-100 ± sqrt(100^2 + 4*1000*2.4)) / 2000 = (-100 ± 140) / 2000 → 0.02 or -0.12.
    # Newton from the linear guess 0.024 must find the root on the calibrated branch, 0.02.
    matrix = np.diag([100.0, 100.0, 10.0])
    second = np.zeros((3, 6))
    second[0, 0] = 1000.0
    signals = signals_from_loads([2.4, 0.0, 0.0], matrix, second)
    # Newton stops at a relative step of 1e-12 and converges quadratically → 1e-12 abs on 0.02.
    np.testing.assert_allclose(signals, [0.02, 0.0, 0.0], rtol=0, atol=1e-12)


def test_second_order_round_trip_by_newton_to_1e10():
    rng = np.random.default_rng(5)
    # Second-order terms a few per cent of the linear ones at 40 mV in every row, as in a
    # calibration that is valid over its range: 0.04 * 0.75 = 3 % of each row's largest term.
    second = 0.75 * np.abs(K3).max(axis=1, keepdims=True) * rng.standard_normal((3, 6))
    signals = rng.uniform(-0.04, 0.04, size=(500, 3))
    loads = signals @ K3.T + _second_order_by_hand(signals) @ second.T
    # The brief asks for 1e-10: Newton's quadratic convergence leaves rounding (~1e-16 of the
    # signal) long before that.
    np.testing.assert_allclose(
        signals_from_loads(loads, K3, second), signals, rtol=1e-10, atol=1e-14
    )


@pytest.mark.parametrize("n", [4, 6])
def test_non_square_balance_minimum_norm_solution(n):
    rng = np.random.default_rng(n)
    matrix = rng.normal(scale=100.0, size=(3, n))
    loads = rng.uniform(-20.0, 20.0, size=(30, 3))
    got = signals_from_loads(loads, matrix)
    # Reference: numpy.linalg.lstsq, which returns the minimum-norm solution of an
    # underdetermined system (numpy documentation); rounding only → rtol 1e-10.
    expected = np.linalg.lstsq(matrix, loads.T, rcond=None)[0].T
    np.testing.assert_allclose(got, expected, rtol=1e-10, atol=1e-14)
    np.testing.assert_allclose(loads_from_signals(got, matrix), loads, rtol=1e-12, atol=1e-12)


def test_non_square_second_order_inverse_reproduces_the_loads():
    rng = np.random.default_rng(6)
    matrix = rng.normal(scale=100.0, size=(3, 6))
    second = rng.normal(scale=30.0, size=(3, 21))
    signals = rng.uniform(-0.03, 0.03, size=(100, 6))
    loads = loads_from_signals(signals, matrix, second)
    # The 6-channel inverse is not unique; what matters is that the signals found give the loads
    # back. Loads ≈ 10 N, rounding ~1e-14 N → atol 1e-11 N.
    found = signals_from_loads(loads, matrix, second)
    np.testing.assert_allclose(loads_from_signals(found, matrix, second), loads, atol=1e-11)


def test_inverse_refuses_a_rank_deficient_matrix():
    # Mz row a copy of Fx: a torque would show in no channel independently (linear algebra).
    matrix = np.array([[1.0, 0.0, 0.0], [0.0, 1.0, 0.0], [1.0, 0.0, 0.0]])
    with pytest.raises(ValueError, match="rank 3"):
        signals_from_loads([1.0, 1.0, 1.0], matrix)


def test_inverse_reports_loads_beyond_the_fold_of_the_calibration():
    # Fx = 100 s + 1000 s^2 has its minimum -2.5 N at s = -0.05 (by hand): Fx = -3 N has no root.
    matrix = np.diag([100.0, 100.0, 10.0])
    second = np.zeros((3, 6))
    second[0, 0] = 1000.0
    with pytest.raises(ValueError, match="Newton"):
        signals_from_loads([-3.0, 0.0, 0.0], matrix, second, max_iter=30)


def test_calibration_shapes_are_checked():
    with pytest.raises(ValueError, match="3 x 6"):
        loads_from_signals([0.0, 0.0, 0.0], K3, np.zeros((3, 5)))
    with pytest.raises(ValueError, match="3 channels"):
        loads_from_signals([0.0, 0.0], K3)


# --- zeros --------------------------------------------------------------------------------


def test_zero_linear_drift_worked_by_hand():
    # Zeros given out of time order. At t = 25 s between (0 s: [1.0, 2.0]) and (100 s: [1.2, 1.9]):
    # 1.0 + 0.25 * 0.2 = 1.05, 2.0 + 0.25 * (-0.1) = 1.975 (by hand); shift = last - first.
    zero, shift, bracketed = interpolate_zero(25.0, [100.0, 0.0], [[1.2, 1.9], [1.0, 2.0]])
    np.testing.assert_allclose(zero, [1.05, 1.975], rtol=1e-15)  # two flops: rounding only
    np.testing.assert_allclose(shift, [0.2, -0.1], rtol=1e-14)
    assert bracketed


def test_zero_picks_the_bracketing_pair_of_three():
    # At 150 s between 100 s [1.2, 1.9] and 300 s [1.0, 2.3]: weight 0.25 → [1.15, 2.0] (by hand).
    zero, shift, bracketed = interpolate_zero(
        150.0, [0.0, 100.0, 300.0], [[1.0, 2.0], [1.2, 1.9], [1.0, 2.3]]
    )
    np.testing.assert_allclose(zero, [1.15, 2.0], rtol=1e-14)
    np.testing.assert_allclose(shift, [0.0, 0.3], atol=1e-15)
    assert bracketed


def test_one_zero_is_used_as_it_is():
    zero, shift, bracketed = interpolate_zero(500.0, [10.0], [[0.5, -0.25]])
    np.testing.assert_array_equal(zero, [0.5, -0.25])
    np.testing.assert_array_equal(shift, [0.0, 0.0])
    assert not bracketed  # no drift was observed around t = 500 s


@pytest.mark.parametrize(("time", "expected"), [(-20.0, [1.0, 2.0]), (180.0, [1.2, 1.9])])
def test_zero_outside_the_bracket_is_the_nearest(time, expected):
    zero, _, bracketed = interpolate_zero(time, [0.0, 100.0], [[1.0, 2.0], [1.2, 1.9]])
    np.testing.assert_array_equal(zero, expected)
    assert not bracketed


def test_zero_interpolation_over_a_batch_of_times():
    times = np.array([-5.0, 0.0, 50.0, 100.0, 120.0])
    zero, _, bracketed = interpolate_zero(times, [0.0, 100.0], [[1.0, 2.0], [1.2, 1.9]])
    # By hand: clamp, end, midpoint, end, clamp.
    expected = [[1.0, 2.0], [1.0, 2.0], [1.1, 1.95], [1.2, 1.9], [1.2, 1.9]]
    np.testing.assert_allclose(zero, expected, rtol=1e-15)
    np.testing.assert_array_equal(bracketed, [False, True, True, True, False])


def test_zeros_at_the_same_time_are_refused():
    with pytest.raises(ValueError, match="same time"):
        interpolate_zero(5.0, [0.0, 0.0], [[1.0, 2.0], [1.1, 2.0]])


# --- spin tares ---------------------------------------------------------------------------

TARE_RATES = np.array([100.0, -100.0, 50.0, -50.0])  # [rad/s], out of order on purpose
TARE = np.array(
    [[0.40, 0.05, -0.080], [0.36, -0.07, 0.078], [0.20, 0.02, -0.045], [0.18, -0.03, 0.043]]
)


def test_tare_interpolated_at_a_known_rate():
    # 75 rad/s, halfway between 50 and 100: (0.20+0.40)/2, (0.02+0.05)/2, (-0.045-0.080)/2.
    loads, extrapolated = tare_loads(75.0, TARE_RATES, TARE)
    np.testing.assert_allclose(loads, [0.30, 0.035, -0.0625], rtol=1e-14)
    assert not extrapolated


def test_tare_does_not_assume_zero_load_at_zero_spin():
    # 0 rad/s lies halfway between -50 and 50: (0.18+0.20)/2 = 0.19 N, not 0 (by hand).
    loads, _ = tare_loads(0.0, TARE_RATES, TARE)
    np.testing.assert_allclose(loads, [0.19, -0.005, -0.001], rtol=1e-13)


def test_tare_repeats_at_one_rate_are_averaged():
    loads, _ = tare_loads(
        50.0, [50.0, 50.0, 100.0], [[0.2, 0.0, -0.04], [0.3, 0.0, -0.05], [0.5, 0.0, -0.09]]
    )
    np.testing.assert_allclose(loads, [0.25, 0.0, -0.045], rtol=1e-14)


def test_tare_out_of_range_flag_extrapolates_the_nearest_segment():
    # 120 rad/s: segment 50 → 100 slope (0.40-0.20)/50 = 0.004 N/(rad/s), so
    # Fx = 0.40 + 20 * 0.004 = 0.48 N; Fy = 0.05 + 20 * 0.03/50 = 0.062;
    # Mz = -0.080 + 20 * (-0.035/50) = -0.094 (by hand).
    loads, extrapolated = tare_loads(120.0, TARE_RATES, TARE, extrapolation="flag")
    np.testing.assert_allclose(loads, [0.48, 0.062, -0.094], rtol=1e-13)
    assert extrapolated


def test_tare_out_of_range_refuse_raises_with_rate_and_range():
    with pytest.raises(TareRangeError) as caught:
        tare_loads(-120.0, TARE_RATES, TARE, extrapolation="refuse")
    assert isinstance(caught.value, ValueError)
    message = str(caught.value)
    assert "-120" in message and "[-100, 100]" in message


def test_tare_refuse_accepts_the_ends_of_the_range():
    loads, extrapolated = tare_loads(-100.0, TARE_RATES, TARE, extrapolation="refuse")
    np.testing.assert_allclose(loads, TARE[1], rtol=1e-15)
    assert not extrapolated


def test_tare_over_a_batch_of_rates():
    loads, extrapolated = tare_loads(np.array([75.0, 120.0]), TARE_RATES, TARE)
    np.testing.assert_allclose(loads, [[0.30, 0.035, -0.0625], [0.48, 0.062, -0.094]], rtol=1e-13)
    np.testing.assert_array_equal(extrapolated, [False, True])


def test_tare_interpolation_error_is_the_remainder_of_a_quadratic():
    # Linear interpolation of f between x1, x2 misses it by f''(xi)/2 (x - x1)(x2 - x) (Burden &
    # Faires, Numerical Analysis, Theorem 3.3, from memory); for a quadratic f'' is constant, so
    # the stated u equals the true miss: the windage torque -c w^2 with c = 4e-8 N m s^2 between
    # tares at 200, 500, 1000 rad/s, read at 700 rad/s.
    from tunnelred.physics.balance import tare_interpolation_error

    rates = np.array([200.0, 500.0, 1000.0])
    curve = np.stack([0.05 * (rates / 1e3) ** 2, 0.0 * rates, -4e-8 * rates**2], axis=-1)
    u = tare_interpolation_error(700.0, rates, curve)
    line, _ = tare_loads(700.0, rates, curve)
    truth = np.array([0.05 * 0.7**2, 0.0, -4e-8 * 700.0**2])
    np.testing.assert_allclose(u, np.abs(line - truth), rtol=1e-9)
    np.testing.assert_allclose(u[2], 0.5 * 8e-8 * 200.0 * 300.0, rtol=1e-12)  # by hand
    # On a tare rate, and with only two tares (no curvature known), nothing is added.
    np.testing.assert_array_equal(tare_interpolation_error(500.0, rates, curve), 0.0)
    np.testing.assert_array_equal(tare_interpolation_error(700.0, rates[1:], curve[1:]), 0.0)


def test_tare_rejects_an_unknown_extrapolation_rule():
    with pytest.raises(ValueError, match="flag"):
        tare_loads(0.0, TARE_RATES, TARE, extrapolation="clip")


# --- axes ---------------------------------------------------------------------------------


def test_axes_at_zero_angle_are_the_balance_axes():
    drag, lift = balance_to_wind(3.0, -2.0, 0.0)
    assert drag == 3.0 and lift == -2.0


def test_axes_at_90_degrees():
    # Balance x along tunnel +y, balance y along tunnel -x: Fx is lift, Fy is minus drag.
    # cos 90° in floating point is 6.1e-17 → atol 1e-15 N.
    drag, lift = balance_to_wind(5.0, 2.0, 90.0)
    assert drag == pytest.approx(-2.0, abs=1e-15)
    assert lift == pytest.approx(5.0, abs=1e-15)


def test_small_misalignment_leaks_drag_into_lift():
    # Pure drag D = 100 N seen by a balance turned 0.5° toward +y: leakage L = D sin φ.
    # sin(0.5°) by its series, φ = 0.5 π/180 = 0.00872664626: φ − φ³/6 + φ⁵/120
    # = 0.00872664626 − 1.10762e-7 + 4.2e-13 = 0.0087265355 (by hand) → L = 0.87265355 N.
    # The series is truncated after φ⁵ (next term ~ 1e-18) and quoted to 8 digits → rel 1e-8.
    drag, lift = balance_to_wind(100.0, 0.0, 0.5)
    assert lift == pytest.approx(0.87265355, rel=1e-8)
    # cos φ = 1 − φ²/2 + φ⁴/24 = 0.99996192 (by hand) → D = 99.996192 N.
    assert drag == pytest.approx(99.996192, rel=1e-8)


@pytest.mark.parametrize(
    "kind",
    [np.asarray, pd.Series, lambda v: xr.DataArray(v, dims="time")],
    ids=["ndarray", "Series", "DataArray"],
)
def test_axes_accept_the_array_kinds(kind):
    # Same 90° geometry as above, over a time series: Fx is lift, Fy is minus drag (by hand).
    drag, lift = balance_to_wind(kind([5.0, 1.0]), kind([2.0, -3.0]), 90.0)
    assert type(drag) is type(kind([0.0]))
    np.testing.assert_allclose(np.asarray(drag), [-2.0, 3.0], atol=1e-15)
    np.testing.assert_allclose(np.asarray(lift), [5.0, 1.0], atol=1e-15)


def test_flow_angle_enters_with_the_opposite_sign():
    # Flow turned β = +2° toward +y, balance aligned with the tunnel (a = 0). A pure lift acts
    # along the flow direction turned +90°, (−sin β, cos β) in tunnel = balance axes, so the
    # balance reads Fx = −L sin β, Fy = L cos β (by hand); the angle argument is a − β = −2°.
    lift_true = 10.0
    beta = math.radians(2.0)
    fx, fy = -lift_true * math.sin(beta), lift_true * math.cos(beta)
    drag, lift = balance_to_wind(fx, fy, 0.0 - 2.0)
    assert drag == pytest.approx(0.0, abs=1e-14)
    assert lift == pytest.approx(lift_true, rel=1e-15)


# --- coefficients -------------------------------------------------------------------------


def test_force_coefficients_worked_by_hand():
    # q d b = 500 * 0.1 * 0.5 = 25 N; R = 0.05 m; alpha = 200 * 0.05 / 20 = 0.5.
    # CL = 50/25 = 2; CD = 12.5/25 = 0.5; CM = -0.25/(25 * 0.05) = -0.2;
    # C_power = -0.25 * 200 / (500 * 20 * 0.1 * 0.5) = -0.1 = CM * alpha; L/D = 4 (by hand).
    c = force_coefficients(50.0, 12.5, -0.25, 500.0, 20.0, 200.0, 0.1, 0.5)
    expected = {"CL": 2.0, "CD": 0.5, "CM": -0.2, "C_power": -0.1, "L_D": 4.0}
    assert set(c) == set(expected)
    for name, value in expected.items():
        assert c[name] == pytest.approx(value, rel=1e-14), name  # few flops: rounding only


def test_lift_to_drag_is_nan_at_zero_drag():
    c = force_coefficients(
        np.array([1.0, 2.0]), np.array([0.0, 4.0]), 0.0, 100.0, 10.0, 0.0, 0.1, 1.0
    )
    assert np.isnan(c["L_D"][0])
    assert c["L_D"][1] == pytest.approx(0.5, rel=1e-15)


# --- end to end: Kutta–Joukowski ----------------------------------------------------------


def test_kutta_joukowski_through_the_balance_recovers_minus_two_pi_alpha():
    # Anderson, Fundamentals of Aerodynamics, 6th ed., §3.16: L' = −ρ U Γ per unit span on a
    # spinning cylinder in potential flow (sign for our axes: docs/conventions.md), Γ = 2π ω R²,
    # hence CL = −2π ωR/U. Batch of B = 7 runs, α of both signs, through a second-order balance
    # turned 1.5° from the tunnel with a 0.3° flow angle.
    rho, diameter, span = 1.2, 0.12, 0.6
    radius = diameter / 2.0
    velocity = np.array([12.0, 15.0, 20.0, 25.0, 18.0, 30.0, 22.0])
    alpha = np.array([-3.0, -1.5, -0.4, 0.2, 0.9, 2.0, 4.0])
    omega = alpha * velocity / radius
    q = 0.5 * rho * velocity**2
    gamma = 2.0 * np.pi * omega * radius**2
    lift = -rho * velocity * gamma * span
    drag = 0.3 * q * diameter * span
    torque = -0.01 * q * diameter * span * radius * np.sign(omega)

    phi = math.radians(1.5 - 0.3)  # alignment angle minus flow angle
    fx = drag * math.cos(phi) + lift * math.sin(phi)  # wind → balance axes (rotation by −φ)
    fy = -drag * math.sin(phi) + lift * math.cos(phi)
    loads = np.stack([fx, fy, torque], axis=-1)
    assert loads.shape == (7, 3)

    # Full scale ≈ 40 N at 40 mV: second-order terms a few per cent, enough to need Newton.
    matrix = np.array([[1000.0, 20.0, -5.0], [-15.0, 1000.0, 8.0], [0.5, -0.3, 25.0]])
    second = np.array(
        [
            [900.0, -300.0, 50.0, 400.0, -80.0, 20.0],
            [-500.0, 700.0, 30.0, -600.0, 60.0, -10.0],
            [5.0, -4.0, 2.0, 3.0, -1.0, 0.5],
        ]
    )
    signals = signals_from_loads(loads, matrix, second)
    assert signals.shape == (7, 3)
    fx2, fy2, torque2 = np.moveaxis(loads_from_signals(signals, matrix, second), -1, 0)
    drag2, lift2 = balance_to_wind(fx2, fy2, 1.5 - 0.3)
    c = force_coefficients(lift2, drag2, torque2, q, velocity, omega, diameter, span)

    # Newton to a relative step of 1e-12 plus a few dozen flops: rel 1e-12 holds on CL.
    np.testing.assert_allclose(c["CL"], -2.0 * np.pi * alpha, rtol=1e-12, atol=0)
    np.testing.assert_allclose(c["CD"], 0.3, rtol=1e-10)
    # C_power = CM α (docs/conventions.md), independently of the torque assumed.
    np.testing.assert_allclose(c["C_power"], c["CM"] * alpha, rtol=1e-12)


# --- overload -----------------------------------------------------------------------------


def test_overload_fraction_worked_by_hand():
    loads = np.array([[10.0, -50.0, 1.0], [-30.0, 20.0, 0.5], [5.0, 45.0, -1.8]])
    # max |Fx| 30/100, |Fy| 50/100, |Mz| 1.8/2 (by hand).
    np.testing.assert_allclose(
        overload_fraction(loads, [100.0, 100.0, 2.0]), [0.3, 0.5, 0.9], rtol=1e-15
    )


def test_overload_needs_positive_full_scale():
    with pytest.raises(ValueError, match="positive"):
        overload_fraction([[1.0, 1.0, 1.0]], [100.0, 0.0, 2.0])


def test_curvature_at_points_is_exact_for_a_parabola():
    # The second divided difference is exact for a quadratic (Burden & Faires, Numerical
    # Analysis, §3.3, from memory): y = 3x² − x + 2 on uneven points has |y''| = 6 at every
    # inner point, NaN at both ends; two curves side by side are handled column by column.
    from tunnelred.physics.interpolation import curvature_at_points

    x = np.array([0.0, 0.4, 1.5, 2.0, 3.7])
    y = np.column_stack([3 * x**2 - x + 2, -0.5 * x**2])
    kappa = curvature_at_points(x, y)
    assert np.isnan(kappa[[0, -1]]).all()
    np.testing.assert_allclose(kappa[1:-1], [[6.0, 1.0]] * 3, rtol=1e-12)
    assert np.isnan(curvature_at_points([0.0, 1.0], [1.0, 2.0])).all()  # no inner point
