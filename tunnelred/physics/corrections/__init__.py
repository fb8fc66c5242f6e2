"""Wall corrections for a spinning circular cylinder in a closed test section.

The package, by its seams: formulas.py, one function per published method, vectorised with numpy
broadcasting so that the whole correction can be evaluated over a batch of Monte Carlo draws in
one call; methods.py, the registry :data:`METHODS`, one :class:`BlockageMethod` a method (its
increments, drag factor, report text, validity range and the models it fits); apply.py,
:func:`wall_correction`, which applies the method config resolved from ``[reduction] blockage``,
and :func:`apply_wall_correction`, which turns uncorrected coefficients into corrected ones.
Every public name of the three is importable from here.
"""

from __future__ import annotations

from tunnelred.physics.corrections.apply import (
    WallCorrection,
    apply_wall_correction,
    correction_summary,
    drag_factor_residue,
    wall_correction,
)
from tunnelred.physics.corrections.formulas import (
    MASKELL_FACTOR_2D,
    MASKELL_FACTOR_3D,
    buoyancy_drag,
    lift_interference_2d,
    maskell_3d,
    solid_blockage_2d,
    wake_blockage_2d,
)
from tunnelred.physics.corrections.methods import (
    METHOD_FORMULAS,
    METHODS,
    BlockageMethod,
    Geometry,
    _registry,  # noqa: F401  (tests/test_corrections.py)
    blockage_method,
)

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
