"""The blockage methods: one :class:`BlockageMethod` a method, in the registry :data:`METHODS`.

Each entry holds its increments (from the published forms of
tunnelred.physics.corrections.formulas), its drag factor, the formula text the report prints, its
validity range and the choice config resolves (tunnelred.inputs.methods). Adding a method is one
entry here and its tests (DEVELOPERS.md, "Adding a wall-correction method").
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import cast

from tunnelred.common._arraylike import Values
from tunnelred.inputs.methods import BLOCKAGE_CHOICES, MethodChoice
from tunnelred.physics.corrections.formulas import maskell_3d, solid_blockage_2d, wake_blockage_2d

__all__ = ["Geometry", "BlockageMethod", "METHODS", "METHOD_FORMULAS", "blockage_method"]


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
