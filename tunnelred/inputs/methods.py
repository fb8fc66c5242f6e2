"""The wall-correction methods campaign.toml may name, and the one resolution of the choice.

Each method is one entry of :data:`tunnelred.physics.corrections.METHODS` (its formulas, drag
factor, report text and validity range). Configuration reading sits a stage below physics and may
not import it, so the little that config needs to *choose* a method — its name and which models
it fits — is the method's :class:`MethodChoice`, registered here; the physics entry holds that
same object as its ``choice`` and reads its name and fitness from it. Importing
:mod:`tunnelred.physics.corrections` fails when a choice here has no physics entry or the other
way round, so the two halves cannot drift apart.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = [
    "MethodChoice",
    "BLOCKAGE_CHOICES",
    "BLOCKAGE_METHODS",
    "THREE_D_METHOD",
    "resolve_blockage",
]


@dataclass(frozen=True)
class MethodChoice:
    """What configuration needs to know of a blockage method to accept and resolve it.

    ``fits_2d``: suits a model that spans the section wall to wall; ``fits_3d``: suits one that
    does not; ``takes_factor``: Maskell's blockage factor (``[reduction] maskell_factor``)
    applies to it.
    """

    name: str
    fits_2d: bool
    fits_3d: bool
    takes_factor: bool = False

    def __post_init__(self) -> None:
        if not self.name or not (self.fits_2d or self.fits_3d):
            raise ValueError(f"method choice {self.name!r} needs a name and a model it fits")

    def fits(self, spans_section: bool) -> bool:
        return self.fits_2d if spans_section else self.fits_3d


#: Every blockage method campaign.toml may choose, by name.
BLOCKAGE_CHOICES: dict[str, MethodChoice] = {
    c.name: c
    for c in (
        MethodChoice("allen-vincenti", fits_2d=True, fits_3d=False),
        MethodChoice("maskell", fits_2d=True, fits_3d=False, takes_factor=True),
        MethodChoice("maskell-3d", fits_2d=False, fits_3d=True, takes_factor=True),
        MethodChoice("none", fits_2d=True, fits_3d=True),
    )
}

#: Names accepted for [reduction] blockage.
BLOCKAGE_METHODS: tuple[str, ...] = tuple(BLOCKAGE_CHOICES)

#: The method a model that does not span the section gets in place of a two-dimensional one.
THREE_D_METHOD = "maskell-3d"


def resolve_blockage(requested: str, spans_section: bool) -> tuple[MethodChoice, str]:
    """The method a campaign's runs are corrected with, and why it differs from the request.

    Parameters
    ----------
    requested : str
        ``[reduction] blockage``, one of :data:`BLOCKAGE_METHODS`.
    spans_section : bool
        ``[model] spans_section``.

    Returns
    -------
    choice : MethodChoice
        The method used: the one requested, or :data:`THREE_D_METHOD` in place of a
        two-dimensional method on a model that does not span the section.
    note : str
        Empty when the request stands; otherwise a sentence saying what was substituted or
        why the request is doubtful, for the notice config gives.

    Examples
    --------
    >>> choice, note = resolve_blockage("allen-vincenti", spans_section=False)
    >>> choice.name
    'maskell-3d'
    """
    choice = BLOCKAGE_CHOICES[requested]
    if choice.fits(spans_section):
        return choice, ""
    if not spans_section:
        used = BLOCKAGE_CHOICES[THREE_D_METHOD]
        return used, (
            f"{requested!r} is a two-dimensional method and the model does not span the section "
            f"(spans_section = false); the runs are corrected with {used.name!r}"
        )
    return choice, (
        f"{requested!r} is a three-dimensional method and the model spans the section; it is "
        "applied as chosen, with S/C = d b/(h w)"
    )
