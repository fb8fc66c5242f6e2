"""Wall corrections (tunnelred/physics/corrections/formulas.py, split at its seams next)."""

from tunnelred.physics.corrections.formulas import *  # noqa: F403
from tunnelred.physics.corrections.formulas import __all__  # noqa: F401
