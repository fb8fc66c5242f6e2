"""Figures of campaign results: coefficients versus spin ratio, Cp(θ), run diagnostics, comparisons.

Every function draws on the Axes (or Figure) it is given, or on a new one made without pyplot,
and returns what it drew on: nothing is left in pyplot's global state, so the functions are safe
in scripts, notebooks and worker processes alike. Error bars and bands are expanded
uncertainties, k = 2, and every figure says so.

The house style (:data:`HOUSE_STYLE`) pairs each colour with its own marker and line style, so a
figure still reads printed in greyscale. The hues are the colour-blind-safe set of Okabe & Ito [1]_.

References
----------
.. [1] M. Okabe and K. Ito, "Color Universal Design (CUD): how to make figures and presentations
   that are friendly to colorblind people", J*FLY, 2008, https://jfly.uni-koeln.de/color/.

The figures live in one module each by kind: :mod:`.style` (house style and shared helpers),
:mod:`.runs` (which runs, grouped how), :mod:`.coefficients` (coefficients against the spin ratio,
drag polar, comparisons), :mod:`.cp` (surface pressure, axes sketch), :mod:`.diagnostics` (run
diagnostics, steadiness) and :mod:`.standard` (the standard figure set of an output folder); this
module gathers their public names.
"""

from __future__ import annotations

from tunnelred.products.plotting.coefficients import (
    FLAGGED_LABEL,
    plot_coefficient,
    plot_comparison,
    plot_drag_polar,
    plot_pressure_lift,
)
from tunnelred.products.plotting.coefficients import UNCORRECTED_GID as UNCORRECTED_GID
from tunnelred.products.plotting.cp import plot_axes_sketch, plot_cp, plot_cp_pair
from tunnelred.products.plotting.diagnostics import plot_run_diagnostics, plot_steadiness
from tunnelred.products.plotting.runs import (
    flagged_runs,
    group_runs,
    representative_runs,
    results_dataset,
    sweep_legs,
)
from tunnelred.products.plotting.standard import (
    draw_standard_figure,
    save_standard_figures,
    standard_figures,
)
from tunnelred.products.plotting.standard import draw_standard_figures as draw_standard_figures
from tunnelred.products.plotting.style import (
    COEFFICIENT_LABELS,
    COVERAGE_FACTOR,
    HOUSE_STYLE,
    SeriesStyle,
    house_style,
)

__all__ = [
    "HOUSE_STYLE",
    "house_style",
    "SeriesStyle",
    "COVERAGE_FACTOR",
    "COEFFICIENT_LABELS",
    "results_dataset",
    "group_runs",
    "representative_runs",
    "plot_coefficient",
    "plot_cp",
    "plot_run_diagnostics",
    "plot_comparison",
    "plot_drag_polar",
    "plot_cp_pair",
    "plot_axes_sketch",
    "plot_pressure_lift",
    "plot_steadiness",
    "flagged_runs",
    "sweep_legs",
    "FLAGGED_LABEL",
    "save_standard_figures",
    "standard_figures",
    "draw_standard_figure",
]
