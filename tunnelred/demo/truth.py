"""The illustrative coefficient model of the synthetic campaigns (free air): the truth.

The model (:func:`true_lift_coefficient` and friends) is an **illustrative model shaped like
published rotating-cylinder measurements, not data**: lift well short of the potential-flow
``-2 pi alpha`` and saturating past ``alpha`` ≈ 2.5-3, more of it with end plates; drag about 1.15
at rest, falling to a minimum near ``alpha`` ≈ 1.5-2 and rising again; a torque rising with the
spin ratio; a weak Reynolds-number dependence throughout. :func:`true_surface_cp` gives the
mid-span Cp(θ) whose integrals are exactly :func:`true_pressure_coefficients`.

Each of the four coefficient functions (illustrative, NOT data) takes the same arguments,
described here once:

alpha : float or array_like
    Spin ratio ``omega R / U``, signed. [-]
reynolds : float or array_like
    Reynolds number ``rho U d / mu``. [-]
end_plates : bool, keyword
    Whether the model carries end plates.

Conventions are those of docs/conventions.md. In particular ``Mz`` is the aerodynamic torque on the
model about +z: it opposes the spin, so ``CM`` has the sign opposite to ``alpha`` and ``C_power = CM
alpha`` is negative (power taken from the drive).
"""

from __future__ import annotations

import numpy as np

from tunnelred.common._arraylike import arraylike

__all__ = [
    "true_lift_coefficient",
    "true_drag_coefficient",
    "true_torque_coefficient",
    "true_pressure_coefficients",
    "true_surface_cp",
]

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

    Returns
    -------
    float or ndarray
        ``CL`` on ``q d b``; negative for positive spin (docs/conventions.md). [-]

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

    with ``f_p = 1.15`` with end plates (their faces add friction), 1 without. Intended for
    ``|alpha| <= 5``.

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
GRID = np.linspace(-np.pi, np.pi, 721)[:-1]
_DGRID = GRID[1] - GRID[0]
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
        0.5 * np.sum(cp_on_grid * np.sin(GRID), axis=-1) * _DGRID,
        0.5 * np.sum(cp_on_grid * np.cos(GRID), axis=-1) * _DGRID,
    )


# Base-weighted correction terms: zero with zero slope at the windward point, so a stagnation
# Cp of 1 is untouched; f_D has no lift integral, f_L no drag integral.
_F_DRAG = ((1.0 - np.cos(GRID)) / 2.0) ** 3
_F_LIFT = np.sin(GRID) * _F_DRAG
DRAG_TERM_CD = _integrals(_F_DRAG)[1]
LIFT_TERM_CL = _integrals(_F_LIFT)[0]
_SHAPE_CL = _integrals(_cp_shape(GRID, _SHAPE_ALPHA[:, None]))[0]


def correction_terms(theta):
    """f_D(θ), f_L(θ) at theta [rad]."""
    f_drag = ((1.0 - np.cos(theta)) / 2.0) ** 3
    return f_drag, np.sin(theta) * f_drag


def shaped_cp(theta, cl_p, cd_p):
    """Cp(θ) [theta in rad] with ½∮Cp sin θ = cl_p and ½∮Cp cos θ = cd_p exactly.

    The gains are solved on the shape of ``cl_p``, ``cd_p`` (run level), then the profile is
    evaluated at ``theta``, which broadcasts with them.
    """
    cl_p = np.asarray(cl_p, dtype=float)
    cd_p = np.asarray(cd_p, dtype=float)
    mirror = np.where(cl_p > 0.0, -1.0, 1.0)  # the shape is built for negative lift
    a_e = np.interp(np.abs(cl_p), -_SHAPE_CL, _SHAPE_ALPHA)
    cl0, cd0 = _integrals(_cp_shape(GRID, a_e[..., None]))
    lift_gain = (-np.abs(cl_p) - cl0) / LIFT_TERM_CL
    drag_gain = (cd_p - cd0) / DRAG_TERM_CD
    th = np.angle(np.exp(1j * mirror * theta))
    f_drag, f_lift = correction_terms(th)
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
    return shaped_cp(th, cl_p, cd_p)
