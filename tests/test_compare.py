"""Tests of tunnelred.products.compare against hand-worked cases, numpy, statistics, scipy and
uncertainties.

Synthetic results are DataFrames built here with the names of docs/results.md; their "truth" is a
stated formula (potential flow CL = −2πα, or a chosen curve plus a known increment) and their
noise is drawn from stated normal distributions with fixed seeds.
"""

from __future__ import annotations

import dataclasses
import math
import statistics

import numpy as np
import pandas as pd
import pytest
import uncertainties
import xarray as xr
from scipy import stats

from tunnelred.common.errors import InputError
from tunnelred.products import compare

RPM_TO_ALPHA = 0.5 / 600.0  # synthetic spin ratio per rpm (a fixed speed and radius)


def sweep_frame(
    config="A",
    spins=(0, 100, 200, 300, 400, 500, 600),
    *,
    speed=20.0,
    curve=lambda a: -2.0 * math.pi * 0.8 * a,
    u_CL=0.02,
    u_alpha=0.002,
    r=0.0,
    seed=None,
    prefix=None,
    t0="2031-05-01T08:00:00",
):
    """One results row per run, in run order; noise on CL and α (correlated r) when seed is set."""
    spins = np.asarray(spins, dtype=float)
    n = spins.size
    alpha_true = spins * RPM_TO_ALPHA
    alpha, CL = alpha_true.copy(), curve(alpha_true)
    if seed is not None:
        rng = np.random.default_rng(seed)
        z = rng.standard_normal((2, n))
        # correlated pair: δC = u_CL z1, δα = u_alpha (r z1 + √(1 − r²) z2)
        CL = CL + u_CL * z[0]
        alpha = alpha + u_alpha * (r * z[0] + math.sqrt(1 - r * r) * z[1])
    prefix = prefix or config
    return pd.DataFrame(
        {
            "run": [f"{prefix}{i:02d}" for i in range(n)],
            "config": config,
            "start": pd.date_range(t0, periods=n, freq="10min").strftime("%Y-%m-%dT%H:%M:%S"),
            "speed_set": speed,
            "spin_set": spins,
            "U": speed,
            "Re": speed * 0.1 / 1.5e-5,
            "alpha": alpha,
            "u_alpha": u_alpha,
            "CL": CL,
            "u_CL": u_CL,
            "corr_CL_alpha": r,
            "CD": 1.0 + 0.1 * alpha,
            "u_CD": 0.01,
        }
    )


# --- legs -------------------------------------------------------------------------------------


def test_up_down_legs_from_hand_made_run_order():
    # Hand-made order: up 0→600 with a mid-leg repeat at 300, two runs at the 600 turning point,
    # down to 0, up again to 200. Rows are shuffled: the order must come from `start`.
    spins = [0, 300, 300, 600, 600, 300, 0, 100, 200]
    df = sweep_frame(spins=spins)
    shuffled = df.sample(frac=1.0, random_state=3)
    sweeps = compare.find_sweeps(shuffled)
    assert [(s.leg, s.leg_index) for s in sweeps] == [("up", 1), ("down", 1), ("up", 2)]
    up, down, up2 = (set(s.runs) for s in sweeps)
    assert up == {"A00", "A01", "A02", "A03", "A04"}  # the repeat at 300 stays in its leg
    assert down == {"A03", "A04", "A05", "A06"}  # both turning-point runs belong to both legs
    assert up2 == {"A06", "A07", "A08"}  # the 0-rpm turning point is shared as well
    # ordered by set spin rate, repeats in run order
    assert sweeps[1].runs == ("A06", "A05", "A03", "A04")
    assert sweeps[2].key == "A | 20 m/s | up 2"


def test_single_leg_and_groups_by_config_speed_and_re():
    df = pd.concat(
        [
            sweep_frame("A", speed=20.0),
            sweep_frame("A", speed=10.0, t0="2031-05-02T08:00:00"),
            sweep_frame("B", speed=20.0, t0="2031-05-03T08:00:00"),
        ],
        ignore_index=True,
    )
    df["run"] = [f"r{i}" for i in range(len(df))]
    sweeps = compare.find_sweeps(df)
    assert [(s.config, s.speed, s.leg) for s in sweeps] == [
        ("A", 20.0, "single"),
        ("A", 10.0, "single"),
        ("B", 20.0, "single"),
    ]
    by_re = compare.find_sweeps(df, by="re")
    # The Re bands are shared by all configurations, so A and B at 20 m/s get the same band.
    assert by_re[0].Re == by_re[2].Re != by_re[1].Re
    # Set speeds 19.8 and 20.1 round to one nominal speed on the 0.5 m/s step of
    # quality.repeat_disagreement (common practice).
    df.loc[df.index[:3], "speed_set"] = [19.8, 20.1, 20.2]
    assert len(compare.find_sweeps(df)) == 3


# --- interpolation and its band ---------------------------------------------------------------


def test_band_formula_against_uncertainties_package():
    # One grid point between two runs whose α and CL are correlated (r = 0.6, −0.3): the linear
    # interpolation at fixed α propagated by the `uncertainties` package (exact first-order
    # derivatives, JCGM 100 §5.2 law of propagation) must match on_grid's band less its
    # interpolation term (a third run at 600 rpm lets the curvature be stated); both are first
    # order in the same model, so they agree to rounding → rtol 1e-10.
    df = sweep_frame(spins=[200, 400, 600], u_alpha=0.01, u_CL=0.05, curve=lambda a: -5.0 * a**0.8)
    df["u_alpha"] = [0.01, 0.015, 0.01]
    df["u_CL"] = [0.05, 0.04, 0.05]
    df["corr_CL_alpha"] = [0.6, -0.3, 0.0]
    sweep = compare.find_sweeps(df)[0]
    g = 0.25
    variables = []
    for _, row in df.iloc[:2].iterrows():
        cov = np.array(
            [
                [row.u_alpha**2, row.corr_CL_alpha * row.u_alpha * row.u_CL],
                [row.corr_CL_alpha * row.u_alpha * row.u_CL, row.u_CL**2],
            ]
        )
        variables.append(uncertainties.correlated_values([row.alpha, row.CL], cov))
    (a1, c1), (a2, c2) = variables
    reference = c1 + (c2 - c1) * (g - a1) / (a2 - a1)
    curve = compare.on_grid(sweep, "CL", [g])
    assert curve.value[0] == pytest.approx(reference.nominal_value, rel=1e-12)
    assert curve.u_interp[0] > 0
    runs_only = math.sqrt(curve.u[0] ** 2 - curve.u_interp[0] ** 2)
    assert runs_only == pytest.approx(reference.std_dev, rel=1e-10)


def test_interpolation_error_of_a_parabola_is_stated_exactly():
    # C = 3α² through points 0, 0.25, 0.5: the remainder of linear interpolation is
    # ½ C'' (g − α₁)(α₂ − g) with C'' = 6 everywhere (R. L. Burden, J. D. Faires, Numerical
    # Analysis, 9th ed., Theorem 3.3), and the second divided difference of a parabola is exact
    # (ibid. §3.3), so u_interp equals the true error of the line at every grid point.
    df = sweep_frame(spins=[0, 300, 600], u_alpha=0.0, curve=lambda a: 3.0 * a**2)
    curve = compare.on_grid(compare.find_sweeps(df)[0], "CL", [0.1, 0.2, 0.25, 0.4])
    error = curve.value - 3.0 * curve.alpha**2
    np.testing.assert_allclose(curve.u_interp, np.abs(error), rtol=1e-12)
    assert curve.u_interp[2] == 0.0  # on a measured point
    # A sweep of two points cannot state its curvature: it covers its two points only.
    two = compare.find_sweeps(sweep_frame(spins=[0, 600], u_alpha=0.0))[0]
    assert compare.on_grid(two, "CL", [0.0, 0.25, 0.5]).covered.tolist() == [True, False, True]


def test_no_grid_point_across_a_gap_wider_than_stated():
    # Points 0, 0.1, 0.2, 0.3 and then 0.5: median step 0.1, so the default limit is 1.5 × 0.1;
    # the last step (0.2) is a gap, and only its two ends are covered.
    df = sweep_frame(spins=[0, 120, 240, 360, 600], u_alpha=0.0)
    sweep = compare.find_sweeps(df)[0]
    assert compare.gap_limit([np.array([0.0, 0.1, 0.2, 0.3, 0.5])]) == pytest.approx(0.15)
    curve = compare.on_grid(sweep, "CL", [0.05, 0.3, 0.4, 0.5])
    assert curve.covered.tolist() == [True, True, False, True]
    # A stated max_gap overrides the default.
    assert compare.on_grid(sweep, "CL", [0.4], max_gap=0.25).covered.tolist() == [True]


def test_interpolation_never_extrapolates():
    # The measured α range is 0 … 0.5 (spins 0 … 600 rpm); points outside are NaN and flagged
    # not covered — a requirement of the brief, no source needed beyond the definition.
    sweep = compare.find_sweeps(sweep_frame())[0]
    grid = np.array([-0.1, -1e-12, 0.0, 0.25, 0.5, 0.5 + 1e-12, 0.8])
    curve = compare.on_grid(sweep, "CL", grid)
    assert curve.covered.tolist() == [False, False, True, True, True, False, False]
    assert np.isnan(curve.value[~curve.covered]).all() and np.isnan(curve.u[~curve.covered]).all()
    assert np.isfinite(curve.value[curve.covered]).all()
    # The two end points are the end runs themselves (hand-worked: w = 1 and w = 0).
    assert curve.value[2] == sweep.arrays["CL"][0] and curve.value[4] == sweep.arrays["CL"][-1]
    # A second sweep over 0.25 … 0.5 only: the difference is NaN (not zero) outside the overlap.
    other = compare.find_sweeps(sweep_frame("B", spins=[300, 450, 600]))[0]
    d = compare.difference(sweep, other, "CL", grid=grid)
    assert d.covered.tolist() == [False, False, False, True, True, False, False]
    assert np.isnan(d.delta[~d.covered]).all() and not d.significant[~d.covered].any()
    # The default grid lies inside the overlap.
    default = compare.alpha_grid(sweep, other, name="CL")
    assert default.min() >= 0.25 and default.max() <= 0.5
    # A sweep with one set point is no curve: it covers nothing.
    lone = compare.find_sweeps(sweep_frame(spins=[300, 300]))[0]
    assert not compare.on_grid(lone, "CL", [0.25]).covered.any()


def test_repeats_at_a_set_point_are_averaged_before_interpolation():
    # Two repeats at 600 rpm and one at 0: at α = 0.5 the curve is the mean of the repeats, with
    # u = √(u₁² + u₂²)/2 for independent runs (JCGM 100 §5.1.2, eq. (10), mean of two).
    df = sweep_frame(spins=[0, 600, 600], u_alpha=0.0)
    df["CL"] = [0.0, -2.9, -3.1]
    df["u_CL"] = [0.1, 0.1, 0.2]
    curve = compare.on_grid(compare.find_sweeps(df)[0], "CL", [0.5])
    assert curve.value[0] == pytest.approx(-3.0, abs=1e-12)
    assert curve.u[0] == pytest.approx(math.hypot(0.1, 0.2) / 2, rel=1e-12)


# --- differences ------------------------------------------------------------------------------


def test_difference_of_a_sweep_with_itself_is_zero_and_never_significant():
    # Identity: the same runs are fully correlated, so Δ = 0 and u(Δ) = 0 exactly (JCGM 100 §5.2
    # with r = 1 between identical quantities); nothing may be flagged significant.
    sweep = compare.find_sweeps(sweep_frame(seed=1, r=0.5, u_alpha=0.01))[0]
    d = compare.difference(sweep, sweep, "CL")
    assert d.covered.sum() >= 5
    assert np.all(d.delta[d.covered] == 0.0) and np.all(d.u[d.covered] == 0.0)
    assert not d.significant.any()


def test_known_lift_increment_is_recovered_within_uncertainty():
    # Configuration B carries a known increment ΔCL = +0.30 over A (an invented truth) on the
    # same curve; both have independent noise of the stated u (CL and α, r = 0.4). Each grid
    # value of Δ − 0.30 is then normal with sd u(Δ): with fixed seeds every |z| < 3 (99.7 %
    # per point; 13 points) and the increment, ≥ 5 u(Δ) here, is significant everywhere.
    increment = 0.30
    spins = np.arange(0, 1201, 100)
    a = sweep_frame("A", spins, seed=11, r=0.4, u_alpha=0.004)
    b = sweep_frame(
        "B",
        spins,
        seed=12,
        r=0.4,
        u_alpha=0.004,
        curve=lambda x: -2.0 * math.pi * 0.8 * x + increment,
        t0="2031-05-02T08:00:00",
    )
    sa, sb = compare.find_sweeps(pd.concat([a, b], ignore_index=True))
    d = compare.difference(sb, sa, "CL")
    z = (d.delta[d.covered] - increment) / d.u[d.covered]
    assert d.covered.sum() >= 10
    assert np.all(np.abs(z) < 3.0)
    assert d.significant[d.covered].all()


def _noisy(sweep, rng, u_cl: float, u_alpha: float, r: float):
    """The sweep with normal noise on CL and α, correlated r (as sweep_frame draws it)."""
    z1, z2 = rng.standard_normal((2, len(sweep.runs)))
    arrays = sweep.arrays | {
        "CL": sweep.arrays["CL"] + u_cl * z1,
        "alpha": sweep.arrays["alpha"] + u_alpha * (r * z1 + math.sqrt(1 - r * r) * z2),
    }
    return dataclasses.replace(sweep, arrays=arrays)


def test_difference_uncertainty_against_monte_carlo():
    # The stated u(Δ) against the scatter of Δ over 2000 independent noise draws of both sweeps
    # (JCGM 101:2008: propagation by sampling). With a linear truth the first-order band is
    # exact to first order, so (N−1) s²/u² ~ χ²(N−1): the 99.9 % interval of scipy.stats.chi2
    # bounds the ratio. u(α) is 2.4 % of the set-point spacing here; the grid holds points mid-
    # segment (0.21, 0.29) and close to a run (0.33, 0.07). (At 12 % the second-order terms move
    # the ratio by up to ±16 %: see on_grid's Notes.)
    draws, r, u_cl, u_alpha = 2000, -0.5, 0.02, 0.002
    grid = np.array([0.07, 0.21, 0.29, 0.33])
    truth = pd.concat(
        [sweep_frame("A", r=r, u_alpha=u_alpha), sweep_frame("B", r=r, u_alpha=u_alpha)]
    )
    sa, sb = compare.find_sweeps(truth)
    u = compare.difference(sa, sb, "CL", grid=grid).u
    rng = np.random.default_rng(99)
    deltas = np.empty((draws, grid.size))
    for k in range(draws):
        noisy = [_noisy(sweep, rng, u_cl, u_alpha, r) for sweep in (sa, sb)]
        deltas[k] = compare.difference(*noisy, "CL", grid=grid).delta
    low, high = stats.chi2.ppf([0.0005, 0.9995], draws - 1) / (draws - 1)
    ratio2 = deltas.var(axis=0, ddof=1) / u**2
    assert np.all((ratio2 > low) & (ratio2 < high)), ratio2


def test_hysteresis_cancels_the_shared_turning_point():
    # Up 0→600 then down 600→0 with the down leg 0.2 higher in CL (invented loop). The 600-rpm
    # run belongs to both legs: it is one measurement, so its δCL cancels in Δ and Δ = 0 there.
    # What remains is its δα acting through the two legs' different slopes: to first order
    # (JCGM 100 §5.1.2) u(Δ) = |s_down − s_up| u(α), worked by hand from the segment slopes.
    df = sweep_frame(spins=[0, 200, 400, 600, 400, 200, 0])
    df.loc[4:, "CL"] += 0.2
    up, down = compare.find_sweeps(df)
    d = compare.hysteresis(up, down, "CL", method="grid", grid=[0.0, 1 / 3, 0.5])
    cl, alpha = df.CL.to_numpy(), df.alpha.to_numpy()
    s_up = (cl[3] - cl[2]) / (alpha[3] - alpha[2])
    s_down = (cl[3] - cl[4]) / (alpha[3] - alpha[4])
    assert d.delta[2] == 0.0 and not d.significant[2]
    assert d.u[2] == pytest.approx(abs(s_down - s_up) * 0.002, rel=1e-12)
    assert d.delta[:2] == pytest.approx([-0.2, -0.2], abs=1e-12)
    assert d.significant[:2].all()  # 0.2 against 2 u(Δ) ≈ 2 × √2 × 0.02 = 0.057
    # With α known exactly the shared run contributes nothing at all.
    exact = compare.find_sweeps(df.assign(u_alpha=0.0))
    assert compare.hysteresis(*exact, "CL", method="grid", grid=[0.5]).u[0] == 0.0
    # Paired at measured spin ratios, the shared turning point pairs with itself and is left
    # out; the other points pair one to one and show the loop.
    paired = compare.hysteresis(up, down, "CL")
    assert paired.method == "paired" and paired.alpha.tolist() == pytest.approx([0, 1 / 6, 1 / 3])
    assert paired.delta == pytest.approx([-0.2, -0.2, -0.2], abs=1e-12)


def test_pairing_within_a_tolerance_moves_each_side_along_its_slope():
    # A: 0, 0.25, 0.5; B measured at 0.26 and 0.52 on the same straight line CL = −4α (no
    # difference in truth). Mutual nearest points within 0.05 pair; each side moves to the
    # pair's mean α along its slope, so Δ is 0 to rounding (a line has no curvature) although
    # the raw CL differ by 4 × 0.01 and 4 × 0.02. With tolerance 0.015 only the first pairs.
    a = sweep_frame("A", spins=[0, 300, 600], u_alpha=0.0, curve=lambda x: -4.0 * x)
    b = sweep_frame("B", spins=[0, 300, 600], u_alpha=0.0, t0="2031-05-02T08:00:00")
    b["alpha"] = [0.0, 0.26, 0.52]
    b["CL"] = -4.0 * b["alpha"]
    sa, sb = compare.find_sweeps(pd.concat([a, b], ignore_index=True))
    d = compare.paired_difference(sa, sb, "CL")
    assert d.alpha_a.tolist() == [0.0, 0.25, 0.5] and d.alpha_b.tolist() == [0.0, 0.26, 0.52]
    assert d.delta == pytest.approx([0.0, 0.0, 0.0], abs=1e-12)
    assert not d.significant.any()
    narrow = compare.paired_difference(sa, sb, "CL", tolerance=0.015)
    assert narrow.alpha_b.tolist() == [0.0, 0.26]


# --- repeatability ----------------------------------------------------------------------------


def test_repeatability_against_statistics_and_chi_square():
    # 30 set points, 2–5 repeats each, normal scatter σ = 0.05 = the stated u.
    rng = np.random.default_rng(7)
    sigma = 0.05
    rows, groups = [], []
    for i in range(30):
        n = 2 + i % 4
        values = -0.1 * i + sigma * rng.standard_normal(n)
        groups.append(values)
        rows += [
            {"config": "A", "speed_set": 20.0, "spin_set": 40.0 * i, "CL": v, "u_CL": sigma}
            for v in values
        ]
    df = pd.DataFrame(rows)
    df["run"] = [f"r{i}" for i in range(len(df))]
    row = compare.repeatability(df, names=["CL"]).iloc[0]
    # Pooled variance from the standard library's sample variance (Python `statistics`):
    dof = sum(len(g) - 1 for g in groups)
    pooled = math.sqrt(sum((len(g) - 1) * statistics.variance(g) for g in groups) / dof)
    assert row.dof == dof and row.set_points == 30 and row.runs == len(df)
    assert row.s_pooled == pytest.approx(pooled, rel=1e-12)
    assert row.u_stated == pytest.approx(sigma, rel=1e-12)
    # Known σ: ν s_p²/σ² ~ χ²(ν) (sampling distribution of a normal variance); 99.9 % interval.
    low, high = stats.chi2.ppf([0.0005, 0.9995], dof)
    assert low < dof * row.ratio**2 < high
    assert row.p_value == pytest.approx(stats.chi2.sf(dof * pooled**2 / sigma**2, dof), rel=1e-9)
    # Scatter three times the stated u: the ratio says so and the p-value is tiny.
    df["u_CL"] = sigma / 3
    inflated = compare.repeatability(df, names=["CL"]).iloc[0]
    assert inflated.ratio == pytest.approx(3 * row.ratio, rel=1e-12)
    assert inflated.p_value < 1e-6


# --- characteristics --------------------------------------------------------------------------


def test_potential_flow_lift_slope_is_minus_two_pi():
    # Potential flow about a spinning cylinder: CL = −2πα (Kutta–Joukowski; J. D. Anderson,
    # Fundamentals of Aerodynamics, §3.16). Exact data, so the fit is exact to rounding.
    df = sweep_frame(spins=np.arange(0, 601, 50), curve=lambda a: -2.0 * math.pi * a, r=0.3)
    figures = compare.characteristics(compare.find_sweeps(df)[0], slope_range=(0.0, 0.5))
    assert figures["dCL_dalpha"] == pytest.approx(-2.0 * math.pi, rel=1e-12)
    assert figures["dCL_dalpha_ratio"] == pytest.approx(1.0, rel=1e-12)
    assert figures["dCL_dalpha_runs"] == 13


def test_lift_slope_against_numpy_weighted_polyfit():
    # Without α uncertainty the effective-variance fit is ordinary weighted least squares:
    # numpy.polyfit with w = 1/u and cov="unscaled" gives the same slope and u(slope).
    spins = np.arange(0, 1201, 100)
    df = sweep_frame(spins=spins, seed=4, u_alpha=0.0)
    df["u_CL"] = np.linspace(0.01, 0.05, spins.size)
    figures = compare.characteristics(compare.find_sweeps(df)[0], slope_range=(0.1, 0.8))
    sel = (df.alpha >= 0.1) & (df.alpha <= 0.8)
    coef, cov = np.polyfit(df.alpha[sel], df.CL[sel], 1, w=1 / df.u_CL[sel], cov="unscaled")
    assert figures["dCL_dalpha"] == pytest.approx(coef[0], rel=1e-10)
    assert figures["u_dCL_dalpha"] == pytest.approx(math.sqrt(cov[0, 0]), rel=1e-10)
    assert figures["dCL_dalpha_runs"] == int(sel.sum())


def test_peaks_and_power_crossing():
    df = sweep_frame(spins=[0, 200, 400, 600], u_alpha=0.01)
    df["CD"] = [1.2, 0.9, 1.0, 1.4]
    df["L_D"] = df.CL / df.CD
    df["u_L_D"] = 0.05
    df["C_power"] = [0.0, -0.02, -0.06, -0.12]
    df["u_C_power"] = [0.001, 0.002, 0.003, 0.004]
    df["corr_C_power_alpha"] = [0.0, 0.2, -0.4, 0.0]
    figures = compare.characteristics(compare.find_sweeps(df)[0], power_level=-0.04)
    # Peaks: the measured extremes, read off the table by hand.
    assert figures["CD_min"] == 0.9 and figures["alpha_CD_min"] == pytest.approx(1 / 6)
    assert figures["CL_peak"] == df.CL.iloc[3] and figures["u_CL_peak"] == 0.02
    assert figures["L_D_peak"] == pytest.approx(df.L_D.abs().max() * np.sign(df.L_D.iloc[3]))
    # Crossing of −0.04 between runs 1 and 2, worked by hand: t = 0.5 → α = 0.25. Its
    # uncertainty against the `uncertainties` package propagating the same linear crossing.
    assert figures["alpha_power"] == pytest.approx(0.25, rel=1e-12)
    values = []
    for i in (1, 2):
        ua, up, r = df.u_alpha[i], df.u_C_power[i], df.corr_C_power_alpha[i]
        cov = [[ua**2, r * ua * up], [r * ua * up, up**2]]
        values.append(uncertainties.correlated_values([df.alpha[i], df.C_power[i]], cov))
    (a1, p1), (a2, p2) = values
    reference = a1 + (-0.04 - p1) * (a2 - a1) / (p2 - p1)
    assert figures["u_alpha_power"] == pytest.approx(reference.std_dev, rel=1e-10)
    # A level never reached gives NaN, not an extrapolated value.
    never = compare.characteristics(compare.find_sweeps(df)[0], power_level=-0.5)
    assert math.isnan(never["alpha_power"]) and math.isnan(never["u_alpha_power"])


# --- campaign tables, figures, command --------------------------------------------------------


def _two_configs():
    a = sweep_frame("A", spins=[0, 200, 400, 600, 400, 200, 0], seed=21)
    b = sweep_frame(
        "B",
        spins=[0, 200, 400, 600],
        seed=22,
        t0="2031-05-02T08:00:00",
        curve=lambda x: -2.0 * math.pi * 0.8 * x + 0.3,
    )
    return pd.concat([a, b], ignore_index=True)


def test_comparison_table_pairs_configs_and_legs():
    table = compare.comparison_table(_two_configs(), names=["CL", "CD"])
    kinds = table.groupby("kind")[["a", "b"]].apply(lambda g: sorted(set(map(tuple, g.values))))
    # B (one single leg) is compared with both legs of reference A; A's legs give a hysteresis.
    assert kinds["config"] == [
        ("B | 20 m/s | single", "A | 20 m/s | down"),
        ("B | 20 m/s | single", "A | 20 m/s | up"),
    ]
    assert kinds["hysteresis"] == [("A | 20 m/s | up", "A | 20 m/s | down")]
    cl = table[(table.kind == "config") & (table.quantity == "CL")]
    assert (cl.U_delta == 2 * cl.u_delta).all()
    # The invented increment of +0.3 is significant at every grid point (≥ 5 u, see above).
    assert cl.significant.all()
    slope = table[(table.quantity == "dCL_dalpha") & table.alpha.isna()]
    assert len(slope) == 2 and np.isfinite(slope.delta).all()


def test_comparison_section_data():
    data = compare.comparison_section_data(_two_configs())
    assert list(data.columns[:5]) == ["config", "reference", "speed", "leg", "alpha"]
    assert set(data.config) == {"B"} and set(data.reference) == {"A"}
    assert data.dCL.to_numpy() == pytest.approx(0.3, abs=4 * data.u_dCL.max())
    assert data.sig_dCL.all() and data.sig_dCL.dtype == bool
    assert compare.comparison_section_data(sweep_frame()).empty


def test_plot_contents():
    sweeps = compare.find_sweeps(_two_configs())
    ax = compare.plot_sweeps(sweeps, "CL")
    assert [line.get_label() for line in ax.get_lines() if not line.get_label().startswith("_")]
    assert len(ax.collections) == 3  # one band per sweep
    d = compare.difference(sweeps[2], sweeps[0], "CL")
    ax = compare.plot_difference(d)
    labels = {line.get_label(): line for line in ax.get_lines()}
    significant = labels["significant (k = 2)"]
    assert len(significant.get_xdata()) == int(d.significant.sum())


def test_run_compare_two_folders(tmp_path):
    data = _two_configs()
    for name, config in (("entry1", "A"), ("entry2", "B")):
        folder = tmp_path / name
        folder.mkdir()
        data[data.config == config].assign(config="bare").to_csv(
            folder / "results.csv", index=False
        )
    written = compare.run_compare(
        [tmp_path / "entry1", tmp_path / "entry2"], dest=tmp_path / "cmp", names=["CL"]
    )
    assert {"comparison.csv", "characteristics.csv"} <= set(written)
    assert all(p.is_file() for p in written.values())
    assert any(k.startswith("figures/delta_CL_") for k in written)
    assert any(k.startswith("figures/hysteresis_CL_") for k in written)
    table = pd.read_csv(written["comparison.csv"])
    # The same label in two entries becomes two configurations, prefixed by folder.
    assert set(table.config_a) | set(table.config_b) == {"entry1:bare", "entry2:bare"}
    assert not list(tmp_path.joinpath("cmp").glob(".*.tmp"))  # nothing half-written left behind
    with pytest.raises(InputError, match="results.nc or results.csv"):
        compare.run_compare(tmp_path / "missing", dest=tmp_path / "cmp2")


def test_dataset_input_and_pairing_by_speed_and_re():
    # The same results as an xarray Dataset (dim run, as store.read_results gives them) give
    # the same sweeps as the DataFrame.
    frame = pd.concat(
        [
            sweep_frame("A", speed=20.0),
            sweep_frame("A", speed=10.0, prefix="A10", t0="2031-05-02T08:00:00"),
            sweep_frame("B", speed=20.0, t0="2031-05-03T08:00:00"),
        ],
        ignore_index=True,
    )
    ds = xr.Dataset.from_dataframe(frame.set_index("run"))
    assert [s.runs for s in compare.find_sweeps(ds)] == [s.runs for s in compare.find_sweeps(frame)]
    by_speed = compare.comparison_table(ds, by="speed", names=["CL"])
    assert set(zip(by_speed.a, by_speed.b, strict=True)) == {
        ("A | 10 m/s | single", "A | 20 m/s | single")
    }
    by_re = compare.comparison_table(ds, by="re", names=["CL"])
    assert set(by_re.config_a) == {"B"} and set(by_re.config_b) == {"A"}
    assert (by_re.Re_a == by_re.Re_b).all()


def test_paired_difference_uncertainty_against_monte_carlo():
    # The stated u(Δ) of paired points against the scatter of Δ over 2000 noise draws of both
    # sweeps (JCGM 101:2008, propagation by sampling). B is measured 0.01–0.03 off A's α, on the
    # same straight line (no curvature term), so the band is first order in the errors alone:
    # (N−1) s²/u² ~ χ²(N−1), the 99.9 % interval of scipy.stats.chi2 bounds the ratio.
    draws, r, u_cl, u_alpha = 2000, -0.5, 0.02, 0.002
    a = sweep_frame("A", r=r, u_alpha=u_alpha)
    b = sweep_frame("B", r=r, u_alpha=u_alpha, t0="2031-05-02T08:00:00")
    b["alpha"] = b["alpha"] + np.array([0.0, 0.01, -0.02, 0.03, 0.01, -0.01, 0.02])
    b["CL"] = -2.0 * math.pi * 0.8 * b["alpha"]
    sa, sb = compare.find_sweeps(pd.concat([a, b], ignore_index=True))
    d = compare.paired_difference(sa, sb, "CL")
    assert d.covered.all() and d.delta.size == 7
    rng = np.random.default_rng(5)
    deltas = np.empty((draws, d.delta.size))
    for k in range(draws):
        noisy = [_noisy(sweep, rng, u_cl, u_alpha, r) for sweep in (sa, sb)]
        deltas[k] = compare.paired_difference(*noisy, "CL").delta
    low, high = stats.chi2.ppf([0.0005, 0.9995], draws - 1) / (draws - 1)
    ratio2 = deltas.var(axis=0, ddof=1) / d.u**2
    assert np.all((ratio2 > low) & (ratio2 < high)), ratio2


def test_flagged_runs_are_left_out_but_not_for_repeat_disagreement():
    # A run flagged for a measurement fault is not compared; `repeat_disagreement` is itself a
    # comparison of the runs at one set point (a real hysteresis raises it), so it keeps the run.
    up = sweep_frame(spins=[0, 200, 400, 600, 400, 200, 0], u_alpha=0.0)
    up["flags"] = ["", "zero_shift", "", "", "repeat_disagreement", "", ""]
    legs = compare.find_sweeps(up)
    assert legs[0].arrays["flagged"].tolist() == [False, True, False, False]
    d = compare.hysteresis(*legs, "CL")
    assert d.alpha.tolist() == pytest.approx([0.0, 1 / 3])  # the pair at 200 rpm is gone
    with_all = compare.hysteresis(*legs, "CL", include_flagged=True)
    assert with_all.alpha.size == 3


def test_compare_command_options(tmp_path, capsys):
    from tunnelred.cli import main

    folder = tmp_path / "out"
    folder.mkdir()
    _two_configs().to_csv(folder / "results.csv", index=False)
    dest = tmp_path / "cmp"
    assert (
        main(["compare", str(folder), "--method", "grid", "--max-gap", "0.2", "-o", str(dest)]) == 0
    )
    table = pd.read_csv(dest / "comparison.csv")
    curves = table[table.alpha.notna()]
    assert set(curves.method) == {"grid"}
    assert main(["compare", str(folder), "--pair-tolerance", "-1", "-o", str(dest)]) == 2
    assert "--pair-tolerance" in capsys.readouterr().err
    # The defaults the help states are the library's.
    assert main(["compare", "--help"]) == 0
    text = " ".join(capsys.readouterr().out.split())
    assert f"(default {compare.PAIR_TOLERANCE:g})" in text
    assert f"default {compare.GAP_FACTOR:g} times the median step" in text
