"""Wall corrections for a spinning circular cylinder in a closed test section: the published forms.

One function per published method, each vectorised with numpy broadcasting so that the whole
correction can be evaluated over a batch of Monte Carlo draws in one call. The registry of the
blockage methods built from them is tunnelred.physics.corrections.methods; their application to a
run, tunnelred.physics.corrections.apply.

Conventions. A blockage is expressed as a velocity increment ``eps``: the model sees the speed
``U (1 + eps)`` instead of the reference speed ``U``. The solid and wake parts add,
``eps = eps_solid + eps_wake``; first order in ``d/h`` throughout.

Sources checked. Maskell's formula ``Δq/q = ε CD S/C`` and the range of his blockage factor
(a little above 5/2 in axisymmetric flow, a little below 1 in two-dimensional flow, close to 5/2
for aspect ratios 1 to 10) were read in the summary of ARC R&M 3400. Allen & Vincenti's
expressions (NACA Report 782) and Glauert's horizontal-buoyancy rule (ARC R&M 1566), as
reproduced by Barlow, Rae & Pope (3rd ed.), are given from memory; the solid-blockage
constant is verified independently in the tests by summing the wall images of the cylinder's
doublet, and the lift-interference form is derived below, with its own image-sum check.
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

from tunnelred.common._arraylike import ArrayLike, Values, arraylike

__all__ = [
    "MASKELL_FACTOR_2D",
    "MASKELL_FACTOR_3D",
    "solid_blockage_2d",
    "wake_blockage_2d",
    "maskell_3d",
    "lift_interference_2d",
    "buoyancy_drag",
]


#: Maskell's blockage factor for two-dimensional flow: his summary of ARC R&M 3400 gives "a little
#: less than unity"; 0.96 is the value his flat-plate comparison at infinite aspect ratio supports
#: (from memory).
MASKELL_FACTOR_2D = 0.96

#: Maskell's blockage factor for three-dimensional bluff bodies of aspect ratio 1 to 10, 5/2
#: (ARC R&M 3400, summary).
MASKELL_FACTOR_3D = 2.5


@arraylike
def solid_blockage_2d(diameter: ArrayLike, height: ArrayLike) -> ArrayLike:
    """Solid-blockage velocity increment of a circular cylinder spanning a closed section.

    Parameters
    ----------
    diameter : float or array_like
        Cylinder diameter. [m]
    height : float or array_like
        Wall-to-wall distance of the test section across which lift acts. [m]

    Returns
    -------
    float or ndarray
        Velocity increment at the model, ``eps_sb``. [-]

    Notes
    -----
    Allen & Vincenti write ``eps_sb = Lambda sigma`` with ``sigma = (pi^2/48)(c/h)^2`` and
    ``Lambda`` a body-shape factor, which is 4 for a circular cylinder of diameter ``c = d``:

    .. math:: \\varepsilon_{sb} = \\frac{\\pi^2}{12}\\left(\\frac{d}{h}\\right)^2

    This is the axial velocity that the infinite row of wall images of the cylinder's doublet
    (strength ``2 pi U R^2``, images at ``y = ±k h``) induces at the model:
    ``2 sum_k U R^2/(k h)^2 = (pi^2/3) U (R/h)^2``. First order in ``(d/h)^2``; use below
    ``d/h`` ≈ 0.3.

    References
    ----------
    .. [1] H. J. Allen and W. G. Vincenti, "Wall interference in a two-dimensional-flow wind
       tunnel, with consideration of the effect of compressibility", NACA Report 782, 1944.
    .. [2] J. B. Barlow, W. H. Rae and A. Pope, Low-Speed Wind Tunnel Testing, 3rd ed., Wiley,
       1999 (from memory).

    Examples
    --------
    >>> round(solid_blockage_2d(0.1, 1.0), 7)
    0.0082247
    """
    return np.pi**2 / 12.0 * (diameter / height) ** 2


@arraylike
def wake_blockage_2d(
    diameter: ArrayLike,
    height: ArrayLike,
    drag_coefficient: ArrayLike,
    *,
    method: str = "allen-vincenti",
    blockage_factor: ArrayLike | None = None,
) -> ArrayLike:
    """Wake-blockage velocity increment of a cylinder spanning a closed section.

    Parameters
    ----------
    diameter, height : float or array_like
        As for :func:`solid_blockage_2d`. [m]
    drag_coefficient : float or array_like
        The run's own uncorrected drag coefficient ``CD_u`` (on ``q d b``). [-]
    method : {"allen-vincenti", "maskell"}
        Which published form to use.
    blockage_factor : float or array_like, optional
        Maskell's blockage factor ``theta``; only for ``method="maskell"``. Default
        :data:`MASKELL_FACTOR_2D` = 0.96. [-]

    Returns
    -------
    float or ndarray
        Velocity increment at the model, ``eps_wb``. [-]

    Notes
    -----
    Allen & Vincenti (the wake as a source of strength ``U d CD_u / 2`` and its wall images):

    .. math:: \\varepsilon_{wb} = \\frac{d}{4h} C_{D,u}

    Maskell (the momentum balance outside a separated wake; his correction, written for the 2-D
    section, where the area ratio is ``S/C = d/h``):

    .. math:: \\left(1 + \\varepsilon_{wb}\\right)^2 = \\frac{q_c}{q_u}
              = 1 + \\theta C_{D,u} \\frac{d}{h}

    Allen & Vincenti's form is a first-order result derived for aerofoils with thin wakes; use it
    for ``d/h`` below ≈ 0.3 and expect it to under-correct a wide separated wake. Maskell's is for
    separated bluff-body wakes that do not reattach; his summary gives ``theta`` a little below
    1 in 2-D flow. A spinning cylinder's wake narrows and deflects as the spin ratio grows,
    which neither method describes: both take the drag as the measure of the wake.

    References
    ----------
    .. [1] H. J. Allen and W. G. Vincenti, NACA Report 782, 1944.
    .. [2] E. C. Maskell, "A theory of the blockage effects on bluff bodies and stalled wings in
       a closed wind tunnel", ARC R&M 3400, 1963 (published 1965).
    .. [3] J. B. Barlow, W. H. Rae and A. Pope, Low-Speed Wind Tunnel Testing, 3rd ed., Wiley,
       1999 (from memory).

    Examples
    --------
    >>> round(wake_blockage_2d(0.1, 1.0, 1.2), 6)
    0.03
    >>> round(wake_blockage_2d(0.1, 1.0, 1.2, method="maskell"), 6)
    0.05603
    """
    if method == "allen-vincenti":
        if blockage_factor is not None:
            raise ValueError("blockage_factor applies to Maskell's method only")
        return diameter / (4.0 * height) * drag_coefficient
    if method == "maskell":
        theta = MASKELL_FACTOR_2D if blockage_factor is None else blockage_factor
        return np.sqrt(1.0 + theta * drag_coefficient * diameter / height) - 1.0
    raise ValueError(f"wake blockage method must be 'allen-vincenti' or 'maskell', not {method!r}")


@arraylike
def maskell_3d(
    drag_coefficient: ArrayLike,
    model_area: ArrayLike,
    section_area: ArrayLike,
    *,
    blockage_factor: ArrayLike | None = None,
) -> ArrayLike:
    """Maskell's blockage correction for a bluff body in a closed section, as a velocity increment.

    Parameters
    ----------
    drag_coefficient : float or array_like
        The run's own uncorrected drag coefficient on ``model_area``. [-]
    model_area : float or array_like
        Frontal (reference) area of the model, ``S = d b`` for a cylinder. [m2]
    section_area : float or array_like
        Cross-section area of the test section, ``C = h w``. [m2]
    blockage_factor : float or array_like, optional
        Maskell's blockage factor ``theta``. Default :data:`MASKELL_FACTOR_3D` = 5/2. [-]

    Returns
    -------
    float or ndarray
        Equivalent velocity increment ``eps = sqrt(q_c/q_u) - 1``. [-]

    Notes
    -----
    .. math:: \\frac{q_c}{q_u} = 1 + \\theta C_{D,u} \\frac{S}{C}, \\qquad
              \\varepsilon = \\sqrt{q_c/q_u} - 1

    and the corrected drag coefficient is ``CD_u q_u/q_c``. Maskell derived it for bluff bodies
    whose separated wake does not reattach (flat plates normal to the stream), and found
    ``theta`` close to 5/2 for aspect ratios 1 to 10. For a cylinder it is an approximation; for a
    spinning cylinder with end plates, whose wake is deflected and narrowed by the spin, a further
    one. Solid blockage is not included. Use for ``S/C`` up to about 0.1.

    References
    ----------
    .. [1] E. C. Maskell, "A theory of the blockage effects on bluff bodies and stalled wings in
       a closed wind tunnel", ARC R&M 3400, 1963 (published 1965).

    Examples
    --------
    >>> round(maskell_3d(1.0, 0.05, 1.0), 7)
    0.0606602
    """
    theta = MASKELL_FACTOR_3D if blockage_factor is None else blockage_factor
    return np.sqrt(1.0 + theta * drag_coefficient * model_area / section_area) - 1.0


def lift_interference_2d(
    lift_coefficient: npt.ArrayLike, diameter: npt.ArrayLike, height: npt.ArrayLike
) -> dict[str, Values]:
    """Streamline-curvature interference on a circulation-carrying cylinder between two walls.

    No published form is standard for a spinning cylinder; this is a first-order derivation in
    the manner of Allen & Vincenti's lift-interference terms for an aerofoil, with the chord
    replaced by the diameter.

    Parameters
    ----------
    lift_coefficient : float or array_like
        Lift coefficient measured in the tunnel (on the corrected or the uncorrected ``q``: the
        correction is relative). [-]
    diameter : float or array_like
        Cylinder diameter. [m]
    height : float or array_like
        Wall-to-wall distance across which lift acts. [m]

    Returns
    -------
    dict
        ``"sigma"``: Allen & Vincenti's ``(pi^2/48)(d/h)^2``; ``"lift_curvature"``: the fraction
        ``2 sigma`` by which the walls raise the lift at fixed circulation; ``"strain"``: the
        image-induced velocity gradient ``(d/U) dv/dx`` at the model; ``"delta_CL"``: the
        correction to add to the tunnel lift coefficient, ``-2 sigma CL/(1 + 2 sigma)``;
        ``"delta_alpha"``: the change of spin ratio, zero (see Notes). All [-].

    Notes
    -----
    The bound vortex ``Gamma`` (``L' = -rho U Gamma``, so ``Gamma = -CL U d/2``) has wall images
    at ``y = ±k h`` of strength ``(-1)^k Gamma``. Near the model their complex velocity is

    .. math:: u - iv = \\sum_{k\\ge1} (-1)^k\\frac{-i\\Gamma}{2\\pi}\\frac{2z}{(kh)^2}
              = i A z, \\qquad A = \\frac{\\pi\\Gamma}{12h^2}

    using ``sum (-1)^k/k^2 = -pi^2/12``: no velocity at the vortex itself (so no change of the
    flow direction and none of the spin ratio beyond blockage) but a pure strain,
    ``u = -A y``, ``v = -A x``, i.e. a curvature of the stream over the model. The cylinder in
    the stream ``U + i A z`` with circulation ``Gamma`` has, by the circle theorem,
    ``w = U + iAz - U R^2/z^2 + i A R^4/z^3 - i Gamma/(2 pi z)``, and Blasius' theorem gives

    .. math:: L' = -\\rho U \\Gamma \\left(1 + \\frac{2\\pi A R^2}{\\Gamma}\\right)
              = -\\rho U \\Gamma (1 + 2\\sigma), \\qquad
              \\sigma = \\frac{\\pi^2}{48}\\left(\\frac{d}{h}\\right)^2

    with no drag and no torque. At fixed circulation (the spin, not a Kutta condition, sets it)
    the tunnel lift is too large by the factor ``1 + 2 sigma``; the free-air lift coefficient is
    ``CL/(1 + 2 sigma)``. For ``d/h = 0.1``, ``2 sigma = 4.1e-3``: at ``CL = -10`` the lift changes
    by +0.041. Compare Allen & Vincenti's aerofoil term ``c_l = c_lu (1 - sigma - 2 eps)``, whose
    remaining part sits in an angle-of-attack change that a cylinder lacks. Inviscid, first order
    in ``(d/h)^2``; the strain also shifts the separation points and with them the circulation,
    which this form ignores. Model centred between the walls; 2-D only.

    References
    ----------
    .. [1] H. J. Allen and W. G. Vincenti, NACA Report 782, 1944 (the aerofoil analogue).
    .. [2] L. M. Milne-Thomson, Theoretical Hydrodynamics, 5th ed., Macmillan, 1968 (circle
       theorem; Blasius' theorem).

    Examples
    --------
    >>> out = lift_interference_2d(-10.0, 0.1, 1.0)
    >>> round(float(out["lift_curvature"]), 6), round(float(out["delta_CL"]), 4)
    (0.004112, 0.041)
    """
    sigma = np.pi**2 / 48.0 * (np.asarray(diameter) / np.asarray(height)) ** 2
    cl = np.asarray(lift_coefficient)
    return {
        "sigma": sigma,
        "lift_curvature": 2.0 * sigma,
        "strain": 2.0 * sigma / np.pi * cl,
        "delta_CL": -2.0 * sigma * cl / (1.0 + 2.0 * sigma),
        "delta_alpha": np.zeros(np.broadcast(sigma, cl).shape),
    }


@arraylike
def buoyancy_drag(
    diameter: ArrayLike, dynamic_pressure: ArrayLike, static_pressure_gradient: ArrayLike
) -> ArrayLike:
    """Horizontal-buoyancy drag coefficient of a circular cylinder in the empty-tunnel gradient.

    Parameters
    ----------
    diameter : float or array_like
        Cylinder diameter. [m]
    dynamic_pressure : float or array_like
        The measured (uncorrected) dynamic pressure the coefficients are based on. [Pa]
    static_pressure_gradient : float or array_like
        Empty-tunnel static-pressure gradient ``dp/dx`` along the stream. [Pa/m]

    Returns
    -------
    float or ndarray
        The buoyancy drag coefficient included in the measurement, to be subtracted from the
        measured ``CD`` (on ``q d b``). Positive when the static pressure falls downstream. [-]

    Notes
    -----
    A body in a stream whose pressure falls along it feels a force ``-(V + V_added) dp/dx``:
    the gradient on its own volume plus the force needed to accelerate the fluid it displaces
    (Glauert). A circular cylinder's added mass equals its displaced mass, so per unit span

    .. math:: D_B = -2\\,\\frac{\\pi d^2}{4}\\frac{dp}{dx}, \\qquad
              \\Delta C_{D,B} = \\frac{D_B}{q d} = -\\frac{\\pi d}{2 q}\\frac{dp}{dx}

    A gradient ``dp/dx < 0`` pushes the model downstream, so the measured drag is too high and
    ``Delta CD_B > 0``. Valid for a gradient uniform over the model's length.

    References
    ----------
    .. [1] H. Glauert, "Wind tunnel interference on wings, bodies and airscrews", ARC R&M 1566,
       1933 (from memory).
    .. [2] J. B. Barlow, W. H. Rae and A. Pope, Low-Speed Wind Tunnel Testing, 3rd ed., Wiley,
       1999 (from memory).

    Examples
    --------
    >>> round(buoyancy_drag(0.1, 500.0, -10.0), 7)
    0.0031416
    """
    return -np.pi * diameter / (2.0 * dynamic_pressure) * static_pressure_gradient
