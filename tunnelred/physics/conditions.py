"""Free stream and spin: q, U, Re, Mach; spin rate, spin ratio, circulation.

The formulas take scalars, ndarrays, Series or DataArrays (tunnelred.common._arraylike) and
broadcast, so a run-level model can be evaluated over a batch of Monte Carlo draws in one call. The
stream functions (:func:`free_stream`, :func:`spin_rate`) work on the per-stream xarray Datasets of
docs/input-format.md: dimension ``time`` in seconds from the run's start, variables in SI.

The statistics of a record (mean, its type-A u with N_eff, drift, correlation of means) live in
tunnelred.physics.series; their names stay importable from here.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt
import xarray as xr

from tunnelred.common._arraylike import ArrayLike, arraylike, as_array
from tunnelred.common.errors import ReductionError
from tunnelred.inputs.config import CampaignConfig
from tunnelred.physics import air
from tunnelred.physics.series import (  # importable from here as before the split
    SeriesStats,
    _fft_length,  # noqa: F401  (tests/test_conditions.py)
    correlation_of_means,
    effective_sample_size,
    series_statistics,
)

__all__ = [
    "dynamic_pressure",
    "impact_pressure",
    "velocity",
    "reynolds_number",
    "mach_number",
    "spin_ratio",
    "circulation",
    "spin_rate_from_encoder",
    "free_stream",
    "spin_rate",
    "SpinSteadiness",
    "spin_steadiness",
    "SeriesStats",
    "series_statistics",
    "effective_sample_size",
    "correlation_of_means",
]


@arraylike
def dynamic_pressure(
    impact_pressure: ArrayLike, static_pressure: ArrayLike, *, gamma: ArrayLike = 1.4
) -> ArrayLike:
    """Dynamic pressure from a pitot-static reading, isentropic (subsonic) flow.

    Parameters
    ----------
    impact_pressure : float or array_like
        Impact pressure qc = p0 − p, the pitot-static differential. [Pa]
    static_pressure : float or array_like
        Free-stream static pressure p. [Pa]
    gamma : float or array_like, optional
        Ratio of specific heats. [-]

    Returns
    -------
    float or array_like
        Dynamic pressure q = ½ rho U² = (gamma/2) p M². [Pa]

    Notes
    -----
    M² = 2/(gamma − 1) [(qc/p + 1)^((gamma − 1)/gamma) − 1] and q = (gamma/2) p M²
    (NACA Report 1135, eqs. 44 and 48 with p0/p = 1 + qc/p). Valid for subsonic flow (M < 1);
    at M = 0.1 q is 0.25 % below qc, at M = 0.3 2.3 %.

    References
    ----------
    .. [1] Ames Research Staff, "Equations, tables, and charts for compressible flow",
       NACA Report 1135, 1953.

    Examples
    --------
    >>> round(dynamic_pressure(600.0, 101325.0), 2)
    598.74
    """
    g = gamma
    # expm1/log1p keep full precision when qc << p, as in every low-speed tunnel.
    M2 = 2.0 / (g - 1.0) * np.expm1((g - 1.0) / g * np.log1p(impact_pressure / static_pressure))
    return 0.5 * g * static_pressure * M2


@arraylike
def impact_pressure(
    q: ArrayLike, static_pressure: ArrayLike, *, gamma: ArrayLike = 1.4
) -> ArrayLike:
    """Impact pressure a pitot-static probe reads in a stream of dynamic pressure q.

    The inverse of :func:`dynamic_pressure` (whose parameters ``static_pressure`` and ``gamma``
    and source, NACA Report 1135 eq. 44, it shares): from q = ½ rho U² [Pa], M² = 2q/(gamma p)
    and the impact pressure qc = p0 − p = p [(1 + (gamma − 1)/2 M²)^(gamma/(gamma − 1)) − 1]
    [Pa]. Subsonic flow only.

    Examples
    --------
    >>> round(impact_pressure(598.74, 101325.0), 1)
    600.0
    """
    g = gamma
    M2 = 2.0 * q / (g * static_pressure)
    return static_pressure * np.expm1(g / (g - 1.0) * np.log1p(0.5 * (g - 1.0) * M2))


@arraylike
def velocity(q: ArrayLike, density: ArrayLike) -> ArrayLike:
    """Flow speed from dynamic pressure and density.

    Parameters
    ----------
    q : float or array_like
        Dynamic pressure. [Pa]
    density : float or array_like
        Air density. [kg/m³]

    Returns
    -------
    float or array_like
        U = sign(q) sqrt(2 |q| / rho). [m/s]

    Notes
    -----
    The definition of q. A negative q (noise about zero with the wind off) gives a negative U
    rather than NaN, so that averages over such samples stay unbiased.

    References
    ----------
    .. [1] J. B. Barlow, W. H. Rae and A. Pope, "Low-Speed Wind Tunnel Testing", 3rd ed.,
       Wiley, 1999, ch. 4 (common practice).

    Examples
    --------
    >>> round(velocity(551.25, 1.225), 3)
    30.0
    """
    return np.sign(q) * np.sqrt(2.0 * np.abs(q) / density)


@arraylike
def reynolds_number(
    density: ArrayLike, velocity: ArrayLike, diameter: ArrayLike, viscosity: ArrayLike
) -> ArrayLike:
    """Reynolds number on the cylinder diameter.

    Parameters
    ----------
    density : float or array_like
        Air density. [kg/m³]
    velocity : float or array_like
        Free-stream speed. [m/s]
    diameter : float or array_like
        Cylinder diameter. [m]
    viscosity : float or array_like
        Dynamic viscosity. [Pa s]

    Returns
    -------
    float or array_like
        Re = rho U d / mu. [-]

    Notes
    -----
    The definition; the diameter is the reference length for circular cylinders.

    References
    ----------
    .. [1] H. Schlichting and K. Gersten, "Boundary-Layer Theory", 9th ed., Springer, 2017, ch. 1.

    Examples
    --------
    >>> round(reynolds_number(1.2, 20.0, 0.1, 1.8e-5))
    133333
    """
    return density * velocity * diameter / viscosity


@arraylike
def mach_number(velocity: ArrayLike, speed_of_sound: ArrayLike) -> ArrayLike:
    """Mach number U / a.

    Parameters
    ----------
    velocity : float or array_like
        Free-stream speed. [m/s]
    speed_of_sound : float or array_like
        Speed of sound. [m/s]

    Returns
    -------
    float or array_like
        M = U / a. [-]

    Notes
    -----
    The definition.

    References
    ----------
    .. [1] Ames Research Staff, NACA Report 1135, 1953.

    Examples
    --------
    >>> round(mach_number(34.0294, 340.294), 3)
    0.1
    """
    return velocity / speed_of_sound


@arraylike
def spin_ratio(omega: ArrayLike, radius: ArrayLike, velocity: ArrayLike) -> ArrayLike:
    """Spin ratio alpha = omega R / U, signed with the spin.

    Parameters
    ----------
    omega : float or array_like
        Spin rate, positive counter-clockwise seen from +z. [rad/s]
    radius : float or array_like
        Cylinder radius. [m]
    velocity : float or array_like
        Free-stream speed. [m/s]

    Returns
    -------
    float or array_like
        alpha, the surface speed over the free-stream speed. [-]

    Notes
    -----
    With the axes of docs/conventions.md (x downstream, y the lift axis, z = x × y), a positive
    alpha moves the surface at the top (+y) upstream, and potential flow gives CL = −2 pi alpha.

    References
    ----------
    .. [1] L. Prandtl, "Application of the 'Magnus effect' to the wind propulsion of ships",
       NACA TM 367, 1926.

    Examples
    --------
    >>> spin_ratio(-100.0, 0.05, 10.0)
    -0.5
    """
    return omega * radius / velocity


@arraylike
def circulation(omega: ArrayLike, radius: ArrayLike) -> ArrayLike:
    """Circulation of the ideal flow a spinning cylinder sets up: Gamma = 2 pi omega R².

    Parameters
    ----------
    omega, radius : float or array_like
        As for :func:`spin_ratio`. [rad/s], [m]

    Returns
    -------
    float or array_like
        Gamma, positive counter-clockwise. [m²/s]

    Notes
    -----
    The circulation of the surface velocity omega R around the circumference 2 pi R (no-slip
    surface, potential flow outside). Kutta–Joukowski then gives L' = −rho U Gamma.

    References
    ----------
    .. [1] L. Prandtl, NACA TM 367, 1926.

    Examples
    --------
    >>> round(circulation(10.0, 0.1), 6)
    0.628319
    """
    return 2.0 * np.pi * omega * radius**2


def spin_rate_from_encoder(time: npt.ArrayLike, angle: npt.ArrayLike) -> float:
    """Mean spin rate of a run from the encoder angle, by a least-squares line.

    Parameters
    ----------
    time : array_like
        Sample times. [s]
    angle : array_like
        Encoder angle, wrapped (0–360, −180–180, any wrap point) or cumulative. [deg]

    Returns
    -------
    float
        omega, the slope of the unwrapped angle, signed with the spin. [rad/s]

    Notes
    -----
    The angle is unwrapped with period 360° (a step larger than 180° between samples is taken as
    a wrap), then omega = d(angle)/dt by ordinary least squares. The unwrapping needs fewer than
    half a revolution between samples, i.e. a sample rate above twice the rotation frequency.

    References
    ----------
    .. [1] NumPy, ``numpy.unwrap`` (the phase-unwrapping rule).

    Examples
    --------
    >>> t = np.arange(0.0, 1.0, 0.01)
    >>> round(spin_rate_from_encoder(t, (720.0 * t) % 360.0), 6)
    12.566371
    """
    t = as_array(time)
    theta = _unwrapped_radians(angle)
    if t.ndim != 1 or t.shape != theta.shape or t.size < 2:
        raise ValueError(
            f"time and angle must be 1-D of the same length >= 2; got {t.shape} and {theta.shape}"
        )
    tc = t - t.mean()
    return float(np.dot(tc, theta - theta.mean()) / np.dot(tc, tc))


def _unwrapped_radians(angle: npt.ArrayLike) -> np.ndarray:
    return np.deg2rad(np.unwrap(as_array(angle), period=360.0))


# Samples in the moving least-squares window of the encoder derivative: odd, so that each slope
# belongs to a sample time; five averages out encoder quantisation while following changes of
# spin slower than a few sample intervals.
_ENCODER_WINDOW = 5

_SPEED_ORDER = ("balance", "pressure", "tunnel")


def spin_rate(streams: dict[str, xr.Dataset]) -> tuple[np.ndarray, np.ndarray, str]:
    """Spin rate over time from a run's streams: the tachometer, else the encoder.

    Parameters
    ----------
    streams : dict of str to xarray.Dataset
        The run's streams by kind (``"balance"``, ``"pressure"``, ``"tunnel"``), each with
        dimension ``time`` [s]; ``speed`` is the signed spin rate [rad/s], ``angle`` the encoder
        angle [deg].

    Returns
    -------
    time : numpy.ndarray
        Sample times. [s]
    omega : numpy.ndarray
        Spin rate, positive counter-clockwise seen from +z. [rad/s]
    source : str
        ``"tachometer"`` (a ``speed`` column), ``"encoder"`` (derived from ``angle``), or
        ``"none"`` when no stream has either: a stationary model, omega = 0 on the first stream's
        time.

    Notes
    -----
    The streams are searched in the order balance, pressure, tunnel. From the encoder, omega(t) is
    the slope of a least-squares line through the unwrapped angle over a centred moving window
    of 5 samples (a first-derivative Savitzky–Golay filter of degree 1 that also accepts uneven
    sample spacing); the first and last two samples, which have no full window, are dropped.

    References
    ----------
    .. [1] A. Savitzky and M. J. E. Golay, "Smoothing and differentiation of data by simplified
       least squares procedures", Anal. Chem. 36 (1964) 1627–1639.

    Examples
    --------
    >>> t = np.linspace(0.0, 1.0, 101)
    >>> ds = xr.Dataset({"angle": ("time", (-90.0 * t) % 360.0)}, coords={"time": t})
    >>> time, omega, source = spin_rate({"pressure": ds})
    >>> source, round(float(omega.mean()), 4), time.size
    ('encoder', -1.5708, 97)
    """
    ordered = [streams[k] for k in _SPEED_ORDER if k in streams]
    ordered += [ds for k, ds in streams.items() if k not in _SPEED_ORDER]
    if not ordered:
        raise ValueError("spin_rate needs at least one stream")
    for ds in ordered:
        if "speed" in ds:
            return as_array(ds["time"]), as_array(ds["speed"]), "tachometer"
    for ds in ordered:
        if "angle" in ds:
            return (*_encoder_rate(as_array(ds["time"]), as_array(ds["angle"])), "encoder")
    t = as_array(ordered[0]["time"])
    return t, np.zeros_like(t), "none"


def _encoder_rate(time: np.ndarray, angle: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    w = _ENCODER_WINDOW
    if time.size < w:
        raise ValueError(f"the encoder stream has {time.size} samples; at least {w} are needed")
    tw = np.lib.stride_tricks.sliding_window_view(time, w)
    aw = np.lib.stride_tricks.sliding_window_view(_unwrapped_radians(angle), w)
    tc = tw - tw.mean(axis=1, keepdims=True)
    ac = aw - aw.mean(axis=1, keepdims=True)
    omega = (tc * ac).sum(axis=1) / (tc * tc).sum(axis=1)
    half = w // 2
    return time[half : time.size - half], omega


_FREE_STREAM_ATTRS = {
    "qc": ("Pa", "impact pressure (pitot-static differential)"),
    "q": ("Pa", "free-stream dynamic pressure"),
    "rho": ("kg m-3", "air density (CIPM-2007)"),
    "mu": ("Pa s", "dynamic viscosity (Sutherland, ICAO form)"),
    "a": ("m s-1", "speed of sound"),
    "U": ("m s-1", "free-stream speed"),
    "Re": ("1", "Reynolds number on the cylinder diameter"),
    "Mach": ("1", "free-stream Mach number"),
}


def free_stream(tunnel: xr.Dataset, config: CampaignConfig) -> xr.Dataset:
    """The free-stream conditions at every sample of the tunnel stream.

    Parameters
    ----------
    tunnel : xarray.Dataset
        The tunnel stream: dimension ``time`` [s]; ``dp_pitot`` or ``dp_contraction`` [Pa] (as
        ``config.tunnel.q_source`` says), ``T`` [K], ``p_baro`` [Pa], ``RH`` [0–1].
    config : CampaignConfig
        The campaign configuration (q source and contraction factor, model diameter).

    Returns
    -------
    xarray.Dataset
        On the tunnel stream's ``time``: ``qc``, ``q``, ``rho``, ``mu``, ``a``, ``U``, ``Re``,
        ``Mach``, each with ``units`` and ``long_name`` attributes. Uncorrected for wall
        interference.

    Raises
    ------
    ReductionError
        When a column the configuration needs is missing (the run id and file are read from the
        Dataset's ``run`` and ``file`` attributes where present).

    Notes ----- qc = dp_pitot, or contraction_factor × dp_contraction (the contraction calibrated
    against a pitot-static probe, so it stands for what that probe reads). The barometric pressure
    stands for the static pressure in :func:`dynamic_pressure` and
    :func:`tunnelred.physics.air.density`; the test-section static pressure sits below it by a
    fraction of q, which shifts rho by about q/p (0.5 % at 30 m/s): a tunnel that measures the
    test-section static pressure can supply it as ``p_baro``. T is taken as the static temperature
    (the recovery difference is U²/(2 cp), 0.4 K at 30 m/s, below a typical thermometer's
    uncertainty at low speed).

    References
    ----------
    .. [1] A. Picard et al., Metrologia 45 (2008) 149–155 (density).
    .. [2] ICAO Doc 7488/3, 1993 (viscosity, speed of sound).
    .. [3] Ames Research Staff, NACA Report 1135, 1953 (q from qc).
    """
    run = str(tunnel.attrs.get("run", "?"))
    file = tunnel.attrs.get("file")
    source = config.tunnel.q_source
    column = {"pitot": "dp_pitot", "contraction": "dp_contraction"}.get(source)
    if column is None:
        raise ReductionError(
            run, f"q_source must be 'pitot' or 'contraction', not {source!r}", file
        )
    missing = [c for c in (column, "T", "p_baro", "RH") if c not in tunnel]
    if missing:
        raise ReductionError(
            run, f"the tunnel stream lacks {', '.join(missing)} (q_source = {source!r})", file
        )
    factor = config.tunnel.contraction_factor if source == "contraction" else 1.0
    # Plain arrays inside: the columns share one time base, so labels add only alignment cost.
    T, p, RH = (tunnel[name].to_numpy() for name in ("T", "p_baro", "RH"))
    qc = factor * tunnel[column].to_numpy()
    q = dynamic_pressure(qc, p)
    rho = air.density(T, p, RH)
    mu = air.viscosity(T)
    a = air.speed_of_sound(T)
    U = velocity(q, rho)
    values = {
        "qc": qc,
        "q": q,
        "rho": rho,
        "mu": mu,
        "a": a,
        "U": U,
        "Re": reynolds_number(rho, U, config.model.diameter, mu),
        "Mach": mach_number(U, a),
    }
    variables = {}
    for name, v in values.items():
        units, long_name = _FREE_STREAM_ATTRS[name]
        variables[name] = (
            "time",
            np.asarray(v, dtype=float),
            {"units": units, "long_name": long_name},
        )
    return xr.Dataset(variables, coords={"time": tunnel["time"]}, attrs=dict(tunnel.attrs))


@dataclass(frozen=True)
class SpinSteadiness:
    """How steady the spin ratio was over a run.

    ``alpha_mean`` [-]; ``scatter`` the relative standard deviation std(alpha)/|mean(alpha)| [-];
    ``drift`` the change of alpha over the run from a least-squares line, relative to the mean
    (positive: |alpha| grew) [-]; ``time`` [s] and ``alpha`` [-] the series on the common time
    base. scatter and drift are NaN when alpha_mean is 0 (a stationary model).
    """

    alpha_mean: float
    scatter: float
    drift: float
    time: np.ndarray
    alpha: np.ndarray


def spin_steadiness(
    spin_time: npt.ArrayLike,
    omega: npt.ArrayLike,
    flow_time: npt.ArrayLike,
    velocity: npt.ArrayLike,
    radius: float,
) -> SpinSteadiness:
    """The spin ratio over time and its scatter and drift.

    Parameters
    ----------
    spin_time : array_like
        Times of the spin-rate samples. [s]
    omega : array_like
        Spin rate. [rad/s]
    flow_time : array_like
        Times of the free-stream samples. [s]
    velocity : array_like
        Free-stream speed. [m/s]
    radius : float
        Cylinder radius. [m]

    Returns
    -------
    SpinSteadiness

    Raises
    ------
    ValueError
        When the two series do not overlap in time.

    Notes
    -----
    alpha(t) = omega(t) R / U(t) on a common time base: the samples of the faster stream (more
    samples per second) inside the overlap of the two, with the slower stream linearly
    interpolated onto them. Nothing is extrapolated. scatter = s(alpha)/|alpha_mean| with the
    sample standard deviation s; drift = b·(t_last − t_first)/alpha_mean with b the least-squares
    slope of alpha(t).

    References
    ----------
    .. [1] JCGM 100:2008 (GUM), §4.2 (sample standard deviation).

    Examples
    --------
    >>> t = np.linspace(0.0, 10.0, 1001)
    >>> s = spin_steadiness(t, np.full(t.size, 100.0), t[::10], np.full(101, 10.0), 0.05)
    >>> s.alpha_mean, s.scatter, s.drift
    (0.5, 0.0, 0.0)
    """
    ts, w = as_array(spin_time), as_array(omega)
    tf, U = as_array(flow_time), as_array(velocity)
    start, end = max(ts[0], tf[0]), min(ts[-1], tf[-1])
    if not end > start:
        raise ValueError(
            f"the spin record ({ts[0]:g}-{ts[-1]:g} s) and the flow record "
            f"({tf[0]:g}-{tf[-1]:g} s) do not overlap"
        )
    spin_rate_hz = ts.size / (ts[-1] - ts[0]) if ts.size > 1 else 0.0
    flow_rate_hz = tf.size / (tf[-1] - tf[0]) if tf.size > 1 else 0.0
    if spin_rate_hz >= flow_rate_hz:
        keep = (ts >= start) & (ts <= end)
        t, w, U = ts[keep], w[keep], np.interp(ts[keep], tf, U)
    else:
        keep = (tf >= start) & (tf <= end)
        t, w, U = tf[keep], np.interp(tf[keep], ts, w), U[keep]
    alpha = w * radius / U
    alpha_mean = float(alpha.mean())
    if alpha_mean == 0.0 or alpha.size < 2:
        return SpinSteadiness(alpha_mean, np.nan, np.nan, t, alpha)
    scatter = float(alpha.std(ddof=1) / abs(alpha_mean))
    tc = t - t.mean()
    slope = np.dot(tc, alpha - alpha_mean) / np.dot(tc, tc)
    drift = float(slope * (t[-1] - t[0]) / alpha_mean)
    return SpinSteadiness(alpha_mean, scatter, drift, t, alpha)
