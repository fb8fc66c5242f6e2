"""Wall corrections against their published forms, hand-worked numbers and image sums."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import xarray as xr
from scipy.special import zeta

from tunnelred.physics import corrections as c

# Shared geometry for the hand-worked cases: d/h = 0.1.
D, H = 0.1, 1.0


def _wall(method="allen-vincenti", **kw):
    args = dict(
        diameter=D,
        height=H,
        span=1.0,
        width=1.0,
        drag_coefficient=1.2,
        lift_coefficient=-3.0,
        dynamic_pressure=500.0,
    )
    args.update(kw)
    return c.wall_correction(method, **args)


# --- solid blockage ---------------------------------------------------------------------------


def test_solid_blockage_published_form():
    # Allen & Vincenti, NACA Report 782: eps_sb = Lambda sigma, sigma = (pi^2/48)(c/h)^2,
    # Lambda = 4 for a circular cylinder (from memory). d/h = 0.1:
    # sigma = 9.8696/48 * 0.01 = 2.05617e-3; 4 sigma = pi^2/1200 = 8.22467e-3.
    # Hand value to 6 digits -> rel 1e-6.
    assert c.solid_blockage_2d(D, H) == pytest.approx(8.22467e-3, rel=1e-6)


def test_solid_blockage_from_doublet_images():
    # Independent check by the method of images (Milne-Thomson, Theoretical Hydrodynamics: a
    # doublet of strength mu = 2 pi U R^2 with its axis along x represents a cylinder of radius
    # R in the stream U; its velocity is u = (mu/2pi)(y^2 - x^2)/r^4). The walls at y = +-h/2
    # reflect it into doublets of the same sign at y = +-k h.
    U, R, h = 1.0, 0.05, 1.0
    mu = 2.0 * np.pi * U * R**2
    K = 20000
    y = h * np.arange(1, K + 1)
    x = 0.0
    u_image = mu / (2.0 * np.pi) * (y**2 - x**2) / (x**2 + y**2) ** 2
    # Euler-Maclaurin tail of sum_{k>K} 1/k^2: 1/K - 1/(2K^2) + 1/(6K^3); error O(K^-5).
    tail = mu / (2.0 * np.pi * h**2) * (1.0 / K - 1.0 / (2 * K**2) + 1.0 / (6 * K**3))
    induced = 2.0 * (u_image.sum() + tail) / U  # both rows of images, y > 0 and y < 0
    # Summation error ~1e-16 relative; rel 1e-10 leaves room for rounding in the sum.
    assert induced == pytest.approx(c.solid_blockage_2d(2 * R, h), rel=1e-10)
    # The lattice sum in closed form: sum 1/k^2 = zeta(2) = pi^2/6 (scipy.special.zeta).
    lattice = 2.0 * U * R**2 / h**2 * zeta(2.0)
    assert lattice == pytest.approx(c.solid_blockage_2d(2 * R, h), rel=1e-12)


def test_solid_blockage_from_channel_potential():
    # Second independent check: the exact complex potential of a doublet midway between walls
    # a distance h apart is W = (mu/(2h)) coth(pi z/h) (sum of 1/(z - ikh) = (pi/h) coth(pi z/h),
    # Milne-Thomson). Removing the doublet's own mu/(2 pi z) leaves the wall field; its
    # derivative at z -> 0 is the velocity the walls induce at the model.
    U, R, h = 1.0, 0.05, 1.0
    mu = 2.0 * np.pi * U * R**2
    z = 1e-4 * h  # wall field is mu pi z/(6h^2) + O(z^3): truncation ~1e-8 relative
    wall_potential = mu / (2.0 * h) / np.tanh(np.pi * z / h) - mu / (2.0 * np.pi * z)
    induced = wall_potential / z / U
    assert induced == pytest.approx(c.solid_blockage_2d(2 * R, h), rel=1e-6)


def test_blockage_grows_as_square_of_diameter_ratio():
    # Allen & Vincenti: eps_sb is proportional to (d/h)^2, so doubling d/h quadruples it;
    # exact in the formula -> rel 1e-12.
    assert c.solid_blockage_2d(0.2, 1.0) / c.solid_blockage_2d(0.1, 1.0) == pytest.approx(4.0)
    ratio = _wall(diameter=0.2, drag_coefficient=0.0).eps / _wall(drag_coefficient=0.0).eps
    assert ratio == pytest.approx(4.0, rel=1e-12)


def test_infinite_height_changes_nothing():
    # Free air (common practice): with the walls far away every correction vanishes.
    wc = _wall(height=1e9, lift_interference=True, buoyancy=False)
    values = dict(U=20.0, q=240.0, alpha=1.5, Re=1.3e5, CL=-6.0, CD=0.8, CM=0.05, C_power=0.075)
    out = c.apply_wall_correction(wc, **values, Cp=np.array([1.0, -1.0, -3.0]))
    for name, value in values.items():
        # eps ~ 1e-10 at d/h = 1e-10 (wake term dominates): rel 1e-8 is generous
        assert out[name] == pytest.approx(value, rel=1e-8), name
    np.testing.assert_allclose(out["Cp"], [1.0, -1.0, -3.0], rtol=1e-8)


@pytest.mark.parametrize(
    "kind", [float, np.asarray, pd.Series, lambda v: xr.DataArray(v, dims="run")]
)
def test_solid_blockage_accepts_array_kinds(kind):
    # tunnelred.common._arraylike promise; values by the published form pi^2/12 (d/h)^2 (Allen &
    # Vincenti): d/h = 0.1 and 0.2 give pi^2/1200 and pi^2/300.
    d = kind([0.1, 0.2]) if kind is not float else 0.1
    expected = [np.pi**2 / 1200, np.pi**2 / 300] if kind is not float else np.pi**2 / 1200
    result = c.solid_blockage_2d(d, 1.0)
    np.testing.assert_allclose(np.asarray(result), expected, rtol=1e-12)
    if kind is pd.Series:
        assert isinstance(result, pd.Series)


# --- wake blockage ----------------------------------------------------------------------------


def test_wake_blockage_allen_vincenti():
    # Allen & Vincenti, NACA Report 782: eps_wb = (c/(4h)) c_du (from memory), c = d.
    # d/h = 0.1, CD = 1.2: 0.1/4 * 1.2 = 0.03 exactly -> rel 1e-12.
    assert c.wake_blockage_2d(D, H, 1.2) == pytest.approx(0.03, rel=1e-12)


def test_wake_blockage_maskell_2d():
    # Maskell, ARC R&M 3400 (summary): Delta q/q = theta CD S/C; in 2-D S/C = d/h.
    # theta = 0.96 (default, from memory; the summary says "a little less than unity"):
    # q_c/q_u = 1 + 0.96 * 1.2 * 0.1 = 1.1152; sqrt(1.1152) = 1.0560303 -> eps = 0.0560303.
    assert c.wake_blockage_2d(D, H, 1.2, method="maskell") == pytest.approx(0.0560303, rel=1e-6)
    # theta = 1: q_c/q_u = 1.12, sqrt(1.12) = 1.0583005 -> 0.0583005
    eps = c.wake_blockage_2d(D, H, 1.2, method="maskell", blockage_factor=1.0)
    assert eps == pytest.approx(0.0583005, rel=1e-6)


def test_maskell_3d():
    # Maskell, ARC R&M 3400 (summary): q_c/q_u = 1 + theta CD S/C, theta = 5/2 for bluff bodies.
    # CD = 1.0, S = d b = 0.1 m * 0.5 m = 0.05 m2, C = h w = 1 m2:
    # q_c/q_u = 1 + 2.5 * 0.05 = 1.125; eps = sqrt(1.125) - 1 = 0.0606602.
    assert c.maskell_3d(1.0, 0.05, 1.0) == pytest.approx(0.0606602, rel=1e-6)
    assert (1.0 + c.maskell_3d(1.0, 0.05, 1.0)) ** 2 == pytest.approx(1.125, rel=1e-12)
    # theta = 2.0 stated: 1 + 2 * 0.05 = 1.1, sqrt(1.1) - 1 = 0.0488088
    eps = c.maskell_3d(1.0, 0.05, 1.0, blockage_factor=2.0)
    assert eps == pytest.approx(0.0488088, rel=1e-6)
    # The dispatcher uses S = d * span, C = height * width and puts it all in eps_wake.
    wc = _wall("maskell-3d", span=0.5, drag_coefficient=1.0, spans_section=False)
    assert wc.eps_wake == pytest.approx(0.0606602, rel=1e-6)
    assert wc.eps_solid == 0.0


def test_dispatcher_totals():
    # Allen & Vincenti at d/h = 0.1, CD = 1.2: eps = 8.22467e-3 + 0.03 = 0.0382247.
    wc = _wall(buoyancy=False)
    assert wc.eps == pytest.approx(0.0382247, rel=1e-6)
    assert wc.delta_CD_buoyancy == 0.0
    # "maskell" adds the same solid blockage to Maskell's 2-D wake term:
    # 8.22467e-3 + 0.0560303 = 0.0642550.
    assert _wall("maskell").eps == pytest.approx(0.0642550, rel=1e-6)


@pytest.mark.parametrize(
    "method, kw",
    [
        ("glauert", {}),
        ("allen-vincenti", {"spans_section": False}),
        ("maskell", {"spans_section": False}),
        ("allen-vincenti", {"blockage_factor": 1.0}),
        ("maskell-3d", {"spans_section": False, "lift_interference": True}),
    ],
)
def test_dispatcher_refuses_what_it_cannot_do(method, kw):
    with pytest.raises(ValueError):
        _wall(method, **kw)


# --- buoyancy ---------------------------------------------------------------------------------


def test_buoyancy_sign_and_size():
    # Glauert, ARC R&M 1566 (from memory): D_B = -(V + V_added) dp/dx; circular cylinder
    # V_added = V = pi d^2/4 per unit span. d = 0.1 m, dp/dx = -10 Pa/m, q = 500 Pa:
    # D_B = -2 * 7.85398e-3 * (-10) = +0.157080 N/m downstream; / (q d = 50 N/m) = 3.14159e-3.
    assert c.buoyancy_drag(0.1, 500.0, -10.0) == pytest.approx(3.14159e-3, rel=1e-5)
    # A rising pressure pushes the model upstream: the measurement is too low, Delta CD < 0.
    assert c.buoyancy_drag(0.1, 500.0, +10.0) == pytest.approx(-3.14159e-3, rel=1e-5)
    # Subtracted from the measured CD: with no blockage CD_c = 1.2 - 3.14159e-3 = 1.19686.
    wc = _wall("none", static_pressure_gradient=-10.0)
    out = c.apply_wall_correction(
        wc, U=28.9, q=500.0, alpha=0.0, Re=2e5, CL=0.0, CD=1.2, CM=0.0, C_power=0.0
    )
    assert out["CD"] == pytest.approx(1.19686, rel=1e-5)


# --- lift interference ------------------------------------------------------------------------


def test_lift_interference_size():
    # The derivation in lift_interference_2d: 2 sigma = (pi^2/24)(d/h)^2; d/h = 0.1:
    # 9.8696/24 * 0.01 = 4.11234e-3. CL = -10: delta_CL = +10 * 4.11234e-3/1.00411234 = 0.040955.
    out = c.lift_interference_2d(-10.0, D, H)
    assert out["lift_curvature"] == pytest.approx(4.11234e-3, rel=1e-5)
    assert out["delta_CL"] == pytest.approx(0.040955, rel=1e-4)
    assert np.all(out["delta_alpha"] == 0.0)


def test_lift_interference_from_vortex_images_and_surface_pressure():
    # Independent check of the derivation. (1) The strain the walls induce: sum the velocity of
    # the image vortices (strength (-1)^k Gamma at y = +-k h; Biot-Savart for a point vortex,
    # u = -Gamma_k (y - y_k)/(2 pi r^2), v = Gamma_k x/(2 pi r^2)) at a point x near the model
    # and compare dv/dx with -A, A = pi Gamma/(12 h^2); the alternating lattice sum is
    # eta(2) = zeta(2)/2 = pi^2/12 (scipy.special.zeta).
    U, R, h, alpha = 1.0, 0.05, 1.0, 1.5
    gamma = 2.0 * np.pi * alpha * U * R  # Gamma = 2 pi omega R^2, omega R = alpha U
    k = np.arange(1, 20001)
    y_k = np.concatenate([k * h, -k * h])
    g_k = np.concatenate([(-1.0) ** k, (-1.0) ** k]) * gamma
    x = 1e-5 * h
    v = np.sum(g_k * x / (2.0 * np.pi * (x**2 + y_k**2)))
    A = np.pi * gamma / (12.0 * h**2)
    # Truncation after K alternating terms ~1/K^2 relative, and O(x^2/h^2) = 1e-10: rel 1e-8.
    assert v / x == pytest.approx(-A, rel=1e-8)
    assert np.sum((-1.0) ** (k + 1) / k**2.0) == pytest.approx(zeta(2.0) / 2.0, rel=1e-8)

    # (2) The force: the surface velocity of the cylinder in the stream U + iAz with circulation
    # Gamma (circle theorem), integrated as CL = 1/2 \oint Cp sin(theta) d(theta) with theta from
    # the windward point (docs convention) must give the documented (1 + 2 sigma) CL_free.
    theta = np.linspace(0.0, 2.0 * np.pi, 2048, endpoint=False)
    zs = -R * np.exp(1j * theta)
    w = U + 1j * A * zs - U * R**2 / zs**2 + 1j * A * R**4 / zs**3 - 1j * gamma / (2 * np.pi * zs)
    normal = zs / R  # outward unit normal as a complex number
    # No flow through the surface: with w = u - iv the radial velocity is Re(w * n).
    assert np.max(np.abs(np.real(w * normal))) < 1e-12
    cp = 1.0 - np.abs(w) ** 2 / U**2
    dtheta = theta[1] - theta[0]
    CL = 0.5 * np.sum(cp * np.sin(theta)) * dtheta  # periodic trapezoid: spectral accuracy
    CD = 0.5 * np.sum(cp * np.cos(theta)) * dtheta
    sigma = np.pi**2 / 48.0 * (2 * R / h) ** 2
    # Free air: CL = -2 pi alpha (Kutta-Joukowski with the docs' sign convention).
    assert CL == pytest.approx(-2.0 * np.pi * alpha * (1.0 + 2.0 * sigma), rel=1e-10)
    assert abs(CD) < 1e-12
    lift = c.lift_interference_2d(CL, 2 * R, h)
    assert CL + lift["delta_CL"] == pytest.approx(-2.0 * np.pi * alpha, rel=1e-10)


# --- applying the correction ------------------------------------------------------------------


def test_stagnation_cp_stays_one():
    # Total pressure unchanged by the walls (common practice): 1 - Cp_c = (1 - Cp)/(1 + eps)^2.
    # Cp = 1 stays 1; Cp = -3 at eps = 0.0382247: (1 + eps)^2 = 1 + 0.0764494 + 0.0014611
    # = 1.0779105, 1 - 4/1.0779105 = -2.710883.
    wc = _wall()
    out = c.apply_wall_correction(
        wc, U=20, q=240, alpha=0, Re=1e5, CL=0, CD=1.2, CM=0, C_power=0, Cp=np.array([1.0, -3.0])
    )
    assert out["Cp"][0] == pytest.approx(1.0, abs=1e-15)
    assert out["Cp"][1] == pytest.approx(-2.710883, rel=1e-6)


def test_none_leaves_coefficients_alone():
    # With no blockage, no buoyancy and no lift interference the corrected values are the
    # measured ones (common practice: "none" means no correction).
    wc = _wall("none", buoyancy=False)
    values = dict(U=20.0, q=240.0, alpha=1.0, Re=1e5, CL=-5.0, CD=1.1, CM=0.1, C_power=0.1)
    out = c.apply_wall_correction(wc, **values, CL_p=-4.9, CD_p=1.0)
    for name, value in values.items():
        assert out[name] == value, name
    assert out["CL_p"] == -4.9 and out["CD_p"] == 1.0
    assert wc.eps == 0.0 and wc.delta_CD_buoyancy == 0.0


def test_batch_of_draws():
    # Vectorised over 4000 Monte Carlo draws with Cp [draw, theta]; each draw must equal the
    # scalar call with that draw's inputs (same arithmetic -> rel 1e-12).
    rng = np.random.default_rng(1)
    n = 4000
    cd = rng.normal(1.2, 0.05, n)
    q = rng.normal(500.0, 5.0, n)
    height = rng.normal(H, 0.002, n)
    theta = np.radians(np.arange(0.0, 360.0, 5.0))
    cp = 1.0 - (0.5 + 2.0 * np.sin(theta)) ** 2 + rng.normal(0, 0.01, (n, theta.size))
    common = dict(diameter=D, span=1.0, width=1.0, static_pressure_gradient=-5.0)
    wc = c.wall_correction(
        "allen-vincenti",
        height=height,
        drag_coefficient=cd,
        lift_coefficient=-3.0,
        dynamic_pressure=q,
        lift_interference=True,
        **common,
    )
    values = dict(U=np.sqrt(2 * q / 1.2), alpha=0.5, Re=2e5, CL=-3.0, CM=0.1, C_power=0.05)
    out = c.apply_wall_correction(wc, q=q, CD=cd, Cp=cp, CL_p=-2.9, CD_p=cd, **values)
    assert out["Cp"].shape == (n, theta.size)
    assert out["CL"].shape == out["CD"].shape == out["alpha"].shape == (n,)
    for i in (0, 1234, n - 1):
        wi = c.wall_correction(
            "allen-vincenti",
            height=height[i],
            drag_coefficient=cd[i],
            lift_coefficient=-3.0,
            dynamic_pressure=q[i],
            lift_interference=True,
            **common,
        )
        vi = {k: (v[i] if np.ndim(v) else v) for k, v in values.items()}
        oi = c.apply_wall_correction(wi, q=q[i], CD=cd[i], Cp=cp[i], CL_p=-2.9, CD_p=cd[i], **vi)
        for name in ("U", "q", "CL", "CD", "alpha", "C_power", "CD_p"):
            assert out[name][i] == pytest.approx(oi[name], rel=1e-12), name
        np.testing.assert_allclose(out["Cp"][i], oi["Cp"], rtol=1e-12)


def test_recovers_free_air_allen_vincenti():
    # Interference applied forward by hand, inverting Allen & Vincenti's relations (NACA Report
    # 782) with buoyancy and the lift-interference factor, then corrected back.
    # d/h = 0.1: e_s = 8.22467e-3, k = d/(4h) = 0.025, a = 1 - 3 e_s = 0.975326;
    # measured q_u = 400 Pa, dp/dx = -8 Pa/m: B = pi * 0.1 * 8/(2 * 400) = 3.14159e-3.
    # Free air CD_f = 1.0: CD_f = (CD_u - B)(a - 2k CD_u) -> 2k CD_u^2 - (a + 2kB) CD_u
    # + (aB + CD_f) = 0, smaller root CD_u = [(a + 2kB) - sqrt((a + 2kB)^2 - 8k(aB + CD_f))]/(4k).
    e_s = np.pi**2 / 1200
    k = 0.025
    a = 1.0 - 3.0 * e_s
    q_u, dpdx = 400.0, -8.0
    B = np.pi * 0.1 * 8.0 / (2.0 * 400.0)
    CD_f, CL_f, CM_f, alpha_f, U_f, Re_f = 1.0, -6.0, 0.08, 1.2, 26.0, 1.7e5
    b2 = a + 2 * k * B
    CD_u = (b2 - np.sqrt(b2**2 - 8 * k * (a * B + CD_f))) / (4 * k)
    eps = e_s + k * CD_u
    two_sigma = np.pi**2 / 24 * 0.01
    measured = dict(
        U=U_f / (1 + eps),
        alpha=alpha_f * (1 + eps),  # omega R unchanged, U lower
        Re=Re_f / (1 + eps),
        CL=CL_f * (1 + eps) ** 2 * (1 + two_sigma),
        CD=CD_u,
        CM=CM_f * (1 + eps) ** 2,
        C_power=CM_f * alpha_f * (1 + eps) ** 3,
    )
    wc = _wall(
        drag_coefficient=CD_u,
        lift_coefficient=measured["CL"],
        dynamic_pressure=q_u,
        static_pressure_gradient=dpdx,
        lift_interference=True,
    )
    out = c.apply_wall_correction(wc, q=q_u, CL_p=measured["CL"], CD_p=CD_u, **measured)
    truth = dict(U=U_f, alpha=alpha_f, Re=Re_f, CL=CL_f, CD=CD_f, CM=CM_f, C_power=CM_f * alpha_f)
    truth.update(CL_p=CL_f, CD_p=CD_f, q=q_u * (1 + eps) ** 2)
    for name, value in truth.items():
        # exact inverse relations: only rounding remains -> rel 1e-12
        assert out[name] == pytest.approx(value, rel=1e-12), name


def test_recovers_free_air_maskell_3d():
    # Maskell, ARC R&M 3400: q_f/q_u = 1 + theta CD_u S/C and CD_f = (CD_u - B) q_u/q_f, so
    # CD_u = (CD_f + B)/(1 - theta CD_f S/C). theta = 2.5, S = 0.1 * 0.6 = 0.06 m2, C = 1.2 m2:
    # S/C = 0.05; q_u = 300 Pa, dp/dx = -6 Pa/m: B = pi * 0.1 * 6/600 = 3.14159e-3;
    # CD_f = 0.9: CD_u = 0.903142/(1 - 0.1125) = 1.017625; q_f/q_u = 1.127203.
    theta, ratio = 2.5, 0.05
    q_u, dpdx = 300.0, -6.0
    B = np.pi * 0.1 * 6.0 / 600.0
    CD_f = 0.9
    CD_u = (CD_f + B) / (1.0 - theta * CD_f * ratio)
    assert CD_u == pytest.approx(1.017625, rel=1e-6)  # hand value above
    q_ratio = 1.0 + theta * CD_u * ratio
    wc = _wall(
        "maskell-3d",
        span=0.6,
        width=1.2,
        drag_coefficient=CD_u,
        dynamic_pressure=q_u,
        static_pressure_gradient=dpdx,
        spans_section=False,
    )
    theta_deg = np.linspace(0.0, 350.0, 36)
    cp_f = 1.0 - (0.8 + 2.0 * np.sin(np.radians(theta_deg))) ** 2  # potential flow, alpha = 0.8
    cp_u = 1.0 - (1.0 - cp_f) * q_ratio
    out = c.apply_wall_correction(
        wc,
        U=20.0,
        q=q_u,
        alpha=0.8 * np.sqrt(q_ratio),
        Re=1e5,
        CL=-5.0 * q_ratio,
        CD=CD_u,
        CM=0.1 * q_ratio,
        C_power=0.08 * q_ratio**1.5,
        Cp=cp_u,
    )
    assert out["q"] == pytest.approx(q_u * q_ratio, rel=1e-12)
    assert out["CD"] == pytest.approx(CD_f, rel=1e-12)
    assert out["CL"] == pytest.approx(-5.0, rel=1e-12)
    assert out["alpha"] == pytest.approx(0.8, rel=1e-12)
    assert out["C_power"] == pytest.approx(0.08, rel=1e-12)
    np.testing.assert_allclose(out["Cp"], cp_f, rtol=1e-12, atol=1e-12)


def test_summary_text():
    # The report's formula text names the method's source.
    text = c.correction_summary("allen-vincenti", lift_interference=True)
    assert "NACA Report 782" in text and "lift interference" in text and "buoyancy" in text
    assert set(c.METHOD_FORMULAS) >= {"allen-vincenti", "maskell", "maskell-3d", "none"}


# --- the registry of methods -------------------------------------------------------------------


def test_every_method_campaign_toml_may_name_has_one_physics_entry():
    from tunnelred.inputs.methods import BLOCKAGE_CHOICES, BLOCKAGE_METHODS

    assert tuple(c.METHODS) == BLOCKAGE_METHODS
    for name, method in c.METHODS.items():
        assert method.choice is BLOCKAGE_CHOICES[name]
        assert method.formula and method.validity and c.METHOD_FORMULAS[name] == method.formula


def test_a_registry_entry_missing_a_field_fails():
    av = c.METHODS["allen-vincenti"]
    with pytest.raises(TypeError):  # no validity range
        c.BlockageMethod(av.choice, av.increments, av.drag_factor, av.formula)
    with pytest.raises(ValueError):  # an empty formula text
        c.BlockageMethod(av.choice, av.increments, av.drag_factor, " ", av.validity)
    with pytest.raises(TypeError):  # a drag factor that cannot be called
        c.BlockageMethod(av.choice, av.increments, 1.0, av.formula, av.validity)
    with pytest.raises(TypeError):  # a name, not the choice config knows
        c.BlockageMethod("allen-vincenti", av.increments, av.drag_factor, av.formula, av.validity)


def test_the_registry_refuses_a_choice_without_physics_or_physics_without_a_choice():
    from tunnelred.inputs.methods import MethodChoice

    with pytest.raises(ValueError, match="maskell-3d"):
        c._registry(*(m for name, m in c.METHODS.items() if name != "maskell-3d"))
    stray = c.BlockageMethod(
        MethodChoice("glauert", fits_2d=True, fits_3d=False),
        c.METHODS["none"].increments,
        c.METHODS["none"].drag_factor,
        "eps = 0",
        "nowhere",
    )
    with pytest.raises(ValueError, match="glauert"):
        c._registry(*c.METHODS.values(), stray)


def test_each_entry_applies_its_own_drag_factor():
    # Allen & Vincenti, NACA Report 782: CD_c = CD_u (1 - 3 eps_sb - 2 eps_wb); at d/h = 0.1,
    # CD_u = 1.2: 1 - 3 * 8.22467e-3 - 2 * 0.03 = 0.915326. Maskell, ARC R&M 3400:
    # CD_c = CD_u q/q_c = 1.2/(1 + 0.0642550)^2 = 1.059477.
    values = dict(U=20.0, q=500.0, alpha=0.0, Re=1e5, CL=0.0, CM=0.0, C_power=0.0)
    out = c.apply_wall_correction(_wall(buoyancy=False), CD=1.2, **values)
    assert out["CD"] == pytest.approx(1.2 * 0.915326, rel=1e-6)
    out = c.apply_wall_correction(_wall("maskell", buoyancy=False), CD=1.2, **values)
    assert out["CD"] == pytest.approx(1.2 / 1.0642550**2, rel=1e-6)


def test_summary_gives_the_validity_range():
    text = c.correction_summary(c.METHODS["maskell-3d"], buoyancy=False)
    assert "ARC R&M 3400" in text and "valid for:" in text and "S/C up to 0.1" in text
