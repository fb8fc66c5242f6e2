"""Synthetic campaigns with known truth: the demo data and the end-to-end tests.

:func:`make_campaign` writes a complete campaign folder (campaign.toml, runs.csv, logs/) from a
:class:`SynthSpec` by running a forward model of the test, and a ``truth.csv`` holding, per data
run, the free-air coefficients the reduction should recover and the in-tunnel (uncorrected)
values the forward model produced. :func:`write_demo_campaign` writes the invented demo scenario
of ``sample_runs/``.

The coefficient model (:func:`true_lift_coefficient` and friends) is an **illustrative model
shaped like published rotating-cylinder measurements, not data**: lift well short of the
potential-flow ``-2 pi alpha`` and saturating past ``alpha`` ≈ 2.5-3, more of it with end plates;
drag about 1.15 at rest, falling to a minimum near ``alpha`` ≈ 1.5-2 and rising again; a torque
rising with the spin ratio; a weak Reynolds-number dependence throughout.

The forward model, in the order it runs for a data run:

1. Air from T, p, RH (:func:`tunnelred.physics.air.density`, :func:`tunnelred.physics.air.viscosity`); the free
   stream ``U(t)`` from the set speed with a set-point error, a slow drift and AR(1)
   turbulence-like fluctuations (correlated, so the effective number of samples is far below the
   sample count); the pitot reads the impact pressure of the *uncorrected* ``q_u``
   (:func:`tunnelred.physics.conditions.impact_pressure`).
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
   :func:`tunnelred.physics.balance.signals_from_loads`, plus channel zeros that drift linearly in time,
   plus noise.
5. Surface pressure at mid-span: rotating taps read ``Cp_u(theta) q_u`` at the azimuth they held
   one tubing delay earlier, minus the centrifugal head of the air column between tap and
   transducer, plus noise.

A :class:`Fault` changes this forward model for one run (an unsteady drive, a drifting tunnel, a
leaking tap, a knock on the model, a wrong pitot or scanner reference, …), each kind built to
raise one quality flag; every faulty run is followed by a clean retake.

Conventions are those of DESIGN.md §4. In particular ``Mz`` is the aerodynamic torque on the model
about +z: it opposes the spin, so ``CM`` has the sign opposite to ``alpha`` and
``C_power = CM alpha`` is negative (power taken from the drive).
"""

from __future__ import annotations

import math
import shutil
from dataclasses import dataclass, field
from datetime import datetime, timedelta
from pathlib import Path

import numpy as np
import pandas as pd
from scipy.signal import lfilter

from tunnelred.common._arraylike import arraylike
from tunnelred.inputs.config import Configuration
from tunnelred.physics import air, balance, conditions, corrections, pressure

__all__ = [
    "FAULT_KINDS",
    "Fault",
    "SynthSpec",
    "true_lift_coefficient",
    "true_drag_coefficient",
    "true_torque_coefficient",
    "true_pressure_coefficients",
    "true_surface_cp",
    "make_campaign",
    "demo_spec",
    "write_demo_campaign",
]

#: Faults that :class:`SynthSpec` can plant, as named in truth.csv ``planted_fault``. Each is
#: named for the quality flag (:data:`tunnelred.engine.quality.FLAG_NAMES`) it is built to raise; what
#: each one changes in the forward model, and the unit of its ``size``, is in :class:`Fault`.
FAULT_KINDS = (
    "spin_scatter",
    "speed_drift",
    "dead_tap",
    "zero_shift",
    "spin_drift",
    "temperature_drift",
    "stream_overlap",
    "tare_extrapolated",
    "overload",
    "few_revolutions",
    "cl_disagreement",
    "repeat_disagreement",
    "stagnation_cp",
)

#: Faults whose run carries a pressure log whatever the spec's pressure set points say.
_PRESSURE_FAULTS = ("dead_tap", "few_revolutions", "cl_disagreement", "stagnation_cp")

#: The knock of the ``overload`` fault: the model rings on the balance at this (invented)
#: natural frequency [Hz] under a Gaussian envelope of this standard deviation [s].
_KNOCK_FREQUENCY = 25.0
_KNOCK_WIDTH = 0.04

_RPM = 2.0 * math.pi / 60.0  # rad/s per rpm
_REFERENCE_RE = 1.0e5


# ---------------------------------------------------------------------------------------------
# The illustrative coefficient model (free air)
# ---------------------------------------------------------------------------------------------


def _lift_shape(end_plates):
    """Saturation lift and spin-ratio scale of the tanh² lift curve."""
    return (9.0, 1.8) if end_plates else (5.5, 1.6)


@arraylike
def true_lift_coefficient(alpha, reynolds, *, end_plates):
    """Whole-span lift coefficient of the illustrative rotating-cylinder model, in free air.

    An illustrative model shaped like published rotating-cylinder measurements, NOT data.

    Parameters
    ----------
    alpha : float or array_like
        Spin ratio ``omega R / U``, signed. [-]
    reynolds : float or array_like
        Reynolds number ``rho U d / mu``. [-]
    end_plates : bool
        Whether the model carries end plates.

    Returns
    -------
    float or ndarray
        ``CL`` on ``q d b``; negative for positive spin (DESIGN.md §4). [-]

    Notes
    -----
    .. math:: C_L = -\\operatorname{sign}(\\alpha)\\, C_{L,sat}
              \\tanh^2(|\\alpha|/\\alpha_s)\\,(Re/10^5)^{0.03}

    with ``C_L,sat = 9``, ``alpha_s = 1.8`` with end plates and ``5.5``, ``1.6`` without. The
    curve leaves zero flat, is steepest near ``alpha`` ≈ 1-1.5 and saturates past 2.5-3, and
    stays below ``2 pi |alpha|`` everywhere (``tanh x <= x``). Intended for
    ``|alpha| <= 5`` and ``Re`` from 10⁴ to 10⁶.

    References
    ----------
    .. [1] A. Thom, "Effects of discs on the air forces on a rotating cylinder", ARC R&M 1623,
       1934 (the shape: lift raised by end discs, saturating at high spin ratio).
    .. [2] C. Badalamenti and S. A. Prince, "The effects of endplates on a rotating cylinder in
       crossflow", AIAA paper 2008-7063, 2008 (the shape of CL and CD against alpha).

    Examples
    --------
    >>> round(true_lift_coefficient(2.0, 1e5, end_plates=True), 2)
    -5.82
    """
    a = np.asarray(alpha, dtype=float)
    sat, scale = _lift_shape(end_plates)
    return -np.sign(a) * sat * np.tanh(np.abs(a) / scale) ** 2 * _re_factor(reynolds, 0.03)


def _re_factor(reynolds, exponent):
    return (np.asarray(reynolds, dtype=float) / _REFERENCE_RE) ** exponent


def _drag_curve(alpha, reynolds, rise):
    a = np.abs(np.asarray(alpha, dtype=float))
    cd0 = 1.15 - 0.02 * np.log10(np.asarray(reynolds, dtype=float) / _REFERENCE_RE)
    return cd0 - 0.75 * (1.0 - np.exp(-(a**2))) + rise * a**2


@arraylike
def true_drag_coefficient(alpha, reynolds, *, end_plates):
    """Whole-span drag coefficient of the illustrative rotating-cylinder model, in free air.

    An illustrative model shaped like published rotating-cylinder measurements, NOT data.

    Parameters
    ----------
    alpha : float or array_like
        Spin ratio, signed. [-]
    reynolds : float or array_like
        Reynolds number. [-]
    end_plates : bool
        Whether the model carries end plates.

    Returns
    -------
    float or ndarray
        ``CD`` on ``q d b``. [-]

    Notes
    -----
    .. math:: C_D = C_{D0}(Re) - 0.75\\,(1 - e^{-\\alpha^2}) + k\\,\\alpha^2, \\qquad
              C_{D0} = 1.15 - 0.02 \\log_{10}(Re/10^5)

    ``k = 0.04`` with end plates, ``0.07`` without (the tip vortices' induced drag). The
    subcritical value at rest is 1.13-1.17 for ``Re`` from 10⁴ to 10⁶; the minimum falls at
    ``alpha`` ≈ 1.75 with end plates and ≈ 1.5 without. Intended for ``|alpha| <= 5``.

    References
    ----------
    .. [1] C. Badalamenti and S. A. Prince, AIAA paper 2008-7063, 2008 (the shape).
    .. [2] W. M. Swanson, "The Magnus effect: a summary of investigations to date", J. Basic
       Engineering 83 (1961) 461-470 (the shape).

    Examples
    --------
    >>> round(true_drag_coefficient(0.0, 1e5, end_plates=True), 3)
    1.15
    """
    return _drag_curve(alpha, reynolds, 0.04 if end_plates else 0.07)


@arraylike
def true_torque_coefficient(alpha, reynolds, *, end_plates):
    """Aerodynamic torque coefficient of the illustrative rotating-cylinder model, in free air.

    An illustrative model shaped like published rotating-cylinder measurements, NOT data.

    Parameters
    ----------
    alpha : float or array_like
        Spin ratio, signed. [-]
    reynolds : float or array_like
        Reynolds number. [-]
    end_plates : bool
        Whether the model carries end plates (their faces add friction).

    Returns
    -------
    float or ndarray
        ``CM = Mz/(q d b R)``, the torque the air exerts about +z; it opposes the spin. [-]

    Notes
    -----
    Skin friction ``c_f`` on a surface moving at ``omega R`` gives a torque
    ``c_f (1/2) rho (omega R)^2 pi d b R``, i.e. ``CM = pi c_f alpha^2``; a linear term stands for
    the laminar part at low spin:

    .. math:: C_M = -\\operatorname{sign}(\\alpha)\\, \\pi c_f (\\alpha^2 + 0.5|\\alpha|)\\, f_p,
              \\qquad c_f = 0.012 (Re/10^5)^{-0.2}

    with ``f_p = 1.15`` with end plates, 1 without. Intended for ``|alpha| <= 5``.

    References
    ----------
    .. [1] H. Schlichting and K. Gersten, Boundary-Layer Theory, 8th ed., Springer, 2000
       (the ``Re^-0.2`` law of turbulent skin friction).

    Examples
    --------
    >>> round(true_torque_coefficient(2.0, 1e5, end_plates=False), 4)
    -0.1885
    """
    a = np.asarray(alpha, dtype=float)
    cf = 0.012 * _re_factor(reynolds, -0.2)
    plates = 1.15 if end_plates else 1.0
    return -np.sign(a) * np.pi * cf * (a**2 + 0.5 * np.abs(a)) * plates


@arraylike
def true_pressure_coefficients(alpha, reynolds, *, end_plates):
    """Mid-span pressure lift and drag coefficients ``CL_p``, ``CD_p`` of the model, in free air.

    An illustrative model shaped like published rotating-cylinder measurements, NOT data.

    Parameters
    ----------
    alpha : float or array_like
        Spin ratio, signed. [-]
    reynolds : float or array_like
        Reynolds number. [-]
    end_plates : bool
        Whether the model carries end plates.

    Returns
    -------
    CL_p, CD_p : float or ndarray
        ``½∮Cp sin θ dθ`` and ``½∮Cp cos θ dθ`` at mid-span. [-]

    Notes
    -----
    Mid-span sees nearly two-dimensional flow, the span average does not: without end plates
    the tip vortices shed circulation toward the ends, so the mid-span section lifts more than
    the span average, ``CL_p = 1.15 CL``; end plates keep the loading nearly uniform, and the
    model takes it as uniform, ``CL_p = CL``. The pressure drag follows the end-plate drag curve
    (no tip-induced drag at mid-span) less 3 % of skin friction, in both configurations:
    ``CD_p = 0.97 CD_plates``.

    References
    ----------
    .. [1] C. Badalamenti and S. A. Prince, AIAA paper 2008-7063, 2008 (end effects on lift).

    Examples
    --------
    >>> cl_p, cd_p = true_pressure_coefficients(0.0, 1e5, end_plates=False)
    >>> round(cd_p, 4)
    1.1155
    """
    factor = 1.0 if end_plates else 1.15
    cl_p = factor * true_lift_coefficient(alpha, reynolds, end_plates=end_plates)
    return cl_p, 0.97 * _drag_curve(alpha, reynolds, 0.04)


# Cp shape: attached potential-like front (1 - (a_e + 2 sin θ)², softly floored), a separated base,
# a window between the separation angles. The fine grid integrates the periodic shape to machine
# precision (trapezoid rule on a smooth periodic function).
_GRID = np.linspace(-np.pi, np.pi, 721)[:-1]
_DGRID = _GRID[1] - _GRID[0]
_SHAPE_ALPHA = np.linspace(0.0, 2.5, 251)


def _sigmoid(x):
    return 0.5 * (1.0 + np.tanh(x))


def _cp_shape(theta, a_e):
    """Base shape for a_e >= 0; theta [rad] wrapped to (-pi, pi]."""
    attached = 1.0 - (a_e + 2.0 * np.sin(theta)) ** 2
    floor = -1.25 - 3.0 * a_e - 3.0 * a_e**2
    soft = 0.25
    # Softplus floor, shifted so that Cp = 1 stays exactly 1.
    lift_off = soft * np.log1p(np.exp(-(1.0 - floor) / soft))
    attached = floor + soft * np.logaddexp(0.0, (attached - floor) / soft) - lift_off
    base = -1.05 - 0.6 * a_e - 0.9 * a_e**2
    upper = np.deg2rad(78.0 + 25.0 * a_e)
    lower = np.deg2rad(-78.0 + 5.0 * a_e)
    width = np.deg2rad(10.0)
    w = _sigmoid((theta - lower) / width) * _sigmoid((upper - theta) / width)
    return w * attached + (1.0 - w) * base


def _integrals(cp_on_grid):
    """(½∮Cp sin θ dθ, ½∮Cp cos θ dθ) over the last axis, on the fine grid."""
    return (
        0.5 * np.sum(cp_on_grid * np.sin(_GRID), axis=-1) * _DGRID,
        0.5 * np.sum(cp_on_grid * np.cos(_GRID), axis=-1) * _DGRID,
    )


# Base-weighted correction terms: zero with zero slope at the windward point, so a stagnation
# Cp of 1 is untouched; f_D has no lift integral, f_L no drag integral.
_F_DRAG = ((1.0 - np.cos(_GRID)) / 2.0) ** 3
_F_LIFT = np.sin(_GRID) * _F_DRAG
_F_DRAG_CD = _integrals(_F_DRAG)[1]
_F_LIFT_CL = _integrals(_F_LIFT)[0]
_SHAPE_CL = _integrals(_cp_shape(_GRID, _SHAPE_ALPHA[:, None]))[0]


def _correction_terms(theta):
    """f_D(θ), f_L(θ) at theta [rad]."""
    f_drag = ((1.0 - np.cos(theta)) / 2.0) ** 3
    return f_drag, np.sin(theta) * f_drag


def _shaped_cp(theta, cl_p, cd_p):
    """Cp(θ) [theta in rad] with ½∮Cp sin θ = cl_p and ½∮Cp cos θ = cd_p exactly.

    The gains are solved on the shape of ``cl_p``, ``cd_p`` (run level), then the profile is
    evaluated at ``theta``, which broadcasts with them.
    """
    cl_p = np.asarray(cl_p, dtype=float)
    cd_p = np.asarray(cd_p, dtype=float)
    mirror = np.where(cl_p > 0.0, -1.0, 1.0)  # the shape is built for negative lift
    a_e = np.interp(np.abs(cl_p), -_SHAPE_CL, _SHAPE_ALPHA)
    cl0, cd0 = _integrals(_cp_shape(_GRID, a_e[..., None]))
    lift_gain = (-np.abs(cl_p) - cl0) / _F_LIFT_CL
    drag_gain = (cd_p - cd0) / _F_DRAG_CD
    th = np.angle(np.exp(1j * mirror * theta))
    f_drag, f_lift = _correction_terms(th)
    return _cp_shape(th, a_e) + drag_gain * f_drag + lift_gain * f_lift


@arraylike
def true_surface_cp(theta, alpha, reynolds, *, end_plates):
    """Mid-span surface pressure coefficient of the illustrative model, in free air.

    An illustrative model shaped like published rotating-cylinder measurements, NOT data.

    Parameters
    ----------
    theta : float or array_like
        Azimuth from the windward point, positive in the sense of positive spin. [deg]
    alpha : float or array_like
        Spin ratio, signed; broadcasts with ``theta``. [-]
    reynolds : float or array_like
        Reynolds number; broadcasts with ``theta``. [-]
    end_plates : bool
        Whether the model carries end plates.

    Returns
    -------
    float or ndarray
        ``Cp(θ)``; ``½∮Cp sin θ dθ`` and ``½∮Cp cos θ dθ`` equal ``CL_p`` and ``CD_p`` of
        :func:`true_pressure_coefficients` exactly. [-]

    Notes
    -----
    A base shape: the potential-flow front ``1 − (a_e + 2 sin θ)²`` [1]_ with an equivalent
    spin ratio ``a_e`` (chosen so that the shape alone carries ``CL_p``, capped at 2.5), its
    suction softly floored at ``−1.25 − 3 a_e − 3 a_e²``, joined through tanh windows at the
    separation angles ``−78° + 5 a_e`` and ``78° + 25 a_e`` (both move with the spin) to a
    separated base ``−1.05 − 0.6 a_e − 0.9 a_e²``. Then
    ``Cp = shape + A f_D + B f_L`` with ``f_D = ((1 − cos θ)/2)³``, ``f_L = sin θ f_D``: both
    vanish with zero slope at ``θ = 0`` (so an ``alpha = 0`` stagnation Cp stays 1), ``f_D``
    has no lift integral and ``f_L`` no drag integral, and ``A``, ``B`` are solved so the
    integrals are exact. Negative spin mirrors the shape, ``Cp(θ, −α) = Cp(−θ, α)``. At
    ``a_e > 2`` the front pressure peak falls below 1, as the stagnation point leaves the
    surface.

    References
    ----------
    .. [1] J. D. Anderson, Fundamentals of Aerodynamics, 6th ed., McGraw-Hill, 2017, §3.15
       (surface pressure of the lifting cylinder).

    Examples
    --------
    >>> round(true_surface_cp(0.0, 0.0, 1e5, end_plates=True), 5)
    1.0
    """
    th = np.deg2rad(np.asarray(theta, dtype=float))
    cl_p, cd_p = true_pressure_coefficients(alpha, reynolds, end_plates=end_plates)
    return _shaped_cp(th, cl_p, cd_p)


# ---------------------------------------------------------------------------------------------
# The specification of a synthetic campaign
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Fault:
    """A flaw planted on purpose in one data run.

    Each kind changes the forward model of the test, never its outputs: the logs are what the
    instruments would have recorded with that flaw. truth.csv keeps the true free-air values, so a
    faulty run's results depart from them where the flaw biases a measurement.

    Parameters
    ----------
    kind : str
        What goes wrong, one of :data:`FAULT_KINDS` (named for the flag it raises):

        - ``spin_scatter``: the drive holds the rpm badly (AR(1) scatter with the spec's
          ``spin_jitter_time``).
        - ``speed_drift``: the tunnel speed changes linearly over the record, rpm held.
        - ``dead_tap``: one tap flat-lines at the revolution-average pressure (its tubing leaks
          into the model's cavity).
        - ``zero_shift``: every balance zero steps just after the run, before its post-zero.
        - ``spin_drift``: the drive's rpm changes linearly over the record (its controller sags).
        - ``temperature_drift``: the air warms linearly over the record; density, viscosity and
          q follow it.
        - ``stream_overlap``: the tunnel log stops before the end of the record (the balance and
          pressure logs run on).
        - ``tare_extrapolated``: the run names only the spin-tare runs spun at most ``size``
          times its own rpm, as when the tare sweep stopped short of the data rpm; the spin
          must not be zero.
        - ``overload``: a knock on the model: the balance rings at 25 Hz under a Gaussian
          envelope (40 ms standard deviation) along the balance y axis, centred on a sample in
          mid-record; the ringing is odd about that sample, so it adds nothing to the mean load.
        - ``few_revolutions``: the acquisition stops early on every stream (the record is cut
          short); the run carries a pressure log.
        - ``cl_disagreement``: the pressure scanner's span is wrong (a wrong range setting):
          every tap reading, centrifugal head included, is ``1 + size`` times what it should be;
          the run carries a pressure log.
        - ``repeat_disagreement``: the pitot-static transducer reads ``size`` above the impact
          pressure (a zero offset): q, U, alpha and every coefficient of the run are biased
          alike, which only a repeat of the set point reveals.
        - ``stagnation_cp``: the scanner's reference port sees ``size`` above the tunnel static
          pressure (a leaking or misplaced reference tube), so every tap reads that much low;
          the run is at rest (``spin_ratio`` 0) and carries a pressure log.
    config : str
        Configuration label of the run.
    speed : float
        Set tunnel speed of the run. [m/s]
    spin_ratio : float
        Nominal spin ratio of the run (the first run of the up sweep at this point). [-]
    size : float
        How large the flaw is, by kind: ``spin_scatter`` the relative standard deviation of the
        rpm [-]; ``speed_drift``, ``spin_drift`` the relative change of U, or of the rpm, from
        start to end of the record [-]; ``zero_shift`` the step of every channel's zero, as a
        fraction of that load's full scale [-]; ``dead_tap`` the index (0-based) of the tap;
        ``temperature_drift`` the change of T from start to end of the record [K];
        ``stream_overlap`` the fraction of the record the tunnel log covers (0 to 1) [-];
        ``tare_extrapolated`` the largest tare rpm named, as a fraction of the run's set rpm
        (0 to 1) [-]; ``overload`` the peak of the knock as a fraction of the Fy full scale [-];
        ``few_revolutions`` the record length [s]; ``cl_disagreement`` the scanner's relative
        span error [-]; ``repeat_disagreement`` the pitot zero offset [Pa]; ``stagnation_cp``
        the reference-pressure offset [Pa].

    Raises
    ------
    ValueError
        For an unknown kind, or a size or spin ratio the kind cannot take.

    Notes
    -----
    Every faulty run is followed by a clean retake at the same set point. A fault that biases
    the coefficients (``zero_shift``, ``repeat_disagreement``) makes the faulty run disagree with
    that retake; give the set point a third run (a down-sweep point or a repeat) so that the
    repeat check can tell which one is wrong.

    Examples
    --------
    >>> Fault("stagnation_cp", "plates", 9.0, 0.0, 5.0).kind
    'stagnation_cp'
    """

    kind: str
    config: str
    speed: float
    spin_ratio: float
    size: float

    def __post_init__(self):
        if self.kind not in FAULT_KINDS:
            raise ValueError(f"unknown fault kind {self.kind!r}; known: {', '.join(FAULT_KINDS)}")
        fractions = ("stream_overlap", "tare_extrapolated")
        if self.kind in fractions and not 0.0 < self.size < 1.0:
            raise ValueError(f"a {self.kind} fault takes a size between 0 and 1; got {self.size}")
        if self.kind == "few_revolutions" and not self.size > 0.0:
            raise ValueError(f"a few_revolutions fault takes a positive length; got {self.size}")
        if self.kind == "stagnation_cp" and self.spin_ratio != 0.0:
            raise ValueError("a stagnation_cp fault needs a run at rest (spin_ratio 0)")
        if self.kind == "tare_extrapolated" and self.spin_ratio == 0.0:
            raise ValueError("a tare_extrapolated fault needs a spinning run")


def _default_configurations():
    # The bare cylinder's mid-span pressure lift is 15 % above its whole-span balance lift (end
    # effects, see true_pressure_coefficients): its configuration allows for that difference.
    return (
        Configuration("plates", "end plates of 2 d diameter at both ends", True, 0.25),
        Configuration("bare", "no end plates", False, None, {"cl_agreement": 0.2}),
    )


@dataclass(frozen=True)
class SynthSpec:
    """Everything the synthetic-campaign generator needs; the defaults make the demo.

    Geometry, air and instruments are SI: lengths [m], pressures [Pa], temperatures [K], times
    [s], angles [deg], rates [Hz], speeds [m/s], rotation rates [rpm].

    Attributes
    ----------
    seed : int
        Seed of the numpy Generator; the whole campaign is a function of it.
    title, facility, date, notes : str
        [campaign] texts.
    start : str
        ISO 8601 time of the first run.
    diameter, span : float
        Model diameter d and loaded span b. [m]
    tunnel_height, tunnel_width : float
        Test-section height h (across which lift acts) and width. [m]
    flow_angle : float
        True flow angularity, toward +y. [deg]
    static_pressure_gradient : float
        Empty-tunnel dp/dx. [Pa/m]
    alignment_angle : float
        Balance x axis from tunnel x, toward +y. [deg]
    transducer_radius : float
        Radius of the pressure transducer on the spinning model. [m]
    configurations : tuple of Configuration
        Model configurations; one block of runs each.
    speeds : tuple of float
        Set tunnel speeds. [m/s]
    spin_ratios_up, spin_ratios_down : tuple of float
        Nominal spin ratios of the up sweep and of the down sweep that follows it. [-]
    pressure_speeds : tuple of float
        Speeds whose runs carry a pressure log. [m/s]
    pressure_spin_ratios : tuple of float
        Up-sweep spin ratios that carry a pressure log at those speeds. [-]
    repeat_point : tuple (str, float, float) or None
        (config, speed [m/s], spin ratio [-]) of the repeat runs, taken at the end of that block.
    repeat_count : int
        How many repeat runs.
    tare_rpms : tuple of float
        Spin rates of the spin-tare runs of each configuration. [rpm]
    rpm_step : float
        The set rpm is rounded to this step, as an operator would set it. [rpm]
    data_duration, wind_off_duration : float
        Record lengths of data runs and of zero and tare runs. [s]
    data_interval, wind_off_interval : float
        Time from one run's start to the next (record plus settling). [s]
    tunnel_rate, balance_rate, pressure_rate : float
        Sample rates of the three streams. [Hz]
    n_taps : int
        Surface taps at mid-span, spaced evenly in azimuth.
    tap_azimuth_scatter : float
        Standard deviation of the taps' installed azimuths about even spacing. [deg]
    tap_delay_range : (float, float)
        Tubing delays are drawn uniformly in this range. [s]
    temperature, temperature_rise : float
        Air temperature at the start, and its rise over the campaign (the tunnel warms). [K]
    pressure, pressure_change : float
        Barometric pressure at the start, and its change over the campaign. [Pa]
    relative_humidity : float
        Relative humidity, fraction. [-]
    speed_set_error : float
        Relative standard deviation of a run's mean speed about its set point. [-]
    turbulence : float
        Relative standard deviation of the AR(1) speed fluctuation. [-]
    turbulence_time : float
        Its correlation time. [s]
    speed_drift : float
        Relative standard deviation of the (linear) speed change over a clean record. [-]
    spin_jitter : float
        Relative standard deviation of the AR(1) rpm fluctuation. [-]
    spin_jitter_time : float
        Its correlation time. [s]
    shedding_strouhal : float
        Strouhal number of vortex shedding (frequency St U/d). [-]
    shedding_cl_rms : float
        RMS fluctuating lift coefficient at rest; it decays as exp(−(α/1.5)²). [-]
    channels : tuple of str
        Balance channel names.
    matrix : tuple of tuples
        3 × n linear calibration (rows Fx [N], Fy [N], Mz [N m], per volt).
    full_scale : (float, float, float)
        Fx [N], Fy [N], Mz [N m].
    zero_offsets : tuple of float
        Channel zeros at the start. [V]
    zero_drift : tuple of float
        Their linear drift. [V/h]
    balance_noise : float
        Standard deviation of white noise on each channel. [V]
    antialias_fraction : float
        Corner of the balance anti-alias filter (4th-order Butterworth magnitude) as a
        fraction of the balance rate. [-]
    tare_friction, tare_viscous, tare_windage : float
        Wind-off torque opposing the spin: ``friction + viscous |ω| + windage ω²``.
        [N m], [N m s/rad], [N m s²/rad²]
    tare_force : (float, float)
        Wind-off spin-induced Fx, Fy at ω = 1000 rad/s (∝ ω², Fy odd in ω). [N]
    imbalance : float
        Rotor imbalance m·e; the rotating force is ``imbalance ω²``. [kg m]
    pitot_noise : float
        White noise on dp_pitot. [Pa]
    tap_noise : float
        White noise on each tap reading, as a fraction of q. [-]
    tap_noise_floor : float
        White noise on each tap reading, absolute. [Pa]
    tachometer_noise : float
        Relative white noise of the tachometer. [-]
    encoder_counts : int
        Encoder counts per revolution.
    blockage, lift_interference, buoyancy : str, bool, bool
        [reduction] wall-correction choices; the forward model inverts exactly these.
    u_* : float
        Type-B standard uncertainties written into campaign.toml (invented instrument specs):
        geometry [m], angles [deg], gradient [Pa/m], scanner and pitot [Pa], pitot relative
        [-], thermometer [K], barometer [Pa], hygrometer [-], tachometer relative [-], encoder
        [deg], tubing delay [s], calibration relative [-].
    faults : tuple of Fault
        Flaws to plant.
    """

    seed: int = 2026
    title: str = "RS-12 rotor-sail model: spin-ratio sweeps with and without end plates"
    facility: str = (
        "SDT-1, an invented 1.0 m x 0.75 m closed-section low-speed tunnel (synthetic data)"
    )
    date: str = "2026-03-10"
    notes: str = "Synthetic demonstration campaign written by tunnelred.demo.synth; see truth.csv."
    start: str = "2026-03-10T08:30:00"
    diameter: float = 0.125
    span: float = 0.74
    tunnel_height: float = 1.0
    tunnel_width: float = 0.75
    flow_angle: float = 0.25
    static_pressure_gradient: float = -1.0
    alignment_angle: float = 0.1
    transducer_radius: float = 0.02
    configurations: tuple[Configuration, ...] = field(default_factory=_default_configurations)
    speeds: tuple[float, ...] = (6.0, 9.0, 12.0)
    spin_ratios_up: tuple[float, ...] = (0.0, 0.5, 1.0, 1.5, 2.0, 2.5, 3.0, 3.5, 4.0)
    spin_ratios_down: tuple[float, ...] = (3.0, 2.0, 1.0, 0.0)
    pressure_speeds: tuple[float, ...] = (9.0,)
    pressure_spin_ratios: tuple[float, ...] = (0.0, 1.0, 2.0, 3.0, 4.0)
    repeat_point: tuple[str, float, float] | None = ("plates", 9.0, 2.0)
    repeat_count: int = 2
    tare_rpms: tuple[float, ...] = (400.0, 1000.0, 2000.0, 3000.0, 4000.0, 5000.0, 6000.0, 7500.0)
    rpm_step: float = 5.0
    data_duration: float = 4.0
    wind_off_duration: float = 3.0
    data_interval: float = 75.0
    wind_off_interval: float = 40.0
    tunnel_rate: float = 50.0
    balance_rate: float = 200.0
    pressure_rate: float = 500.0
    n_taps: int = 16
    tap_azimuth_scatter: float = 0.3
    tap_delay_range: tuple[float, float] = (0.4e-3, 0.9e-3)
    temperature: float = 291.4
    temperature_rise: float = 3.0
    pressure: float = 100850.0
    pressure_change: float = -150.0
    relative_humidity: float = 0.48
    speed_set_error: float = 0.003
    turbulence: float = 0.003
    turbulence_time: float = 0.3
    speed_drift: float = 0.0015
    spin_jitter: float = 0.002
    spin_jitter_time: float = 0.05
    shedding_strouhal: float = 0.2
    shedding_cl_rms: float = 0.3
    channels: tuple[str, ...] = ("N1", "N2", "N3")
    matrix: tuple[tuple[float, ...], ...] = (
        (8.0, 0.15, -0.30),
        (-0.20, 24.0, 0.40),
        (0.002, -0.005, 0.20),
    )
    full_scale: tuple[float, float, float] = (40.0, 120.0, 1.0)
    zero_offsets: tuple[float, ...] = (0.0123, -0.0315, 0.0871)
    zero_drift: tuple[float, ...] = (1.5e-3, 2.0e-3, -1.0e-3)
    balance_noise: float = 4e-4
    antialias_fraction: float = 0.4
    tare_friction: float = 0.012
    tare_viscous: float = 2.0e-5
    tare_windage: float = 4.0e-8
    tare_force: tuple[float, float] = (0.05, 0.08)
    imbalance: float = 2.0e-6
    pitot_noise: float = 0.05
    tap_noise: float = 0.004
    tap_noise_floor: float = 0.5
    tachometer_noise: float = 5e-4
    encoder_counts: int = 4096
    blockage: str = "allen-vincenti"
    lift_interference: bool = False
    buoyancy: bool = True
    u_diameter: float = 5e-5
    u_span: float = 5e-4
    u_height: float = 1e-3
    u_width: float = 1e-3
    u_flow_angle: float = 0.1
    u_static_pressure_gradient: float = 0.3
    u_alignment_angle: float = 0.05
    u_scanner: float = 1.5
    u_pitot: float = 0.1
    u_pitot_relative: float = 0.002
    u_thermometer: float = 0.1
    u_barometer: float = 20.0
    u_hygrometer: float = 0.02
    u_tachometer_relative: float = 0.001
    u_encoder: float = 0.1
    u_azimuth: float = 0.2
    u_tubing_delay: float = 5e-5
    u_matrix_relative: float = 0.001
    faults: tuple[Fault, ...] = ()


# ---------------------------------------------------------------------------------------------
# The run schedule
# ---------------------------------------------------------------------------------------------


@dataclass
class _Run:
    run: str
    kind: str  # "zero" | "tare" | "data"
    start: float  # seconds from the campaign start
    duration: float
    config: str = ""
    speed_set: float = math.nan  # [m/s]
    spin_set: float = math.nan  # [rpm]
    pressure: bool = False
    fault: Fault | None = None
    notes: str = ""
    zero: tuple[str, ...] = ()
    tare: tuple[str, ...] = ()


def _set_rpm(spec: SynthSpec, speed: float, spin_ratio: float) -> float:
    rpm = spin_ratio * speed / (spec.diameter / 2.0) / _RPM
    return round(rpm / spec.rpm_step) * spec.rpm_step


def _close(a: float, b: float) -> bool:
    return abs(a - b) < 1e-9


def _schedule(spec: SynthSpec) -> list[_Run]:
    """Every run in time order, with its zero and tare runs named."""
    runs: list[_Run] = []
    counters = {"zero": 0, "tare": 0, "data": 0}
    prefix = {"zero": "Z", "tare": "T", "data": "R"}
    clock = [0.0]

    def add(kind, **kw):
        counters[kind] += 1
        duration = spec.data_duration if kind == "data" else spec.wind_off_duration
        interval = spec.data_interval if kind == "data" else spec.wind_off_interval
        run = _Run(f"{prefix[kind]}{counters[kind]:03d}", kind, clock[0], duration, **kw)
        clock[0] += interval
        runs.append(run)
        return run

    def zero():
        if not runs or runs[-1].kind != "zero":
            add("zero", notes="wind off, not spinning")

    faults = list(spec.faults)
    for cfg in spec.configurations:
        zero()
        for rpm in spec.tare_rpms:
            add("tare", config=cfg.label, spin_set=rpm, notes="wind off, spinning")
        zero()
        for speed in spec.speeds:
            points = [(a, "up") for a in spec.spin_ratios_up]
            points += [(a, "down") for a in spec.spin_ratios_down]
            if spec.repeat_point and spec.repeat_point[0] == cfg.label:
                if _close(spec.repeat_point[1], speed):
                    points += [(spec.repeat_point[2], "repeat")] * spec.repeat_count
            for alpha, leg in points:
                fault = None
                if leg == "up":
                    for f in faults:
                        if f.config == cfg.label and _close(f.speed, speed):
                            if _close(f.spin_ratio, alpha):
                                fault = f
                    if fault is not None:
                        faults.remove(fault)
                pressure = leg == "up" and any(_close(speed, s) for s in spec.pressure_speeds)
                pressure = pressure and any(_close(alpha, a) for a in spec.pressure_spin_ratios)
                common = dict(
                    config=cfg.label,
                    speed_set=speed,
                    spin_set=_set_rpm(spec, speed, alpha),
                    pressure=pressure or (fault is not None and fault.kind in _PRESSURE_FAULTS),
                )
                text = {"up": "up sweep", "down": "down sweep", "repeat": "repeat"}[leg]
                text += f", nominal alpha {alpha:g}"
                if fault is not None and fault.kind == "zero_shift":
                    zero()
                first = add("data", fault=fault, notes=text, **common)
                if fault is not None and fault.kind == "few_revolutions":
                    if fault.size >= first.duration:
                        raise ValueError(f"a few_revolutions fault shortens the record: {fault}")
                    first.duration = fault.size
                if fault is not None:
                    if fault.kind == "zero_shift":
                        zero()
                    add("data", notes=f"{text}, retake of {first.run}", **common)
            zero()
    if faults:
        raise ValueError(f"faults match no up-sweep run: {faults}")

    zeros = [(i, r.run) for i, r in enumerate(runs) if r.kind == "zero"]
    tares: dict[str, list[_Run]] = {}
    for r in runs:
        if r.kind == "tare":
            tares.setdefault(r.config, []).append(r)
    for i, r in enumerate(runs):
        if r.kind == "zero":
            continue
        before = [z for j, z in zeros if j < i]
        after = [z for j, z in zeros if j > i]
        r.zero = tuple(x for x in (before[-1:] + after[:1]))
        if r.kind == "data" and r.spin_set != 0.0:
            named = tares.get(r.config, [])
            if r.fault is not None and r.fault.kind == "tare_extrapolated":
                top = r.fault.size * abs(r.spin_set)
                named = [t for t in named if abs(t.spin_set) <= top]
                if not named:
                    raise ValueError(f"no tare run at or below {top:g} rpm for {r.fault}")
            r.tare = tuple(t.run for t in named)
    return runs


# ---------------------------------------------------------------------------------------------
# Forward model
# ---------------------------------------------------------------------------------------------


def _ar1(rng: np.random.Generator, n: int, dt: float, tau: float) -> np.ndarray:
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


def _in_tunnel(spec: SynthSpec, end_plates: bool, U_u, q_u, omega, rho, mu) -> dict:
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
            spec.blockage,
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
        spec.blockage,
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


def _tunnel_cp(theta, state) -> np.ndarray:
    """In-tunnel Cp at theta [rad]: 1 − Cp_u = (1 − Cp_c)(1 + eps)², plus the base-weighted
    terms that carry the rest of CL_p_u and CD_p_u (buoyancy, lift interference)."""
    speed2 = (1.0 + state["eps"]) ** 2
    cp_c = _shaped_cp(theta, state["CL_p"], state["CD_p"])
    lift_gain = (state["CL_p_uncorrected"] - speed2 * state["CL_p"]) / _F_LIFT_CL
    drag_gain = (state["CD_p_uncorrected"] - speed2 * state["CD_p"]) / _F_DRAG_CD
    f_drag, f_lift = _correction_terms(theta)
    return 1.0 - (1.0 - cp_c) * speed2 + drag_gain * f_drag + lift_gain * f_lift


@dataclass
class _Ambient:
    """The air over the campaign: linear trends in time [s from the campaign start]."""

    spec: SynthSpec
    total: float

    def __call__(self, t_abs, rng, dt):
        s = self.spec
        frac = np.asarray(t_abs) / self.total
        n = np.size(t_abs)
        T = s.temperature + s.temperature_rise * frac + 0.02 * _ar1(rng, n, dt, 1.0)
        p = s.pressure + s.pressure_change * frac + 2.0 * _ar1(rng, n, dt, 1.0)
        RH = s.relative_humidity - 0.03 * frac + 0.002 * _ar1(rng, n, dt, 1.0)
        return T, p, RH


def _zero_signals(spec: SynthSpec, t_abs, steps) -> np.ndarray:
    """Channel zeros [V] at campaign times t_abs: offset, linear drift, and planted steps."""
    t = np.asarray(t_abs, dtype=float)[..., None]
    v0 = np.asarray(spec.zero_offsets) + np.asarray(spec.zero_drift) * t / 3600.0
    for when, volts in steps:
        v0 = v0 + np.where(t > when, volts, 0.0)
    return v0


def _stream_times(rng, rate: float, duration: float) -> np.ndarray:
    """Sample times of one stream: its own start offset (streams are not synchronised)."""
    offset = rng.uniform(0.0, 1.0 / rate)
    return offset + np.arange(int(round(duration * rate))) / rate


def _tare_loads(spec: SynthSpec, omega) -> np.ndarray:
    """Wind-off spin loads on the balance axes, shape (..., 3): Fx, Fy [N], Mz [N m]."""
    w = np.asarray(omega, dtype=float)
    fx = spec.tare_force[0] * (w / 1000.0) ** 2
    fy = spec.tare_force[1] * w * np.abs(w) / 1000.0**2
    mz = -np.sign(w) * (
        spec.tare_friction + spec.tare_viscous * np.abs(w) + spec.tare_windage * w**2
    )
    return np.stack([fx, fy, mz], axis=-1)


def _imbalance_loads(spec: SynthSpec, omega, angle) -> np.ndarray:
    """Once-per-revolution force of the rotor imbalance after the anti-alias filter."""
    w = np.asarray(omega, dtype=float)
    f_rev = np.abs(w) / (2.0 * np.pi)
    corner = spec.antialias_fraction * spec.balance_rate
    gain = 1.0 / np.sqrt(1.0 + (f_rev / corner) ** 8)
    force = spec.imbalance * w**2 * gain
    return np.stack([force * np.cos(angle), force * np.sin(angle), np.zeros_like(w)], axis=-1)


def _knock(t, peak: float) -> np.ndarray:
    """Load of a knock on the model at sample times ``t`` [s], its largest sample ``peak`` [N].

    The model rings on the balance at its natural frequency under a Gaussian envelope, odd about
    the middle sample, so the samples sum to zero (to rounding) and the mean load is untouched.
    """
    x = np.asarray(t, dtype=float) - t[np.size(t) // 2]
    ring = np.sin(2.0 * np.pi * _KNOCK_FREQUENCY * x) * np.exp(-0.5 * (x / _KNOCK_WIDTH) ** 2)
    return peak * ring / np.max(np.abs(ring))


class _Writer:
    """Simulates each run and writes its logs; collects runs.csv rows and the truth table."""

    def __init__(self, dest: Path, spec: SynthSpec):
        self.dest = dest
        self.spec = spec
        self.rng = np.random.default_rng(spec.seed)
        self.runs = _schedule(spec)
        self.t0 = datetime.fromisoformat(spec.start)
        end = self.runs[-1].start + self.runs[-1].duration
        self.ambient = _Ambient(spec, end)
        self.configs = {c.label: c for c in spec.configurations}
        self.matrix = np.asarray(spec.matrix, dtype=float)
        n = spec.n_taps
        self.tap_azimuth = np.round(
            np.arange(n) * 360.0 / n + spec.tap_azimuth_scatter * self.rng.standard_normal(n), 2
        )
        self.tap_delay = np.round(self.rng.uniform(*spec.tap_delay_range, n), 5)
        self.tap_names = tuple(f"tap{k + 1:02d}" for k in range(n))
        self.zero_steps = []
        for r in self.runs:
            if r.fault is not None and r.fault.kind == "zero_shift":
                volts = balance.signals_from_loads(
                    r.fault.size * np.asarray(spec.full_scale), self.matrix
                )
                self.zero_steps.append((r.start + r.duration + 1.0, np.asarray(volts)))
        self.rows: list[dict] = []
        self.truth: list[dict] = []

    # --- files -----------------------------------------------------------------------------

    def _write_csv(self, rel: str, columns: dict[str, tuple[np.ndarray, int]]) -> str:
        frame = pd.DataFrame({name: np.round(v, dec) for name, (v, dec) in columns.items()})
        path = self.dest / rel
        path.parent.mkdir(parents=True, exist_ok=True)
        frame.to_csv(path, index=False, float_format="%.8g", lineterminator="\n")
        return rel

    def _balance_log(self, r: _Run, t, loads, omega) -> str:
        s = self.spec
        signals = balance.signals_from_loads(loads, self.matrix)
        signals = signals + _zero_signals(s, r.start + t, self.zero_steps)
        signals = signals + s.balance_noise * self.rng.standard_normal(signals.shape)
        cols = {"time [s]": (t, 5)}
        for k, name in enumerate(s.channels):
            cols[f"{name} [V]"] = (signals[:, k], 5)
        rpm = omega / _RPM * (1.0 + s.tachometer_noise * self.rng.standard_normal(t.size))
        cols["speed [rpm]"] = (rpm, 1)
        return self._write_csv(f"logs/{r.run}_balance.csv", cols)

    # --- runs ------------------------------------------------------------------------------

    def _spin(self, n, dt, omega_set, scatter):
        if omega_set == 0.0:
            return np.zeros(n)
        s = self.spec
        return omega_set * (1.0 + scatter * _ar1(self.rng, n, dt, s.spin_jitter_time))

    def wind_off(self, r: _Run) -> None:
        s = self.spec
        t = _stream_times(self.rng, s.balance_rate, r.duration)
        omega_set = 0.0 if r.kind == "zero" else r.spin_set * _RPM
        dt = 1.0 / s.balance_rate
        omega = self._spin(t.size, dt, omega_set, s.spin_jitter)
        angle = self.rng.uniform(0, 2 * np.pi) + np.cumsum(omega) * dt
        loads = _tare_loads(s, omega) + _imbalance_loads(s, omega, angle)
        log = self._balance_log(r, t, loads, omega)
        self._row(r, balance_log=log)

    def data(self, r: _Run) -> None:
        s = self.spec
        rng = self.rng
        cfg = self.configs[r.config]
        fault = r.fault.kind if r.fault is not None else ""
        base_rate = 2.0 * max(s.tunnel_rate, s.balance_rate, s.pressure_rate)
        dt = 1.0 / base_rate
        tb = np.arange(-0.05, r.duration + 0.05, dt)
        n = tb.size
        inside = (tb >= 0.0) & (tb <= r.duration)

        drift = r.fault.size if fault == "speed_drift" else s.speed_drift * rng.standard_normal()
        U_mean = r.speed_set * (1.0 + s.speed_set_error * rng.standard_normal())
        turbulence = _ar1(rng, n, dt, s.turbulence_time)
        U = U_mean * (1.0 + drift * (tb / r.duration - 0.5) + s.turbulence * turbulence)
        scatter = r.fault.size if fault == "spin_scatter" else s.spin_jitter
        omega = self._spin(n, dt, r.spin_set * _RPM, scatter)
        if fault == "spin_drift":
            omega = omega * (1.0 + r.fault.size * (tb / r.duration - 0.5))
        T, p, RH = self.ambient(r.start + tb, rng, dt)
        if fault == "temperature_drift":
            T = T + r.fault.size * (tb / r.duration - 0.5)
        rho = air.density(T, p, RH)
        mu = air.viscosity(T)
        q = 0.5 * rho * U**2
        # A model at rest is indexed at encoder zero, so its taps sit at their azimuths.
        angle0 = rng.uniform(0, 2 * np.pi) if r.spin_set != 0.0 else 0.0
        angle = angle0 + np.concatenate([[0.0], np.cumsum(omega[1:]) * dt])

        # Run-level truth at the record's mean conditions.
        T_m, p_m, RH_m = (float(np.mean(x[inside])) for x in (T, p, RH))
        rho_m = float(air.density(T_m, p_m, RH_m))
        mu_m = float(air.viscosity(T_m))
        q_m = float(np.mean(q[inside]))
        omega_m = float(np.mean(omega[inside]))
        U_m = float(conditions.velocity(q_m, rho_m))
        state = _in_tunnel(s, cfg.end_plates, U_m, q_m, omega_m, rho_m, mu_m)

        # Tunnel log.
        tt = _stream_times(rng, s.tunnel_rate, r.duration)
        q_t, p_t = np.interp(tt, tb, q), np.interp(tt, tb, p)
        dp = conditions.impact_pressure(q_t, p_t) + s.pitot_noise * rng.standard_normal(tt.size)
        if fault == "repeat_disagreement":
            dp = dp + r.fault.size
        tunnel_cols = {
            "time [s]": (tt, 4),
            "dp_pitot [Pa]": (dp, 3),
            "T [degC]": (np.interp(tt, tb, T) - 273.15, 2),
            "p_baro [hPa]": (p_t / 100.0, 2),
            "RH [%]": (100.0 * np.interp(tt, tb, RH), 1),
        }
        if fault == "stream_overlap":
            kept = tt <= r.fault.size * r.duration
            tunnel_cols = {name: (v[kept], dec) for name, (v, dec) in tunnel_cols.items()}
        tunnel_log = self._write_csv(f"logs/{r.run}_tunnel.csv", tunnel_cols)

        # Balance log: quasi-steady loads sample by sample, shedding, tare, imbalance.
        t_b = _stream_times(rng, s.balance_rate, r.duration)
        U_b, q_b, w_b = (np.interp(t_b, tb, x) for x in (U, q, omega))
        rho_b, mu_b = np.interp(t_b, tb, rho), np.interp(t_b, tb, mu)
        sample = _in_tunnel(s, cfg.end_plates, U_b, q_b, w_b, rho_b, mu_b)
        area = s.diameter * s.span
        f_shed = s.shedding_strouhal * U_mean / s.diameter
        wander = np.cumsum(rng.standard_normal(t_b.size)) * math.sqrt(
            2.0 * np.pi * 0.1 * f_shed / s.balance_rate
        )
        phase = 2.0 * np.pi * f_shed * t_b + wander
        cl_rms = s.shedding_cl_rms * math.exp(-((state["alpha"] / 1.5) ** 2))
        lift = (sample["CL_uncorrected"] + cl_rms * math.sqrt(2.0) * np.sin(phase)) * q_b * area
        drag = (sample["CD_uncorrected"] + 0.1 * cl_rms * np.sin(2.0 * phase)) * q_b * area
        torque = sample["CM_uncorrected"] * q_b * area * s.diameter / 2.0
        fx, fy = balance.balance_to_wind(drag, lift, -(s.alignment_angle - s.flow_angle))
        loads = np.stack([fx, fy, torque], axis=-1)
        loads = loads + _tare_loads(s, w_b) + _imbalance_loads(s, w_b, np.interp(t_b, tb, angle))
        if fault == "overload":
            loads[:, 1] += _knock(t_b, r.fault.size * s.full_scale[1])
        balance_log = self._balance_log(r, t_b, loads, w_b)

        pressure_log = ""
        if r.pressure:
            pressure_log = self._pressure_log(r, tb, q, rho, omega, angle, state, fault)

        self._row(r, balance_log=balance_log, tunnel_log=tunnel_log, pressure_log=pressure_log)
        row = {
            "run": r.run,
            "config": r.config,
            "planted_fault": fault,
            "speed_set": r.speed_set,
            "spin_set": r.spin_set,
            "has_pressure": bool(r.pressure),
            "T": T_m,
            "p_baro": p_m,
            "RH": RH_m,
            "rho": rho_m,
            "mu": mu_m,
            "omega": omega_m,
            "Gamma": float(conditions.circulation(omega_m, s.diameter / 2.0)),
        }
        # + 0.0 turns the -0.0 of a run at rest into 0.0.
        for k in ("U", "q", "Re", "alpha", "CL", "CD", "CM", "C_power", "CL_p", "CD_p"):
            row[k] = float(state[k]) + 0.0
        row["L_D"] = row["CL"] / row["CD"]
        row["CL_ideal"] = -2.0 * np.pi * row["alpha"] + 0.0
        for k in ("eps_solid", "eps_wake", "delta_CD_buoyancy"):
            row[k] = float(state[k])
        for k in ("U", "q", "Re", "alpha", "CL", "CD", "CM", "C_power", "CL_p", "CD_p"):
            row[f"{k}_uncorrected"] = float(state[f"{k}_uncorrected"]) + 0.0
        row["L_D_uncorrected"] = row["CL_uncorrected"] / row["CD_uncorrected"]
        self.truth.append(row)

    def _pressure_log(self, r, tb, q, rho, omega, angle, state, fault) -> str:
        s = self.spec
        rng = self.rng
        tp = _stream_times(rng, s.pressure_rate, r.duration)
        q_p, rho_p, w_p = (np.interp(tp, tb, x) for x in (q, rho, omega))
        head = pressure.centrifugal_head(rho_p, w_p, s.diameter / 2.0, s.transducer_radius)
        delayed = tp[:, None] - self.tap_delay[None, :]
        theta = np.interp(delayed, tb, angle) + np.deg2rad(self.tap_azimuth)[None, :]
        cp = _tunnel_cp(theta, state)
        if fault == "dead_tap":
            k = int(r.fault.size)
            cp[:, k] = np.mean(_tunnel_cp(_GRID, state))
        noise = np.hypot(s.tap_noise * q_p, s.tap_noise_floor)[:, None]
        taps = cp * q_p[:, None] - head[:, None] + noise * rng.standard_normal(cp.shape)
        if fault == "cl_disagreement":
            taps = taps * (1.0 + r.fault.size)
        elif fault == "stagnation_cp":
            taps = taps - r.fault.size
        counts = np.floor(
            np.mod(np.rad2deg(np.interp(tp, tb, angle)), 360.0) / 360.0 * s.encoder_counts
        )
        cols = {"time [s]": (tp, 5), "angle [deg]": (counts * 360.0 / s.encoder_counts, 3)}
        for k, name in enumerate(self.tap_names):
            cols[f"{name} [Pa]"] = (taps[:, k], 2)
        return self._write_csv(f"logs/{r.run}_pressure.csv", cols)

    def _row(self, r: _Run, *, balance_log="", tunnel_log="", pressure_log="") -> None:
        start = self.t0 + timedelta(seconds=round(r.start))
        self.rows.append(
            {
                "run": r.run,
                "kind": r.kind,
                "config": r.config,
                "start": start.isoformat(timespec="seconds"),
                "balance_log": balance_log,
                "tunnel_log": tunnel_log,
                "pressure_log": pressure_log,
                "zero": ";".join(r.zero),
                "tare": ";".join(r.tare),
                "speed_set [m/s]": "" if math.isnan(r.speed_set) else f"{r.speed_set:g}",
                "spin_set [rpm]": "" if math.isnan(r.spin_set) else f"{r.spin_set:g}",
                "notes": r.notes,
            }
        )

    def write(self) -> pd.DataFrame:
        for r in self.runs:
            if r.kind == "data":
                self.data(r)
            else:
                self.wind_off(r)
        (self.dest / "campaign.toml").write_text(_campaign_toml(self), encoding="utf-8")
        pd.DataFrame(self.rows).to_csv(self.dest / "runs.csv", index=False, lineterminator="\n")
        truth = pd.DataFrame(self.truth)
        truth.to_csv(
            self.dest / "truth.csv", index=False, float_format="%.10g", lineterminator="\n"
        )
        return truth


def _toml_value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, str):
        return '"' + v.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(v, int | float | np.floating | np.integer):
        return repr(float(v)) if isinstance(v, float | np.floating) else str(int(v))
    return "[" + ", ".join(_toml_value(x) for x in v) + "]"


def _campaign_toml(w: _Writer) -> str:
    s = w.spec
    lines = [
        "# Synthetic campaign written by tunnelred.demo.synth (invented scenario, not data).",
        "",
    ]

    def table(name, items):
        lines.append(f"[{name}]")
        lines.extend(f"{k} = {_toml_value(v)}" for k, v in items)
        lines.append("")

    table(
        "campaign",
        [("title", s.title), ("facility", s.facility), ("date", s.date), ("notes", s.notes)],
    )
    table(
        "tunnel",
        [
            ("section", "closed"),
            ("height", f"{s.tunnel_height * 1000:g} mm"),
            ("u_height", f"{s.u_height * 1000:g} mm"),
            ("width", s.tunnel_width),
            ("u_width", s.u_width),
            ("flow_angle", f"{s.flow_angle:g} deg"),
            ("u_flow_angle", f"{s.u_flow_angle:g} deg"),
            ("static_pressure_gradient", s.static_pressure_gradient),
            ("u_static_pressure_gradient", s.u_static_pressure_gradient),
            ("q_source", "pitot"),
        ],
    )
    table(
        "model",
        [
            ("diameter", f"{s.diameter * 1000:g} mm"),
            ("u_diameter", f"{s.u_diameter * 1000:g} mm"),
            ("span", s.span),
            ("u_span", s.u_span),
            ("spans_section", True),
            ("transducer_radius", f"{s.transducer_radius * 1000:g} mm"),
        ],
    )
    for c in s.configurations:
        items = [("description", c.description), ("end_plates", c.end_plates)]
        if c.end_plate_diameter is not None:
            items.append(("end_plate_diameter", c.end_plate_diameter))
        table(f"configurations.{c.label}", items)
        if c.tolerance_overrides:
            table(f"configurations.{c.label}.tolerances", list(c.tolerance_overrides.items()))
    table(
        "instruments.balance",
        [
            ("channels", list(s.channels)),
            ("matrix", [list(row) for row in s.matrix]),
            ("full_scale", list(s.full_scale)),
            ("u_fraction_of_full_scale", [0.0005, 0.0005, 0.0005]),
            ("u_matrix_relative", s.u_matrix_relative),
            ("alignment_angle", f"{s.alignment_angle:g} deg"),
            ("u_alignment_angle", f"{s.u_alignment_angle:g} deg"),
        ],
    )
    table("instruments.scanner", [("full_scale", 2500.0), ("u", s.u_scanner)])
    table("instruments.pitot", [("u", s.u_pitot), ("u_relative", s.u_pitot_relative)])
    table("instruments.thermometer", [("u", s.u_thermometer)])
    table("instruments.barometer", [("u", f"{s.u_barometer / 100:g} hPa")])
    table("instruments.hygrometer", [("u", s.u_hygrometer)])
    table("instruments.tachometer", [("u_relative", s.u_tachometer_relative)])
    table("instruments.encoder", [("u", f"{s.u_encoder:g} deg")])
    for name, az, delay in zip(w.tap_names, w.tap_azimuth, w.tap_delay, strict=True):
        lines.append("[[taps]]")
        lines.append(f"name = {_toml_value(name)}")
        lines.append(f'azimuth = "{az:g} deg"')
        lines.append(f"u_azimuth = {_toml_value(s.u_azimuth)}")
        lines.append(f'tubing_delay = "{delay * 1000:g} ms"')
        lines.append(f'u_tubing_delay = "{s.u_tubing_delay * 1000:g} ms"')
        lines.append("")
    table(
        "reduction",
        [
            ("blockage", s.blockage),
            ("lift_interference", s.lift_interference),
            ("buoyancy", s.buoyancy),
        ],
    )
    return "\n".join(lines)


# ---------------------------------------------------------------------------------------------
# Public entry points
# ---------------------------------------------------------------------------------------------


def make_campaign(dest, spec: SynthSpec) -> pd.DataFrame:
    """Write a synthetic campaign folder with known truth.

    Parameters
    ----------
    dest : str or path-like
        Folder to write; created if absent. Its ``campaign.toml``, ``runs.csv``, ``truth.csv``
        and ``logs/`` are replaced; nothing else in it is touched.
    spec : SynthSpec
        The scenario.

    Returns
    -------
    pandas.DataFrame
        The truth table (also written as ``truth.csv``): one row a data run, keyed by ``run``,
        with the free-air values under the names of docs/results.md (``U``, ``q``, ``Re``,
        ``alpha``, ``CL``, ``CD``, ``CM``, ``C_power``, ``L_D``, ``CL_p``, ``CD_p``, …), the
        in-tunnel values as ``<X>_uncorrected``, the correction sizes (``eps_solid``,
        ``eps_wake``, ``delta_CD_buoyancy``), the run-mean air, ``planted_fault`` ("" for a clean
        run) and ``has_pressure``. ``CL_p`` and ``CD_p`` are given for every run, with a
        pressure log or not.

    Notes
    -----
    The forward model is described in the module docstring. The whole folder is a function of
    ``spec`` (numpy Generator seeded with ``spec.seed``): two writes are byte-identical.

    Examples
    --------
    >>> import tempfile
    >>> from dataclasses import replace
    >>> spec = replace(demo_spec(), speeds=(8.0,), spin_ratios_up=(0.0, 2.0),
    ...                spin_ratios_down=(), configurations=demo_spec().configurations[:1],
    ...                tare_rpms=(2000.0, 3000.0), repeat_point=None, faults=(),
    ...                pressure_speeds=())
    >>> with tempfile.TemporaryDirectory() as d:
    ...     truth = make_campaign(d, spec)
    >>> truth["run"].tolist()
    ['R001', 'R002']
    """
    dest = Path(dest)
    dest.mkdir(parents=True, exist_ok=True)
    if (dest / "logs").exists():
        shutil.rmtree(dest / "logs")
    return _Writer(dest, spec).write()


def demo_spec(seed: int = 2026) -> SynthSpec:
    """The demo scenario: the invented RS-12 rotor-sail model in the invented SDT-1 tunnel.

    Three speeds (6, 9, 12 m/s), spin ratios 0 to 4 up and 3 to 0 down, with and without end
    plates; spin tares at eight rpm per configuration; pressure logs at 9 m/s for alpha = 0,
    1, 2, 3, 4; two repeats at 9 m/s, alpha = 2 with plates; four planted faults, each
    followed by a clean retake (see sample_runs/README.md).

    Parameters
    ----------
    seed : int
        Seed of the random generator.

    Returns
    -------
    SynthSpec

    Examples
    --------
    >>> [f.kind for f in demo_spec().faults]
    ['spin_scatter', 'speed_drift', 'dead_tap', 'zero_shift']
    """
    return SynthSpec(
        seed=seed,
        faults=(
            Fault("spin_scatter", "plates", 12.0, 2.5, 0.05),
            Fault("speed_drift", "bare", 12.0, 1.5, 0.05),
            Fault("dead_tap", "plates", 9.0, 3.0, 6),
            Fault("zero_shift", "bare", 6.0, 2.0, 0.006),
        ),
    )


def write_demo_campaign(dest, *, seed: int = 2026) -> pd.DataFrame:
    """Write the demo campaign (``tunnelred demo DEST``; also how sample_runs/ is made).

    Parameters
    ----------
    dest : str or path-like
        Folder to write.
    seed : int
        Seed of the random generator; 2026 gives sample_runs/.

    Returns
    -------
    pandas.DataFrame
        The truth table, as :func:`make_campaign`.
    """
    return make_campaign(dest, demo_spec(seed))
