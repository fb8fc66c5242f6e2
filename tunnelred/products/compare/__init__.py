"""Comparisons of sweeps, configurations and campaigns, every difference with its uncertainty.

The package is cut at its seams, in the order of the work:

- :mod:`~tunnelred.products.compare.sweeps`: results in, sweeps (legs) out (:func:`find_sweeps`);
- :mod:`~tunnelred.products.compare.grid`: curves on an α grid and their differences
  (:func:`on_grid`, :func:`difference`), interpolation error in u, no gap bridged;
- :mod:`~tunnelred.products.compare.paired`: differences at measured spin ratios paired within a
  tolerance (:func:`paired_difference`, :func:`hysteresis`);
- :mod:`~tunnelred.products.compare.characteristics`: repeatability and characteristic figures;
- :mod:`~tunnelred.products.compare.tables`: the campaign's comparison tables;
- :mod:`~tunnelred.products.compare.figures`: figures of sweeps and differences;
- :mod:`~tunnelred.products.compare.command`: ``tunnelred compare`` (:func:`run_compare`).

The functions take the results as an ``xarray.Dataset``
(:func:`tunnelred.products.store.read_results`) or a ``pandas.DataFrame`` with the names of
docs/results.md. Everything public is importable from here.
"""

from tunnelred.products.compare.characteristics import (
    COMPARED,
    characteristics,
    characteristics_table,
    repeatability,
)
from tunnelred.products.compare.command import run_compare
from tunnelred.products.compare.figures import plot_difference, plot_sweeps
from tunnelred.products.compare.grid import (
    Difference,
    GridCurve,
    alpha_grid,
    difference,
    on_grid,
)
from tunnelred.products.compare.paired import (
    METHODS,
    PAIR_TOLERANCE,
    hysteresis,
    paired_difference,
    paired_points,
)
from tunnelred.products.compare.sweeps import GAP_FACTOR, Sweep, find_sweeps, gap_limit
from tunnelred.products.compare.tables import comparison_section_data, comparison_table
from tunnelred.products.plotting import COVERAGE_FACTOR

__all__ = [
    "COVERAGE_FACTOR",
    "COMPARED",
    "GAP_FACTOR",
    "METHODS",
    "PAIR_TOLERANCE",
    "Sweep",
    "GridCurve",
    "Difference",
    "find_sweeps",
    "gap_limit",
    "alpha_grid",
    "on_grid",
    "difference",
    "paired_points",
    "paired_difference",
    "hysteresis",
    "repeatability",
    "characteristics",
    "characteristics_table",
    "comparison_table",
    "comparison_section_data",
    "plot_sweeps",
    "plot_difference",
    "run_compare",
]
