"""One run end to end: conditions, balance, pressure, corrections, uncertainty and flags.

A data run is reduced in two layers:

1. the *time-series layer* turns each stream's samples into run-level inputs — means with their
   type-A standard uncertainty from the effective number of independent samples, the zero and tare
   loads from the runs the data run names, Cp binned in azimuth — plus the steadiness measures the
   quality flags judge;
2. the *run-level model* (:func:`run_model`) maps those inputs, the instruments' type-B terms and
   the geometry to every reported result. It is vectorised over a leading batch axis, so the same
   code gives the nominal values, the GUM sensitivities (one batched call) and Monte Carlo draws.

Only the runs a data run names as its zeros and tares are read besides its own logs, which keeps
runs independent for the parallel engine.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from tunnelred.common.errors import InputError, ReductionError
from tunnelred.engine import plausibility, quality
from tunnelred.engine.quality import Flag
from tunnelred.physics import air, balance, conditions, corrections, pressure, theory
from tunnelred.physics.uncertainty import Input, propagate_linear, propagate_monte_carlo

__all__ = [
    "RunResult",
    "reduce_run",
    "RUN_OUTPUTS",
    "PressureModel",
    "run_model",
    "air_data_inputs",
    "balance_load_inputs",
    "spin_rate_inputs",
    "pressure_run_inputs",
    "geometry_inputs",
    "reading_slope",
]

#: Scalar outputs of the run-level model, in the order results list them.
RUN_OUTPUTS = (
    "T", "p_baro", "RH", "rho", "mu", "q", "U", "Re", "Mach", "omega", "alpha", "Gamma",
    "CL", "CD", "CM", "C_power", "L_D", "CL_p", "CD_p",
    "eps_solid", "eps_wake", "delta_CD_buoyancy", "delta_alpha_lift",
    "q_uncorrected", "U_uncorrected", "Re_uncorrected", "alpha_uncorrected",
    "CL_uncorrected", "CD_uncorrected", "CM_uncorrected", "C_power_uncorrected",
    "L_D_uncorrected", "CL_p_uncorrected", "CD_p_uncorrected",
    "CL_ideal", "lift_efficiency", "theta_stag_ideal",
    "theta_stag", "Cp_max", "Cp_min", "theta_Cp_min", "Cp_base",
)  # fmt: skip

#: Headline outputs whose uncertainty budgets are kept.
BUDGET_OUTPUTS = ("alpha", "CL", "CD", "CM")


@dataclass
class RunResult:
    """Everything reduced from one data run.

    ``values`` holds the per-run scalars (and the few strings: ``config``, ``start``,
    ``dead_taps``, ``flags``) named as in docs/results.md, including ``u_X`` and
    ``X_uncorrected``. ``profiles`` holds arrays on ``theta`` (``Cp``, ``u_Cp``,
    ``Cp_uncorrected``, ``Cp_count``, ``Cp_ideal``); it is empty for a run without a pressure
    log. ``inputs`` maps every file the run used (its own logs and those of its zero and tare
    runs, relative to the campaign folder) to its SHA-256.
    """

    run: str
    config: str
    values: dict[str, float | str]
    theta: np.ndarray | None = None
    profiles: dict[str, np.ndarray] = field(default_factory=dict)
    flags: tuple[Flag, ...] = ()
    budgets: pd.DataFrame | None = None
    inputs: dict[str, str] = field(default_factory=dict)


# --------------------------------------------------------------------------------------------
# Zero and tare runs: their means, kept per campaign object so a worker reads each only once.


@dataclass(frozen=True)
class _ZeroState:
    epoch: float  # mid-time [s since 1970]
    signals: np.ndarray  # mean channel signals [n]
    u_signals: np.ndarray  # type-A standard uncertainty of the means [n]


@dataclass(frozen=True)
class _TareState:
    omega: float  # mean spin rate [rad/s]
    loads: np.ndarray  # zero-corrected mean loads [3]
    u_loads: np.ndarray  # type-A standard uncertainty [3]
    terms: np.ndarray  # mean calibration terms (balance.calibration_terms) of the signals


def _memo(campaign) -> dict:
    memo = campaign.__dict__.get("_reduction_memo")
    if memo is None:
        memo = {}
        campaign.__dict__["_reduction_memo"] = memo
    return memo


def _load(campaign, run_id: str):
    problems = campaign.run_problems(run_id)
    if problems:
        raise InputError(problems)
    return campaign.load_run(run_id)


def _signal_matrix(stream, channels) -> np.ndarray:
    return np.column_stack([stream[name].to_numpy() for name in channels])


def _mid_epoch(spec, stream) -> float:
    t = stream["time"].to_numpy()
    return spec.start.timestamp() + 0.5 * (t[0] + t[-1])


def _series_means(matrix: np.ndarray, time: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    stats = [conditions.series_statistics(matrix[:, j], time) for j in range(matrix.shape[1])]
    return np.array([s.mean for s in stats]), np.array([s.u_mean for s in stats])


def _zero_state(campaign, run_id: str) -> _ZeroState:
    memo = _memo(campaign)
    key = ("zero", run_id)
    if key not in memo:
        data = _load(campaign, run_id)
        stream = data.streams["balance"]
        channels = campaign.config.instruments.balance.channels
        means, u = _series_means(_signal_matrix(stream, channels), stream["time"].to_numpy())
        memo[key] = _ZeroState(_mid_epoch(data.spec, stream), means, u)
    return memo[key]


def _zero_for(campaign, spec, epoch: float):
    """Interpolated zero signals, the pre/post shift and the zeros' type-A uncertainty."""
    if not spec.zero:
        raise ReductionError(spec.run, "names no wind-off zero run", "runs.csv", spec.line)
    zeros = sorted((_zero_state(campaign, z) for z in spec.zero), key=lambda z: z.epoch)
    zero, shift, _ = balance.interpolate_zero(
        epoch, np.array([z.epoch for z in zeros]), np.array([z.signals for z in zeros])
    )
    u_zero = np.sqrt(np.mean([z.u_signals**2 for z in zeros], axis=0))
    return np.asarray(zero), np.asarray(shift), u_zero


def _tare_state(campaign, run_id: str) -> _TareState:
    memo = _memo(campaign)
    key = ("tare", run_id)
    if key not in memo:
        cfg = campaign.config.instruments.balance
        data = _load(campaign, run_id)
        stream = data.streams["balance"]
        t = stream["time"].to_numpy()
        zero, _, _ = _zero_for(campaign, data.spec, _mid_epoch(data.spec, stream))
        signals = _signal_matrix(stream, cfg.channels) - zero
        loads = balance.loads_from_signals(signals, np.array(cfg.matrix), _second_order(cfg))
        means, u = _series_means(loads, t)
        t_spin, omega, _ = conditions.spin_rate(data.streams)
        terms = balance.calibration_terms(signals, second_order=cfg.second_order is not None)
        memo[key] = _TareState(float(np.mean(omega)), means, u, terms.mean(axis=0))
    return memo[key]


def _second_order(cfg):
    return None if cfg.second_order is None else np.array(cfg.second_order)


def _files_used(campaign, spec) -> dict[str, str]:
    files = {}
    for rid in campaign.dependencies(spec.run):
        for path in campaign.runs[rid].logs.values():
            files[path] = campaign.file_hashes.get(path, "")
    return files


# --------------------------------------------------------------------------------------------
# The time-series layer


def _balance_inputs(campaign, spec, data, omega_mean: float, measures: dict):
    """Run-level balance inputs: net loads (zero removed), their tares, and their u.

    Also the load records behind the means, ``[(name, loads, time, u of the mean)]``, whose
    fluctuations the dynamic pressure shares (:func:`_shared_fluctuation`).
    """
    cfg = campaign.config.instruments.balance
    stream = data.streams["balance"]
    t = stream["time"].to_numpy()
    matrix, second = np.array(cfg.matrix), _second_order(cfg)
    zero, shift, u_zero = _zero_for(campaign, spec, _mid_epoch(spec, stream))
    loads_t = balance.loads_from_signals(
        _signal_matrix(stream, cfg.channels) - zero, matrix, second
    )
    means, u_a = _series_means(loads_t, t)
    # The zero's own scatter enters through the linearised calibration.
    u_zero_loads = np.abs(matrix) @ u_zero
    full_scale = np.array(cfg.full_scale)
    # Per component, so that a flag's reason can name the load (Fx, Fy, Mz).
    measures["overload"] = _components(balance.overload_fraction(loads_t, full_scale))
    if len(spec.zero) > 1:
        shift_loads = balance.loads_from_signals(shift, matrix, None)
        measures["zero_shift"] = _components(np.abs(np.asarray(shift_loads)) / full_scale)
    if spec.provisional:
        # The closing zero is not in: the drift since the opening zero is unobserved. A drift
        # the zero_shift check would pass is at most its tolerance of full scale by the closing
        # zero, so it enters as a rectangular term of that half-width (GUM 4.3.7).
        tolerance = campaign.config.tolerances_for(spec.config).zero_shift
        u_zero_loads = np.hypot(u_zero_loads, tolerance * full_scale / np.sqrt(3.0))

    tare = np.zeros(3)
    u_tare = np.zeros(3)
    if spec.tare:
        states = sorted((_tare_state(campaign, r) for r in spec.tare), key=lambda s: s.omega)
        rates = np.array([s.omega for s in states])
        try:
            tare, extrapolated = balance.tare_loads(
                omega_mean,
                rates,
                np.array([s.loads for s in states]),
                extrapolation=campaign.config.reduction.tare_extrapolation,
            )
        except balance.TareRangeError as exc:
            raise ReductionError(spec.run, str(exc), "runs.csv", spec.line) from exc
        tare = np.asarray(tare, dtype=float)
        u_tare = np.sqrt(np.mean([s.u_loads**2 for s in states], axis=0))
        if extrapolated:
            measures["tare_extrapolated"] = True
            measures["tare_range"] = (float(rates.min()), float(rates.max()))
            measures["omega"] = omega_mean

    inputs = balance_load_inputs(cfg, means, np.hypot(u_a, u_zero_loads), tare, u_tare)
    records = [(name, loads_t[:, k], t, u_a[k]) for k, name in enumerate(("Fx", "Fy", "Mz"))]
    return inputs, records


def balance_load_inputs(
    cfg, loads: np.ndarray, u_loads: np.ndarray, tare: np.ndarray, u_tare: np.ndarray
) -> dict[str, Input]:
    """The balance's run-level inputs from its mean loads, their tares and their type-A u.

    ``cfg`` is the campaign's BalanceConfig; ``loads`` and ``tare`` are (Fx, Fy, Mz) in N, N m
    (the zero removed), ``u_loads`` their type-A u (the zero's scatter included). The
    specification, calibration and alignment terms come from ``cfg``. Public so that a test
    plan (tunnelred.products.plan) builds the inputs a run would have.
    """
    u_b = np.asarray(cfg.u_fraction_of_full_scale) * np.array(cfg.full_scale)
    inputs = {}
    for k, name in enumerate(("Fx", "Fy", "Mz")):
        inputs[name] = Input(loads[k], u_loads[k], "A", f"balance {name}")
        inputs[f"{name}_spec"] = Input(0.0, u_b[k], "B", f"balance {name} specification")
        inputs[f"{name}_tare"] = Input(tare[k], u_tare[k], "A", f"spin tare {name}")
    inputs["calibration"] = Input(1.0, cfg.u_matrix_relative, "B", "balance calibration factor")
    align = cfg.alignment_angle
    inputs["alignment"] = Input(align, cfg.u_alignment_angle, "B", "balance alignment [deg]")
    return inputs


def _shared_fluctuation(cfg, tunnel, records, inputs: dict) -> dict[tuple[str, str], float]:
    """Correlations of the time-averaged dynamic pressure and loads, from their records.

    The loads follow the speed sample by sample, so the means of dp and of the loads move
    together and a coefficient (load over q) scatters far less than either; propagated as
    independent, u(CL) would count the speed fluctuation twice. Each mean's correlation
    (:func:`tunnelred.physics.conditions.correlation_of_means`) is scaled by the share of that
    input's u that is its own record's scatter (the zero's scatter is independent of it).
    """
    column = "dp_pitot" if cfg.tunnel.q_source == "pitot" else "dp_contraction"
    dp = tunnel[column].to_numpy()
    named = [("dp", dp, tunnel["time"].to_numpy(), float(inputs["dp"].u))] + records
    R = conditions.correlation_of_means([(values, time) for _, values, time, _ in named])
    share = []
    for name, _, _, u_record in named:
        u = float(inputs[name].u)
        share.append(u_record / u if u > 0 else 0.0)
    correlation = {}
    for i in range(len(named)):
        for j in range(i + 1, len(named)):
            r = float(R[i, j]) * share[i] * share[j]
            if r != 0.0:
                correlation[(named[i][0], named[j][0])] = r
    return correlation


@dataclass(frozen=True)
class _CalibrationStep:
    """The balance coefficients as one vector input with their covariance (calibration_file)."""

    inputs: dict[str, Input]
    correlation: dict[tuple[str, str], float]
    coefficients: np.ndarray  # c0, the file's values [K]
    sensitivity: np.ndarray  # ∂(net loads)/∂c at c0 [3, K]


def _calibration_step(campaign, spec, data, omega_mean: float) -> _CalibrationStep | None:
    """Net loads are linear in the coefficients: F_r = Σ_t K_rt (term_t(run) − term_t(tare))."""
    cfg = campaign.config.instruments.balance
    if cfg.coefficient_covariance is None:
        return None
    stream = data.streams["balance"]
    zero, _, _ = _zero_for(campaign, spec, _mid_epoch(spec, stream))
    second = cfg.second_order is not None
    terms = balance.calibration_terms(
        _signal_matrix(stream, cfg.channels) - zero, second_order=second
    ).mean(axis=0)
    if spec.tare:
        states = sorted((_tare_state(campaign, r) for r in spec.tare), key=lambda s: s.omega)
        rates = np.array([s.omega for s in states])
        tare_terms = np.array([s.terms for s in states])
        # tare_loads interpolates three columns at a time; it is linear, so any columns do.
        width = tare_terms.shape[1]
        padded = np.pad(tare_terms, ((0, 0), (0, -width % 3)))
        interpolated = np.concatenate([
            np.asarray(balance.tare_loads(omega_mean, rates, padded[:, k : k + 3])[0])
            for k in range(0, padded.shape[1], 3)
        ])[:width]  # fmt: skip
        terms = terms - interpolated
    per_load = terms.size
    sensitivity = np.zeros((3, 3 * per_load))
    for r in range(3):
        sensitivity[r, r * per_load : (r + 1) * per_load] = terms
    coefficients = np.hstack(
        [np.array(cfg.matrix), np.array(cfg.second_order)] if second else [np.array(cfg.matrix)]
    ).ravel()
    covariance = np.array(cfg.coefficient_covariance)
    u = np.sqrt(np.diag(covariance))
    correlation = {}
    for i, j in zip(*np.triu_indices(len(u), 1), strict=True):
        if u[i] > 0 and u[j] > 0 and covariance[i, j] != 0:
            r = float(np.clip(covariance[i, j] / (u[i] * u[j]), -1.0, 1.0))
            correlation[(f"calibration_coefficients[{i}]", f"calibration_coefficients[{j}]")] = r
    inputs = {
        "calibration_coefficients": Input(
            coefficients, u, "B", f"balance calibration coefficients ({cfg.calibration_file})"
        )
    }
    return _CalibrationStep(inputs, correlation, coefficients, sensitivity)


@dataclass(frozen=True)
class _PressurePoints:
    """Tap readings reduced to points in azimuth: bins of a spinning model, or taps at rest."""

    theta: np.ndarray  # azimuth of each point [deg]
    reading: np.ndarray  # mean scanner reading (p_tap - p_inf at the transducer) [Pa]
    u_reading: np.ndarray  # its type-A standard uncertainty [Pa]
    grid: np.ndarray  # bin centres of the results' theta grid [deg]
    grid_index: np.ndarray  # bin of each point on that grid
    count: np.ndarray  # samples per grid bin
    share: np.ndarray  # (points, taps): the fraction of each point's samples from each tap [-]


def _components(values) -> tuple[float, ...]:
    return tuple(float(v) for v in np.atleast_1d(np.asarray(values, dtype=float)))


def _pressure_inputs(
    campaign, data, q_mean: float, omega_mean: float, spinning: bool, measures: dict
):
    """Tap readings (Pa) reduced to azimuth points, dead taps excluded, and u of the azimuth.

    A spinning run (:func:`tunnelred.engine.quality.is_spinning`) is binned in azimuth; a model
    at rest gives one point a tap at its fixed azimuth.
    """
    cfg = campaign.config
    stream = data.streams["pressure"]
    t = stream["time"].to_numpy()
    angle = stream["angle"].to_numpy() if "angle" in stream else np.zeros_like(t)
    names = [tap.name for tap in cfg.taps]
    # One unwrap of the encoder gives every tap's azimuth and revolution count.
    thetas, turns = pressure.tap_azimuths(
        angle, [tap.azimuth for tap in cfg.taps], [tap.tubing_delay for tap in cfg.taps], omega_mean
    )
    readings = np.stack([stream[name].to_numpy() for name in names])
    bins = cfg.reduction.cp_bins
    revolutions = abs(omega_mean) * (t[-1] - t[0]) / (2 * np.pi)
    # Each tap's bin means, all taps in one bincount: the dead-tap test needs no more.
    width = 360.0 / bins
    cells = np.minimum((np.mod(thetas, 360.0) // width).astype(int), bins - 1)
    cells += np.arange(len(names))[:, None] * bins
    size = len(names) * bins
    sums = np.bincount(cells.ravel(), weights=(readings / q_mean).ravel(), minlength=size)
    counts = np.bincount(cells.ravel(), minlength=size)
    with np.errstate(invalid="ignore", divide="ignore"):
        per_tap = (sums / counts).reshape(len(names), bins)
    tolerances = cfg.tolerances_for(data.spec.config)
    u_per_tap = None
    if spinning:
        per_tap, u_per_tap = _tap_comparison(
            cfg, thetas, cells, counts, per_tap, q_mean, omega_mean
        )
    dead = pressure.find_dead_taps(names, per_tap, tolerance=tolerances.dead_tap, u=u_per_tap)
    measures["dead_taps"] = dead
    keep = [i for i, name in enumerate(names) if name not in dead]
    if not keep:
        raise ReductionError(data.spec.run, "every pressure tap is dead or leaking")
    grid = (np.arange(bins) + 0.5) * width
    if spinning:
        measures["revolutions"] = revolutions
        binned = pressure.bin_cp(thetas[keep], readings[keep], bins=bins, revolution=turns[keep])
        # A bin seen on a single pass has no between-revolution scatter to judge it by.
        filled = np.flatnonzero((binned.count > 0) & np.isfinite(binned.u_mean))
        mean = binned.mean[filled]
        # A bin's mean is Cp at its samples' azimuths, not at its centre: to second order it
        # exceeds Cp(centre) by Cp' d + Cp'' (s² + d²)/2 (Taylor about the centre).
        slope, curvature = pressure.azimuth_derivatives(binned.theta[filled], mean)
        at_centre = mean - slope * binned.offset[filled] - 0.5 * curvature * binned.spread[filled]
        share = np.zeros((filled.size, len(names)))
        share[:, keep] = (binned.series_count[:, filled] / binned.count[filled]).T
        points = _PressurePoints(
            binned.theta[filled],
            at_centre,
            binned.u_mean[filled],
            grid,
            filled,
            binned.count.astype(float),
            share,
        )
    else:
        # A model at rest: each tap is one point at its fixed azimuth.
        stats = [conditions.series_statistics(readings[i], t) for i in keep]
        theta = np.array([float(np.mean(thetas[i])) % 360.0 for i in keep])
        index = np.minimum((theta // width).astype(int), bins - 1)
        count = np.bincount(index, minlength=bins) * len(t)
        points = _PressurePoints(
            theta,
            np.array([s.mean for s in stats]),
            np.array([s.u_mean for s in stats]),
            grid,
            index,
            count.astype(float),
            np.eye(len(names))[keep],
        )
    return points, sorted(dead)


def _tap_comparison(cfg, thetas, cells, counts, per_tap, q_mean: float, omega_mean: float):
    """Each tap's bin means at the bin centres, and their u from the tap's own errors.

    The taps' bin means are compared with each other (pressure.find_dead_taps). Each tap leaves
    its samples at its own azimuths within a bin, so its mean is first brought to the bin centre
    (as the pooled bins are, second order in the offset); the slope of the taps' median curve
    then turns each tap's azimuth uncertainty (installed azimuth, tubing delay times ω) into Cp,
    and its scanner port adds u_scanner / q.
    """
    bins = per_tap.shape[1]
    width = 360.0 / bins
    from_centre = np.mod(thetas, 360.0) - (np.mod(cells, bins) + 0.5) * width
    size = per_tap.size
    with np.errstate(invalid="ignore", divide="ignore"):
        offset = np.bincount(cells.ravel(), from_centre.ravel(), size) / counts
        square = np.bincount(cells.ravel(), (from_centre**2).ravel(), size) / counts
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # a bin no tap saw
        reference = np.nanmedian(per_tap, axis=0)
    seen = np.flatnonzero(np.isfinite(reference))
    slope = np.zeros(bins)
    curvature = np.zeros(bins)
    centres = (seen + 0.5) * width
    slope[seen], curvature[seen] = pressure.azimuth_derivatives(centres, reference[seen])
    at_centre = (
        per_tap
        - slope * offset.reshape(per_tap.shape)
        - 0.5 * curvature * square.reshape(per_tap.shape)
    )
    u_azimuth = _azimuth_u(cfg, omega_mean)
    u_cp = np.hypot(slope[None, :] * u_azimuth[:, None], cfg.instruments.u_scanner / q_mean)
    return at_centre, u_cp


def _azimuth_u(cfg, omega: float) -> np.ndarray:
    """Each tap's azimuth uncertainty: its installed azimuth and its tubing delay times ω [deg]."""
    return np.array([np.hypot(t.u_azimuth, np.degrees(omega) * t.u_tubing_delay) for t in cfg.taps])


def _merged_pressure(campaign, spec, points: _PressurePoints, q_mean: float, dead: list[str]):
    """This run's pressure points with those of the runs named in ``pressure_with``.

    A model at rest sees only its taps' azimuths; runs at other index angles fill the circle.
    Their readings are brought to this run's q (Cp is what is shared), bin counts are added, and
    a tap dead in any of the runs is reported. A tap's scanner port is the same in every run, so
    its error enters the other runs' points too, scaled with their readings.
    """
    thetas, readings, u = [points.theta], [points.reading], [points.u_reading]
    index, count, share = [points.grid_index], points.count.copy(), [points.share]
    for other in spec.pressure_with:
        data = _load(campaign, other)
        flow = conditions.free_stream(data.streams["tunnel"], campaign.config)
        q_other = float(np.mean(flow["q"].to_numpy()))
        _, omega, _ = conditions.spin_rate(data.streams)
        omega_other = float(np.mean(omega))
        alpha_other = conditions.spin_ratio(
            omega_other, campaign.config.model.radius, float(np.mean(flow["U"].to_numpy()))
        )
        extra, dead_other = _pressure_inputs(
            campaign, data, q_other, omega_other, quality.is_spinning(alpha_other), {}
        )
        scale = q_mean / q_other
        thetas.append(extra.theta)
        readings.append(extra.reading * scale)
        u.append(extra.u_reading * scale)
        index.append(extra.grid_index)
        share.append(extra.share * scale)
        count += extra.count
        dead += [f"{tap} ({other})" for tap in dead_other]
    merged = _PressurePoints(
        np.concatenate(thetas),
        np.concatenate(readings),
        np.concatenate(u),
        points.grid,
        np.concatenate(index),
        count,
        np.concatenate(share),
    )
    return merged, dead


def drift_uncertainty(values: np.ndarray, time: np.ndarray) -> float:
    """Standard uncertainty of a record's least-squares change b (t_N − t_1), from its noise.

    u(b) = s_r / sqrt(Σ (t_i − t̄)²) · sqrt(N / N_eff), with s_r the residuals' standard
    deviation about the line (N − 2 degrees of freedom) and N_eff their effective sample size
    (:func:`conditions.effective_sample_size`): for noise that is correlated over times short
    against the record, the variance of a regression slope grows by the same factor N / N_eff
    as that of the mean: least squares on a polynomial trend is asymptotically efficient, with
    the variance set by the noise spectrum at zero frequency (U. Grenander, Ann. Math. Stat. 25
    (1954) 252–272, from memory).
    NaN for fewer than three samples.
    """
    x, t = np.asarray(values, dtype=float), np.asarray(time, dtype=float)
    if x.size < 3:
        return float("nan")
    tc = t - t.mean()
    slope = np.dot(tc, x - x.mean()) / np.dot(tc, tc)
    residuals = x - x.mean() - slope * tc
    s_r = np.sqrt(np.dot(residuals, residuals) / (x.size - 2))
    inflation = np.sqrt(x.size / conditions.effective_sample_size(residuals))
    return float(s_r / np.sqrt(np.dot(tc, tc)) * inflation * (t[-1] - t[0]))


def _tunnel_inputs(cfg, tunnel, fs, measures: dict) -> dict:
    t = tunnel["time"].to_numpy()
    column = "dp_pitot" if cfg.tunnel.q_source == "pitot" else "dp_contraction"
    stats = {
        name: conditions.series_statistics(tunnel[name].to_numpy(), t)
        for name in (column, "T", "p_baro", "RH")
    }
    u_speed = conditions.series_statistics(fs["U"].to_numpy(), t)
    measures["speed_drift"] = abs(u_speed.drift) / u_speed.mean
    measures["u_speed_drift"] = drift_uncertainty(fs["U"].to_numpy(), t) / u_speed.mean
    measures["temperature_drift"] = abs(stats["T"].drift)
    means = {"dp" if name == column else name: (s.mean, s.u_mean) for name, s in stats.items()}
    return air_data_inputs(cfg, means)


def air_data_inputs(cfg, means: dict[str, tuple[float, float]]) -> dict[str, Input]:
    """The tunnel's run-level inputs from its record means and their type-A u.

    ``means`` maps ``dp`` (the q_source's reading), ``T``, ``p_baro``, ``RH`` to (mean, u of the
    mean) in SI; the instruments' specification terms come from campaign.toml. Public so that a
    test plan (tunnelred.products.plan) builds the inputs a run would have.
    """
    column = "dp_pitot" if cfg.tunnel.q_source == "pitot" else "dp_contraction"
    ins = cfg.instruments
    dp, u_dp = means["dp"]
    u_dp_b = float(np.hypot(ins.u_pitot, ins.u_pitot_relative * abs(dp)))
    inputs = {
        "dp": Input(dp, u_dp, "A", f"{column} (time average)"),
        "dp_spec": Input(0.0, u_dp_b, "B", f"{column} transducer"),
        "T": Input(*means["T"], "A", "air temperature (time average)"),
        "T_spec": Input(0.0, ins.u_thermometer, "B", "thermometer"),
        "p": Input(*means["p_baro"], "A", "barometric pressure"),
        "p_spec": Input(0.0, ins.u_barometer, "B", "barometer"),
        "RH": Input(*means["RH"], "A", "relative humidity"),
        "RH_spec": Input(0.0, ins.u_hygrometer, "B", "hygrometer"),
    }
    if cfg.tunnel.q_source == "contraction":
        inputs["k_contraction"] = Input(
            cfg.tunnel.contraction_factor,
            cfg.tunnel.u_contraction_factor,
            "B",
            "contraction factor",
        )
    return inputs


def _stream_overlap(streams) -> float:
    spans = [(s["time"].values[0], s["time"].values[-1]) for s in streams.values()]
    start = max(a for a, _ in spans)
    end = min(b for _, b in spans)
    longest = max(b - a for a, b in spans)
    return max(0.0, end - start) / longest if longest > 0 else 1.0


# --------------------------------------------------------------------------------------------
# The run-level model


def run_model(
    cfg,
    *,
    has_balance: bool,
    pressure_points: PressureModel | None = None,
    integrate: bool = False,
    calibration: _CalibrationStep | None = None,
):
    """The vectorised map from run-level inputs to every reported quantity.

    ``pressure_points`` is the run's :class:`PressureModel` (None: no pressure log);
    ``integrate`` is False when its points leave a gap too wide for the pressure forces;
    ``calibration`` adds the loads' change with the balance coefficients (calibration_file).
    """
    theta_bins = None if pressure_points is None else pressure_points.theta
    model_cfg, red = cfg.model, cfg.reduction
    # Config resolved the method once (the 3-D substitution included); it is applied as it is.
    method = corrections.METHODS[red.blockage]

    def model(x: dict) -> dict:
        temperature = x["T"] + x["T_spec"]
        p = x["p"] + x["p_spec"]
        rh = np.clip(x["RH"] + x["RH_spec"], 0.0, 1.0)
        qc = x["dp"] + x["dp_spec"]
        if "k_contraction" in x:
            qc = qc * x["k_contraction"]
        rho = air.density(temperature, p, rh)
        mu = air.viscosity(temperature)
        q_u = conditions.dynamic_pressure(qc, p)
        U_u = conditions.velocity(q_u, rho)
        d, b, h = x["diameter"], x["span"], x["height"]
        radius = d / 2
        omega = x["omega"] * (1 + x["omega_spec"])
        alpha_u = conditions.spin_ratio(omega, radius, U_u)
        Re_u = conditions.reynolds_number(rho, U_u, d, mu)
        out = {
            "T": temperature,
            "p_baro": p,
            "RH": rh,
            "rho": rho,
            "mu": mu,
            "Mach": conditions.mach_number(U_u, air.speed_of_sound(temperature)),
            "omega": omega,
            "Gamma": conditions.circulation(omega, radius),
        }
        nan = np.full_like(q_u, np.nan)
        if has_balance:
            loads = [
                # The tare was read through the same calibration as the run.
                (x[n] + x[f"{n}_spec"] - x[f"{n}_tare"]) * x["calibration"]
                for n in ("Fx", "Fy", "Mz")
            ]
            if calibration is not None:
                step = (x["calibration_coefficients"] - calibration.coefficients) @ (
                    calibration.sensitivity.T
                )
                loads = [load + step[..., k] for k, load in enumerate(loads)]
            drag, lift = balance.balance_to_wind(
                loads[0], loads[1], x["alignment"] - x["flow_angle"]
            )
            coeffs = balance.force_coefficients(lift, drag, loads[2], q_u, U_u, omega, d, b)
        else:
            coeffs = {k: nan for k in ("CL", "CD", "CM", "C_power", "L_D")}
        cp_u = None
        CL_p, CD_p = nan, nan
        if theta_bins is not None:
            pm = pressure_points
            head = pressure.centrifugal_head(rho, omega, radius, model_cfg.transducer_radius)
            # Each point pools its taps' samples: their scanner ports' errors and azimuth errors
            # enter in the shares of their samples; an azimuth error δ (assigned minus true
            # azimuth) read the curve at θ − δ, so Cp(θ) is the reading plus its slope times δ.
            delta = x["tap_azimuth"] @ pm.share.T + x["encoder"][..., None]
            # The delays were turned into azimuth with the measured spin rate: its error too.
            delta = delta - np.degrees((omega - pm.omega)[..., None] * pm.delay)
            p_tap = x["p_bin"] + x["p_scanner"] @ pm.share.T + pm.slope * delta + head[..., None]
            cp_u = p_tap / q_u[..., None]
        if theta_bins is not None and integrate:
            CL_p, CD_p = pressure.integrate_cp(theta_bins, cp_u, max_gap=red.max_tap_gap)
            if "quadrature_CL_p" in x:  # the rule's own error at the points' spacing
                CL_p, CD_p = CL_p + x["quadrature_CL_p"], CD_p + x["quadrature_CD_p"]
        cd_for_wake = coeffs["CD"] if has_balance else CD_p
        cl_for_lift = coeffs["CL"] if has_balance else CL_p
        wc = corrections.wall_correction(
            method,
            diameter=d,
            height=h,
            span=b,
            width=x["width"],
            drag_coefficient=cd_for_wake,
            lift_coefficient=cl_for_lift,
            dynamic_pressure=q_u,
            static_pressure_gradient=x["dpdx"],
            blockage_factor=red.maskell_factor,
            lift_interference=red.lift_interference,
            buoyancy=red.buoyancy,
            spans_section=model_cfg.spans_section,
        )
        corrected = corrections.apply_wall_correction(
            wc,
            U=U_u,
            q=q_u,
            alpha=alpha_u,
            Re=Re_u,
            CL=coeffs["CL"],
            CD=coeffs["CD"],
            CM=coeffs["CM"],
            C_power=coeffs["C_power"],
            CL_p=CL_p,
            CD_p=CD_p,
            Cp=cp_u,
            truncation=x["wall_truncation"],
        )
        for name in ("U", "q", "Re", "alpha", "CL", "CD", "CM", "C_power", "CL_p", "CD_p"):
            out[name] = np.broadcast_to(corrected[name], q_u.shape)
        out["L_D"] = np.where(out["CD"] != 0, out["CL"] / out["CD"], np.nan)
        uncorrected = {"q": q_u, "U": U_u, "Re": Re_u, "alpha": alpha_u, "CL_p": CL_p, "CD_p": CD_p}
        uncorrected.update(coeffs)
        for name, value in uncorrected.items():
            out[f"{name}_uncorrected"] = value
        out["eps_solid"] = np.broadcast_to(wc.eps_solid, q_u.shape)
        out["eps_wake"] = np.broadcast_to(wc.eps_wake, q_u.shape)
        out["delta_CD_buoyancy"] = np.broadcast_to(wc.delta_CD_buoyancy, q_u.shape)
        out["delta_alpha_lift"] = np.broadcast_to(wc.delta_alpha_lift, q_u.shape)
        # The potential-flow comparison is part of the model, so that it carries an uncertainty.
        out["CL_ideal"] = theory.lift_coefficient(out["alpha"])
        with np.errstate(invalid="ignore", divide="ignore"):
            out["lift_efficiency"] = np.where(
                out["alpha"] != 0, out["CL"] / out["CL_ideal"], np.nan
            )
        out["theta_stag_ideal"] = theory.stagnation_angles(out["alpha"])[0]
        for name in ("theta_stag", "Cp_max", "Cp_min", "theta_Cp_min", "Cp_base"):
            out[name] = nan
        if cp_u is not None:
            out["Cp"] = corrected["Cp"]
            out["Cp_uncorrected"] = cp_u
            features = theory.surface_features(theta_bins, out["Cp"], base_arc=red.base_arc)
            # An azimuth error moves the measured features along θ with the whole curve.
            mean_delta = np.mean(delta, axis=-1)
            for name, value in features.items():
                shift = mean_delta if name.startswith("theta") else 0.0
                out[name] = np.broadcast_to(value - shift, q_u.shape)
        return out

    return model


def geometry_inputs(cfg) -> dict[str, Input]:
    """The geometry, flow angle, gradient and wall-correction inputs of every run."""
    t, m = cfg.tunnel, cfg.model
    return {
        "diameter": Input(m.diameter, m.u_diameter, "B", "model diameter"),
        "span": Input(m.span, m.u_span, "B", "model span"),
        "height": Input(t.height, t.u_height, "B", "test-section height"),
        "width": Input(t.width, t.u_width, "B", "test-section width"),
        "flow_angle": Input(t.flow_angle, t.u_flow_angle, "B", "flow angularity [deg]"),
        "dpdx": Input(
            t.static_pressure_gradient,
            t.u_static_pressure_gradient,
            "B",
            "static-pressure gradient",
        ),
        # The first-order wall correction's own uncertainty, in units of its second-order
        # residue (corrections.drag_factor_residue).
        "wall_truncation": Input(0.0, 1.0, "B", "wall correction, second-order terms"),
    }


# --------------------------------------------------------------------------------------------
# One run


def reduce_run(campaign, run_id: str, *, monte_carlo: int = 0, seed: int = 0) -> RunResult:
    """Reduce one data run of an opened campaign.

    Parameters
    ----------
    campaign : tunnelred.inputs.readers.Campaign
        From :func:`tunnelred.open_campaign`.
    run_id : str
        A data run's id from runs.csv.
    monte_carlo : int, optional
        Number of Monte Carlo draws (JCGM 101:2008) to check the linear propagation; 0 skips it.
    seed : int, optional
        Seed of the Monte Carlo draws.

    Returns
    -------
    RunResult

    Raises
    ------
    InputError
        The run's inputs (or those of its zero and tare runs) have problems.
    ReductionError
        The inputs are valid but the run cannot be reduced as configured.
    """
    cfg = campaign.config
    spec = campaign.runs[run_id]
    if spec.kind != "data":
        raise ReductionError(run_id, f"is a {spec.kind} run; only data runs are reduced")
    data = _load(campaign, run_id)
    if "tunnel" not in data.streams:
        raise ReductionError(run_id, "has no tunnel log", "runs.csv", spec.line)
    measures: dict = {}
    tunnel = data.streams["tunnel"]
    fs = conditions.free_stream(tunnel, cfg)
    implausible = plausibility.run_problems(cfg, data, fs)
    if implausible:
        raise InputError(implausible)
    inputs = _tunnel_inputs(cfg, tunnel, fs, measures)
    inputs.update(geometry_inputs(cfg))
    spin = _spin_inputs(cfg, data, fs, measures)
    inputs.update(spin.inputs)
    measures["stream_overlap"] = _stream_overlap(data.streams)

    has_balance = "balance" in data.streams
    calibration = None
    correlation: dict[tuple[str, str], float] = {}
    if has_balance:
        balance_inputs, records = _balance_inputs(campaign, spec, data, spin.omega_mean, measures)
        inputs.update(balance_inputs)
        correlation.update(_shared_fluctuation(cfg, tunnel, records, inputs))
        calibration = _calibration_step(campaign, spec, data, spin.omega_mean)
    if calibration is not None:
        inputs.update(calibration.inputs)

    q_mean = float(np.mean(fs["q"].to_numpy()))
    taps = _pressure_step(campaign, spec, data, q_mean, spin, measures)
    inputs.update(taps.inputs)

    model = run_model(
        cfg,
        has_balance=has_balance,
        pressure_points=taps.model,
        integrate=taps.integrate,
        calibration=calibration,
    )
    if calibration is not None:
        correlation.update(calibration.correlation)
    linear = propagate_linear(model, inputs, correlation=correlation)

    values = _run_values(spec, linear, measures, taps.dead_taps)
    theta, profiles = _profiles(taps.points, linear, values["alpha"])
    _agreement_measures(measures, values, linear, has_balance and taps.integrate, taps.points)
    measures.update(
        speed_set=values["speed_set"],
        U_measured=values["U_uncorrected"],
        spin_set=values["spin_set"],
        spin_rpm=abs(values["omega"]) * quality.RPM_PER_RAD_S,
    )

    if monte_carlo:
        mc = propagate_monte_carlo(
            model, inputs, correlation=correlation, draws=monte_carlo, seed=seed
        )
        for name in RUN_OUTPUTS:
            values[f"u_{name}_mc"] = float(np.asarray(mc.u[name]).reshape(-1)[0])

    # A key that is not a RunMeasures field is a TypeError here, never a silently skipped check.
    run_measures = quality.RunMeasures(**measures)
    flags = tuple(quality.check_run(run_measures, cfg.tolerances_for(spec.config)))
    values.update(quality.flag_columns(flags))
    return RunResult(
        run=run_id,
        config=spec.config,
        values=values,
        theta=theta,
        profiles=profiles,
        flags=flags,
        budgets=_budget_table(linear, values, run_id),
        inputs=_files_used(campaign, spec),
    )


@dataclass(frozen=True)
class _SpinStep:
    """The spin rate as run-level inputs, and whether the run counts as spinning."""

    inputs: dict[str, Input]
    omega_mean: float  # [rad/s]
    spinning: bool  # quality.is_spinning of the time-mean spin ratio


def _spin_inputs(cfg, data, fs, measures: dict) -> _SpinStep:
    """Spin rate (tachometer or encoder) with its u, and the spin-steadiness measures."""
    t_spin, omega_t, spin_source = conditions.spin_rate(data.streams)
    omega_stats = conditions.series_statistics(omega_t, t_spin)
    omega_mean = omega_stats.mean
    inputs = spin_rate_inputs(
        cfg, omega_mean, omega_stats.u_mean, spin_source, t_spin[-1] - t_spin[0]
    )
    tunnel_time = data.streams["tunnel"]["time"].to_numpy()
    steadiness = conditions.spin_steadiness(
        t_spin, omega_t, tunnel_time, fs["U"].to_numpy(), cfg.model.radius
    )
    spinning = quality.is_spinning(steadiness.alpha_mean)
    if spinning:
        measures["spin_scatter"] = steadiness.scatter
        measures["spin_drift"] = abs(steadiness.drift)
    return _SpinStep(inputs, omega_mean, spinning)


def spin_rate_inputs(
    cfg, omega: float, u_omega: float, source: str, duration: float
) -> dict[str, Input]:
    """The spin rate's run-level inputs: its mean [rad/s] with type-A u, and its instrument.

    ``source`` is "tachometer" or "encoder" (an encoder's rate is two angle readings over the
    record ``duration`` [s]). Public so that a test plan builds the inputs a run would have.
    """
    if source == "tachometer":
        u_omega_rel = cfg.instruments.u_tachometer_relative
    else:
        u_omega_rel = np.sqrt(2) * np.radians(cfg.instruments.u_encoder) / duration
        u_omega_rel = u_omega_rel / abs(omega) if omega else 0.0
    return {
        "omega": Input(omega, u_omega, "A", f"spin rate ({source})"),
        "omega_spec": Input(0.0, u_omega_rel, "B", f"{source} (relative)"),
    }


@dataclass(frozen=True)
class PressureModel:
    """What the run model needs of the pressure points besides their readings (constants)."""

    theta: np.ndarray  # azimuth of each point [deg]
    share: np.ndarray  # (points, taps): fraction of each point's samples from each tap [-]
    slope: np.ndarray  # d(reading)/dθ at each point, from the readings [Pa/deg]
    omega: float  # the spin rate the taps' delays were turned into azimuth with [rad/s]
    delay: np.ndarray  # each point's sample-weighted tubing delay [s]


@dataclass(frozen=True)
class _PressureStep:
    """The surface-pressure part of a run: its points (None without taps) and their inputs."""

    points: _PressurePoints | None
    dead_taps: list[str]
    integrate: bool  # False when the points leave a gap too wide for the pressure forces
    inputs: dict[str, Input]
    model: PressureModel | None = None


def _pressure_step(campaign, spec, data, q_mean: float, spin: _SpinStep, measures: dict):
    cfg = campaign.config
    if "pressure" not in data.streams or not cfg.taps:
        return _PressureStep(None, [], False, {})
    points, dead_taps = _pressure_inputs(
        campaign, data, q_mean, spin.omega_mean, spin.spinning, measures
    )
    if spec.pressure_with:
        points, dead_taps = _merged_pressure(campaign, spec, points, q_mean, dead_taps)
    inputs = pressure_run_inputs(cfg, points.reading, points.u_reading, spin.omega_mean)
    delays = np.array([tap.tubing_delay for tap in cfg.taps])
    model = PressureModel(
        points.theta,
        points.share,
        reading_slope(points.theta, points.reading),
        spin.omega_mean,
        points.share @ delays,
    )
    integrate = True
    try:
        pressure.integrate_cp(points.theta, points.reading, max_gap=cfg.reduction.max_tap_gap)
    except pressure.CpGapError as exc:
        # The balance result stands; only the pressure forces are left out.
        integrate = False
        measures["pressure_gap"] = str(exc)
    if integrate:
        u_rule = pressure.quadrature_uncertainty(points.theta, points.reading / q_mean)
        if np.isfinite(u_rule):
            for name in ("CL_p", "CD_p"):
                inputs[f"quadrature_{name}"] = Input(0.0, u_rule, "B", f"{name} quadrature")
    return _PressureStep(points, dead_taps, integrate, inputs, model)


def _at_bin_centres(points: _PressurePoints, values) -> np.ndarray:
    """A curve known at the points (Cp) read at their grid bins' centres instead.

    The results give Cp at the bin centres; a tap of a model at rest reads it at its own azimuth,
    up to half a bin away, which on a steep Cp(θ) is several times u(Cp). As the spinning bins
    are, each such value is moved to its centre to second order (Cp' d + Cp'' d²/2), the
    derivatives from all the points' curve (merged index runs included). Binned points already
    sit at their centres; the integration keeps the points where they were measured.
    """
    values = np.asarray(values, dtype=float).reshape(-1)
    centre = points.grid[points.grid_index]
    offset = np.mod(points.theta - centre + 180.0, 360.0) - 180.0
    if not np.any(np.abs(offset) > 1e-9):
        return values
    slope, curvature = _point_derivatives(points.theta, values)
    return values - slope * offset - 0.5 * curvature * offset**2


def pressure_run_inputs(
    cfg, reading: np.ndarray, u_reading: np.ndarray, omega: float
) -> dict[str, Input]:
    """The taps' run-level inputs: each point's mean reading [Pa] with type-A u, and per tap
    its scanner port and its azimuth error (installed azimuth, tubing delay times ``omega``).

    Public so that a test plan (tunnelred.products.plan) builds the inputs a run would have.
    """
    n_taps = len(cfg.taps)
    return {
        "p_bin": Input(reading, u_reading, "A", "tap pressure per bin"),
        "p_scanner": Input(
            np.zeros(n_taps), np.full(n_taps, cfg.instruments.u_scanner), "B", "scanner, per tap"
        ),
        "tap_azimuth": Input(
            np.zeros(n_taps),
            _azimuth_u(cfg, omega),
            "B",
            "tap azimuth, per tap (installed, delay)",
        ),
        "encoder": Input(0.0, cfg.instruments.u_encoder, "B", "encoder zero"),
    }


def reading_slope(theta: np.ndarray, reading: np.ndarray) -> np.ndarray:
    """dp/dθ at each point [Pa/deg], points at one azimuth (merged index runs) sharing one."""
    return _point_derivatives(theta, reading)[0]


def _point_derivatives(theta: np.ndarray, values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Slope and curvature of the points' curve at each point, points at one azimuth averaged."""
    distinct, which = np.unique(np.mod(theta, 360.0), return_inverse=True)
    mean = np.bincount(which, weights=values) / np.bincount(which)
    slope, curvature = pressure.azimuth_derivatives(distinct, mean)
    return slope[which], curvature[which]


def _run_values(spec, linear, measures: dict, dead_taps: list[str]) -> dict[str, float | str]:
    """The run's row of results: set points, every output with its u, and the measures."""
    values: dict[str, float | str] = {
        "config": spec.config,
        "start": spec.start.isoformat(),
        "speed_set": np.nan if spec.speed_set is None else spec.speed_set,
        "spin_set": np.nan if spec.spin_set is None else spec.spin_set,
        "provisional": bool(spec.provisional),
    }
    for name in RUN_OUTPUTS:
        values[name] = float(np.asarray(linear.values[name]).reshape(-1)[0])
        values[f"u_{name}"] = float(np.asarray(linear.u[name]).reshape(-1)[0])
    values["corr_CL_alpha"] = _safe_correlation(linear, "CL", "alpha")
    for name in ("spin_scatter", "spin_drift", "speed_drift", "temperature_drift", "zero_shift"):
        values[name] = float(np.max(measures.get(name, np.nan)))
    values["revolutions"] = float(measures.get("revolutions", np.nan))
    values["overload"] = float(np.max(measures.get("overload", np.nan)))
    values["stream_overlap"] = float(measures["stream_overlap"])
    values["dead_taps"] = ";".join(dead_taps)
    return values


def _profiles(points: _PressurePoints | None, linear, alpha: float):
    """Cp and its u on the results' theta grid (None and {} for a run without taps)."""
    if points is None:
        return None, {}
    theta = points.grid
    # Points sharing a bin (merged index runs) are averaged there, their u as for a mean of
    # independent values.
    n = np.bincount(points.grid_index, minlength=theta.size)

    def on_grid(v, power=1):
        total = np.bincount(points.grid_index, np.asarray(v).reshape(-1) ** power, theta.size)
        with np.errstate(invalid="ignore", divide="ignore"):
            mean = np.where(n > 0, total / n, np.nan)
        return mean if power == 1 else np.sqrt(mean / n)

    profiles = {
        "Cp": on_grid(_at_bin_centres(points, linear.values["Cp"])),
        "u_Cp": on_grid(linear.u["Cp"], power=2),
        "Cp_uncorrected": on_grid(_at_bin_centres(points, linear.values["Cp_uncorrected"])),
        "Cp_count": points.count,
        "Cp_ideal": theory.cp_surface(theta, alpha),
    }
    return theta, profiles


def _agreement_measures(measures: dict, values: dict, linear, both: bool, points) -> None:
    """The measures judged on the reduced values: Cp_max, balance/pressure lift, alpha."""
    if points is not None:
        measures["Cp_max"] = values["Cp_max"]
        if np.isfinite(values["u_Cp_max"]):
            measures["u_Cp_max"] = values["u_Cp_max"]
    if both:
        measures.update(
            CL=values["CL"],
            u_CL=values["u_CL"],
            CL_p=values["CL_p"],
            u_CL_p=values["u_CL_p"],
            corr_CL_CL_p=_safe_correlation(linear, "CL", "CL_p"),
        )
    measures["alpha"] = values["alpha"]


def _budget_table(linear, values: dict, run_id: str) -> pd.DataFrame | None:
    # An exact result (alpha of a model at rest) has no variance to share out.
    budgeted = [n for n in BUDGET_OUTPUTS if np.isfinite(values[n]) and values[f"u_{n}"] > 0]
    if not budgeted:
        return None
    table = linear.budgets(budgeted)
    table.insert(0, "run", run_id)
    return table


def _safe_correlation(linear, a: str, b: str) -> float:
    try:
        value = linear.correlation(a, b)
    except (KeyError, ValueError, ZeroDivisionError):
        return float("nan")
    return float(value) if np.isfinite(value) else float("nan")
