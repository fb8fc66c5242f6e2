"""The runs a data run names for its zeros and tares, read once per campaign object.

A worker reduces many data runs of one campaign; each zero or tare run's means are worked out the
first time a data run names it and kept on the campaign object (``_reduction_memo``). Also the
helpers every reading of a balance or pressure record shares: a run's logs with its problems
raised, a record's channel matrix, its mid-time and its means with their type-A uncertainty.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from tunnelred.common.errors import InputError, ReductionError
from tunnelred.physics import balance, conditions


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


def load_checked(campaign, run_id: str):
    problems = campaign.run_problems(run_id)
    if problems:
        raise InputError(problems)
    return campaign.load_run(run_id)


def signal_matrix(stream, channels) -> np.ndarray:
    return np.column_stack([stream[name].to_numpy() for name in channels])


def mid_epoch(spec, stream) -> float:
    t = stream["time"].to_numpy()
    return spec.start.timestamp() + 0.5 * (t[0] + t[-1])


def series_means(matrix: np.ndarray, time: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    stats = [conditions.series_statistics(matrix[:, j], time) for j in range(matrix.shape[1])]
    return np.array([s.mean for s in stats]), np.array([s.u_mean for s in stats])


def _zero_state(campaign, run_id: str) -> _ZeroState:
    memo = _memo(campaign)
    key = ("zero", run_id)
    if key not in memo:
        data = load_checked(campaign, run_id)
        stream = data.streams["balance"]
        channels = campaign.config.instruments.balance.channels
        means, u = series_means(signal_matrix(stream, channels), stream["time"].to_numpy())
        memo[key] = _ZeroState(mid_epoch(data.spec, stream), means, u)
    return memo[key]


def zero_for(campaign, spec, epoch: float):
    """Interpolated zero signals, the pre/post shift and the zeros' type-A uncertainty."""
    if not spec.zero:
        raise ReductionError(spec.run, "names no wind-off zero run", "runs.csv", spec.line)
    zeros = sorted((_zero_state(campaign, z) for z in spec.zero), key=lambda z: z.epoch)
    zero, shift, _ = balance.interpolate_zero(
        epoch, np.array([z.epoch for z in zeros]), np.array([z.signals for z in zeros])
    )
    u_zero = np.sqrt(np.mean([z.u_signals**2 for z in zeros], axis=0))
    return np.asarray(zero), np.asarray(shift), u_zero


def tare_state(campaign, run_id: str) -> _TareState:
    memo = _memo(campaign)
    key = ("tare", run_id)
    if key not in memo:
        cfg = campaign.config.instruments.balance
        data = load_checked(campaign, run_id)
        stream = data.streams["balance"]
        t = stream["time"].to_numpy()
        zero, _, _ = zero_for(campaign, data.spec, mid_epoch(data.spec, stream))
        signals = signal_matrix(stream, cfg.channels) - zero
        loads = balance.loads_from_signals(signals, np.array(cfg.matrix), second_order(cfg))
        means, u = series_means(loads, t)
        t_spin, omega, _ = conditions.spin_rate(data.streams)
        terms = balance.calibration_terms(signals, second_order=cfg.second_order is not None)
        memo[key] = _TareState(float(np.mean(omega)), means, u, terms.mean(axis=0))
    return memo[key]


def second_order(cfg):
    return None if cfg.second_order is None else np.array(cfg.second_order)


def files_used(campaign, spec) -> dict[str, str]:
    files = {}
    for rid in campaign.dependencies(spec.run):
        for path in campaign.runs[rid].logs.values():
            files[path] = campaign.file_hashes.get(path, "")
    return files
