"""Statistics of a sampled record: mean, scatter, drift and the type-A u of the mean.

Consecutive samples of a tunnel record are correlated, so the u of a mean comes from the effective
number of independent samples (:func:`effective_sample_size`) rather than the sample count; the
means of records taken over one interval are correlated too (:func:`correlation_of_means`), and
the u of a record's drift takes the same N_eff (:func:`drift_uncertainty`). Every stream's
time-series layer (tunnelred.engine.reduction) reads its records through this module.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from tunnelred.common._arraylike import as_array

__all__ = [
    "SeriesStats",
    "series_statistics",
    "effective_sample_size",
    "expected_record_statistics",
    "variance_of_the_mean",
    "expected_white_noise_variance",
    "white_noise_variance",
    "correlation_of_means",
    "drift_uncertainty",
]


@dataclass(frozen=True)
class SeriesStats:
    """Statistics of one sampled record.

    ``mean``; ``std`` the sample standard deviation (n − 1); ``drift`` the change over the record
    from a least-squares line (slope × duration), in the values' unit; ``n`` the sample count;
    ``n_eff`` the effective number of independent samples; ``u_mean`` the type-A standard
    uncertainty of the mean, std / sqrt(n_eff).
    """

    mean: float
    std: float
    drift: float
    n: int
    n_eff: float
    u_mean: float


def series_statistics(values: npt.ArrayLike, time: npt.ArrayLike | None = None) -> SeriesStats:
    """Mean, scatter, drift and the type-A uncertainty of the mean of a correlated record.

    Parameters
    ----------
    values : array_like
        The 1-D record (any unit).
    time : array_like, optional
        Sample times [s]; without it the samples are taken as evenly spaced.

    Returns
    -------
    SeriesStats

    Notes
    -----
    u_mean = s / sqrt(N_eff) with s the sample standard deviation and N_eff from
    :func:`effective_sample_size`: consecutive samples of a tunnel record are correlated, and
    s / sqrt(N) would understate the uncertainty. N_eff is computed on the record as measured
    (mean removed, drift kept), so a drifting record gets a larger u_mean. drift = b (t_N − t_1)
    with b the least-squares slope (with no time, t is the sample index).
    A record of one sample has std, u_mean NaN.

    References
    ----------
    .. [1] JCGM 100:2008 (GUM), §4.2.
    .. [2] A. Zięba, "Effective number of observations and unbiased estimators of variance for
       autocorrelated data - an overview", Metrol. Meas. Syst. 17 (2010) 3–16.

    Examples
    --------
    >>> s = series_statistics([1.0, 2.0, 3.0, 4.0], time=[0.0, 1.0, 2.0, 3.0])
    >>> s.mean, s.drift, s.n
    (2.5, 3.0, 4)
    """
    x = as_array(values)
    if x.ndim != 1 or x.size == 0:
        raise ValueError(f"series_statistics needs a non-empty 1-D record; got shape {x.shape}")
    n = x.size
    t = np.arange(n, dtype=float) if time is None else as_array(time)
    if t.shape != x.shape:
        raise ValueError(f"time has shape {t.shape}, values {x.shape}")
    mean = float(x.mean())
    if n < 2:
        return SeriesStats(mean, np.nan, 0.0, 1, 1.0, np.nan)
    std = float(x.std(ddof=1))
    tc = t - t.mean()
    drift = float(np.dot(tc, x - mean) / np.dot(tc, tc) * (t[-1] - t[0]))
    n_eff = effective_sample_size(x)
    return SeriesStats(mean, std, drift, n, n_eff, std / np.sqrt(n_eff))


def _fft_length(n: int) -> int:
    """The smallest 5-smooth number (2^a 3^b 5^c) >= n: a length pocketfft transforms fast.

    The same length as scipy.fft.next_fast_len(n, real=True), without importing scipy.fft
    (0.4-0.9 s) in every process.
    """
    best = 1 << max(int(n - 1).bit_length(), 0)  # the power of two at or above n
    p5 = 1
    while p5 < best:
        p35 = p5
        while p35 < best:
            # the smallest power of two that lifts p35 to n or above
            quotient = -(-n // p35)
            candidate = p35 << max(int(quotient - 1).bit_length(), 0)
            best = min(best, candidate)
            p35 *= 3
        p5 *= 5
    return best


# Automatic window (Sokal 1997): the smallest M with M >= _WINDOW_C tau(M). Sokal's c of 4-10 is
# for a sharp window; the triangular window's bias falls only as 1/M, so a wider one (measured on
# AR(1) and on the demo's shedding: c = 20 halves the shedding's overstatement of c = 10 and keeps
# AR(1) within its scatter).
_WINDOW_C = 20.0
# N_eff is never taken above this many times N (u_mean >= s / (2 sqrt(N))): see the Notes.
_N_EFF_CAP = 4.0


def effective_sample_size(x: npt.ArrayLike) -> float:
    """Effective number of independent samples in an autocorrelated record, for its mean.

    Parameters
    ----------
    x : array_like
        The 1-D record (any unit), evenly sampled.

    Returns
    -------
    float
        N_eff = s² / var(mean), estimated; clipped to [1, 4 N]. [-]

    Notes
    -----
    var(mean) = s² tau / N with the integrated autocorrelation time
    tau = 1 + 2 Σ_k (1 − k/N) rho_k (Bayley and Hammersley 1946; Zięba 2010, eq. 9), rho_k the
    sample autocorrelation (biased estimator, from the FFT of the mean-removed record zero-padded
    to at least 2N: O(N log N)). tau is 2π × the record's spectral density at zero frequency
    over its variance, estimated with a triangular (Bartlett) lag window,
    tau(M) = 1 + 2 Σ_{k=1}^{M} (1 − k/(M+1)) (1 − k/N) rho_k, which can never be negative
    (Priestley 1981, §6.2.3), with Sokal's automatic window: the smallest M with
    M >= 20 tau(M), M <= N/4 (Sokal 1997, §3). The window takes in the negative lobes of an
    oscillating correlation (vortex shedding: a narrow-band record's mean converges faster than
    s/√N), so tau < 1 and N_eff > N where the record says so. For a pure tone plus white noise
    the tone's share of s² drops out of tau up to a residual of about 1/(M sin²(ω/2)).
    N_eff is capped at 4 N: beyond that a record is nearly a pure tone, whose mean's error is set
    by the part-cycle at the record's end, not by the noise the window sees.
    When no such M exists (the correlation has not died out within N/4: a drift, a ramp, a record
    too short for its correlation time) the sum stops before the first lag with rho_k <= 0
    instead, as conservative there as it is for a periodic record. A constant record gives N.

    References
    ----------
    .. [1] G. V. Bayley and J. M. Hammersley, "The 'effective' number of independent
       observations in an autocorrelated time series", J. R. Stat. Soc. Suppl. 8 (1946) 184–197.
    .. [2] A. Zięba, Metrol. Meas. Syst. 17 (2010) 3–16.
    .. [3] A. D. Sokal, "Monte Carlo methods in statistical mechanics: foundations and new
       algorithms", in Functional Integration: Basics and Applications (Cargèse 1996), NATO ASI
       Series B 361, Plenum, 1997, pp. 131–192.
    .. [4] M. B. Priestley, Spectral Analysis and Time Series, Academic Press, 1981.

    Examples
    --------
    >>> rng = np.random.default_rng(1)
    >>> 0.9 < effective_sample_size(rng.standard_normal(10_000)) / 10_000 < 1.1
    True
    """
    x = as_array(x)
    if x.ndim != 1 or x.size == 0:
        raise ValueError(f"effective_sample_size needs a non-empty 1-D record; got {x.shape}")
    n = x.size
    dx = x - x.mean()
    size = _fft_length(2 * n)
    spectrum = np.fft.rfft(dx, size)
    return _n_eff_of_lag_sums(np.fft.irfft(spectrum.real**2 + spectrum.imag**2, size)[:n])


def _n_eff_of_lag_sums(acov: np.ndarray) -> float:
    """N_eff from a record's lag sums Σ_i dx_i dx_(i+k), k = 0 … N−1 (effective_sample_size)."""
    n = acov.size
    if acov[0] <= 0.0:
        return float(n)

    def weighted_lags(last: int) -> tuple[np.ndarray, np.ndarray]:
        k = np.arange(1, last + 1)
        return k, (1.0 - k / n) * acov[1 : last + 1] / acov[0]

    # The window is searched among M <= N/4 only: the lags up to there suffice (the running
    # sums of a prefix are the prefix of the running sums).
    k, weighted = weighted_lags(n // 4)
    # tau(M) for every M at once: Σ (1 − k/(M+1)) r_k = Σ r_k − Σ k r_k / (M+1).
    tau = 1.0 + 2.0 * (np.cumsum(weighted) - np.cumsum(k * weighted) / (k + 1.0))
    window = np.flatnonzero((k >= _WINDOW_C * tau) & (k <= n // 4))
    if window.size:
        return float(np.clip(n / tau[window[0]], 1.0, _N_EFF_CAP * n))
    _, weighted = weighted_lags(n - 1)
    non_positive = np.flatnonzero(weighted <= 0.0)
    last = non_positive[0] if non_positive.size else weighted.size
    return float(np.clip(n / (1.0 + 2.0 * np.sum(weighted[:last])), 1.0, n))


def _lag_covariances(gamma: npt.ArrayLike, caller: str) -> np.ndarray:
    gamma = as_array(gamma)
    if gamma.ndim != 1 or gamma.size < 2:
        raise ValueError(f"{caller} needs gamma_0 … gamma_(N-1), N >= 2; got shape {gamma.shape}")
    return gamma


def _covariance_with_the_mean(gamma: np.ndarray) -> np.ndarray:
    """c_i = cov(x_i, x̄) = (1/N) Σ_j gamma_|i−j|, i = 0 … N−1 (cumulative sums: O(N))."""
    cumulative = np.cumsum(gamma)
    return (cumulative + cumulative[::-1] - gamma[0]) / gamma.size


def variance_of_the_mean(autocovariance: npt.ArrayLike) -> float:
    """The exact variance of the mean of N samples of a stationary record.

    Parameters
    ----------
    autocovariance : array_like
        gamma_k, k = 0 … N−1 (the unit squared); for two records sampled together, their
        cross-covariance (even in the lag) gives the covariance of their means.

    Returns
    -------
    float
        var(x̄) = (1/N²) Σ_i Σ_j gamma_|i−j| = (gamma_0 + 2 Σ_k (1 − k/N) gamma_k) / N
        (Bayley and Hammersley 1946). [unit²]

    References
    ----------
    .. [1] G. V. Bayley and J. M. Hammersley, "The 'effective' number of independent
       observations in an autocorrelated time series", J. R. Stat. Soc. Suppl. 8 (1946) 184–197.

    Examples
    --------
    >>> round(variance_of_the_mean(np.r_[4.0, np.zeros(99)]), 12)  # white noise: sigma² / N
    0.04
    """
    gamma = _lag_covariances(autocovariance, "variance_of_the_mean")
    return float(np.sum(_covariance_with_the_mean(gamma))) / gamma.size


def expected_record_statistics(autocovariance: npt.ArrayLike) -> tuple[float, float]:
    """The standard deviation and N_eff the reduction will estimate from a modelled record.

    Parameters
    ----------
    autocovariance : array_like
        gamma_k, k = 0 … N−1: the autocovariance of a stationary record of N evenly spaced
        samples at lag k (the record's unit squared), from a stated noise model.

    Returns
    -------
    (float, float)
        s, the expected sample standard deviation (n − 1), and N_eff: what
        :func:`effective_sample_size` gives from the record's expected lag sums (its window,
        its cap). s / sqrt(N_eff) is the type-A u of the mean that :func:`series_statistics`
        will report for such a record.

    Notes
    -----
    The lag sums of the mean-removed record have the expectation
    E[Σ_{i<N−k} (x_i − x̄)(x_{i+k} − x̄)] = (N − k)(gamma_k + V) − Σ_{i<N−k} (c_i + c_{i+k}),
    c_i = cov(x_i, x̄) = (1/N) Σ_j gamma_|i−j|, V = var(x̄) = (1/N) Σ_i c_i (expanding the
    product; O(N) with cumulative sums). The estimator is applied to these expected sums
    instead of to one record's: a plug-in value of its expectation (the estimator is a ratio
    with a data-chosen window, so its mean over records differs from it by the estimator's own
    small bias). A test plan uses it so that its predicted u follows the reduction's N_eff
    for every stated spectrum (AR(1), narrow-band shedding, a tone) with one home for the window.

    Examples
    --------
    >>> s, n_eff = expected_record_statistics(np.r_[1.0, np.zeros(999)])  # white noise
    >>> round(s, 3), 950 < n_eff < 1050
    (1.0, True)
    """
    lag_sums = _expected_lag_sums(_lag_covariances(autocovariance, "expected_record_statistics"))
    s2 = max(float(lag_sums[0]) / (lag_sums.size - 1), 0.0)
    return float(np.sqrt(s2)), _n_eff_of_lag_sums(lag_sums)


def _expected_lag_sums(gamma: np.ndarray) -> np.ndarray:
    """E[Σ_{i<N−k} (x_i − x̄)(x_{i+k} − x̄)], k = 0 … N−1 (expected_record_statistics)."""
    n = gamma.size
    c = _covariance_with_the_mean(gamma)
    var_mean = float(np.sum(c)) / n
    k = np.arange(n)
    c_cum = np.cumsum(c)
    head = c_cum[n - 1 - k]  # Σ_{i=0}^{N−1−k} c_i
    tail = c_cum[-1] - np.r_[0.0, c_cum[:-1]]  # Σ_{i=k}^{N−1} c_i
    return (n - k) * (gamma + var_mean) - head - tail


def expected_white_noise_variance(autocovariance: npt.ArrayLike) -> float:
    """What :func:`white_noise_variance` gives from a modelled record: its nugget taken on the
    record's expected lag sums (:func:`expected_record_statistics`; N >= 4)."""
    gamma = _lag_covariances(autocovariance, "expected_white_noise_variance")
    if gamma.size < 4:
        return float("nan")
    return _nugget(_expected_lag_sums(gamma)[:3] / gamma.size)


def _nugget(gamma: np.ndarray) -> float:
    """σ_w² = γ(0) − (2γ(1) − γ(2)), within [0, γ(0)] (white_noise_variance)."""
    return float(np.clip(gamma[0] - (2.0 * gamma[1] - gamma[2]), 0.0, gamma[0]))


def white_noise_variance(x: npt.ArrayLike) -> float:
    """The variance of a record's uncorrelated (white) part: the instrument's own noise.

    Parameters
    ----------
    x : array_like
        As for :func:`effective_sample_size`.

    Returns
    -------
    float
        σ_w² in the record's unit squared, within [0, s²]; NaN for fewer than four samples.

    Notes
    -----
    A record of a fluctuating flow is the flow's own, correlated, signal plus the transducer's
    white noise. White noise adds to the autocovariance at lag 0 only, so its variance is the
    step of γ at the origin: σ_w² = γ(0) − (2γ(1) − γ(2)), the correlated part extrapolated
    linearly from lags 1 and 2 (the "nugget" of a variogram; G. Matheron, Econ. Geol. 58 (1963)
    1246–1266, from memory). Exact for white noise (γ(1) = γ(2) = 0) and for a correlated part
    that is linear over two lags; an AR(1) part with lag-one correlation φ is over-counted by
    (1 − φ)² of its variance (0.4 % at φ = 0.94, the demo's 50 Hz pitot record). γ_k is the
    biased sample autocovariance of the mean-removed record.

    References
    ----------
    .. [1] G. Matheron, "Principles of geostatistics", Econ. Geol. 58 (1963) 1246–1266 (the nugget
       effect), from memory.

    Examples
    --------
    >>> rng = np.random.default_rng(3)
    >>> smooth = np.cumsum(rng.standard_normal(20_000)) * 0.01
    >>> noisy = smooth - smooth.mean() + 0.1 * rng.standard_normal(20_000)
    >>> 0.009 < white_noise_variance(noisy) < 0.011
    True
    """
    x = as_array(x)
    if x.ndim != 1:
        raise ValueError(f"white_noise_variance needs a 1-D record; got shape {x.shape}")
    n = x.size
    if n < 4:
        return float("nan")
    dx = x - x.mean()
    return _nugget(np.array([float(np.dot(dx[: n - k], dx[k:])) / n for k in range(3)]))


def correlation_of_means(records: list[tuple[npt.ArrayLike, npt.ArrayLike]]) -> np.ndarray:
    """Correlation matrix of the time means of records taken over the same interval.

    Parameters
    ----------
    records : list of (values, time)
        Each record's 1-D samples (any unit) and their times [s], on one clock; the streams may
        have different rates and sample times.

    Returns
    -------
    ndarray
        (n, n) correlation coefficients of the records' means [-], positive semi-definite, unit
        diagonal.

    Notes
    -----
    Means taken from one time series (the loads and the dynamic pressure both follow the speed)
    are not independent, and their ratio (a coefficient) scatters far less than either. Every
    record is brought to one grid: cells as wide as the slowest stream's sample interval over
    the interval all records cover, each cell the mean of a record's samples in it (cells some
    record misses are left out). On that grid the correlation of two means follows from the
    polarisation identity ``r = (u²(a + b) − u²(a − b)) / 4`` for ``a``, ``b`` scaled to unit
    u(mean), each u(mean) from :func:`series_statistics` (N_eff). The matrix is clipped to
    [−1, 1] and projected onto the positive semi-definite cone (negative eigenvalues set to
    zero, the diagonal rescaled to 1). The estimate has the resolution of N_eff: about
    ±1/sqrt(N_eff) for independent records.

    Examples
    --------
    >>> t = np.arange(400) / 100.0
    >>> rng = np.random.default_rng(0)
    >>> common = np.cumsum(rng.standard_normal(400))
    >>> r = correlation_of_means([(common, t), (2 * common + 1, t)])
    >>> bool(r[0, 1] > 0.99)
    True
    """
    series = [(as_array(v), as_array(t)) for v, t in records]
    n = len(series)
    if n < 2:
        return np.eye(n)
    start = max(float(t[0]) for _, t in series)
    end = min(float(t[-1]) for _, t in series)
    width = max(float(np.median(np.diff(t))) for _, t in series if t.size > 1)
    cells = int(np.floor((end - start) / width)) if end > start else 0
    if cells < 4:
        return np.eye(n)
    grid = []
    filled = np.ones(cells, dtype=bool)
    for v, t in series:
        inside = (t >= start) & (t < start + cells * width)
        index = ((t[inside] - start) // width).astype(int)
        count = np.bincount(index, minlength=cells)
        total = np.bincount(index, weights=v[inside], minlength=cells)
        filled &= count > 0
        with np.errstate(invalid="ignore", divide="ignore"):
            grid.append(total / count)
    grid = [g[filled] for g in grid]
    if grid[0].size < 4:
        return np.eye(n)
    u = np.array([series_statistics(g).u_mean for g in grid])
    R = np.eye(n)
    for i in range(n):
        for j in range(i + 1, n):
            if not (u[i] > 0 and u[j] > 0):
                continue
            a, b = grid[i] / u[i], grid[j] / u[j]
            plus = series_statistics(a + b).u_mean ** 2
            minus = series_statistics(a - b).u_mean ** 2
            R[i, j] = R[j, i] = np.clip((plus - minus) / 4.0, -1.0, 1.0)
    w, V = np.linalg.eigh(R)
    if w[0] < 0.0:
        R = (V * np.clip(w, 0.0, None)) @ V.T
        d = np.sqrt(np.diag(R))
        R = R / np.outer(d, d)
        np.fill_diagonal(R, 1.0)
    return R


def drift_uncertainty(values: npt.ArrayLike, time: npt.ArrayLike) -> float:
    """Standard uncertainty of a record's least-squares change b (t_N − t_1), from its noise.

    u(b) = s_r / sqrt(Σ (t_i − t̄)²) · sqrt(N / N_eff), with s_r the residuals' standard
    deviation about the line (N − 2 degrees of freedom) and N_eff their effective sample size
    (:func:`effective_sample_size`): for noise that is correlated over times short
    against the record, the variance of a regression slope grows by the same factor N / N_eff
    as that of the mean: least squares on a polynomial trend is asymptotically efficient, with
    the variance set by the noise spectrum at zero frequency (U. Grenander, Ann. Math. Stat. 25
    (1954) 252–272, from memory). The residuals about a line fitted to a correlated record
    scatter less than the noise: E[(N − 2) s_r²] = σ² (N − tr(H R)) with H the fit's hat matrix
    and R the noise correlation, tr(H R) ≈ 2 N / N_eff (one N / N_eff for the mean, one for the
    slope); s_r² is scaled by (N − 2)/(N − 2 N/N_eff) accordingly (the unbiased variance of
    autocorrelated data, A. Zięba, Metrol. Meas. Syst. 17 (2010) 3–16, carried from the mean to
    the line). On 4 s AR(1) records with τ = 0.3 s (3000 records) u went from 0.70 to 0.80 of the
    drift's true spread: N_eff of the short residual record is still overestimated.
    NaN for fewer than three samples.

    References
    ----------
    .. [1] U. Grenander, "On the estimation of regression coefficients in the case of an
       autocorrelated disturbance", Ann. Math. Stat. 25 (1954) 252–272, from memory.
    .. [2] A. Zięba, "Effective number of observations and unbiased estimators of variance for
       autocorrelated data", Metrol. Meas. Syst. 17 (2010) 3–16.
    """
    x, t = np.asarray(values, dtype=float), np.asarray(time, dtype=float)
    if x.size < 3:
        return float("nan")
    tc = t - t.mean()
    slope = np.dot(tc, x - x.mean()) / np.dot(tc, tc)
    residuals = x - x.mean() - slope * tc
    tau = x.size / effective_sample_size(residuals)
    s_r = np.sqrt(np.dot(residuals, residuals) / max(x.size - 2.0 * tau, 1.0))
    return float(s_r / np.sqrt(np.dot(tc, tc)) * np.sqrt(tau) * (t[-1] - t[0]))
