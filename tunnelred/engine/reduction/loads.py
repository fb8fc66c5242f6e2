"""The balance's part of a run: net loads, zeros, spin tares, calibration coefficients.

The time-series layer of the balance stream (the package docstring): the mean loads with the
zero removed, the spin tare at the run's rate, their type-A uncertainties and the instrument's
type-B terms as run-level inputs, the correlations the loads share with the dynamic pressure, and
the calibration coefficients as one vector input when campaign.toml gives their covariance.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from tunnelred.common.errors import ReductionError
from tunnelred.engine.reduction.references import (
    mid_epoch,
    second_order,
    series_means,
    signal_matrix,
    tare_state,
    zero_for,
)
from tunnelred.physics import balance, conditions
from tunnelred.physics.uncertainty import Input


def net_load_inputs(campaign, spec, data, omega_mean: float, measures: dict):
    """Run-level balance inputs: net loads (zero removed), their tares, and their u.

    Also the load records behind the means, ``[(name, loads, time, u of the mean)]``, whose
    fluctuations the dynamic pressure shares (:func:`shared_fluctuation`).
    """
    cfg = campaign.config.instruments.balance
    stream = data.streams["balance"]
    t = stream["time"].to_numpy()
    matrix, second = np.array(cfg.matrix), second_order(cfg)
    zero, shift, u_zero = zero_for(campaign, spec, mid_epoch(spec, stream))
    loads_t = balance.loads_from_signals(signal_matrix(stream, cfg.channels) - zero, matrix, second)
    means, u_a = series_means(loads_t, t)
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
    u_tare_interp = np.zeros(3)
    if spec.tare:
        states = sorted((tare_state(campaign, r) for r in spec.tare), key=lambda s: s.omega)
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
        u_tare_interp = balance.tare_interpolation_error(
            omega_mean, rates, np.array([s.loads for s in states])
        )
        if extrapolated:
            measures["tare_extrapolated"] = True
            measures["tare_range"] = (float(rates.min()), float(rates.max()))
            measures["omega"] = omega_mean

    inputs = balance_load_inputs(
        cfg, means, np.hypot(u_a, u_zero_loads), tare, u_tare, u_tare_interp
    )
    records = [(name, loads_t[:, k], t, u_a[k]) for k, name in enumerate(("Fx", "Fy", "Mz"))]
    return inputs, records


def balance_load_inputs(
    cfg,
    loads: np.ndarray,
    u_loads: np.ndarray,
    tare: np.ndarray,
    u_tare: np.ndarray,
    u_tare_interp: np.ndarray | None = None,
) -> dict[str, Input]:
    """The balance's run-level inputs from its mean loads, their tares and their type-A u.

    ``cfg`` is the campaign's BalanceConfig; ``loads`` and ``tare`` are (Fx, Fy, Mz) in N, N m
    (the zero removed), ``u_loads`` their type-A u (the zero's scatter included),
    ``u_tare_interp`` the tare curve's interpolation error in ω
    (:func:`tunnelred.physics.balance.tare_interpolation_error`; None: no such input). The
    specification, calibration and alignment terms come from ``cfg``. Public so that a test
    plan (tunnelred.products.plan) builds the inputs a run would have.
    """
    u_b = np.asarray(cfg.u_fraction_of_full_scale) * np.array(cfg.full_scale)
    inputs = {}
    for k, name in enumerate(("Fx", "Fy", "Mz")):
        inputs[name] = Input(loads[k], u_loads[k], "A", f"balance {name}")
        inputs[f"{name}_spec"] = Input(0.0, u_b[k], "B", f"balance {name} specification")
        inputs[f"{name}_tare"] = Input(tare[k], u_tare[k], "A", f"spin tare {name}")
        if u_tare_interp is not None:
            inputs[f"{name}_tare_interp"] = Input(
                0.0, u_tare_interp[k], "B", f"spin tare {name}, interpolation in spin rate"
            )
    inputs["calibration"] = Input(1.0, cfg.u_matrix_relative, "B", "balance calibration factor")
    align = cfg.alignment_angle
    inputs["alignment"] = Input(align, cfg.u_alignment_angle, "B", "balance alignment [deg]")
    return inputs


def shared_fluctuation(cfg, tunnel, records, inputs: dict) -> dict[tuple[str, str], float]:
    """Correlations of the time-averaged dynamic pressure and loads, from their records.

    The loads follow the speed sample by sample, so the means of dp and of the loads move
    together and a coefficient (load over q) scatters far less than either; propagated as
    independent, u(CL) would count the speed fluctuation twice. Each mean's correlation
    (:func:`tunnelred.physics.conditions.correlation_of_means`) is scaled by the share of that
    input's u that is its own record's scatter (the zero's scatter is independent of it).
    """
    column = "dp_pitot" if cfg.tunnel.q_source == "pitot" else "dp_contraction"
    dp = tunnel[column].to_numpy()
    # The loads follow the flow, not the transducer's noise: they correlate with dp_flow, the
    # flow's part of the dp record's u (all of it without dp_flow).
    if "dp_flow" in inputs:
        name, u_dp = "dp_flow", float(np.hypot(inputs["dp"].u, inputs["dp_flow"].u))
    else:
        name, u_dp = "dp", float(inputs["dp"].u)
    named = [(name, dp, tunnel["time"].to_numpy(), u_dp)] + records
    R = conditions.correlation_of_means([(values, time) for _, values, time, _ in named])
    share = []
    for label, _, _, u_record in named:
        u = float(inputs[label].u)
        share.append(u_record / u if u > 0 else 0.0)
    return input_correlations([label for label, *_ in named], R, share)


def input_correlations(names: list[str], R: np.ndarray, share: list[float]) -> dict:
    """The inputs' correlation coefficients from their records' means' correlation ``R``.

    Each input's coefficient is scaled by ``share``, the part of its u that is its record's
    scatter. Public so that a test plan (tunnelred.products.plan) scales its own the same way.
    """
    n = len(names)
    C = np.eye(n)
    for i in range(n):
        for j in range(i + 1, n):
            C[i, j] = C[j, i] = np.clip(float(R[i, j]) * share[i] * share[j], -1.0, 1.0)
    # dp_flow's share exceeds 1 by the noise part; a matrix so scaled past validity is pulled
    # back toward the identity until it is one (the noise share is a few % at most).
    scale = 1.0
    while np.linalg.eigvalsh(np.eye(n) + scale * (C - np.eye(n)))[0] < 1e-9:
        scale *= 0.99
    correlation = {}
    for i in range(n):
        for j in range(i + 1, n):
            r = float(C[i, j]) * scale
            if r != 0.0:
                correlation[(names[i], names[j])] = r
    return correlation


@dataclass(frozen=True)
class CalibrationStep:
    """The balance coefficients as one vector input with their covariance (calibration_file)."""

    inputs: dict[str, Input]
    correlation: dict[tuple[str, str], float]
    coefficients: np.ndarray  # c0, the file's values [K]
    sensitivity: np.ndarray  # ∂(net loads)/∂c at c0 [3, K]


def calibration_step(campaign, spec, data, omega_mean: float) -> CalibrationStep | None:
    """Net loads are linear in the coefficients: F_r = Σ_t K_rt (term_t(run) − term_t(tare))."""
    cfg = campaign.config.instruments.balance
    if cfg.coefficient_covariance is None:
        return None
    stream = data.streams["balance"]
    zero, _, _ = zero_for(campaign, spec, mid_epoch(spec, stream))
    second = cfg.second_order is not None
    terms = balance.calibration_terms(
        signal_matrix(stream, cfg.channels) - zero, second_order=second
    ).mean(axis=0)
    if spec.tare:
        states = sorted((tare_state(campaign, r) for r in spec.tare), key=lambda s: s.omega)
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
    return calibration_from_terms(cfg, terms)


def calibration_from_terms(cfg, terms: np.ndarray) -> CalibrationStep | None:
    """The calibration file's coefficients as one input with their covariance, or None.

    ``cfg`` is the campaign's BalanceConfig, ``terms`` a run's net calibration terms
    (:func:`tunnelred.physics.balance.calibration_terms` of its mean signals, the tare's
    removed). Public so that a test plan propagates the same covariance.
    """
    if cfg.coefficient_covariance is None:
        return None
    second = cfg.second_order is not None
    terms = np.asarray(terms, dtype=float)
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
    return CalibrationStep(inputs, correlation, coefficients, sensitivity)


def _components(values) -> tuple[float, ...]:
    return tuple(float(v) for v in np.atleast_1d(np.asarray(values, dtype=float)))
