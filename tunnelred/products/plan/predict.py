"""One planned point: the run a test would record there, built as the reduction's inputs.

The prediction reuses the reduction's run model and its GUM propagation
(:func:`tunnelred.engine.reduction.run_model`,
:func:`tunnelred.physics.uncertainty.propagate_linear`): the planned conditions and the prior's
coefficients give each input's nominal value, the instruments' declared uncertainties
(campaign.toml) its type-B terms, and the stated noise levels with the record length its
type-A terms. Each record's type-A u is the one the reduction will estimate from such a record:
the stated noise model gives the record's autocovariance (turbulence AR(1), white noise, the
shedding's narrow band, the imbalance's once-per-revolution tone), and
:func:`tunnelred.physics.series.expected_record_statistics` applies the reduction's own
N_eff estimator to its expected lag sums.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from tunnelred.engine import plausibility, quality, reduction
from tunnelred.physics import air, balance, conditions, corrections, pressure, series, theory
from tunnelred.physics.uncertainty import propagate_linear
from tunnelred.products.plan.levels import AirState, NoiseLevels
from tunnelred.products.plan.matrix import PlannedPoint
from tunnelred.products.plan.prior import Prior

__all__ = ["PointPrediction", "predict_point", "PREDICTED"]

#: Outputs whose predicted standard uncertainty the plan reports (u_Cp_max: the largest over
#: the azimuth points).
PREDICTED = ("alpha", "CL", "CD", "CM", "C_power", "CL_p", "CD_p")
_BUDGETED = ("alpha", "CL", "CD", "CM")
_LOADS = ("Fx", "Fy", "Mz")


@dataclass
class PointPrediction:
    """One row of plan.csv (``values``), its budgets and its warnings."""

    point: PlannedPoint
    values: dict[str, float | str]
    budgets: pd.DataFrame | None
    warnings: list[str]
    theta: np.ndarray | None = None
    u_Cp: np.ndarray | None = None


def _lags(record: float, rate: float) -> np.ndarray:
    """The lag times [s] of a record of this length and sample rate (at least two samples)."""
    return np.arange(max(2, int(round(record * rate)))) / rate


def _ar1(lags: np.ndarray, variance, tau: float) -> np.ndarray:
    """Autocovariance of a fluctuation with correlation time tau (AR(1), exponential)."""
    return np.multiply.outer(np.asarray(variance, dtype=float), np.exp(-lags / tau))


def _white(lags: np.ndarray, variance) -> np.ndarray:
    return np.multiply.outer(np.asarray(variance, dtype=float), (lags == 0.0).astype(float))


def _band(lags: np.ndarray, variance, frequency: float, bandwidth: float) -> np.ndarray:
    """A spectral line at ``frequency`` [Hz] of relative full width at half maximum
    ``bandwidth`` (a Lorentzian: the correlation cos(2 pi f t) exp(-pi B f t)); 0: a tone."""
    shape = np.cos(2.0 * np.pi * frequency * lags) * np.exp(-np.pi * bandwidth * frequency * lags)
    return np.multiply.outer(np.asarray(variance, dtype=float), shape)


def _u_of_mean(gamma: np.ndarray) -> np.ndarray:
    """The type-A u of the mean the reduction will report, per record (last axis: lag)."""
    gamma = np.atleast_2d(gamma)
    out = []
    for row in gamma:
        s, n_eff = series.expected_record_statistics(row)
        out.append(s / np.sqrt(n_eff))
    return np.array(out)


@dataclass(frozen=True)
class _Planned:
    """The nominal state of a planned point, independent of its record length."""

    rho: float
    q: float
    dp: float  # the q source's reading [Pa]
    omega: float  # [rad/s]
    alpha: float
    coefficients: tuple[float, float, float]
    loads: np.ndarray  # Fx, Fy, Mz on the balance axes [N, N, N m]
    outside_prior: bool


def _nominal(
    cfg,
    point: PlannedPoint,
    prior: Prior,
    air_state: AirState,
    scale=(1.0, 1.0, 1.0),
    alpha_free: float = 1.0,
) -> _Planned:
    """The point's nominal state; ``scale`` turns the prior's free-air CL, CD, CM into the
    tunnel's (uncorrected over corrected, from the run model's own wall correction), and the
    prior is read at the free-air spin ratio, ``alpha_free`` times the tunnel's."""
    m, t = cfg.model, cfg.tunnel
    radius = m.diameter / 2.0
    rho = float(air.density(air_state.T, air_state.p_baro, air_state.RH))
    U = point.speed_set
    q = 0.5 * rho * U * U
    dp = float(conditions.impact_pressure(q, air_state.p_baro))
    if t.q_source == "contraction":
        dp = dp / t.contraction_factor
    omega = point.omega(radius)
    alpha = float(conditions.spin_ratio(omega, radius, U))
    cl, cd, cm, outside = prior.coefficients(point.config, alpha * alpha_free)
    cl, cd, cm = cl * scale[0], cd * scale[1], cm * scale[2]
    area = m.diameter * m.span
    lift, drag, torque = cl * q * area, cd * q * area, cm * q * area * radius
    phi = cfg.instruments.balance.alignment_angle - t.flow_angle
    # The inverse of balance_to_wind is the rotation by -phi.
    fx, fy = balance.balance_to_wind(drag, lift, -phi)
    loads = np.array([float(fx), float(fy), float(torque)])
    return _Planned(rho, q, dp, omega, alpha, (cl, cd, cm), loads, outside)


def _inputs(cfg, point: PlannedPoint, nom: _Planned, noise: NoiseLevels, air_state, record):
    """The run-level inputs and correlations a run of this record length would have."""
    b = cfg.instruments.balance
    q_rel = 2.0 * noise.turbulence  # q = rho U^2 / 2
    lags_t = _lags(record, point.tunnel_rate)
    dp_record = _ar1(lags_t, (nom.dp * q_rel) ** 2, noise.turbulence_time) + _white(
        lags_t, noise.pitot_noise**2
    )
    u_dp = float(_u_of_mean(dp_record)[0])
    # The run's mean flow is the measurand (docs/methods.md): dp's u is the record's white noise
    # as the reduction estimates it, the flow's unsteadiness goes to dp_flow.
    u_noise = np.sqrt(series.expected_white_noise_variance(dp_record) / lags_t.size)
    u_noise = min(float(u_noise), u_dp) if np.isfinite(u_noise) else u_dp
    inputs = reduction.air_data_inputs(
        cfg,
        {
            "dp": (nom.dp, u_noise),
            "dp_flow": (0.0, float(np.sqrt(u_dp**2 - u_noise**2))),
            "T": (air_state.T, 0.0),
            "p_baro": (air_state.p_baro, 0.0),
            "RH": (air_state.RH, 0.0),
        },
    )
    inputs.update(reduction.geometry_inputs(cfg))
    spin_source = "tachometer"
    lags_b = _lags(record, point.balance_rate)
    jitter = _ar1(lags_b, (nom.omega * noise.spin_jitter) ** 2, noise.spin_jitter_time)
    u_omega = float(_u_of_mean(jitter)[0])
    inputs.update(reduction.spin_rate_inputs(cfg, nom.omega, u_omega, spin_source, record))
    u_record = _u_of_mean(_load_records(cfg, point, nom, noise, lags_b))
    # The wind-off records: the zeros (at rest: the balance's noise alone) and the spin tares
    # (spinning: the imbalance's tone on top), each its own record of wind_off_record.
    lags_w = _lags(noise.wind_off_record, point.balance_rate)
    white = _white(lags_w, _white_loads(cfg, noise) ** 2)
    u_zero = _u_of_mean(white)
    u_tare = np.zeros(3)
    if nom.omega != 0.0:
        u_tare = _u_of_mean(white + _imbalance(lags_w, nom.omega, noise))
    inputs.update(
        reduction.balance_load_inputs(b, nom.loads, np.hypot(u_record, u_zero), np.zeros(3), u_tare)
    )
    # The loads follow q sample by sample: their means and dp's share the turbulence. Its
    # part of each mean's variance, a_i^2 = var(turbulence's mean) / var(the record's mean),
    # gives the means' correlation a_i a_j (one common fluctuation: a valid correlation matrix);
    # the reduction estimates it from the records (conditions.correlation_of_means) and scales
    # it, as here, by the share of each input's u that is its own record's.
    turbulence = [_ar1(lags_t, (nom.dp * q_rel) ** 2, noise.turbulence_time)]
    turbulence += list(_ar1(lags_b, (nom.loads * q_rel) ** 2, noise.turbulence_time))
    whole = [dp_record, *_load_records(cfg, point, nom, noise, lags_b)]
    a = []
    signs = np.sign([nom.dp, *nom.loads])
    for sign, part, record_gamma in zip(signs, turbulence, whole, strict=True):
        total = series.variance_of_the_mean(record_gamma)
        turbulent = series.variance_of_the_mean(part) / total if total > 0 else 0.0
        a.append(sign * np.sqrt(min(turbulent, 1.0)))
    # The loads correlate with dp_flow, its share of the dp record's u above 1 by the noise
    # part, as in the reduction (reduction.input_correlations scales both alike).
    named = ["dp_flow", *_LOADS]
    own = [u_dp, *u_record]
    share = [
        o / float(inputs[n].u) if inputs[n].u > 0 else 0.0 for n, o in zip(named, own, strict=True)
    ]
    correlation = reduction.input_correlations(named, np.outer(a, a), share)
    calibration = _calibration(cfg, nom)
    if calibration is not None:
        inputs.update(calibration.inputs)
        correlation.update(calibration.correlation)
    taps = None
    if point.pressure_rate > 0 and cfg.taps:
        taps = _tap_inputs(cfg, point, nom, noise, record, quality.is_spinning(nom.alpha), q_rel)
        inputs.update(taps[0])
    return inputs, correlation, taps, calibration


def _white_loads(cfg, noise: NoiseLevels) -> np.ndarray:
    return noise.balance_noise * np.array(cfg.instruments.balance.full_scale)


def _imbalance(lags: np.ndarray, omega: float, noise: NoiseLevels) -> np.ndarray:
    """The once-per-revolution force m e omega^2 on Fx and Fy (a tone, F^2/2 on each)."""
    force = noise.imbalance * omega**2
    tone = _band(lags, force**2 / 2.0, abs(omega) / (2.0 * np.pi), 0.0)
    return np.stack([tone, tone, np.zeros_like(tone)])


def _load_records(cfg, point, nom: _Planned, noise: NoiseLevels, lags: np.ndarray) -> np.ndarray:
    """Autocovariance of each load record (Fx, Fy, Mz) a run at this point would hold."""
    gamma = _ar1(lags, (nom.loads * 2.0 * noise.turbulence) ** 2, noise.turbulence_time)
    gamma += _white(lags, _white_loads(cfg, noise) ** 2)
    frequency = _STROUHAL * point.speed_set / cfg.model.diameter
    gamma += _band(lags, _shedding(cfg, nom, noise) ** 2, frequency, noise.shedding_bandwidth)
    if nom.omega != 0.0:
        gamma += _imbalance(lags, nom.omega, noise)
    return gamma


def _calibration(cfg, nom: _Planned):
    """The calibration file's covariance, acting through the net signals of the point's loads."""
    b = cfg.instruments.balance
    if b.coefficient_covariance is None:
        return None
    second = None if b.second_order is None else np.array(b.second_order)
    signals = balance.signals_from_loads(nom.loads, np.array(b.matrix), second)
    terms = balance.calibration_terms(signals, second_order=second is not None)
    return reduction.calibration_from_terms(b, np.asarray(terms).reshape(-1))


_STROUHAL = 0.2  # vortex shedding of a circular cylinder (common practice)


def _shedding(cfg, nom: _Planned, noise: NoiseLevels) -> np.ndarray:
    """RMS of the shedding loads on the balance axes [N, N, N m] (lift only)."""
    cl_rms = noise.unsteady_cl * np.exp(-((nom.alpha / noise.unsteady_cl_decay) ** 2))
    lift = cl_rms * nom.q * cfg.model.diameter * cfg.model.span
    phi = np.radians(cfg.instruments.balance.alignment_angle - cfg.tunnel.flow_angle)
    return np.array([abs(lift * np.sin(phi)), abs(lift * np.cos(phi)), 0.0])


def _tap_inputs(cfg, point, nom: _Planned, noise: NoiseLevels, record, spinning, q_rel):
    """The taps' points as the reduction would bin them, and their inputs."""
    n_taps = len(cfg.taps)
    if spinning:
        bins = cfg.reduction.cp_bins
        theta = (np.arange(bins) + 0.5) * 360.0 / bins
        share = np.full((bins, n_taps), 1.0 / n_taps)
        samples = point.pressure_rate * record * n_taps / bins
    else:
        theta = np.array([tap.azimuth % 360.0 for tap in cfg.taps])
        share = np.eye(n_taps)
        samples = point.pressure_rate * record
    # The prior's Cp(theta): potential flow at the spin ratio that lifts as the prior does.
    alpha_e = -nom.coefficients[0] / (2.0 * np.pi)
    cp = np.asarray(theory.cp_surface(theta, alpha_e), dtype=float)
    radius = cfg.model.diameter / 2.0
    head = float(pressure.centrifugal_head(nom.rho, nom.omega, radius, cfg.model.transducer_radius))
    reading = cp * nom.q - head
    sigma = np.hypot(noise.tap_noise * nom.q, noise.tap_noise_floor)
    # Turbulence: the readings follow q, an AR(1) record at the taps' rate.
    var_turb = _u_of_mean(_ar1(_lags(record, point.pressure_rate), 1.0, noise.turbulence_time))
    u_reading = np.sqrt(sigma**2 / samples + (cp * nom.q * q_rel) ** 2 * var_turb[0] ** 2)
    inputs = reduction.pressure_run_inputs(cfg, reading, u_reading, nom.omega)
    delays = np.array([tap.tubing_delay for tap in cfg.taps])
    model = reduction.PressureModel(
        theta, share, reduction.reading_slope(theta, reading), nom.omega, share @ delays
    )
    try:
        pressure.integrate_cp(theta, reading, max_gap=cfg.reduction.max_tap_gap)
        integrate = True
    except pressure.CpGapError:
        integrate = False
    return inputs, model, integrate, theta, reading


def _propagate(cfg, inputs, correlation, taps, calibration):
    model = reduction.run_model(
        cfg,
        has_balance=True,
        pressure_points=None if taps is None else taps[1],
        integrate=False if taps is None else taps[2],
        calibration=calibration,
    )
    return propagate_linear(model, inputs, correlation=correlation)


def _predicted(cfg, point, nom: _Planned, noise: NoiseLevels, air_state, record: float):
    """The run model's values and u at this point for a record of this length, and its taps."""
    inputs, correlation, taps, calibration = _inputs(cfg, point, nom, noise, air_state, record)
    return _propagate(cfg, inputs, correlation, taps, calibration), taps


def _scalar(x) -> float:
    return float(np.asarray(x).reshape(-1)[0])


def predict_point(
    cfg,
    point: PlannedPoint,
    prior: Prior,
    noise: NoiseLevels,
    air_state: AirState,
    *,
    target: tuple[str, float] | None = None,
    eps_limit: float = 0.05,
) -> PointPrediction:
    """Predict one planned point (docs/plan.md lists what each value means)."""
    nom = _nominal(cfg, point, prior, air_state)
    linear, taps = _predicted(cfg, point, nom, noise, air_state, point.record)
    # The prior is free air, the balance sees the tunnel: one step of the run model's own
    # correction backwards (its second-order remainder is far below the prior's own doubt).
    scale = []
    for name in ("CL", "CD", "CM"):
        corrected = _scalar(linear.values[name])
        raw = _scalar(linear.values[f"{name}_uncorrected"])
        scale.append(raw / corrected if corrected and np.isfinite(raw / corrected) else 1.0)
    alpha_free = _scalar(linear.values["alpha"]) / nom.alpha if nom.alpha else 1.0
    nom = _nominal(cfg, point, prior, air_state, tuple(scale), alpha_free)
    linear, taps = _predicted(cfg, point, nom, noise, air_state, point.record)
    tol = cfg.tolerances_for(point.config)
    b = cfg.instruments.balance
    full_scale = np.array(b.full_scale)
    values: dict[str, float | str] = {
        "point": point.point,
        "config": point.config,
        "speed_set": point.speed_set,
        "record": point.record,
        "prior": prior.name,
    }
    for name in ("q", "U", "Re", "Mach", "omega", "alpha", "CL", "CD", "CM", "C_power"):
        values[name] = _scalar(linear.values[name])
    values["rpm"] = abs(nom.omega) * quality.RPM_PER_RAD_S
    for name in PREDICTED:
        values[f"u_{name}"] = _scalar(linear.u[name])
        values[f"Uk2_{name}"] = 2.0 * values[f"u_{name}"]
    values["u_Cp_max"] = values["u_Cp_median"] = np.nan
    u_cp = None
    theta = None
    if taps is not None:
        u_cp = np.asarray(linear.u["Cp"], dtype=float).reshape(-1)
        theta = taps[3]
        values["u_Cp_max"] = float(np.max(u_cp))
        values["u_Cp_median"] = float(np.median(u_cp))
    values["Uk2_Cp_max"] = 2.0 * values["u_Cp_max"]
    warnings: list[str] = []

    # Balance loads: the mean, and a peak of the mean plus three standard deviations of the
    # samples (turbulence, white noise, shedding; the tares' mean loads come on top).
    sample_sd = np.sqrt(
        (nom.loads * 2.0 * noise.turbulence) ** 2
        + (noise.balance_noise * full_scale) ** 2
        + _shedding(cfg, nom, noise) ** 2
    )
    # The imbalance's force rotates with the model: its amplitude adds to the peak of Fx, Fy.
    swing = abs(noise.imbalance) * nom.omega**2 * np.array([1.0, 1.0, 0.0])
    peak = (np.abs(nom.loads) + swing + 3.0 * sample_sd) / full_scale
    for k, name in enumerate(_LOADS):
        values[f"{name}_fraction"] = float(abs(nom.loads[k]) / full_scale[k])
        values[f"{name}_peak_fraction"] = float(peak[k])
    values["load_fraction_max"] = float(np.max(peak))
    # Scanner range.
    values["scanner_fraction"] = np.nan
    if taps is not None and cfg.instruments.scanner_full_scale:
        use = float(np.max(np.abs(taps[4])) / cfg.instruments.scanner_full_scale)
        values["scanner_fraction"] = use
        if use > 1.0:
            warnings.append(f"scanner range exceeded: {100 * use:.0f} % of its full scale")
    revolutions = abs(nom.omega) * point.record / (2.0 * np.pi)
    values["revolutions"] = revolutions
    values["record_for_revolutions"] = (
        tol.min_revolutions * 2.0 * np.pi / abs(nom.omega) if nom.omega else np.nan
    )
    # alpha(t) scatters with omega and U.
    values["spin_scatter"] = float(np.hypot(noise.spin_jitter, noise.turbulence))
    warnings += _spin_limit(cfg, nom, noise, values)
    warnings += _implausible(cfg, linear, noise)
    # Every flag the prediction can judge, judged by the flags' own table (quality.CHECKS).
    flags = quality.check_run(_measures(point, nom, values, linear, taps, peak), tol)
    values["flags_expected"] = ";".join(f.name for f in flags)
    for flag in flags:
        if flag.name == "overload":
            which = _LOADS[int(np.argmax(peak))]
            warnings.append(
                f"OVERLOAD: {which} peak {100 * np.max(peak):.0f} % of full scale exceeds the "
                f"overload tolerance {100 * tol.overload:.0f} %"
            )
        elif flag.name == "few_revolutions":
            warnings.append(
                f"record too short: {revolutions:.1f} revolutions, min_revolutions is "
                f"{tol.min_revolutions:g}; record at least "
                f"{values['record_for_revolutions']:.1f} s"
            )
        else:
            warnings.append(f"flag {flag.name} expected: {flag.reason}")
    # Wall corrections, as the run model applies them.
    for name in ("eps_solid", "eps_wake", "delta_CD_buoyancy", "delta_alpha_lift"):
        values[name] = _scalar(linear.values[name])
    eps = values["eps_solid"] + values["eps_wake"]
    values["eps_total"] = eps
    for name in ("CL", "CD", "CM"):
        raw = _scalar(linear.values[f"{name}_uncorrected"])
        values[f"{name}_correction"] = values[name] / raw - 1.0 if raw else np.nan
    if abs(eps) > eps_limit:
        warnings.append(
            f"wall correction large: eps = {100 * eps:.1f} % above the stated limit "
            f"{100 * eps_limit:.1f} % (a smaller model or a larger section)"
        )
    method = corrections.METHODS[cfg.reduction.blockage]
    d_h = cfg.model.diameter / cfg.tunnel.height
    s_c = cfg.model.diameter * cfg.model.span / (cfg.tunnel.height * cfg.tunnel.width)
    values["d_over_h"] = d_h
    values["area_ratio"] = s_c
    if method.diameter_ratio_limit is not None and d_h > method.diameter_ratio_limit:
        warnings.append(f"d/h = {d_h:.3f} beyond {method.name}'s validity ({method.validity})")
    if method.area_ratio_limit is not None and s_c > method.area_ratio_limit:
        warnings.append(f"S/C = {s_c:.3f} beyond {method.name}'s validity ({method.validity})")
    if nom.outside_prior:
        warnings.append("spin ratio outside the prior's data: coefficients held at its end")

    budgets = None
    budgeted = [n for n in _BUDGETED if values[f"u_{n}"] > 0]
    if budgeted:
        budgets = linear.budgets(budgeted)
        budgets.insert(0, "point", point.point)
        for name in budgeted:
            rows = budgets[(budgets["output"] == name) & (budgets["input"] != "(correlations)")]
            top = rows.sort_values("share", ascending=False).head(2)
            values[f"dominant_{name}"] = "; ".join(
                f"{r.input} {100 * r.share:.0f} %" for r in top.itertuples()
            )
    if target is not None:
        name, wanted = target
        values[f"record_for_u_{name}"] = _record_for(
            cfg, point, nom, noise, air_state, name, wanted, values[f"u_{name}"]
        )
        needed = values[f"record_for_u_{name}"]
        if not np.isfinite(needed):
            warnings.append(
                f"u({name}) = {wanted:g} is out of reach at this point: the parts that do not "
                "shrink with the record (instrument specifications, geometry) exceed it"
            )
        elif needed > point.record:
            warnings.append(
                f"record too short for u({name}) = {wanted:g}: record at least {needed:.1f} s"
            )
    values["warnings"] = "; ".join(warnings)
    return PointPrediction(point, values, budgets, warnings, theta, u_cp)


#: The record lengths a target is searched over: from the planned one down to 1/64 of it and
#: up to 1024 times it, then bisected (in log T) to this relative width.
_SHORTEST, _LONGEST, _RESOLUTION = 1.0 / 64.0, 1024.0, 0.01


#: The flags of quality.CHECKS the plan judges in advance from its prediction, and why each
#: other one cannot be (docs/plan.md, "Flags checked in advance"; tests/test_plan.py keeps the
#: two in step with the table).
PRECHECKED = (
    "spin_scatter", "overload", "stream_overlap", "few_revolutions", "cl_disagreement",
    "stagnation_cp", "speed_setpoint", "spin_setpoint",
)  # fmt: skip
NOT_PRECHECKED = {
    "spin_drift": "a drift of the spin over a run is no stated level",
    "speed_drift": "a drift of the speed over a run is no stated level",
    "temperature_drift": "the air's change over a run is no stated level",
    "zero_shift": "the zeros' drift between the pre- and post-run zeros is no stated level",
    "tare_extrapolated": "PLAN.csv names no spin-tare runs; their rpm range is the run sheet's",
    "dead_tap": "a failed tap is a fault, not a level",
    "repeat_disagreement": "judged between runs of a campaign, not on one point",
}


def _measures(point, nom: _Planned, values: dict, linear, taps, peak) -> quality.RunMeasures:
    """The measures a run recorded at this point would be judged on, as the plan predicts them
    (the set points are the planned ones; the streams cover the whole record)."""
    spinning = quality.is_spinning(nom.alpha)
    measures = {
        "overload": tuple(float(f) for f in peak),
        "stream_overlap": 1.0,
        "alpha": _scalar(linear.values["alpha"]),
        "speed_set": point.speed_set,
        "U_measured": _scalar(linear.values["U_uncorrected"]),
        "spin_set": float(values["rpm"]),
        "spin_rpm": abs(_scalar(linear.values["omega"])) * quality.RPM_PER_RAD_S,
    }
    if spinning:
        measures["spin_scatter"] = float(values["spin_scatter"])
    if taps is not None:
        measures["Cp_max"] = float(np.max(_scalar_array(linear.values["Cp"])))
        measures["u_Cp_max"] = float(values["u_Cp_max"])
        if spinning:
            measures["revolutions"] = float(values["revolutions"])
        if taps[2]:
            measures.update(
                CL=values["CL"],
                u_CL=values["u_CL"],
                CL_p=_scalar(linear.values["CL_p"]),
                u_CL_p=values["u_CL_p"],
                corr_CL_CL_p=_correlation(linear, "CL", "CL_p"),
            )
    return quality.RunMeasures(**measures)


def _scalar_array(x) -> np.ndarray:
    return np.asarray(x, dtype=float).reshape(-1)


def _correlation(linear, a: str, b: str) -> float:
    try:
        r = float(np.asarray(linear.correlation(a, b)).reshape(-1)[0])
    except (KeyError, ValueError, ZeroDivisionError):  # an output with no u
        return 0.0
    return r if np.isfinite(r) else 0.0


def _spin_limit(cfg, nom: _Planned, noise: NoiseLevels, values: dict) -> list[str]:
    """The spin rate against the model's rating (the reduction refuses a run above it)."""
    values["spin_fraction_of_limit"] = np.nan
    limit = cfg.model.max_spin_rate
    if not limit:
        return []
    fraction = abs(nom.omega) / limit
    values["spin_fraction_of_limit"] = fraction
    rated = f"{limit * quality.RPM_PER_RAD_S:.0f} rpm"
    if fraction > 1.0:
        return [
            f"SPIN LIMIT EXCEEDED: {values['rpm']:.0f} rpm is {100 * fraction:.0f} % of the "
            f"model's max_spin_rate ({rated}); do not run this point without the model's "
            "designers' approval and the facility's safety rules"
        ]
    if fraction * (1.0 + 3.0 * noise.spin_jitter) > 1.0:
        return [
            f"SPIN LIMIT: {values['rpm']:.0f} rpm is {100 * fraction:.1f} % of the model's "
            f"max_spin_rate ({rated}): the spin jitter's peaks (3 standard deviations) reach it, "
            "and the reduction refuses a run whose spin log passes it"
        ]
    return []


def _implausible(cfg, linear, noise: NoiseLevels) -> list[str]:
    """The air data against the ranges the reduction refuses a run outside
    (plausibility.RANGES), the Mach number at the turbulence's peaks (3 standard deviations)."""
    peaks = {
        "T": _scalar(linear.values["T"]),
        "p_baro": _scalar(linear.values["p_baro"]),
        "rho": _scalar(linear.values["rho"]),
        "Mach": _scalar(linear.values["Mach"]) * (1.0 + 3.0 * noise.turbulence),
    }
    out = []
    for r in plausibility.RANGES:
        value = peaks.get(r.name)
        if value is not None and not r.low <= value <= r.high:
            out.append(
                f"{r.name} {value:.4g} {r.unit} outside the reduction's range: {r.what} "
                "(the run would not be reduced)"
            )
    return out


def _record_for(cfg, point, nom, noise, air_state, name: str, wanted: float, u_now: float):
    """The shortest record whose predicted u(name) is at most ``wanted`` (inf: none up to
    1024 times the planned record).

    Searched on the prediction itself (doubling or halving the record, then bisection), not on
    a fitted u² = B + A / T: the u the reduction reports from a short record is not A / T (its
    N_eff estimate of a record a few correlation times long runs low), so the prediction need
    not fall as 1 / T.
    """

    def u_at(record: float) -> float:
        return _scalar(_predicted(cfg, point, nom, noise, air_state, record)[0].u[name])

    record = point.record
    if u_now <= wanted:
        short = record
        while short * 0.5 >= point.record * _SHORTEST and u_at(short * 0.5) <= wanted:
            short *= 0.5
        if short * 0.5 < point.record * _SHORTEST:
            return float(short)
        low, high = short * 0.5, short
    else:
        high = record
        while u_at(high) > wanted:
            if high >= point.record * _LONGEST:
                return float("inf")
            high *= 2.0
        low = high * 0.5
    while high / low - 1.0 > _RESOLUTION:
        middle = np.sqrt(low * high)
        if u_at(middle) <= wanted:
            high = middle
        else:
            low = middle
    return float(high)
