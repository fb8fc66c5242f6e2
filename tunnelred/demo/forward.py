"""The forward model of a synthetic test: what the instruments would record.

In the order it runs for a data run (driven by :mod:`tunnelred.demo.writer`):

1. Air from T, p, RH (:func:`tunnelred.physics.air.density`,
   :func:`tunnelred.physics.air.viscosity`); the free stream ``U(t)`` from the set speed with a
   set-point error, a slow drift and AR(1) turbulence-like fluctuations (correlated, so the
   effective number of samples is far below the sample count); the pitot reads the impact pressure
   of the *uncorrected* ``q_u`` (:func:`tunnelred.physics.conditions.impact_pressure`).
2. The spin ``omega(t)`` from the set rpm with AR(1) jitter; the tachometer and the encoder.
3. Wall interference applied forward: the model sees ``U_c = U_u (1 + eps)``; the free-air
   coefficients are evaluated at ``alpha_c``, ``Re_c``; the in-tunnel coefficients are those
   that :func:`tunnelred.physics.corrections.apply_wall_correction` (with the campaign's configured
   method) turns into the free-air ones, found by a fixed-point iteration because ``eps`` depends
   on the uncorrected drag. The iteration runs sample by sample, so the loads follow the
   instantaneous speed and spin.
4. Balance: aerodynamic loads plus vortex-shedding fluctuations, plus the spin tare (bearing
   friction torque, small spin-induced forces) and a rotor-imbalance vibration, rotated from
   wind to balance axes through the alignment and flow angles, turned into channel signals by
   :func:`tunnelred.physics.balance.signals_from_loads`, plus channel zeros that drift linearly
   in time, plus noise.
5. Surface pressure at mid-span: rotating taps read ``Cp_u(theta) q_u`` at the azimuth they held
   one tubing delay earlier, minus the centrifugal head of the air column between tap and
   transducer, plus noise.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.signal import lfilter

from tunnelred.demo.spec import SynthSpec
from tunnelred.demo.truth import (
    DRAG_TERM_CD,
    LIFT_TERM_CL,
    correction_terms,
    shaped_cp,
    true_drag_coefficient,
    true_lift_coefficient,
    true_pressure_coefficients,
    true_torque_coefficient,
)
from tunnelred.physics import conditions, corrections

#: The knock of the ``overload`` fault: the model rings on the balance at this (invented)
#: natural frequency [Hz] under a Gaussian envelope of this standard deviation [s].
_KNOCK_FREQUENCY = 25.0
_KNOCK_WIDTH = 0.04


def ar1(rng: np.random.Generator, n: int, dt: float, tau: float) -> np.ndarray:
    """Unit-variance AR(1) sequence, stationary from its first sample (correlation time tau)."""
    phi = math.exp(-dt / tau)
    gain = math.sqrt(1.0 - phi**2)
    e = rng.standard_normal(n)
    e[0] /= gain
    return lfilter([gain], [1.0, -phi], e)


def _wall_kwargs(spec: SynthSpec) -> dict:
    return dict(
        diameter=spec.diameter,
        height=spec.tunnel_height,
        span=spec.span,
        width=spec.tunnel_width,
        static_pressure_gradient=spec.static_pressure_gradient,
        lift_interference=spec.lift_interference,
        buoyancy=spec.buoyancy,
        spans_section=True,
    )


def in_tunnel(spec: SynthSpec, end_plates: bool, U_u, q_u, omega, rho, mu) -> dict:
    """The free-air truth and the in-tunnel coefficients that correct to it.

    Inputs are the uncorrected speed [m/s] and dynamic pressure [Pa], the spin rate [rad/s] and
    the air [kg/m³, Pa s], as scalars or arrays (sample by sample). The in-tunnel coefficients
    ``X_u`` solve ``apply_wall_correction(wall_correction(CD_u, …), X_u) = X_true(alpha_c,
    Re_c)``; every coefficient enters affinely, so one Newton step per sweep is exact for a
    given ``eps``, and the sweeps iterate on ``eps(CD_u)``.
    """
    U_u, q_u, omega = (np.asarray(x, dtype=float) for x in (U_u, q_u, omega))
    R = spec.diameter / 2.0
    alpha_u = conditions.spin_ratio(omega, R, U_u)
    Re_u = conditions.reynolds_number(rho, U_u, spec.diameter, mu)
    names = ("CL", "CD", "CM", "CL_p", "CD_p")
    u = dict(zip(names, _truth_coefficients(alpha_u, Re_u, end_plates), strict=True))
    kw = _wall_kwargs(spec)
    method = corrections.blockage_method(spec.blockage)  # the registry entry, resolved once

    def corrected(values, corr):
        return corrections.apply_wall_correction(
            corr,
            U=U_u,
            q=q_u,
            alpha=alpha_u,
            Re=Re_u,
            CL=values["CL"],
            CD=values["CD"],
            CM=values["CM"],
            C_power=values["CM"] * alpha_u,
            CL_p=values["CL_p"],
            CD_p=values["CD_p"],
        )

    for _ in range(100):
        corr = corrections.wall_correction(
            method,
            drag_coefficient=u["CD"],
            lift_coefficient=u["CL"],
            dynamic_pressure=q_u,
            **kw,
        )
        out = corrected(u, corr)
        target = dict(
            zip(names, _truth_coefficients(out["alpha"], out["Re"], end_plates), strict=True)
        )
        unit = corrected({k: v + 1.0 for k, v in u.items()}, corr)
        new = {k: u[k] + (target[k] - out[k]) / (unit[k] - out[k]) for k in names}
        step = np.max(np.abs(new["CD"] - u["CD"]))
        u = new
        if step < 1e-14:
            break
    corr = corrections.wall_correction(
        method,
        drag_coefficient=u["CD"],
        lift_coefficient=u["CL"],
        dynamic_pressure=q_u,
        **kw,
    )
    out = corrected(u, corr)
    truth = dict(zip(names, _truth_coefficients(out["alpha"], out["Re"], end_plates), strict=True))
    result = {k: out[k] for k in ("U", "q", "alpha", "Re")} | truth
    result["C_power"] = truth["CM"] * out["alpha"]
    for k in ("U", "q", "alpha", "Re"):
        result[f"{k}_uncorrected"] = {"U": U_u, "q": q_u, "alpha": alpha_u, "Re": Re_u}[k]
    for k in names:
        result[f"{k}_uncorrected"] = u[k]
    result["C_power_uncorrected"] = u["CM"] * alpha_u
    result["eps"] = np.asarray(corr.eps)
    result["eps_solid"] = np.asarray(corr.eps_solid)
    result["eps_wake"] = np.asarray(corr.eps_wake)
    result["delta_CD_buoyancy"] = np.asarray(corr.delta_CD_buoyancy)
    return result


def _truth_coefficients(alpha, reynolds, end_plates):
    cl_p, cd_p = true_pressure_coefficients(alpha, reynolds, end_plates=end_plates)
    return (
        np.asarray(true_lift_coefficient(alpha, reynolds, end_plates=end_plates)),
        np.asarray(true_drag_coefficient(alpha, reynolds, end_plates=end_plates)),
        np.asarray(true_torque_coefficient(alpha, reynolds, end_plates=end_plates)),
        np.asarray(cl_p),
        np.asarray(cd_p),
    )


def tunnel_cp(theta, state) -> np.ndarray:
    """In-tunnel Cp at theta [rad]: 1 − Cp_u = (1 − Cp_c)(1 + eps)², plus the base-weighted
    terms that carry the rest of CL_p_u and CD_p_u (buoyancy, lift interference)."""
    speed2 = (1.0 + state["eps"]) ** 2
    cp_c = shaped_cp(theta, state["CL_p"], state["CD_p"])
    lift_gain = (state["CL_p_uncorrected"] - speed2 * state["CL_p"]) / LIFT_TERM_CL
    drag_gain = (state["CD_p_uncorrected"] - speed2 * state["CD_p"]) / DRAG_TERM_CD
    f_drag, f_lift = correction_terms(theta)
    return 1.0 - (1.0 - cp_c) * speed2 + drag_gain * f_drag + lift_gain * f_lift


@dataclass
class Ambient:
    """The air over the campaign: linear trends in time [s from the campaign start]."""

    spec: SynthSpec
    total: float

    def __call__(self, t_abs, rng, dt):
        s = self.spec
        frac = np.asarray(t_abs) / self.total
        n = np.size(t_abs)
        T = s.temperature + s.temperature_rise * frac + 0.02 * ar1(rng, n, dt, 1.0)
        p = s.pressure + s.pressure_change * frac + 2.0 * ar1(rng, n, dt, 1.0)
        RH = s.relative_humidity - 0.03 * frac + 0.002 * ar1(rng, n, dt, 1.0)
        return T, p, RH


def zero_signals(spec: SynthSpec, t_abs, steps) -> np.ndarray:
    """Channel zeros [V] at campaign times t_abs: offset, linear drift, and planted steps."""
    t = np.asarray(t_abs, dtype=float)[..., None]
    v0 = np.asarray(spec.zero_offsets) + np.asarray(spec.zero_drift) * t / 3600.0
    for when, volts in steps:
        v0 = v0 + np.where(t > when, volts, 0.0)
    return v0


def stream_times(rng, rate: float, duration: float) -> np.ndarray:
    """Sample times of one stream: its own start offset (streams are not synchronised)."""
    offset = rng.uniform(0.0, 1.0 / rate)
    return offset + np.arange(int(round(duration * rate))) / rate


def tare_loads(spec: SynthSpec, omega) -> np.ndarray:
    """Wind-off spin loads on the balance axes, shape (..., 3): Fx, Fy [N], Mz [N m]."""
    w = np.asarray(omega, dtype=float)
    fx = spec.tare_force[0] * (w / 1000.0) ** 2
    fy = spec.tare_force[1] * w * np.abs(w) / 1000.0**2
    mz = -np.sign(w) * (
        spec.tare_friction + spec.tare_viscous * np.abs(w) + spec.tare_windage * w**2
    )
    return np.stack([fx, fy, mz], axis=-1)


def imbalance_loads(spec: SynthSpec, omega, angle) -> np.ndarray:
    """Once-per-revolution force of the rotor imbalance after the anti-alias filter."""
    w = np.asarray(omega, dtype=float)
    f_rev = np.abs(w) / (2.0 * np.pi)
    corner = spec.antialias_fraction * spec.balance_rate
    gain = 1.0 / np.sqrt(1.0 + (f_rev / corner) ** 8)
    force = spec.imbalance * w**2 * gain
    return np.stack([force * np.cos(angle), force * np.sin(angle), np.zeros_like(w)], axis=-1)


def knock(t, peak: float) -> np.ndarray:
    """Load of a knock on the model at sample times ``t`` [s], its largest sample ``peak`` [N].

    The model rings on the balance at its natural frequency under a Gaussian envelope, odd about
    the middle sample, so the samples sum to zero (to rounding) and the mean load is untouched.
    """
    x = np.asarray(t, dtype=float) - t[np.size(t) // 2]
    ring = np.sin(2.0 * np.pi * _KNOCK_FREQUENCY * x) * np.exp(-0.5 * (x / _KNOCK_WIDTH) ** 2)
    return peak * ring / np.max(np.abs(ring))
