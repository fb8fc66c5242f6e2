"""tunnelred.physics.conditions against published relations, hand-worked numbers and scipy."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
import xarray as xr
from scipy.optimize import brentq
from scipy.signal import lfilter
from test_air import KINDS, first_of_kind

from tunnelred.common.errors import ReductionError
from tunnelred.inputs.config import (
    CampaignConfig,
    CampaignInfo,
    InstrumentsConfig,
    ModelConfig,
    ReductionConfig,
    TunnelConfig,
)
from tunnelred.physics import air, conditions, series

P0 = 101325.0
GAMMA = 1.4
Q_M01 = 0.5 * GAMMA * P0 * 0.1**2  # q at M = 0.1 [Pa]


# --- compressible pitot-static relations -------------------------------------------------------


@pytest.mark.parametrize("mach", [0.1, 0.2, 0.3])
def test_impact_pressure_series_naca_1135(mach):
    # NACA Report 1135 (1953): for gamma = 1.4, qc/q = 1 + M^2/4 + M^4/40 + M^6/1600 + ...;
    # the next term is of order M^8/10^4, under 1e-8 at M = 0.3 -> rtol 1e-8.
    q = 0.5 * GAMMA * P0 * mach**2
    series = 1.0 + mach**2 / 4 + mach**4 / 40 + mach**6 / 1600
    assert conditions.impact_pressure(q, P0) / q == pytest.approx(series, rel=1e-8)


@pytest.mark.parametrize(("mach", "p_over_p0"), [(0.1, 0.9930), (0.2, 0.9725), (0.3, 0.9395)])
def test_impact_pressure_naca_1135_table(mach, p_over_p0):
    # NACA Report 1135, table I (subsonic), p/p0 to 4 digits (from memory) -> rtol 6e-5.
    q = 0.5 * GAMMA * P0 * mach**2
    p0 = P0 + conditions.impact_pressure(q, P0)
    assert P0 / p0 == pytest.approx(p_over_p0, rel=6e-5)


@pytest.mark.parametrize("mach", [0.1, 0.2, 0.3])
def test_dynamic_pressure_against_scipy_root(mach):
    # Invert the isentropic total-pressure ratio p0/p = (1 + (g-1)/2 M^2)^(g/(g-1))
    # (NACA Report 1135, eq. 44) numerically with scipy's brentq; xtol 1e-14 on M -> rtol 1e-10.
    qc = P0 * ((1 + 0.2 * mach**2) ** 3.5 - 1)
    m = brentq(lambda M: P0 * ((1 + 0.2 * M**2) ** 3.5 - 1) - qc, 1e-6, 0.99, xtol=1e-14)
    expected_q = 0.5 * GAMMA * P0 * m**2
    assert conditions.dynamic_pressure(qc, P0) == pytest.approx(expected_q, rel=1e-10)


def test_dynamic_pressure_inverts_impact_pressure_over_a_batch():
    # q -> qc -> q over a batch broadcast against two static pressures (docs/conventions.md:
    # run-level models are evaluated over Monte Carlo draws); float64 round trip -> rtol 1e-12.
    q = np.linspace(10.0, 6000.0, 50)[:, None]
    p = np.array([P0, 0.8 * P0])
    back = conditions.dynamic_pressure(conditions.impact_pressure(q, p), p)
    assert back.shape == (50, 2)
    np.testing.assert_allclose(back, np.broadcast_to(q, (50, 2)), rtol=1e-12)


# --- free stream -----------------------------------------------------------------------------


def test_velocity_hand_worked():
    # U = sqrt(2 q / rho): q = 551.25 Pa, rho = 1.225 kg/m3 -> U = sqrt(900) = 30 m/s exactly.
    assert conditions.velocity(551.25, 1.225) == pytest.approx(30.0, rel=1e-14)
    # Wind-off noise: the sign is kept rather than NaN (documented convention).
    assert conditions.velocity(-551.25, 1.225) == pytest.approx(-30.0, rel=1e-14)


def test_reynolds_number_hand_worked():
    # Re = rho U d / mu = 1.2 * 20 * 0.1 / 1.8e-5 = 2.4 / 1.8e-5 = 133 333.33 (by hand).
    assert conditions.reynolds_number(1.2, 20.0, 0.1, 1.8e-5) == pytest.approx(
        133333.3333, rel=1e-9
    )


def test_mach_number_icao():
    # ICAO Doc 7488/3: a0 = 340.294 m/s; 34.0294 m/s is M = 0.1 (by hand).
    assert conditions.mach_number(34.0294, 340.294) == pytest.approx(0.1, rel=1e-12)


def _config(q_source="pitot", factor=1.0, diameter=0.1) -> CampaignConfig:
    return CampaignConfig(
        campaign=CampaignInfo("test", "test tunnel"),
        tunnel=TunnelConfig(1.2, 0.8, q_source=q_source, contraction_factor=factor),
        model=ModelConfig(diameter=diameter, span=0.8),
        configurations={},
        instruments=InstrumentsConfig(),
        taps=(),
        reduction=ReductionConfig(),
    )


def _tunnel(n=200, column="dp_pitot", value=600.0, T=288.15, p=P0, RH=0.0) -> xr.Dataset:
    t = np.arange(n) * 0.01
    full = np.ones(n)
    return xr.Dataset(
        {
            column: ("time", value * full),
            "T": ("time", T * full),
            "p_baro": ("time", p * full),
            "RH": ("time", RH * full),
        },
        coords={"time": t},
        attrs={"run": "R001"},
    )


def test_free_stream_hand_worked_sea_level():
    # ICAO sea level (288.15 K, 101325 Pa, dry), pitot-static reading 600 Pa. By hand:
    # M^2 ~ 2 qc/(g p) = 0.008458 so qc/q = 1 + M^2/4 + ... = 1.002117 (NACA 1135 series),
    # q = 598.735 Pa; CIPM-2007 dry rho = 1.22552 kg/m3 (ICAO 1.2250 / Z with Z = 0.99959);
    # U = sqrt(2 q / rho) = 31.2587 m/s; Re = rho U d / mu with mu0 = 1.7894e-5 Pa s, d = 0.1 m:
    # 214 087; Mach = U / 340.294 = 0.091858. The hand values carry 5-6 digits -> rtol 5e-5.
    fs = conditions.free_stream(_tunnel(), _config())
    assert fs["q"].values == pytest.approx(598.735, rel=5e-5)
    assert fs["rho"].values == pytest.approx(1.22552, rel=5e-5)
    assert fs["U"].values == pytest.approx(31.2587, rel=5e-5)
    assert fs["Re"].values == pytest.approx(214087.0, rel=5e-5)
    assert fs["Mach"].values == pytest.approx(0.091858, rel=5e-5)
    assert fs["mu"].values == pytest.approx(1.7894e-5, rel=5e-5)
    assert fs["a"].values == pytest.approx(340.294, rel=5e-6)
    for name in ("qc", "q", "rho", "mu", "a", "U", "Re", "Mach"):
        assert fs[name].dims == ("time",)
        assert fs[name].attrs["units"] and fs[name].attrs["long_name"]
    np.testing.assert_array_equal(fs["time"], _tunnel()["time"])


def test_free_stream_contraction_factor():
    # q_source = "contraction": qc = factor x dp_contraction (docs/input-format.md).
    pitot = conditions.free_stream(_tunnel(value=600.0), _config())
    contraction = conditions.free_stream(
        _tunnel(column="dp_contraction", value=500.0), _config("contraction", 1.2)
    )
    np.testing.assert_allclose(contraction["qc"], 600.0, rtol=1e-14)
    np.testing.assert_allclose(contraction["U"], pitot["U"], rtol=1e-14)


def test_free_stream_humid_air_is_faster_for_the_same_reading():
    # Humid air is lighter (Picard et al. 2008), so the same q means a higher U.
    dry = conditions.free_stream(_tunnel(RH=0.0), _config())
    humid = conditions.free_stream(_tunnel(RH=0.9, T=303.15), _config())
    assert float(humid["U"][0]) > float(dry["U"][0])
    assert float(humid["rho"][0]) == pytest.approx(air.density(303.15, P0, 0.9), rel=1e-14)


def test_free_stream_missing_column_is_a_reduction_error():
    ds = _tunnel().drop_vars("RH")
    with pytest.raises(ReductionError, match="RH"):
        conditions.free_stream(ds, _config())
    with pytest.raises(ReductionError, match="dp_contraction"):
        conditions.free_stream(_tunnel(), _config("contraction", 1.1))


# --- spin ------------------------------------------------------------------------------------


@pytest.mark.parametrize("omega", [50.0, -50.0, 3.0])
@pytest.mark.parametrize("wrap", ["0-360", "-180-180", "cumulative"])
def test_encoder_slope_with_wraps(omega, wrap):
    # A known rotation at 1 kHz over 2 s, starting 17 deg before a wrap point; the unwrapped
    # least-squares slope must give omega back to float64 precision -> rtol 1e-9.
    t = np.arange(0.0, 2.0, 1e-3)
    angle = 343.0 + np.degrees(omega) * t
    if wrap == "0-360":
        angle = angle % 360.0
    elif wrap == "-180-180":
        angle = (angle + 180.0) % 360.0 - 180.0
    assert conditions.spin_rate_from_encoder(t, angle) == pytest.approx(omega, rel=1e-9)


def test_spin_ratio_sign_both_directions():
    # docs/conventions.md: alpha = omega R / U, signed with omega (positive counter-clockwise
    # seen from +z). omega = +-100 rad/s, R = 0.05 m, U = 10 m/s -> alpha = +-0.5 (by hand).
    assert conditions.spin_ratio(100.0, 0.05, 10.0) == pytest.approx(0.5, rel=1e-14)
    assert conditions.spin_ratio(-100.0, 0.05, 10.0) == pytest.approx(-0.5, rel=1e-14)


def test_circulation_hand_worked():
    # Gamma = 2 pi omega R^2 (docs/conventions.md): 2 pi * 10 * 0.01 = 0.6283185 m^2/s.
    assert conditions.circulation(10.0, 0.1) == pytest.approx(0.2 * np.pi, rel=1e-14)
    assert conditions.circulation(-10.0, 0.1) == pytest.approx(-0.2 * np.pi, rel=1e-14)


def _stream(t, **columns) -> xr.Dataset:
    return xr.Dataset({k: ("time", v) for k, v in columns.items()}, coords={"time": t})


def test_spin_rate_prefers_tachometer_in_stream_order():
    # docs/input-format.md: the spin rate comes from `speed` where any stream has it; the order
    # searched is balance, pressure, tunnel.
    t = np.linspace(0.0, 1.0, 11)
    streams = {
        "tunnel": _stream(t, speed=np.full(11, 7.0)),
        "pressure": _stream(t, angle=np.degrees(5.0 * t)),
        "balance": _stream(t, speed=np.full(11, 6.0)),
    }
    time, omega, source = conditions.spin_rate(streams)
    assert source == "tachometer"
    np.testing.assert_array_equal(omega, 6.0)
    np.testing.assert_array_equal(time, t)


@pytest.mark.parametrize("omega0", [80.0, -80.0])
def test_spin_rate_from_encoder_follows_a_ramp(omega0):
    # omega(t) = omega0 + c t, angle = omega0 t + c t^2 / 2, wrapped. A centred least-squares
    # line over a symmetric window has the exact derivative of a quadratic at its centre
    # (Savitzky & Golay 1964), so omega(t) comes back to float64 precision -> atol 1e-7 rad/s.
    t = np.arange(0.0, 3.0, 2e-3)
    c = 4.0
    angle = np.degrees(omega0 * t + 0.5 * c * t**2) % 360.0
    time, omega, source = conditions.spin_rate({"pressure": _stream(t, angle=angle)})
    assert source == "encoder"
    assert time.size == t.size - 4
    np.testing.assert_allclose(omega, omega0 + c * time, atol=1e-7)


def test_spin_rate_from_encoder_uneven_sampling():
    # Jittered sample times, steady rotation: a least-squares line through exact points is exact.
    rng = np.random.default_rng(3)
    t = np.cumsum(rng.uniform(0.5e-3, 1.5e-3, 3000))
    angle = np.degrees(-60.0 * t) % 360.0
    _, omega, _ = conditions.spin_rate({"balance": _stream(t, angle=angle)})
    np.testing.assert_allclose(omega, -60.0, rtol=1e-8)


def test_spin_rate_without_spin_columns_is_a_stationary_model():
    t = np.linspace(0.0, 1.0, 5)
    time, omega, source = conditions.spin_rate({"tunnel": _stream(t, T=np.full(5, 290.0))})
    assert source == "none"
    np.testing.assert_array_equal(omega, 0.0)
    np.testing.assert_array_equal(time, t)


def test_spin_steadiness_known_scatter_and_drift():
    # Spin at 1 kHz with a relative drift d = 0.03 over the run and white relative noise
    # s = 0.01; flow at 100 Hz, steady; the records overlap on 0.5-9.5 s. For a linear ramp
    # the relative std is sqrt(s^2 + d^2/12) (variance of a uniform ramp, common practice).
    # 9001 samples on the common base: the std estimate has relative sd 1/sqrt(2N) = 0.75 %
    # -> rtol 0.04; the fitted drift has sd s sqrt(12/N) = 3.7e-4 -> atol 2e-3.
    rng = np.random.default_rng(7)
    radius, U0 = 0.05, 10.0
    ts = np.arange(0.0, 9.5 + 1e-9, 1e-3)
    tf = np.arange(0.5, 10.0 + 1e-9, 1e-2)
    d, s = 0.03, 0.01
    alpha0 = -0.8
    omega = alpha0 * U0 / radius * (1 + d * (ts - 5.0) / 9.0 + s * rng.standard_normal(ts.size))
    result = conditions.spin_steadiness(ts, omega, tf, np.full(tf.size, U0), radius)
    assert result.time[0] >= 0.5 and result.time[-1] <= 9.5
    assert result.time.size == 9001  # the faster (spin) stream's samples inside the overlap
    assert result.alpha_mean == pytest.approx(alpha0, rel=1e-3)
    assert result.scatter == pytest.approx(np.sqrt(s**2 + d**2 / 12), rel=0.04)
    assert result.drift == pytest.approx(d, abs=2e-3)


def test_spin_steadiness_interpolates_the_slower_stream():
    # U ramps linearly, spin steady: linear interpolation of a linear U is exact.
    ts = np.linspace(0.0, 10.0, 101)  # 10 Hz spin
    tf = np.linspace(0.0, 10.0, 1001)  # 100 Hz flow
    U = 10.0 + 0.1 * tf
    result = conditions.spin_steadiness(ts, np.full(ts.size, 200.0), tf, U, 0.05)
    np.testing.assert_array_equal(result.time, tf)
    np.testing.assert_allclose(result.alpha, 10.0 / U, rtol=1e-12)


def test_spin_steadiness_needs_an_overlap():
    with pytest.raises(ValueError, match="overlap"):
        conditions.spin_steadiness([0.0, 1.0], [1.0, 1.0], [2.0, 3.0], [10.0, 10.0], 0.05)


# --- time-series statistics ------------------------------------------------------------------


def _ar1(phi: float, n: int, seed: int) -> np.ndarray:
    # x_k = phi x_{k-1} + e_k via a recursive filter (no Python loop); 2000 samples of burn-in
    # bring the start to the stationary distribution (phi^2000 ~ 1e-92).
    e = np.random.default_rng(seed).standard_normal(n + 2000)
    return lfilter([1.0], [1.0, -phi], e)[2000:]


def test_effective_sample_size_ar1():
    # AR(1): rho_k = phi^k, so N_eff -> N (1 - phi)/(1 + phi) (Bayley & Hammersley 1946;
    # Zieba 2010). phi = 0.9, N = 2e5: 10 526. The truncated-sum estimator has a relative sd of
    # about 3.5 % here (measured over 40 seeds; Sokal's estimate sqrt(2(2M+1)/N) with M ~ 60
    # agrees) -> rtol 0.15, over 4 sd.
    n, phi = 200_000, 0.9
    expected = n * (1 - phi) / (1 + phi)
    assert conditions.effective_sample_size(_ar1(phi, n, seed=11)) == pytest.approx(
        expected, rel=0.15
    )


def test_effective_sample_size_white_noise_and_limits():
    # Independent samples: N_eff ~ N. The windowed sum (Sokal's window, here M ~ 20 lags) has a
    # relative sd of about sqrt(4 M / (3 N)) = 0.023 at N = 5e4 (Priestley 1981, Bartlett
    # window variance, from memory) -> +-10 %, over 4 sd.
    n = 50_000
    x = np.random.default_rng(5).standard_normal(n)
    assert 0.9 * n < conditions.effective_sample_size(x) < 1.1 * n
    assert conditions.effective_sample_size(np.full(100, 3.0)) == 100.0
    # A ramp is correlated at every lag (rho_k > 0 up to about N/4): no window fits, the sum
    # stops at the first zero: few effective samples, and never fewer than 1.
    assert 1.0 <= conditions.effective_sample_size(np.linspace(0.0, 1.0, 1000)) < 10.0


def _claimed_variance_of_mean(records: list[np.ndarray]) -> float:
    return float(np.mean([x.var(ddof=1) / conditions.effective_sample_size(x) for x in records]))


def test_variance_of_the_mean_of_a_short_ar1_record():
    # Exact variance of the mean of N samples of a stationary AR(1) (Bayley & Hammersley 1946):
    # var = sigma_x^2 / N [1 + 2 sum_{k=1}^{N-1} (1 - k/N) phi^k], sigma_x^2 = 1 / (1 - phi^2).
    # A tunnel-length record (N = 4000, phi = 0.9, tau = 19): the claim averaged over 60 records
    # within 20 % (one record's N_eff scatters by about 25 %; measured bias -2 %).
    n, phi = 4000, 0.9
    k = np.arange(1, n)
    exact = (1 + 2 * np.sum((1 - k / n) * phi**k)) / (1 - phi**2) / n
    records = [_ar1(phi, n, seed=100 + s) for s in range(60)]
    assert _claimed_variance_of_mean(records) == pytest.approx(exact, rel=0.2)


def test_variance_of_the_mean_of_a_tone_in_white_noise():
    # x_j = A sin(w j + phase) + e_j, phase uniform, e white (sd sigma): the mean's variance is
    # sigma^2 / N + (A^2 / 2) D^2, D = sin(N w / 2) / (N sin(w / 2)) (the Dirichlet kernel: a
    # whole number of periods averages out exactly). The tone carries 3/4 of s^2 here, so any
    # N_eff <= N (the first-zero sum, before Sokal's window) claims at least 4x the variance
    # (2x the u); the window takes in the negative lobes. It stops short of a whole period
    # (M ~ 18 lags at 20 samples a period), so the tone still leaves a residual: measured 2.5x
    # the exact variance (1.6x in u) -> within [0.8, 3]x, which the first-zero sum cannot meet.
    n, period, sigma = 4000, 20.0, 1.0
    w, amplitude = 2 * np.pi / period, np.sqrt(6.0) * sigma
    d = np.sin(n * w / 2) / (n * np.sin(w / 2))
    exact = sigma**2 / n + amplitude**2 / 2 * d**2
    j = np.arange(n)
    records = []
    for seed in range(40):
        rng = np.random.default_rng(300 + seed)
        phase = rng.uniform(0.0, 2 * np.pi)
        records.append(amplitude * np.sin(w * j + phase) + sigma * rng.standard_normal(n))
    ratio = _claimed_variance_of_mean(records) / exact
    assert 0.8 < ratio < 3.0, ratio
    # The cap: N_eff never above 4 N, even for a pure tone.
    tone = np.sin(w * j + 0.3)
    assert n < conditions.effective_sample_size(tone) <= 4 * n


def test_series_statistics_uncertainty_uses_n_eff():
    # Type-A standard uncertainty of the mean of an AR(1) record: sigma_x / sqrt(N_eff)
    # (GUM JCGM 100:2008 4.2 with Zieba 2010); sigma / sqrt(N) would be 4.4x too small for
    # phi = 0.9. Marginal sd of the AR(1) is 1/sqrt(1 - phi^2) = 2.294. rtol 0.1 (N_eff as above,
    # halved in the square root).
    n, phi = 200_000, 0.9
    stats = conditions.series_statistics(_ar1(phi, n, seed=12) + 5.0)
    assert stats.n == n
    assert stats.mean == pytest.approx(5.0, abs=5 * stats.u_mean)
    assert stats.std == pytest.approx(1 / np.sqrt(1 - phi**2), rel=0.02)
    expected_u = 1 / np.sqrt(1 - phi**2) / np.sqrt(n * (1 - phi) / (1 + phi))
    assert stats.u_mean == pytest.approx(expected_u, rel=0.1)
    assert stats.u_mean > 4 * stats.std / np.sqrt(n)


def test_correlation_of_means_of_streams_sharing_a_fluctuation():
    # Two streams at 200 Hz and 50 Hz, each a common AR(1) fluctuation s plus its own white
    # noise. For a long record the mean of s has variance sigma_s^2 (1 + phi)/((1 - phi) N)
    # (Bayley & Hammersley 1946), the same in both streams (the 50 Hz one samples the same s),
    # and the noises add sigma_i^2 / N_i: r = c var(s_mean) / sqrt(var(a_mean) var(b_mean)).
    n, phi, c = 400_000, 0.98, -3.0
    s = _ar1(phi, n, seed=21)
    rng = np.random.default_rng(22)
    t = np.arange(n) / 200.0
    a = s + 3.0 * rng.standard_normal(n)
    b = c * s[2::4] + 40.0 * rng.standard_normal(n // 4)
    var_s = 1 / (1 - phi**2) * (1 + phi) / ((1 - phi) * n)
    expected = c * var_s / np.sqrt((var_s + 9.0 / n) * (c**2 * var_s + 1600.0 / (n // 4)))
    assert -0.9 < expected < -0.6
    r = conditions.correlation_of_means([(a, t), (b, t[2::4])])
    # N_eff of s is about 4000 here: the estimate's sd is about 1/sqrt(4000) ~ 0.016.
    assert r[0, 1] == pytest.approx(expected, abs=0.08)
    assert np.allclose(np.diag(r), 1.0)
    # An independent record: r within 4 sd of zero.
    other = _ar1(phi, n, seed=23)
    r = conditions.correlation_of_means([(a, t), (other, t)])
    assert abs(r[0, 1]) < 4 / np.sqrt(n * (1 - phi) / (1 + phi))


def test_correlation_of_means_is_a_correlation_matrix():
    # Three records that are nearly one: pairwise estimates, each clipped to [-1, 1], can make a
    # matrix with a negative eigenvalue; the result is positive semi-definite, unit diagonal.
    rng = np.random.default_rng(3)
    t = np.arange(2000) / 50.0
    base = _ar1(0.9, 2000, seed=4)
    x = base + 0.1 * rng.standard_normal(2000)
    y = base + 0.1 * rng.standard_normal(2000)
    r = conditions.correlation_of_means([(x, t), (y, t), (-base, t)])
    assert np.linalg.eigvalsh(r)[0] >= -1e-12
    assert np.allclose(np.diag(r), 1.0)
    assert r[0, 1] > 0.9 and r[0, 2] < -0.9


def test_series_statistics_drift_with_and_without_time():
    # A line of slope 0.2 per second over 50 s drifts by 10 (by hand); with no time the samples
    # are evenly spaced, so the same samples drift by the same amount.
    t = np.linspace(0.0, 50.0, 501)
    x = 3.0 + 0.2 * t
    assert conditions.series_statistics(x, t).drift == pytest.approx(10.0, rel=1e-12)
    assert conditions.series_statistics(x).drift == pytest.approx(10.0, rel=1e-12)
    assert dataclasses.asdict(conditions.series_statistics([4.0]))["n"] == 1


def test_series_statistics_rejects_2d():
    with pytest.raises(ValueError):
        conditions.series_statistics(np.ones((3, 3)))


# --- input kinds -----------------------------------------------------------------------------


@pytest.mark.parametrize("kind", KINDS)
@pytest.mark.parametrize(
    ("func", "arguments", "reference"),
    [
        # by hand, as in the tests above
        (conditions.velocity, ([551.25, 600.0], [1.225, 1.2]), 30.0),
        (
            conditions.reynolds_number,
            ([1.2, 1.1], [20.0, 20.0], [0.1, 0.1], [1.8e-5] * 2),
            133333.3,
        ),
        (conditions.mach_number, ([34.0294, 20.0], [340.294] * 2), 0.1),
        (conditions.spin_ratio, ([-100.0, 50.0], [0.05] * 2, [10.0] * 2), -0.5),
        (conditions.circulation, ([10.0, 5.0], [0.1] * 2), 0.2 * np.pi),
        # NACA 1135 series at M = 0.1 (as above): qc = q (1 + 0.0025 + 0.0000025)
        (
            conditions.impact_pressure,
            ([0.7 * P0 * 0.01] * 2, [P0] * 2),
            0.7 * P0 * 0.01 * 1.0025025,
        ),
        (
            conditions.dynamic_pressure,
            ([0.7 * P0 * 0.01 * 1.0025025] * 2, [P0] * 2),
            0.7 * P0 * 0.01,
        ),
    ],
)
def test_input_kinds(func, arguments, reference, kind):
    # STYLE.md: every vectorised function takes scalar, ndarray, Series and DataArray alike;
    # references carry 7 digits -> rtol 1e-6.
    assert first_of_kind(func, arguments, kind) == pytest.approx(reference, rel=1e-6)


def test_fft_length_is_scipys_next_fast_len():
    # scipy.fft.next_fast_len(n, real=True) is the reference: the smallest 5-smooth number >= n.
    # The same length keeps N_eff bitwise what it was when scipy chose it.
    from scipy.fft import next_fast_len

    from tunnelred.physics.conditions import _fft_length

    for n in [*range(1, 3000), 39999, 40000, 40001, 123457, 2_000_003]:
        assert _fft_length(n) == next_fast_len(n, real=True), n


def test_expected_record_statistics_is_the_expectation_of_the_lag_sums():
    # The expected lag sums follow from E[(x_i - m)(x_j - m)] = gamma_ij - c_i - c_j + V, the
    # definition of the sample covariance with the mean removed (any statistics text, e.g.
    # Priestley 1981 §5.3, from memory): here the same sums from the full N x N covariance
    # matrix P G P, P the centring matrix; exact up to rounding.
    n, phi = 300, 0.9
    gamma = phi ** np.arange(n) / (1 - phi**2)
    G = gamma[np.abs(np.subtract.outer(np.arange(n), np.arange(n)))]
    P = np.eye(n) - 1.0 / n
    expected = P @ G @ P
    lag_sums = np.array([np.trace(expected, offset=k) for k in range(n)])
    s, n_eff = series.expected_record_statistics(gamma)
    assert s**2 == pytest.approx(lag_sums[0] / (n - 1), rel=1e-12)
    assert n_eff == pytest.approx(series._n_eff_of_lag_sums(lag_sums), rel=1e-9)


@pytest.mark.parametrize("kind", ["ar1", "narrow band"])
def test_expected_record_statistics_matches_the_estimator_over_records(kind):
    # What a plan predicts is what series_statistics reports on average: the mean of its
    # u_mean over 200 simulated records of the stated process (a Monte Carlo of the estimator
    # itself, JCGM 101 style). AR(1) at a tunnel record's length (4 s at 50 Hz, tau 0.3 s:
    # no Sokal window fits, the first-zero sum) and a shedding-like narrow band (a sine whose
    # phase diffuses: Lorentzian line of relative width 0.1 at 14.4 Hz, sampled at 200 Hz, in
    # white noise). Measured: the plug-in within 3 % of the Monte Carlo mean; tolerance 10 %
    # (one record's u scatters by 15-25 %, the mean of 200 by under 2 %).
    rng = np.random.default_rng(7)
    if kind == "ar1":
        rate, n, tau = 50.0, 200, 0.3
        phi = np.exp(-1.0 / (rate * tau))
        gamma = phi ** np.arange(n)
        records = [
            lfilter([np.sqrt(1 - phi**2)], [1.0, -phi], rng.standard_normal(n + 3000))[3000:]
            for _ in range(200)
        ]
    else:
        rate, n, f, width, white = 200.0, 800, 14.4, 0.1, 0.1
        t = np.arange(n) / rate
        gamma = np.cos(2 * np.pi * f * t) * np.exp(-np.pi * width * f * t) + white**2 * (t == 0)
        step = np.sqrt(2 * np.pi * width * f / rate)  # phase diffusion: D = 2 pi (width f)
        records = []
        for _ in range(200):
            phase = rng.uniform(0, 2 * np.pi) + 2 * np.pi * f * t
            phase = phase + np.cumsum(rng.standard_normal(n)) * step
            records.append(np.sqrt(2) * np.sin(phase) + white * rng.standard_normal(n))
    s, n_eff = series.expected_record_statistics(gamma)
    simulated = np.mean([conditions.series_statistics(x).u_mean for x in records])
    assert s / np.sqrt(n_eff) == pytest.approx(simulated, rel=0.1)


def test_variance_of_the_mean_of_a_stationary_record():
    # Exact variance of the mean of N samples of a stationary AR(1) (Bayley & Hammersley 1946):
    # sigma_x^2 / N [1 + 2 sum_{k=1}^{N-1} (1 - k/N) phi^k], sigma_x^2 = 1 / (1 - phi^2); white
    # noise sigma^2 / N (GUM 4.2.3).
    n, phi = 4000, 0.9
    k = np.arange(1, n)
    exact = (1 + 2 * np.sum((1 - k / n) * phi**k)) / (1 - phi**2) / n
    gamma = phi ** np.arange(n) / (1 - phi**2)
    assert series.variance_of_the_mean(gamma) == pytest.approx(exact, rel=1e-12)
    assert series.variance_of_the_mean(np.r_[2.0, np.zeros(49)]) == pytest.approx(2.0 / 50)
    with pytest.raises(ValueError, match="N >= 2"):
        series.variance_of_the_mean([1.0])


def test_white_noise_variance_separates_the_noise_from_an_ar1_flow():
    # An AR(1) record x_t = phi x_(t-1) + e has autocovariance s^2 phi^k (Box & Jenkins, Time
    # Series Analysis, §3.2, from memory), so the linear extrapolation of lags 1, 2 to 0 leaves
    # (1 - phi)^2 s^2 of it in the estimate; white noise of variance w^2 adds at lag 0 only.
    from tunnelred.physics.series import white_noise_variance

    rng = np.random.default_rng(7)
    n, phi, w = 200_000, 0.936, 0.05
    flow = lfilter([np.sqrt(1 - phi**2)], [1.0, -phi], rng.standard_normal(n)) * 0.3
    expected = w**2 + (1 - phi) ** 2 * 0.3**2
    # Sampling error of the lag sums: about 3 % of w^2 at this length (measured over seeds).
    assert white_noise_variance(flow + w * rng.standard_normal(n)) == pytest.approx(
        expected, rel=0.1
    )
    assert white_noise_variance(w * rng.standard_normal(n)) == pytest.approx(w**2, rel=0.02)
    # The flow alone: only its (1 - phi)^2 s^2 = 3.7e-4 residue, far below the noise's 2.5e-3.
    assert white_noise_variance(flow) < 0.2 * w**2
    assert np.isnan(white_noise_variance([1.0, 2.0, 3.0]))


def test_expected_white_noise_variance_matches_the_estimator_over_records():
    # A 50 Hz pitot record: AR(1) flow (phi = 0.935, the demo's 0.3 s at 50 Hz) plus white noise
    # of a third of its sd. The nugget estimator's mean over 200 records (a Monte Carlo of the
    # estimator itself) against its value on the expected lag sums; it over-counts the AR(1)
    # part by about (1 - phi)^2 of its variance (series.white_noise_variance Notes), the same in
    # both. Tolerance 5 % (the Monte Carlo mean's relative sd is about 1 %).
    rng = np.random.default_rng(11)
    n, phi, white = 200, 0.935, 1.0 / 3.0
    gamma = phi ** np.arange(n) + white**2 * (np.arange(n) == 0)
    simulated = []
    for _ in range(200):
        flow = lfilter([np.sqrt(1 - phi**2)], [1.0, -phi], rng.standard_normal(n + 3000))[3000:]
        simulated.append(series.white_noise_variance(flow + white * rng.standard_normal(n)))
    expected = series.expected_white_noise_variance(gamma)
    assert expected == pytest.approx(np.mean(simulated), rel=0.05)
    assert expected == pytest.approx(white**2 + (1 - phi) ** 2, rel=0.05)
