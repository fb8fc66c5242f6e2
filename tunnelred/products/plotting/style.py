"""The house style: series styles (Okabe & Ito hues, each with its marker and dash), the neutral
tones of theory and bounds, figure settings, axis labels, and the small helpers every figure shares
(new axes, the coverage-factor legend, significant figures).
"""

from __future__ import annotations

import contextlib
import math
from collections.abc import Iterator
from dataclasses import dataclass

import matplotlib as mpl
import numpy as np
from matplotlib.axes import Axes
from matplotlib.figure import Figure

#: Coverage factor of every error bar and band drawn (docs/conventions.md: reports show k = 2).
COVERAGE_FACTOR = 2.0


@dataclass(frozen=True)
class SeriesStyle:
    """How one data series is drawn: a colour, a marker and a line style that go together."""

    color: str
    marker: str
    linestyle: str | tuple


#: The house series styles, in the order series take them. Hues: Okabe & Ito (2008) blue,
#: vermillion, bluish green, reddish purple, orange, sky blue and black (their yellow is left out:
#: it vanishes on white paper). Each has its own marker and dash pattern for greyscale print.
HOUSE_STYLE: tuple[SeriesStyle, ...] = (
    SeriesStyle("#0072B2", "o", "-"),
    SeriesStyle("#D55E00", "s", "--"),
    SeriesStyle("#009E73", "^", "-."),
    SeriesStyle("#CC79A7", "D", ":"),
    SeriesStyle("#E69F00", "v", (0, (5, 1, 1, 1, 1, 1))),
    SeriesStyle("#56B4E9", "P", (0, (8, 2))),
    SeriesStyle("#000000", "X", (0, (1, 3))),
)

# Theory and bounds are drawn in neutral tones so that they never read as one more data series.
THEORY_COLOR = "#333333"
BOUND_COLOR = "#777777"

# Figure-level settings of the house style, applied only while a figure is drawn.
_RC = {
    "font.size": 9,
    "axes.titlesize": 10,
    "axes.labelsize": 9,
    "legend.fontsize": 8,
    "legend.framealpha": 0.9,
    "axes.grid": True,
    "grid.color": "#dddddd",
    "grid.linewidth": 0.6,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "lines.linewidth": 1.2,
    "lines.markersize": 5,
    "errorbar.capsize": 2,
    "savefig.dpi": 200,
}

#: Axis labels of the plottable result names.
COEFFICIENT_LABELS: dict[str, str] = {
    "alpha": r"spin ratio $\alpha = \omega R / U$",
    "CL": r"lift coefficient $C_L$",
    "CD": r"drag coefficient $C_D$",
    "CM": r"torque coefficient $C_M = T/(q\,d\,b\,R)$",
    "C_power": r"power coefficient $C_P = T\omega/(q\,U\,d\,b)$",
    "L_D": r"lift-to-drag ratio $L/D$",
    "CL_p": r"lift coefficient from $\oint C_p$, $C_{L,p}$",
    "CD_p": r"drag coefficient from $\oint C_p$, $C_{D,p}$",
}

_K_TEXT = "bars: expanded uncertainty, k = 2"
FIGURE_SIZE = (6.4, 4.4)


@contextlib.contextmanager
def house_style() -> Iterator[None]:
    """Context in which figures are drawn in the house style (fonts, grid, line widths)."""
    with mpl.rc_context(_RC):
        yield


def new_axes(ax: Axes | None, *, polar: bool = False, size=FIGURE_SIZE) -> Axes:
    if ax is not None:
        return ax
    fig = Figure(figsize=size, layout="constrained")
    return fig.add_subplot(projection="polar" if polar else None)


def significant(x: float, digits: int = 2) -> str:
    """x to ``digits`` significant figures; powers of ten in mathtext outside 1e-3 … 1e4."""
    if not np.isfinite(x) or x == 0:
        return f"{x:g}"
    exponent = math.floor(math.log10(abs(x)))
    if -3 <= exponent < 4:
        return f"{x:.{max(digits - 1 - exponent, 0)}f}"
    mantissa = x / 10**exponent
    return rf"{mantissa:.{digits - 1}f}$\times10^{{{exponent}}}$"


def styled(groups: list[tuple[str, np.ndarray]]) -> list[tuple[str, np.ndarray, SeriesStyle]]:
    return [
        (label or "all runs", idx, HOUSE_STYLE[i % len(HOUSE_STYLE)])
        for i, (label, idx) in enumerate(groups)
    ]


def coverage_legend(ax: Axes) -> None:
    """The legend titled with the coverage factor; beside the axes when it is long."""
    count = len(ax.get_legend_handles_labels()[1])
    if count > 6:
        ax.legend(title=_K_TEXT, loc="upper left", bbox_to_anchor=(1.02, 1.0), fontsize=7,
                  title_fontsize=7, borderaxespad=0.0)  # fmt: skip
    else:
        ax.legend(title=_K_TEXT, loc="best", fontsize=7, title_fontsize=7)
