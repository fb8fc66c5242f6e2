"""The wall corrections of a run: their sizes (:func:`wall_correction`) and the corrected results.

:func:`wall_correction` works out the increments of the method config resolved from
``[reduction] blockage`` (an entry of tunnelred.physics.corrections.methods.METHODS), with the
buoyancy and lift-interference corrections that follow their own switches;
:func:`apply_wall_correction` turns uncorrected coefficients into corrected ones.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import cast

import numpy as np
import numpy.typing as npt

from tunnelred.common._arraylike import Values
from tunnelred.physics.corrections.formulas import buoyancy_drag, lift_interference_2d
from tunnelred.physics.corrections.methods import (
    METHOD_FORMULAS,
    BlockageMethod,
    Geometry,
    blockage_method,
)

__all__ = [
    "WallCorrection",
    "wall_correction",
    "apply_wall_correction",
    "drag_factor_residue",
    "correction_summary",
]


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
