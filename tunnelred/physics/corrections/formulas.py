"""Wall corrections for a spinning circular cylinder in a closed test section.

One function per published method, each vectorised with numpy broadcasting so that the whole
correction can be evaluated over a batch of Monte Carlo draws in one call; the registry
:data:`METHODS`, one :class:`BlockageMethod` a method (its increments, drag factor, report text,
validity range and the models it fits); :func:`wall_correction`, which applies the method config
resolved from ``[reduction] blockage``; and :func:`apply_wall_correction`, which turns uncorrected
coefficients into corrected ones.

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

from collections.abc import Callable
from dataclasses import dataclass
from typing import cast

import numpy as np
import numpy.typing as npt

from tunnelred.common._arraylike import ArrayLike, Values, arraylike
from tunnelred.inputs.methods import BLOCKAGE_CHOICES, MethodChoice

__all__ = [
    "MASKELL_FACTOR_2D",
    "MASKELL_FACTOR_3D",
    "METHODS",
    "METHOD_FORMULAS",
    "BlockageMethod",
    "Geometry",
    "WallCorrection",
    "blockage_method",
    "solid_blockage_2d",
    "wake_blockage_2d",
    "maskell_3d",
    "lift_interference_2d",
    "buoyancy_drag",
    "wall_correction",
    "apply_wall_correction",
    "drag_factor_residue",
    "correction_summary",
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
    diameter : float or array_like
        Cylinder diameter. [m]
    height : float or array_like
        Wall-to-wall distance of the test section across which lift acts. [m]
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


@dataclass(frozen=True)
class Geometry:
    """What a blockage method may use besides the drag: model and section sizes [m]."""

    diameter: Values
    height: Values  # wall to wall across which lift acts
    span: Values
    width: Values


@dataclass(frozen=True)
class BlockageMethod:
    """One wall-correction (blockage) method: everything the reduction and the report use of it.

    Attributes
    ----------
    choice : MethodChoice
        Its name and the models it fits, as campaign.toml and config know it
        (:mod:`tunnelred.inputs.methods`).
    increments : callable
        ``increments(geometry, drag_coefficient, blockage_factor) -> (eps_solid, eps_wake)``:
        the solid- and wake-blockage velocity increments [-]; ``blockage_factor`` is Maskell's
        ``theta`` or None for the method's default.
    drag_factor : callable
        ``drag_factor(eps_solid, eps_wake) -> F``: the factor that turns a drag coefficient
        (buoyancy removed) into the corrected one [-].
    formula : str
        The formulas and the publication, as the report prints them.
    validity : str
        The range the method is valid in, for the report and the docs.
    diameter_ratio_limit, area_ratio_limit : float or None
        The numbers of that range a test plan checks in advance (tunnelred.products.plan):
        the largest d/h, and the largest model-to-section area ratio S/C = d b / (h w); None
        where the validity text sets none.
    """

    choice: MethodChoice
    increments: Callable[[Geometry, Values, float | None], tuple[Values, Values]]
    drag_factor: Callable[[Values, Values], Values]
    formula: str
    validity: str
    diameter_ratio_limit: float | None = None
    area_ratio_limit: float | None = None

    def __post_init__(self) -> None:
        if not isinstance(self.choice, MethodChoice):
            raise TypeError(f"{self.choice!r} is not a MethodChoice")
        if not callable(self.increments) or not callable(self.drag_factor):
            raise TypeError(f"method {self.choice.name!r}: increments and drag_factor are called")
        if not self.formula.strip() or not self.validity.strip():
            raise ValueError(f"method {self.choice.name!r} needs its formula and validity text")

    @property
    def name(self) -> str:
        return self.choice.name

    @property
    def fits_2d(self) -> bool:
        return self.choice.fits_2d

    @property
    def fits_3d(self) -> bool:
        return self.choice.fits_3d


def _q_ratio_factor(eps_solid: Values, eps_wake: Values) -> Values:
    """``CD_c = CD_u q/q_c``: the drag scales as the dynamic pressure does."""
    return 1.0 / (1.0 + (eps_solid + eps_wake)) ** 2


# The casts below say what the arraylike rule guarantees and a type checker cannot see: a formula
# given floats and ndarrays (Values) gives back a float or an ndarray.


def _allen_vincenti(g: Geometry, cd: Values, factor: float | None) -> tuple[Values, Values]:
    solid = solid_blockage_2d(g.diameter, g.height)
    return cast(Values, solid), cast(Values, wake_blockage_2d(g.diameter, g.height, cd))


def _allen_vincenti_drag(eps_solid: Values, eps_wake: Values) -> Values:
    # The extra -eps_sb is the horizontal buoyancy in the wake-induced pressure gradient.
    return 1.0 - 3.0 * eps_solid - 2.0 * eps_wake


def _maskell_2d(g: Geometry, cd: Values, factor: float | None) -> tuple[Values, Values]:
    # Maskell's theory, built on thin plates, has no solid blockage: Allen & Vincenti's is added.
    wake = wake_blockage_2d(g.diameter, g.height, cd, method="maskell", blockage_factor=factor)
    return cast(Values, solid_blockage_2d(g.diameter, g.height)), cast(Values, wake)


def _maskell_3d(g: Geometry, cd: Values, factor: float | None) -> tuple[Values, Values]:
    wake = maskell_3d(cd, g.diameter * g.span, g.height * g.width, blockage_factor=factor)
    return 0.0, cast(Values, wake)


def _no_blockage(g: Geometry, cd: Values, factor: float | None) -> tuple[Values, Values]:
    return 0.0, 0.0


def _registry(*methods: BlockageMethod) -> dict[str, BlockageMethod]:
    """The methods by name; each must be a choice config knows, and every choice needs one."""
    table = {m.name: m for m in methods}
    for m in methods:
        if BLOCKAGE_CHOICES.get(m.name) is not m.choice:
            raise ValueError(f"method {m.name!r} is not registered in tunnelred.inputs.methods")
    missing = set(BLOCKAGE_CHOICES) - set(table)
    if missing or len(table) != len(methods):
        raise ValueError(f"blockage methods without one physics entry: {sorted(missing)}")
    return table


#: Every blockage method, by the name campaign.toml gives: the one table the reduction, the
#: forward model, the report and the docs read.
METHODS: dict[str, BlockageMethod] = _registry(
    BlockageMethod(
        BLOCKAGE_CHOICES["allen-vincenti"],
        increments=_allen_vincenti,
        drag_factor=_allen_vincenti_drag,
        formula=(
            "eps_sb = (pi^2/12)(d/h)^2; eps_wb = (d/(4h)) CD_u; eps = eps_sb + eps_wb; "
            "q_c = q (1 + eps)^2; CD_c = CD_u (1 - 3 eps_sb - 2 eps_wb) "
            "(Allen & Vincenti, NACA Report 782, 1944)"
        ),
        validity="a model spanning the section, d/h below about 0.3, thin (attached) wakes",
        diameter_ratio_limit=0.3,
    ),
    BlockageMethod(
        BLOCKAGE_CHOICES["maskell"],
        increments=_maskell_2d,
        drag_factor=_q_ratio_factor,
        formula=(
            "eps_sb = (pi^2/12)(d/h)^2; (1 + eps_wb)^2 = 1 + theta CD_u d/h, theta = 0.96; "
            "q_c = q (1 + eps)^2; CD_c = CD_u q/q_c (Maskell, ARC R&M 3400, 1963, in 2-D form)"
        ),
        validity="a model spanning the section, separated wakes that do not reattach",
    ),
    BlockageMethod(
        BLOCKAGE_CHOICES["maskell-3d"],
        increments=_maskell_3d,
        drag_factor=_q_ratio_factor,
        formula=(
            "q_c/q = 1 + theta CD_u S/C, theta = 5/2, S = d b, C = h w; eps = sqrt(q_c/q) - 1; "
            "CD_c = CD_u q/q_c (Maskell, ARC R&M 3400, 1963)"
        ),
        validity="a bluff model of aspect ratio 1 to 10 not spanning the section, S/C up to 0.1",
        area_ratio_limit=0.1,
    ),
    BlockageMethod(
        BLOCKAGE_CHOICES["none"],
        increments=_no_blockage,
        drag_factor=_q_ratio_factor,
        formula="no blockage correction: eps = 0",
        validity="any model; the results are the tunnel's, not free air's",
    ),
)

#: The formula text of each correction, the one place the report takes it from: the blockage
#: methods' own and the two corrections that follow their own switches.
METHOD_FORMULAS: dict[str, str] = {
    **{name: m.formula for name, m in METHODS.items()},
    "lift-interference": (
        "sigma = (pi^2/48)(d/h)^2; the wall images of the bound vortex strain the stream at the "
        "model and raise the lift at fixed circulation by (1 + 2 sigma): CL_c = CL_u (q/q_c)/(1 + "
        "2 sigma); alpha unchanged (derived in tunnelred.physics.corrections.lift_interference_2d)"
    ),
    "buoyancy": (
        "Delta CD_B = -(pi d/(2 q)) dp/dx (volume plus added mass of a circular cylinder, "
        "Glauert, ARC R&M 1566), subtracted before the blockage scaling"
    ),
}


def blockage_method(method: str | BlockageMethod) -> BlockageMethod:
    """The registry entry of a method given by name (or the entry itself)."""
    if isinstance(method, BlockageMethod):
        return method
    if method not in METHODS:
        raise ValueError(f"blockage method must be one of {tuple(METHODS)}, not {method!r}")
    return METHODS[method]


@dataclass(frozen=True)
class WallCorrection:
    """The size of the wall corrections for one run (floats, or arrays over a batch of draws).

    ``eps_solid``, ``eps_wake``, ``eps``: velocity increments [-]; ``delta_CD_buoyancy``: the
    buoyancy drag coefficient in the measurement, subtracted before the blockage scaling [-];
    ``delta_alpha_lift``: lift-interference change of the spin ratio [-] (zero in the 2-D
    derivation, see :func:`lift_interference_2d`); ``lift_curvature``: the fraction ``2 sigma``
    by which the walls raise the lift [-]; ``method``: the blockage method applied.
    """

    eps_solid: Values
    eps_wake: Values
    eps: Values
    delta_CD_buoyancy: Values
    delta_alpha_lift: Values
    method: BlockageMethod
    lift_curvature: Values = 0.0


def wall_correction(
    method: str | BlockageMethod,
    *,
    diameter: Values,
    height: Values,
    span: Values,
    width: Values,
    drag_coefficient: Values,
    lift_coefficient: Values,
    dynamic_pressure: Values,
    static_pressure_gradient: Values = 0.0,
    blockage_factor: float | None = None,
    lift_interference: bool = False,
    buoyancy: bool = True,
    spans_section: bool = True,
) -> WallCorrection:
    """Work out the wall corrections of a run by the method named in campaign.toml.

    Parameters
    ----------
    method : BlockageMethod or str
        The resolved ``[reduction] blockage``: an entry of :data:`METHODS` or its name.
    diameter, height, span, width : float or array_like
        Model diameter and span; test-section height (across which lift acts) and width. [m]
    drag_coefficient, lift_coefficient : float or array_like
        The run's own uncorrected coefficients (on the measured ``q``). [-]
    dynamic_pressure : float or array_like
        The measured dynamic pressure. [Pa]
    static_pressure_gradient : float or array_like
        Empty-tunnel ``dp/dx``. [Pa/m]
    blockage_factor : float, optional
        Maskell's ``theta`` (``[reduction] maskell_factor``); None: the method's default. [-]
    lift_interference : bool
        Apply :func:`lift_interference_2d` (2-D models only).
    buoyancy : bool
        Remove the horizontal buoyancy of :func:`buoyancy_drag`.
    spans_section : bool
        True when the model spans the section wall to wall.

    Returns
    -------
    WallCorrection

    Raises
    ------
    ValueError
        For an unknown method, a 2-D method or lift interference on a model that does not span
        the section, or a blockage factor given to a method that has none. (Configuration
        resolves the method so that a reduction never meets the first two.)

    Notes
    -----
    The blockage is the method's own ``increments`` (see :data:`METHODS`). Buoyancy and lift
    interference follow their own switches whatever the blockage method.

    References
    ----------
    See the functions named in :data:`METHODS`.

    Examples
    --------
    >>> wc = wall_correction("allen-vincenti", diameter=0.1, height=1.0, span=1.0, width=1.0,
    ...                      drag_coefficient=1.2, lift_coefficient=0.0, dynamic_pressure=500.0)
    >>> round(wc.eps, 6)
    0.038225
    """
    entry = blockage_method(method)
    if blockage_factor is not None and not entry.choice.takes_factor:
        raise ValueError(f"a blockage factor applies to Maskell's methods, not to {entry.name!r}")
    if not spans_section and not entry.fits_3d:
        raise ValueError(
            f"{entry.name!r} is a two-dimensional method; a model that does not span the section "
            f"needs a three-dimensional one"
        )
    if not spans_section and lift_interference:
        raise ValueError("the lift-interference correction is two-dimensional only")
    shape = np.broadcast(
        diameter, height, span, width, drag_coefficient, lift_coefficient, dynamic_pressure
    ).shape
    zero = np.zeros(shape) if shape else 0.0

    geometry = Geometry(diameter, height, span, width)
    eps_solid, eps_wake = entry.increments(geometry, drag_coefficient, blockage_factor)
    eps_solid = eps_solid + zero
    eps_wake = eps_wake + zero

    delta_cd = zero
    if buoyancy:
        buoyancy_cd = buoyancy_drag(diameter, dynamic_pressure, static_pressure_gradient)
        delta_cd = cast(Values, buoyancy_cd) + zero
    lift_curvature = zero
    if lift_interference:
        lift_curvature = lift_interference_2d(lift_coefficient, diameter, height)["lift_curvature"]
        lift_curvature = lift_curvature + zero
    return WallCorrection(
        eps_solid=eps_solid,
        eps_wake=eps_wake,
        eps=eps_solid + eps_wake,
        delta_CD_buoyancy=delta_cd,
        delta_alpha_lift=zero,
        method=entry,
        lift_curvature=lift_curvature,
    )


def drag_factor_residue(corr: WallCorrection) -> Values:
    """How far a first-order drag factor lies from its unlinearised form (an uncertainty).

    Allen & Vincenti's ``1 − 3 eps_sb − 2 eps_wb`` linearises ``(1 − eps_sb)/(1 + eps)²``: the
    wake-gradient buoyancy ``eps_sb CD_u`` removed, then the q scaling. Both are first-order
    theory, so neither is the truth; their difference, ``3 eps² + …`` (0.7 % of CD at
    eps = 0.047), is the method's own standard uncertainty. Zero for the methods whose factor is
    ``q/q_c`` itself.
    """
    if corr.method.name == "allen-vincenti":
        exact = (1.0 - corr.eps_solid) / (1.0 + corr.eps) ** 2
        return exact - corr.method.drag_factor(corr.eps_solid, corr.eps_wake)
    return np.zeros_like(np.asarray(corr.eps, dtype=float))


def apply_wall_correction(
    corr: WallCorrection,
    *,
    U: Values,
    q: Values,
    alpha: Values,
    Re: Values,
    CL: Values,
    CD: Values,
    CM: Values,
    C_power: Values,
    CL_p: Values | None = None,
    CD_p: Values | None = None,
    Cp: npt.ArrayLike | None = None,
    truncation: Values = 0.0,
) -> dict[str, Values]:
    """Turn a run's uncorrected free-stream values and coefficients into wall-corrected ones.

    Parameters
    ----------
    corr : WallCorrection
        From :func:`wall_correction`.
    U, q : float or array_like
        Measured speed [m/s] and dynamic pressure [Pa].
    alpha, Re : float or array_like
        Spin ratio and Reynolds number on the measured speed. [-]
    CL, CD, CM, C_power : float or array_like
        Balance coefficients on the measured ``q`` (and ``U`` for ``C_power``). [-]
    CL_p, CD_p : float or array_like, optional
        Coefficients from the surface-pressure integral. [-]
    Cp : array_like, optional
        Pressure coefficients, shape ``[..., n_theta]`` broadcasting with ``corr.eps`` ``[...]``.
    truncation : float or array_like, optional
        Multiple of :func:`drag_factor_residue` added to the drag factor: an uncertainty input
        (value 0, standard uncertainty 1); 0 gives the published form.

    Returns
    -------
    dict
        The corrected values under the same names (``CL_p``, ``CD_p``, ``Cp`` only when given).

    Notes
    -----
    With ``eps = eps_solid + eps_wake`` and ``k = 1 + lift_curvature``:

    - ``U_c = U (1 + eps)``, ``q_c = q (1 + eps)^2``, ``Re_c = Re (1 + eps)``;
    - ``alpha_c = alpha/(1 + eps) + delta_alpha_lift`` (``omega R`` is unchanged);
    - ``CL_c = CL (q/q_c)/k``, ``CM_c = CM q/q_c``, ``C_power_c = C_power (1 + eps)^-3`` (it
      carries ``U`` as well as ``q``, and equals ``CM_c alpha_c``);
    - ``CD_c = (CD - Delta CD_B) F`` with ``F = 1 - 3 eps_sb - 2 eps_wb`` for Allen & Vincenti
      (the extra ``-eps_sb`` is the horizontal buoyancy in the wake-induced pressure gradient)
      and ``F = q/q_c`` for Maskell's methods; the empty-tunnel buoyancy is a force measured on
      the measured ``q``, so it is removed before the scaling;
    - ``1 - Cp_c = (1 - Cp)/(1 + eps)^2``: the total pressure is unchanged, so a stagnation Cp of 1
      stays 1;
    - ``CL_p`` and ``CD_p`` are corrected exactly as ``CL`` and ``CD``. Both buoyancy forces act
      through the surface pressure, so they are in ``CD_p`` as they are in ``CD``; the ``Cp``
      transformation alone would give ``CD_p/(1 + eps)^2``, leaving them in. The corrected
      profile ``Cp`` therefore integrates to ``CD_p (1 + eps)^-2``, not to the corrected ``CD_p``;
      the difference (``eps_sb CD_p`` for Allen & Vincenti, plus buoyancy) is the part of the
      pressure field that a change of reference pressure cannot remove.

    References
    ----------
    .. [1] H. J. Allen and W. G. Vincenti, NACA Report 782, 1944.
    .. [2] E. C. Maskell, ARC R&M 3400, 1963.

    Examples
    --------
    >>> wc = wall_correction("none", diameter=0.1, height=1.0, span=1.0, width=1.0,
    ...                      drag_coefficient=1.2, lift_coefficient=-3.0, dynamic_pressure=500.0,
    ...                      buoyancy=False)
    >>> out = apply_wall_correction(wc, U=20.0, q=240.0, alpha=1.0, Re=1e5, CL=-3.0, CD=1.2,
    ...                             CM=0.1, C_power=0.1)
    >>> float(out["CL"]), float(out["CD"])
    (-3.0, 1.2)
    """
    eps = corr.eps
    speed = 1.0 + eps
    q_ratio = speed**-2
    lift_factor = q_ratio / (1.0 + corr.lift_curvature)
    drag_factor = corr.method.drag_factor(corr.eps_solid, corr.eps_wake)
    drag_factor = drag_factor + truncation * drag_factor_residue(corr)
    out = {
        "U": U * speed,
        "q": q * speed**2,
        "Re": Re * speed,
        "alpha": alpha / speed + corr.delta_alpha_lift,
        "CL": CL * lift_factor,
        "CD": (CD - corr.delta_CD_buoyancy) * drag_factor,
        "CM": CM * q_ratio,
        "C_power": C_power * speed**-3,
    }
    if CL_p is not None:
        out["CL_p"] = CL_p * lift_factor
    if CD_p is not None:
        out["CD_p"] = (CD_p - corr.delta_CD_buoyancy) * drag_factor
    if Cp is not None:
        profile_speed = np.asarray(speed)[..., np.newaxis]
        out["Cp"] = 1.0 - (1.0 - np.asarray(Cp)) / profile_speed**2
    return out


def correction_summary(
    method: str | BlockageMethod,
    *,
    lift_interference: bool = False,
    buoyancy: bool = True,
    blockage_factor: float | None = None,
) -> str:
    """The formulas a reduction used, as lines of text for the report.

    Parameters
    ----------
    method : BlockageMethod or str
        The blockage method applied, or its name.
    lift_interference, buoyancy : bool
        Whether those corrections were on.
    blockage_factor : float, optional
        Maskell's ``theta`` when set in campaign.toml. [-]

    Returns
    -------
    str
        ``name: text`` lines: the blockage formula, its validity range, then the factor, lift
        interference and buoyancy as they apply.

    Examples
    --------
    >>> print(correction_summary("none", buoyancy=False))
    blockage: no blockage correction: eps = 0
    valid for: any model; the results are the tunnel's, not free air's
    """
    entry = blockage_method(method)
    lines = [f"blockage: {entry.formula}", f"valid for: {entry.validity}"]
    if blockage_factor is not None:
        lines.append(f"Maskell's blockage factor set to theta = {blockage_factor:g}")
    if lift_interference:
        lines.append(f"lift interference: {METHOD_FORMULAS['lift-interference']}")
    if buoyancy:
        lines.append(f"buoyancy: {METHOD_FORMULAS['buoyancy']}")
    return "\n".join(lines)
