"""Comparisons of sweeps, configurations and campaigns, every difference with its uncertainty."""

from tunnelred.products.compare.grid import *  # noqa: F403
from tunnelred.products.compare.grid import __all__  # noqa: F401
