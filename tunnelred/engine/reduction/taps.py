"""The surface pressure of a run: tap readings reduced to points in azimuth, and their inputs.

A spinning model's taps are binned in azimuth, a model at rest gives one point a tap; dead taps
are left out, the points of the runs named in ``pressure_with`` are merged in, and the points
become run-level inputs with the constants the run model needs (:class:`PressureModel`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from tunnelred.common.errors import ReductionError
from tunnelred.engine import quality
from tunnelred.engine.reduction.flow import SpinStep
from tunnelred.engine.reduction.references import load_checked
from tunnelred.physics import conditions, pressure
from tunnelred.physics.uncertainty import Input


@dataclass(frozen=True)
class PressureModel:
    """What the run model needs of the pressure points besides their readings (constants)."""

    theta: np.ndarray  # azimuth of each point [deg]
    share: np.ndarray  # (points, taps): fraction of each point's samples from each tap [-]
    slope: np.ndarray  # d(reading)/dθ at each point, from the readings [Pa/deg]
    omega: float  # the spin rate the taps' delays were turned into azimuth with [rad/s]
    delay: np.ndarray  # each point's sample-weighted tubing delay [s]


@dataclass(frozen=True)
class PressurePoints:
    """Tap readings reduced to points in azimuth: bins of a spinning model, or taps at rest."""

    theta: np.ndarray  # azimuth of each point [deg]
    reading: np.ndarray  # mean scanner reading (p_tap - p_inf at the transducer) [Pa]
    u_reading: np.ndarray  # its type-A standard uncertainty [Pa]
    grid: np.ndarray  # bin centres of the results' theta grid [deg]
    grid_index: np.ndarray  # bin of each point on that grid
    count: np.ndarray  # samples per grid bin
    share: np.ndarray  # (points, taps): the fraction of each point's samples from each tap [-]


@dataclass(frozen=True)
class PressureStep:
    """The surface-pressure part of a run: its points (None without taps) and their inputs."""

    points: PressurePoints | None
    dead_taps: list[str]
    integrate: bool  # False when the points leave a gap too wide for the pressure forces
    inputs: dict[str, Input]
    model: PressureModel | None = None


def pressure_step(campaign, spec, data, q_mean: float, spin: SpinStep, measures: dict):
    cfg = campaign.config
    if "pressure" not in data.streams or not cfg.taps:
        return PressureStep(None, [], False, {})
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
    return PressureStep(points, dead_taps, integrate, inputs, model)


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
    wrapped = pressure.within_turn(thetas)
    tap_bins = np.minimum(pressure.floor_divide(wrapped, width).astype(int), bins - 1)
    cells = tap_bins + np.arange(len(names))[:, None] * bins
    size = len(names) * bins
    sums = np.bincount(cells.ravel(), weights=(readings / q_mean).ravel(), minlength=size)
    counts = np.bincount(cells.ravel(), minlength=size)
    with np.errstate(invalid="ignore", divide="ignore"):
        per_tap = (sums / counts).reshape(len(names), bins)
    tolerances = cfg.tolerances_for(data.spec.config)
    u_per_tap = None
    if spinning:
        per_tap, u_per_tap = _tap_comparison(
            cfg, wrapped, tap_bins, cells, counts, per_tap, q_mean, omega_mean
        )
    dead = pressure.find_dead_taps(names, per_tap, tolerance=tolerances.dead_tap, u=u_per_tap)
    measures["dead_taps"] = dead
    keep = [i for i, name in enumerate(names) if name not in dead]
    if not keep:
        raise ReductionError(data.spec.run, "every pressure tap is dead or leaking")
    grid = (np.arange(bins) + 0.5) * width
    if spinning:
        measures["revolutions"] = revolutions
        if len(keep) < len(names):
            thetas, readings, turns = thetas[keep], readings[keep], turns[keep]
        binned = pressure.bin_cp(thetas, readings, bins=bins, revolution=turns)
        # A bin seen on a single pass has no between-revolution scatter to judge it by.
        filled = np.flatnonzero((binned.count > 0) & np.isfinite(binned.u_mean))
        mean = binned.mean[filled]
        # A bin's mean is Cp at its samples' azimuths, not at its centre: to second order it
        # exceeds Cp(centre) by Cp' d + Cp'' (s² + d²)/2 (Taylor about the centre).
        slope, curvature = pressure.azimuth_derivatives(binned.theta[filled], mean)
        at_centre = mean - slope * binned.offset[filled] - 0.5 * curvature * binned.spread[filled]
        share = np.zeros((filled.size, len(names)))
        share[:, keep] = (binned.series_count[:, filled] / binned.count[filled]).T
        points = PressurePoints(
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
        points = PressurePoints(
            theta,
            np.array([s.mean for s in stats]),
            np.array([s.u_mean for s in stats]),
            grid,
            index,
            count.astype(float),
            np.eye(len(names))[keep],
        )
    return points, sorted(dead)


def _tap_comparison(
    cfg, wrapped, tap_bins, cells, counts, per_tap, q_mean: float, omega_mean: float
):
    """Each tap's bin means at the bin centres, and their u from the tap's own errors.

    The taps' bin means are compared with each other (pressure.find_dead_taps). Each tap leaves
    its samples at its own azimuths within a bin, so its mean is first brought to the bin centre
    (as the pooled bins are, second order in the offset); the slope of the taps' median curve
    then turns each tap's azimuth uncertainty (installed azimuth, tubing delay times ω) into Cp,
    and its scanner port adds u_scanner / q.
    """
    bins = per_tap.shape[1]
    width = 360.0 / bins
    # wrapped: the taps' azimuths in [0, 360); tap_bins: their bins (cells less tap × bins).
    from_centre = (wrapped - ((np.arange(bins) + 0.5) * width)[tap_bins]).ravel()
    size = per_tap.size
    cells = cells.ravel()
    with np.errstate(invalid="ignore", divide="ignore"):
        offset = np.bincount(cells, from_centre, size) / counts
        square = np.bincount(cells, from_centre * from_centre, size) / counts
    reference = pressure.nanmedian_of_columns(per_tap)  # NaN: a bin no tap saw
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


def _merged_pressure(campaign, spec, points: PressurePoints, q_mean: float, dead: list[str]):
    """This run's pressure points with those of the runs named in ``pressure_with``.

    A model at rest sees only its taps' azimuths; runs at other index angles fill the circle.
    Their readings are brought to this run's q (Cp is what is shared), bin counts are added, and
    a tap dead in any of the runs is reported. A tap's scanner port is the same in every run, so
    its error enters the other runs' points too, scaled with their readings.
    """
    thetas, readings, u = [points.theta], [points.reading], [points.u_reading]
    index, count, share = [points.grid_index], points.count.copy(), [points.share]
    for other in spec.pressure_with:
        data = load_checked(campaign, other)
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
    merged = PressurePoints(
        np.concatenate(thetas),
        np.concatenate(readings),
        np.concatenate(u),
        points.grid,
        np.concatenate(index),
        count,
        np.concatenate(share),
    )
    return merged, dead


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


def at_bin_centres(points: PressurePoints, values) -> np.ndarray:
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


def reading_slope(theta: np.ndarray, reading: np.ndarray) -> np.ndarray:
    """dp/dθ at each point [Pa/deg], points at one azimuth (merged index runs) sharing one."""
    return _point_derivatives(theta, reading)[0]


def _point_derivatives(theta: np.ndarray, values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Slope and curvature of the points' curve at each point, points at one azimuth averaged."""
    distinct, which = np.unique(np.mod(theta, 360.0), return_inverse=True)
    mean = np.bincount(which, weights=values) / np.bincount(which)
    slope, curvature = pressure.azimuth_derivatives(distinct, mean)
    return slope[which], curvature[which]
