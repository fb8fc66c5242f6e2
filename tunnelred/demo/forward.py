"""The forward model of a synthetic test: what the instruments would record.

Independent of the reduction by rule (DEVELOPERS.md): nothing here calls tunnelred.physics or
tunnelred.engine; every physical step is written forward, from first principles, so that a
formula wrong in the reduction cannot be wrong the same way here (tests/test_layering.py checks
the imports). In the order it runs for a data run (driven by :mod:`tunnelred.demo.writer`):

1. Air from T, p, RH (:func:`moist_air_density`, CIPM-2007 re-coded from the paper in
   partial-pressure form; :func:`air_viscosity`, Sutherland in reference form); the free stream
   ``U(t)`` from the set speed with a set-point error, a slow drift and AR(1) turbulence-like
   fluctuations (correlated, so the effective number of samples is far below the sample count);
   the pitot reads the isentropic impact pressure of the reference stream
   (:func:`pitot_reading`).
2. The spin ``omega(t)`` from the set rpm with AR(1) jitter; the tachometer and the encoder.
3. Wall interference, forward (:func:`in_tunnel`): the images of the model's doublet and the
   source of its wake speed up the stream at the model, ``U_c = U_u (1 + eps)``; the model feels
   the free-air coefficients at ``alpha_c``, ``Re_c`` on ``q_c``; its drag adds the buoyancy of
   the empty tunnel's pressure gradient and of the wake images' gradient. The image sums are
   taken numerically. It runs sample by sample, so the loads follow the instantaneous speed and
   spin.
4. Balance: aerodynamic loads plus vortex-shedding fluctuations, plus the spin tare (bearing
   friction torque, small spin-induced forces) and a rotor-imbalance vibration, turned from wind
   to balance axes (:func:`wind_to_balance`), into channel signals by the balance's response,
   the inverse of its calibration (:func:`channel_signals`), plus channel zeros that drift
   linearly in time, plus noise.
5. Surface pressure at mid-span (:func:`tunnel_cp`): rotating taps read the in-tunnel pressure
   at the azimuth they held one tubing delay earlier, less the rigid-body rotation head of the
   air column between tap and transducer (:func:`tubing_head`), plus noise.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.signal import lfilter

from tunnelred.demo.spec import SynthSpec
from tunnelred.demo.truth import (
    LIFT_TERM_CL,
    correction_terms,
    shaped_cp,
    true_drag_coefficient,
    true_lift_coefficient,
    true_pressure_coefficients,
    true_torque_coefficient,
)

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


# ---------------------------------------------------------------------------------------------
# Physics of the test, written forward (none of it calls the reduction's formulas; see
# DEVELOPERS.md "The forward model is independent")
# ---------------------------------------------------------------------------------------------

# CIPM-2007 moist air, written from Picard, Davis, Gläser and Fujii, Metrologia 45 (2008)
# 149-155, appendix A1 (the equation the reduction inverts is re-coded here from the paper, in
# partial-pressure form).
_GAS_CONSTANT = 8.314472  # J/(mol K)
_MOLAR_MASS_DRY = 28.96546e-3  # kg/mol at 400 ppm CO2
_MOLAR_MASS_WATER = 18.01528e-3  # kg/mol
_PSV_COEFFS = (1.2378847e-5, -1.9121316e-2, 33.93711047, -6.3431645e3)
_ENHANCE = (1.00062, 3.14e-8, 5.6e-7)
_Z_COEFFS = (1.58123e-6, -2.9331e-8, 1.1043e-10, 5.707e-6, -2.051e-8, 1.9898e-4, -2.376e-6)
_Z_SECOND = (1.83e-11, -0.765e-8)
# Sutherland's law in its reference form (mu_ref at T_ref, constant S; from memory).
_MU_REF, _T_REF, _SUTHERLAND = 1.716e-5, 273.15, 110.4
_GAMMA = 1.4  # ratio of specific heats of air


def moist_air_density(T, p, RH):
    """Density [kg/m³] of moist air at T [K], p [Pa], RH [fraction]: dry and vapour parts."""
    T, p, RH = (np.asarray(x, dtype=float) for x in (T, p, RH))
    t = T - 273.15
    A, B, C, D = _PSV_COEFFS
    p_sat = np.exp(A * T * T + B * T + C + D / T)
    p_vapour = RH * (_ENHANCE[0] + _ENHANCE[1] * p + _ENHANCE[2] * t * t) * p_sat
    x_v = p_vapour / p
    a0, a1, a2, b0, b1, c0, c1 = _Z_COEFFS
    d, e = _Z_SECOND
    virial = a0 + a1 * t + a2 * t * t + (b0 + b1 * t) * x_v + (c0 + c1 * t) * x_v * x_v
    Z = 1.0 - p / T * virial + (p / T) ** 2 * (d + e * x_v * x_v)
    return ((p - p_vapour) * _MOLAR_MASS_DRY + p_vapour * _MOLAR_MASS_WATER) / (
        Z * _GAS_CONSTANT * T
    )


def air_viscosity(T):
    """Dynamic viscosity [Pa s] at T [K]."""
    T = np.asarray(T, dtype=float)
    return _MU_REF * (T / _T_REF) ** 1.5 * (_T_REF + _SUTHERLAND) / (T + _SUTHERLAND)


def pitot_reading(rho, U, p_static):
    """Impact pressure [Pa] a pitot-static probe reads in a stream of rho, U at p_static.

    Isentropic deceleration to rest: p0 = p (1 + (γ−1)/2 M²)^(γ/(γ−1)), M² = ρU²/(γp).
    """
    m2 = rho * U * U / (_GAMMA * p_static)
    return p_static * ((1.0 + 0.5 * (_GAMMA - 1.0) * m2) ** (_GAMMA / (_GAMMA - 1.0)) - 1.0)


def tubing_head(rho, omega, R, r_transducer):
    """Pressure fall [Pa] from the tap at radius R to the transducer at r_transducer.

    The air in the tube turns with the model as a rigid body, dp/dr = ρω²r, integrated from
    r_transducer to R.
    """
    return rho * omega * omega * (R * R - r_transducer * r_transducer) / 2.0


def wind_to_balance(drag, lift, phi):
    """Balance-axis forces (Fx, Fy) [N] of a drag and lift, balance x at phi [deg] from the wind.

    The wind frame turned by −phi about z: the stream direction has components (cos φ, −sin φ)
    in balance axes and the lift direction (sin φ, cos φ).
    """
    c, s = np.cos(np.radians(phi)), np.sin(np.radians(phi))
    return drag * c + lift * s, -drag * s + lift * c


def channel_signals(loads, matrix) -> np.ndarray:
    """Signals [V] that a linear calibration ``loads = matrix @ signals`` turns into ``loads``.

    ``loads`` has shape (..., 3); the balance's response is the matrix's inverse (square, 3 × 3).
    """
    loads = np.asarray(loads, dtype=float)
    response = np.linalg.inv(np.asarray(matrix, dtype=float))
    return loads @ response.T


# Wall images of a model midway between floor and ceiling h apart sit at y = ±n h, n = 1, 2, …
# The sums over them are taken numerically (with the Euler-Maclaurin tail), not from the
# closed forms the reduction's methods quote.
_IMAGES = np.arange(1, 20001, dtype=float)
_SUM_INV_SQUARES = float(np.sum(1.0 / _IMAGES**2) + 1.0 / 20000.5)
_SUM_ALTERNATING = float(np.sum((-1.0) ** (_IMAGES + 1.0) / _IMAGES**2))


def _doublet_speed_up(R, h):
    """Fractional speed increment at the model from the images of its doublet (U R² per span).

    A doublet of strength U R² at ±i n h induces u = U R²/(n h)² on the model's axis.
    """
    return 2.0 * (R / h) ** 2 * _SUM_INV_SQUARES


def _image_strain(R, h):
    """σ of the bound vortex's images (they alternate in sign): the lift rises by 1 + 2σ."""
    return (R / h) ** 2 * _SUM_ALTERNATING


def in_tunnel(
    spec: SynthSpec, end_plates: bool, U_u, q_u, omega, rho, mu, *, lift_offset: float = 0.0
) -> dict:
    """The free-air truth the model experiences in the tunnel, and what the tunnel measures.

    Inputs are the tunnel's reference (uncorrected) speed [m/s] and dynamic pressure [Pa], the
    spin rate [rad/s] and the air [kg/m³, Pa s], as scalars or arrays (sample by sample).

    The walls, forward: the images of the model's doublet and the source of its wake (strength
    ``m = D'/(ρ U)`` per span, from the drag per span D' the model really feels) speed the
    stream at the model up to ``U_c = U_u (1 + eps)``, ``eps = eps_solid + m/(2 h U_u)``; the
    model feels the free-air coefficients at ``alpha_c = omega R / U_c`` and ``Re_c`` on
    ``q_c = ρ U_c²/2``. Its drag per span adds the buoyancy of two pressure gradients, each
    ``−2 (π d²/4) dp/dx`` (volume and added mass of a circle): the empty tunnel's, and that of
    the wake source's images, ``dp/dx = −ρ U_u du/dx``, ``du/dx = (m/π h²) Σ 1/n²``. With lift
    interference on, the images of the bound vortex raise the lift by ``1 + 2σ``. eps depends
    on D', which depends on eps: the loop iterates to convergence. ``lift_offset`` is added to
    the free-air CL (a planted hysteresis: :attr:`SynthSpec.down_sweep_lift_offset`).
    """
    U_u, q_u, omega, rho, mu = (np.asarray(x, dtype=float) for x in (U_u, q_u, omega, rho, mu))
    d, h = spec.diameter, spec.tunnel_height
    R = d / 2.0
    eps_solid = _doublet_speed_up(R, h) * np.ones_like(U_u)
    lift_gain = 1.0 + 2.0 * _image_strain(R, h) if spec.lift_interference else 1.0
    gradient = spec.static_pressure_gradient if spec.buoyancy else 0.0
    volume_and_added_mass = 2.0 * np.pi * R * R
    empty_buoyancy = -volume_and_added_mass * gradient  # [N/m]
    # The wake's image gradient per unit of drag per span: dp/dx = −ρ U du/dx = −D' Σ/(π h²).
    wake_buoyancy_per_drag = volume_and_added_mass * _SUM_INV_SQUARES / (np.pi * h * h)
    if not spec.buoyancy:
        wake_buoyancy_per_drag = 0.0
    eps = eps_solid
    for _ in range(200):
        U_c = U_u * (1.0 + eps)
        alpha_c = omega * R / U_c
        Re_c = rho * U_c * d / mu
        cl, cd, cm, cl_p, cd_p = _truth_coefficients(alpha_c, Re_c, end_plates)
        q_c = 0.5 * rho * U_c * U_c
        drag = (cd * q_c * d + empty_buoyancy) / (1.0 - wake_buoyancy_per_drag)
        eps_wake = drag / (rho * U_u) / (2.0 * h * U_u)
        new = eps_solid + eps_wake
        step = np.max(np.abs(new - eps))
        eps = new
        if step < 1e-15:
            break
    U_c = U_u * (1.0 + eps)
    alpha_c = omega * R / U_c
    Re_c = rho * U_c * d / mu
    cl, cd, cm, cl_p, cd_p = _truth_coefficients(alpha_c, Re_c, end_plates)
    cl = cl + lift_offset
    q_c = 0.5 * rho * U_c * U_c
    drag = (cd * q_c * d + empty_buoyancy) / (1.0 - wake_buoyancy_per_drag)
    wake_gradient = -drag * _SUM_INV_SQUARES / (np.pi * h * h) if spec.buoyancy else 0.0
    total_gradient = gradient + wake_gradient
    ratio = q_c / q_u
    qd = q_u * d
    alpha_u = omega * R / U_u
    result = {
        "U": U_c,
        "q": q_c,
        "alpha": alpha_c,
        "Re": Re_c,
        "CL": cl,
        "CD": cd,
        "CM": cm,
        "CL_p": cl_p,
        "CD_p": cd_p,
        "C_power": cm * alpha_c,
        "U_uncorrected": U_u,
        "q_uncorrected": q_u,
        "alpha_uncorrected": alpha_u,
        "Re_uncorrected": rho * U_u * d / mu,
        "CL_uncorrected": cl * ratio * lift_gain,
        "CD_uncorrected": drag / qd,
        "CM_uncorrected": cm * ratio,
        "C_power_uncorrected": cm * ratio * alpha_u,
        # The mid-span section: its pressures carry both gradients' buoyancy (see tunnel_cp).
        "CL_p_uncorrected": cl_p * ratio * lift_gain,
        "CD_p_uncorrected": cd_p * ratio - np.pi * R * total_gradient / q_u,
        "eps": eps,
        "eps_solid": eps_solid,
        "eps_wake": eps - eps_solid,
        "delta_CD_buoyancy": empty_buoyancy / qd,
        "q_ratio": ratio,
        "pressure_gradient": total_gradient,
        "lift_gain": lift_gain,
        "radius": R,
    }
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
    """In-tunnel Cp at theta [rad], on the tunnel's reference static pressure and q_u.

    The total pressure is the tunnel's, so the free-air profile on q_c reads
    ``1 − (1 − Cp) q_c/q_u``; a stream pressure gradient G adds ``x G`` twice over (the
    gradient and the flow it turns about the circle), ``x = −R cos θ``; lift interference adds
    the base-weighted lift term that carries the extra ``2σ`` of lift.
    """
    ratio = state["q_ratio"]
    cp_c = shaped_cp(theta, state["CL_p"], state["CD_p"])
    q_u = state["q_uncorrected"]
    gradient = -2.0 * state["radius"] * np.cos(theta) * state["pressure_gradient"] / q_u
    extra_lift = (state["lift_gain"] - 1.0) * state["CL_p"] * ratio / LIFT_TERM_CL
    _, f_lift = correction_terms(theta)
    return 1.0 - (1.0 - cp_c) * ratio + gradient + extra_lift * f_lift


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
