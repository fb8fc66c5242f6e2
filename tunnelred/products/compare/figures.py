"""Figures of sweeps and differences, in the house style (each takes ``ax=``, returns it)."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from matplotlib.axes import Axes
from matplotlib.figure import Figure

from tunnelred.products.compare.grid import Difference, on_grid
from tunnelred.products.compare.sweeps import Sweep, gap_limit, has_coefficient, point_alpha
from tunnelred.products.plotting import (
    COEFFICIENT_LABELS,
    COVERAGE_FACTOR,
    HOUSE_STYLE,
    house_style,
)

__all__ = ["plot_difference", "plot_sweeps"]


def _axes(ax: Axes | None) -> Axes:
    if ax is not None:
        return ax
    return Figure(figsize=(6.4, 4.4), layout="constrained").add_subplot()


def plot_sweeps(
    sweeps: Sequence[Sweep],
    name: str,
    *,
    ax: Axes | None = None,
    max_gap: float | None = None,
    include_flagged: bool = False,
) -> Axes:
    """Sweeps of one coefficient overlaid: the runs, and each curve with its k = 2 band.

    Parameters
    ----------
    sweeps : sequence of Sweep
    name : str
        The coefficient.
    ax : matplotlib.axes.Axes, optional
        Where to draw; a new one when None.
    max_gap : float, optional
        A sweep's line and band stop at a step in α wider than this between its measured
        points; default :func:`gap_limit` of the sweeps drawn. [-]
    include_flagged : bool
        Let flagged runs into the lines (their markers are drawn, hollow, either way).

    Returns
    -------
    matplotlib.axes.Axes
        One line (labelled with the sweep key) and one band per sweep that has ``name``; the
        line is NaN, so broken, wherever the sweep does not cover α.

    Notes
    -----
    A line joins only the measured points of its own sweep (one configuration, one speed, one
    direction), in order of α, and only across steps no wider than the gap limit; a sweep of
    fewer than three points, whose interpolation error cannot be stated, is drawn as markers
    alone.
    """
    k = COVERAGE_FACTOR
    with house_style():
        ax = _axes(ax)
        drawn = [s for s in sweeps if has_coefficient(s, name)]
        limit = gap_limit([point_alpha(s) for s in drawn], max_gap)
        for i, sweep in enumerate(drawn):
            style = HOUSE_STYLE[i % len(HOUSE_STYLE)]
            alpha = np.asarray(sweep.arrays["alpha"], dtype=float)
            value = np.asarray(sweep.arrays[name], dtype=float)
            flagged = np.asarray(sweep.arrays.get("flagged", np.zeros(alpha.size)), dtype=bool)
            lo, hi = np.nanmin(alpha), np.nanmax(alpha)
            # The measured α themselves are on the grid, so a line ends on the point before a gap.
            grid = np.union1d(np.linspace(lo, hi, 101), alpha[np.isfinite(alpha)])
            curve = on_grid(sweep, name, grid, max_gap=limit, include_flagged=include_flagged)
            _band(ax, curve.alpha, curve.value, k * curve.u, style.color)
            ax.plot(
                curve.alpha,
                curve.value,
                color=style.color,
                linestyle=style.linestyle,
                label=sweep.key,
            )
            ax.plot(
                alpha[~flagged],
                value[~flagged],
                color=style.color,
                marker=style.marker,
                linestyle="none",
            )
            if flagged.any():
                ax.plot(
                    alpha[flagged],
                    value[flagged],
                    color=style.color,
                    marker=style.marker,
                    markerfacecolor="white",
                    linestyle="none",
                    label="_flagged run",
                )
        ax.set_xlabel(COEFFICIENT_LABELS["alpha"])
        ax.set_ylabel(COEFFICIENT_LABELS.get(name, name))
        ax.set_title(f"{name}: sweeps, bands k = 2")
        if ax.get_legend_handles_labels()[0]:
            ax.legend(loc="best")
    return ax


def _band(ax: Axes, x, centre, half_width, color) -> None:
    """The shaded band centre ± half_width that sweeps and differences are drawn with."""
    ax.fill_between(
        x, centre - half_width, centre + half_width, color=color, alpha=0.2, linewidth=0
    )


def plot_difference(d: Difference, *, ax: Axes | None = None) -> Axes:
    """A difference against α with its k = 2 band; significant points filled, others open.

    Parameters
    ----------
    d : Difference
    ax : matplotlib.axes.Axes, optional

    Returns
    -------
    matplotlib.axes.Axes
        Artists labelled ``"significant (k = 2)"`` and ``"not significant"``; the line and band
        join neighbouring grid points only (a paired difference is drawn as points).
    """
    style = HOUSE_STYLE[0]
    k = d.k
    with house_style():
        ax = _axes(ax)
        ax.axhline(0.0, color="#777777", linewidth=0.8)
        if d.method == "grid":
            _band(ax, d.alpha, d.delta, k * d.u, style.color)
            ax.plot(d.alpha, d.delta, color=style.color, linestyle=style.linestyle)
        else:
            # Pairs are separate spin ratios: bars, and no line drawn between them.
            ax.errorbar(
                d.alpha[d.covered],
                d.delta[d.covered],
                yerr=k * d.u[d.covered],
                color=style.color,
                linestyle="none",
                elinewidth=0.8,
            )
        sig, plain = d.significant, d.covered & ~d.significant
        ax.plot(
            d.alpha[sig],
            d.delta[sig],
            linestyle="none",
            marker=style.marker,
            color=style.color,
            label=f"significant (k = {k:g})",
        )
        ax.plot(
            d.alpha[plain],
            d.delta[plain],
            linestyle="none",
            marker=style.marker,
            markerfacecolor="white",
            color=style.color,
            label="not significant",
        )
        ax.set_xlabel(COEFFICIENT_LABELS["alpha"])
        ax.set_ylabel(f"Δ{d.name}")
        ax.set_title(f"Δ{d.name} = [{d.a}] − [{d.b}]", fontsize=8)
        ax.legend(loc="best")
    return ax
