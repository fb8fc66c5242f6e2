"""The free stream, the spin rate and the geometry as run-level inputs.

The time-series layer of the tunnel log (dynamic pressure, temperature, pressure, humidity) and
of the spin rate (tachometer or encoder), with the steadiness measures the quality flags judge,
and the geometry every run shares.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from tunnelred.engine import quality
from tunnelred.physics import conditions, series
from tunnelred.physics.uncertainty import Input


def tunnel_inputs(cfg, tunnel, fs, measures: dict) -> dict:
    t = tunnel["time"].to_numpy()
    column = "dp_pitot" if cfg.tunnel.q_source == "pitot" else "dp_contraction"
    stats = {
        name: conditions.series_statistics(tunnel[name].to_numpy(), t)
        for name in (column, "T", "p_baro", "RH")
    }
    u_speed = conditions.series_statistics(fs["U"].to_numpy(), t)
    measures["speed_drift"] = abs(u_speed.drift) / u_speed.mean
    measures["u_speed_drift"] = series.drift_uncertainty(fs["U"].to_numpy(), t) / u_speed.mean
    measures["temperature_drift"] = abs(stats["T"].drift)
    means = {"dp" if name == column else name: (s.mean, s.u_mean) for name, s in stats.items()}
    # The measurand is the mean of the flow this run had (docs/methods.md, "The measurand of q,
    # U, Re"): the flow's own unsteadiness over the record is no error of that mean, the
    # transducer's white noise is. The unsteadiness stays in the coefficients (dp_flow).
    dp = stats[column]
    u_noise = np.sqrt(series.white_noise_variance(tunnel[column].to_numpy()) / dp.n)
    u_noise = min(float(u_noise), dp.u_mean) if np.isfinite(u_noise) else dp.u_mean
    means["dp"] = (dp.mean, u_noise)
    means["dp_flow"] = (0.0, float(np.sqrt(dp.u_mean**2 - u_noise**2)))
    return air_data_inputs(cfg, means)


def air_data_inputs(cfg, means: dict[str, tuple[float, float]]) -> dict[str, Input]:
    """The tunnel's run-level inputs from its record means and their type-A u.

    ``means`` maps ``dp`` (the q_source's reading), ``T``, ``p_baro``, ``RH`` to (mean, u of the
    mean) in SI; the instruments' specification terms come from campaign.toml. An optional
    ``dp_flow`` (0, u) is the part of the record's u(mean dp) that is the flow's own
    unsteadiness: no error of the run's mean q, U, Re, it enters the q the coefficients are
    made with, where it cancels against the loads that follow the same flow. Without it ``dp``'s
    u goes to q and the coefficients alike. Public so that a test plan
    (tunnelred.products.plan) builds the inputs a run would have.
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
    if "dp_flow" in means:
        inputs["dp_flow"] = Input(*means["dp_flow"], "A", "flow unsteadiness (coefficients' q)")
    if cfg.tunnel.q_source == "contraction":
        inputs["k_contraction"] = Input(
            cfg.tunnel.contraction_factor,
            cfg.tunnel.u_contraction_factor,
            "B",
            "contraction factor",
        )
    return inputs


def stream_overlap(streams) -> float:
    spans = [(s["time"].values[0], s["time"].values[-1]) for s in streams.values()]
    start = max(a for a, _ in spans)
    end = min(b for _, b in spans)
    longest = max(b - a for a, b in spans)
    return max(0.0, end - start) / longest if longest > 0 else 1.0


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


@dataclass(frozen=True)
class SpinStep:
    """The spin rate as run-level inputs, and whether the run counts as spinning."""

    inputs: dict[str, Input]
    omega_mean: float  # [rad/s]
    spinning: bool  # quality.is_spinning of the time-mean spin ratio


def spin_inputs(cfg, data, fs, measures: dict) -> SpinStep:
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
    return SpinStep(inputs, omega_mean, spinning)


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
