"""Tests of tunnelred.physics.theory: potential flow about a spinning cylinder and Cp(θ) features.

Main source: J. D. Anderson, Fundamentals of Aerodynamics, 6th ed. (2017), §3.15 (lifting flow
over a cylinder: surface speed 2U sin θ + Γ/(2πR), Cp = 1 − (V/U)², stagnation points where the
speed vanishes) and §3.16 (Kutta–Joukowski L′ = ρUΓ). The azimuth and sign convention is
docs/conventions.md: θ from the windward point, positive with positive spin, L′ = −ρUΓ along +y.
"""

import numpy as np
import pandas as pd
import pytest
import xarray as xr
from scipy.integrate import quad

from tunnelred.physics.pressure import integrate_cp
from tunnelred.physics.theory import (
    PRANDTL_LIMIT,
    cp_surface,
    lift_coefficient,
    stagnation_angles,
    surface_features,
)

ALPHAS = [-2.0, -1.3, -0.4, 0.0, 0.25, 1.0, 1.7, 2.0]


def _centres(bins):
    return (np.arange(bins) + 0.5) * 360.0 / bins


@pytest.mark.parametrize("alpha", ALPHAS)
def test_cp_integrates_to_kutta_joukowski_lift_and_no_drag(alpha):
    # Anderson §3.15-3.16: CL = -2 pi alpha (sign of docs/conventions.md), d'Alembert CD = 0. Cp sin
    # θ is a trigonometric polynomial of degree 3, which the 36-point periodic trapezoid rule
    # integrates exactly, so only rounding is left: 1e-12 absolute.
    theta = np.arange(36) * 10.0
    CL, CD = integrate_cp(theta, cp_surface(theta, alpha))
    assert CL == pytest.approx(-2 * np.pi * alpha, abs=1e-12)
    assert CD == pytest.approx(0.0, abs=1e-12)


@pytest.mark.parametrize("alpha", [-1.0, 0.6])
def test_cp_integrates_to_lift_by_adaptive_quadrature(alpha):
    # The same identity checked without tunnelred's integrator: scipy.integrate.quad of
    # ½ Cp sin θ dθ over one turn (quad's default tolerance ~1.5e-8 relative → rel 1e-8).
    def lift_integrand(t):
        return 0.5 * cp_surface(np.degrees(t), alpha) * np.sin(t)

    CL, _ = quad(lift_integrand, 0.0, 2 * np.pi)
    assert CL == pytest.approx(-2 * np.pi * alpha, rel=1e-8)
    assert lift_coefficient(alpha) == pytest.approx(-2 * np.pi * alpha, rel=1e-15)


def test_cp_non_spinning_cylinder():
    # Anderson §3.13 (section from memory; non-lifting cylinder, Cp = 1 − 4 sin²θ): Cp = 1 at the
    # windward stagnation point, −3 at the shoulders (θ = ±90°); exact up to sin(90°) rounding.
    assert cp_surface(np.array([0.0, 90.0, -90.0, 180.0]), 0.0) == pytest.approx(
        [1.0, -3.0, -3.0, 1.0], abs=1e-14
    )


def test_cp_spin_speeds_the_positive_theta_side():
    # Anderson §3.15 with docs/conventions.md: positive spin adds speed where θ > 0 (the surface
    # moves with the flow there), hand-worked: alpha = 0.5, θ = 90° → 1 − 2.5² = −5.25; θ = −90° → 1
    # − 1.5² = −1.25. Exact arithmetic → 1e-14.
    assert cp_surface(np.array([90.0, -90.0]), 0.5) == pytest.approx([-5.25, -1.25], abs=1e-14)


def test_lift_coefficient_from_kutta_joukowski_with_numbers():
    # Kutta–Joukowski (Anderson §3.16), hand-worked: rho = 1.2 kg/m3, U = 10 m/s, omega = 100
    # rad/s, R = 0.05 m: Gamma = 2 pi omega R² = 0.5 pi m2/s, L' = −rho U Gamma = −6 pi N/m,
    # q d = 60 Pa × 0.1 m = 6 N/m → CL = −pi; alpha = omega R / U = 0.5. Rounding only → rel 1e-14.
    rho, U, omega, R = 1.2, 10.0, 100.0, 0.05
    lift = -rho * U * 2 * np.pi * omega * R**2
    CL = lift / (0.5 * rho * U**2 * 2 * R)
    assert CL == pytest.approx(-np.pi, rel=1e-14)
    assert lift_coefficient(omega * R / U) == pytest.approx(CL, rel=1e-14)


@pytest.mark.parametrize("alpha", [-1.9, -1.0, -0.3, 0.0, 0.5, 1.0, 1.99])
def test_stagnation_points_where_surface_speed_vanishes(alpha):
    # Anderson §3.15: stagnation where sin θ = −alpha/2, i.e. where Cp = 1; the front one on the
    # windward half. Rounding only → 1e-12.
    front, rear = stagnation_angles(alpha)
    for angle in (front, rear):
        assert np.sin(np.radians(angle)) == pytest.approx(-alpha / 2, abs=1e-12)
        assert cp_surface(angle, alpha) == pytest.approx(1.0, abs=1e-12)
    assert -90.0 <= front <= 90.0
    assert 90.0 <= rear <= 270.0


def test_stagnation_angles_hand_worked():
    # alpha = 1: sin θ = −1/2 → θ = −30° (front) and 210° (rear); alpha = −1: +30° and 150°.
    assert stagnation_angles(1.0) == pytest.approx((-30.0, 210.0), abs=1e-12)
    assert stagnation_angles(-1.0) == pytest.approx((30.0, 150.0), abs=1e-12)


@pytest.mark.parametrize("alpha", [2.0, -2.0])
def test_stagnation_points_merge_at_prandtl_limit(alpha):
    # Anderson §3.15: the two points merge at the bottom (top) of the cylinder at abs(alpha) = 2,
    # where abs(CL) = 4 pi (Prandtl's limit, L. Prandtl, NACA TM 367, 1926 (from memory)).
    front, rear = stagnation_angles(alpha)
    assert np.mod(front - rear, 360.0) == pytest.approx(0.0, abs=1e-12)
    assert front == pytest.approx(-90.0 * np.sign(alpha), abs=1e-12)
    assert abs(lift_coefficient(alpha)) == pytest.approx(PRANDTL_LIMIT, rel=1e-15)
    assert PRANDTL_LIMIT == pytest.approx(4 * np.pi, rel=1e-15)


def test_stagnation_points_leave_the_surface_beyond_two():
    # Anderson §3.15: for Gamma > 4 pi U R (abs(alpha) > 2) there is no stagnation point on the
    # surface; the function promises NaN there, element by element.
    front, rear = stagnation_angles(np.array([-2.5, -2.0000001, 1.0, 3.0]))
    assert np.isnan(front[[0, 1, 3]]).all() and np.isnan(rear[[0, 1, 3]]).all()
    assert front[2] == pytest.approx(-30.0, abs=1e-12)


def test_broadcasting():
    # docs/conventions.md: physics functions broadcast (a grid of theta against a batch of alpha).
    theta = np.linspace(0.0, 350.0, 36)
    alpha = np.array([[0.0], [0.5], [1.0]])
    assert cp_surface(theta, alpha).shape == (3, 36)
    front, rear = stagnation_angles(alpha)
    assert front.shape == rear.shape == (3, 1)


@pytest.mark.parametrize(
    "kind",
    [
        lambda v: v,
        np.asarray,
        lambda v: pd.Series(v, index=np.arange(10, 10 + len(v))),
        lambda v: xr.DataArray(v, dims="theta"),
    ],
    ids=["list", "ndarray", "Series", "DataArray"],
)
def test_input_kinds(kind):
    # The array adapter keeps the input's kind (tunnelred.common._arraylike); values as the α = 0
    # case.
    cp = cp_surface(kind([0.0, 90.0]), 0.0)
    assert np.asarray(cp) == pytest.approx([1.0, -3.0], abs=1e-14)
    if isinstance(kind([0.0]), pd.Series | xr.DataArray):
        assert type(cp) is type(kind([0.0]))


def test_surface_features_find_front_stagnation_at_alpha_half():
    # Anderson §3.15: front stagnation at −asin(alpha/2) = −14.4775° for alpha = 0.5, Cp = 1 there;
    # Cp_min = 1 − (alpha + 2)² = −5.25 at θ = 90°. Sampled at 72 bin centres (h = 5°) the raw
    # maximum is only known to h/2 = 2.5°; the parabolic refinement must do ten times better:
    # tolerance h/20 = 0.25° (the measured error is 0.03°). The vertex value of a parabola through
    # samples of a smooth peak differs from the peak by O(h²) relative to its curvature
    # (8 cos²θ h² / 8 ≈ 0.007 here): tolerance 0.01 on Cp_max and Cp_min.
    bins = 72
    theta = _centres(bins)
    f = surface_features(theta, cp_surface(theta, 0.5))
    h = 360.0 / bins
    assert f["theta_stag"] == pytest.approx(-np.degrees(np.arcsin(0.25)), abs=h / 20)
    assert f["Cp_max"] == pytest.approx(1.0, abs=0.01)
    assert f["Cp_min"] == pytest.approx(-5.25, abs=0.01)
    assert f["theta_Cp_min"] == pytest.approx(90.0, abs=h / 20)


@pytest.mark.parametrize("bins", [36, 72, 180])
def test_surface_features_front_not_rear_stagnation(bins):
    # In potential flow the rear point (194.5° at alpha = 0.5, Anderson §3.15) also has Cp = 1;
    # the measured feature is the front one. Same h/20 tolerance as above.
    theta = _centres(bins)
    f = surface_features(theta, cp_surface(theta, -0.5))
    assert f["theta_stag"] == pytest.approx(np.degrees(np.arcsin(0.25)), abs=360.0 / bins / 20)


def test_surface_features_grid_independent_of_order_and_range():
    # The same bins given in −180..180 and shuffled must give the same features (rounding only).
    theta = _centres(72)
    cp = cp_surface(theta, 0.8)
    shuffled = np.random.default_rng(1).permutation(72)
    f1 = surface_features(theta, cp)
    f2 = surface_features((theta[shuffled] + 180.0) % 360.0 - 180.0, cp[shuffled])
    for key in f1:
        assert f2[key] == pytest.approx(f1[key], abs=1e-12)


@pytest.mark.parametrize("arc", [(160.0, 200.0), (350.0, 10.0)])
def test_surface_features_base_pressure_is_the_arc_mean(arc):
    # The mean of the bin centres in the arc is the midpoint rule for the arc-mean of Cp, checked
    # against scipy.integrate.quad of the potential-flow Cp (Anderson §3.15). Midpoint-rule error
    # ≤ h² max|Cp''| / 24 with h = 5° = 0.0873 rad and |Cp''| ≤ 4|alpha| + 8 = 10 (alpha = 0.5):
    # 3.2e-3 → tolerance 4e-3. The second arc wraps through 0/360.
    alpha = 0.5
    theta = _centres(72)
    f = surface_features(theta, cp_surface(theta, alpha), base_arc=arc)
    start, end = arc
    width = np.mod(end - start, 360.0)
    exact, _ = quad(lambda t: cp_surface(t, alpha), start, start + width)
    assert f["Cp_base"] == pytest.approx(exact / width, abs=4e-3)


def test_surface_features_empty_bins_and_batch():
    # A batch of Cp(θ) (Monte Carlo draws) gives arrays of the batch shape equal to the features
    # of each row computed alone (rounding only); an empty (NaN) bin is skipped.
    theta = _centres(72)
    alphas = np.array([[0.0, 0.5, 1.0], [-0.3, 1.5, -1.0]])
    cp = cp_surface(theta, alphas[..., None])
    cp[1, 2, 10] = np.nan
    f = surface_features(theta, cp)
    assert f["theta_stag"].shape == (2, 3)
    for i in range(2):
        for j in range(3):
            alone = surface_features(theta, cp[i, j])
            for key in f:
                assert f[key][i, j] == pytest.approx(alone[key], abs=1e-12)


def test_surface_features_without_data():
    # No finite bin at all: every feature NaN rather than an error (an empty pressure run is
    # flagged elsewhere).
    theta = _centres(36)
    f = surface_features(theta, np.full(36, np.nan))
    assert all(np.isnan(v) for v in f.values())


def test_surface_features_rejects_bad_grid():
    with pytest.raises(ValueError, match="share one azimuth"):
        surface_features([0.0, 90.0, 360.0, 180.0], [1.0, -3.0, 1.0, 1.0])
    with pytest.raises(ValueError, match="match cp"):
        surface_features(_centres(36), np.zeros(35))
    with pytest.raises(ValueError, match="encloses no angle"):
        surface_features(_centres(36), np.zeros(36), base_arc=(10.0, 370.0))
