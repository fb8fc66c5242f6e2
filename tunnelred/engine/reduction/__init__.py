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

The modules of the package, in the order :func:`reduce_run` calls them: references.py (the zero
and tare runs, read once per campaign object), flow.py (tunnel log, spin rate, geometry),
loads.py (the balance), taps.py (the surface pressure), model.py (the run-level model) and
results.py (:class:`RunResult` and how it is filled). Every public name is importable from here.
"""

from __future__ import annotations

import numpy as np

from tunnelred.common.errors import InputError, ReductionError
from tunnelred.engine import plausibility, quality
from tunnelred.engine.reduction.flow import (
    air_data_inputs,
    geometry_inputs,
    spin_inputs,
    spin_rate_inputs,
    stream_overlap,
    tunnel_inputs,
)
from tunnelred.engine.reduction.loads import (
    balance_load_inputs,
    calibration_from_terms,
    calibration_step,
    input_correlations,
    net_load_inputs,
    shared_fluctuation,
)
from tunnelred.engine.reduction.model import run_model
from tunnelred.engine.reduction.references import files_used, load_checked
from tunnelred.engine.reduction.results import (
    BUDGET_OUTPUTS,
    RUN_OUTPUTS,
    RunResult,
    agreement_measures,
    budget_table,
    cp_profiles,
    run_values,
)
from tunnelred.engine.reduction.taps import (
    PressureModel,
    pressure_run_inputs,
    pressure_step,
    reading_slope,
)
from tunnelred.physics import conditions
from tunnelred.physics.series import drift_uncertainty  # importable from here, as before
from tunnelred.physics.uncertainty import propagate_linear, propagate_monte_carlo

__all__ = [
    "RunResult",
    "reduce_run",
    "RUN_OUTPUTS",
    "BUDGET_OUTPUTS",
    "PressureModel",
    "run_model",
    "air_data_inputs",
    "balance_load_inputs",
    "calibration_from_terms",
    "input_correlations",
    "spin_rate_inputs",
    "pressure_run_inputs",
    "geometry_inputs",
    "reading_slope",
    "drift_uncertainty",
]


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
    data = load_checked(campaign, run_id)
    if "tunnel" not in data.streams:
        raise ReductionError(run_id, "has no tunnel log", "runs.csv", spec.line)
    measures: dict = {}
    tunnel = data.streams["tunnel"]
    fs = conditions.free_stream(tunnel, cfg)
    implausible = plausibility.run_problems(cfg, data, fs)
    if implausible:
        raise InputError(implausible)
    inputs = tunnel_inputs(cfg, tunnel, fs, measures)
    inputs.update(geometry_inputs(cfg))
    spin = spin_inputs(cfg, data, fs, measures)
    inputs.update(spin.inputs)
    measures["stream_overlap"] = stream_overlap(data.streams)

    has_balance = "balance" in data.streams
    calibration = None
    correlation: dict[tuple[str, str], float] = {}
    if has_balance:
        balance_inputs, records = net_load_inputs(campaign, spec, data, spin.omega_mean, measures)
        inputs.update(balance_inputs)
        correlation.update(shared_fluctuation(cfg, tunnel, records, inputs))
        calibration = calibration_step(campaign, spec, data, spin.omega_mean)
    if calibration is not None:
        inputs.update(calibration.inputs)

    q_mean = float(np.mean(fs["q"].to_numpy()))
    taps = pressure_step(campaign, spec, data, q_mean, spin, measures)
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

    values = run_values(spec, linear, measures, taps.dead_taps)
    theta, profiles = cp_profiles(taps.points, linear, values["alpha"])
    agreement_measures(measures, values, linear, has_balance and taps.integrate, taps.points)
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
        budgets=budget_table(linear, values, run_id),
        inputs=files_used(campaign, spec),
    )
