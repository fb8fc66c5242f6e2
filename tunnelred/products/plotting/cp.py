"""Surface-pressure figures: Cp(θ) of a run, cartesian or polar, with its k = 2 band and potential
flow; the pair with the band's width; the sketch of the axes and azimuth.
"""

from __future__ import annotations

import math

import matplotlib as mpl
import numpy as np
from matplotlib.axes import Axes
from matplotlib.figure import Figure

from tunnelred.physics import theory
from tunnelred.products.plotting.runs import results_dataset
from tunnelred.products.plotting.style import (
    COVERAGE_FACTOR,
    FIGURE_SIZE,
    HOUSE_STYLE,
    THEORY_COLOR,
    house_style,
    new_axes,
)


def _wrap(theta: np.ndarray) -> np.ndarray:
    """Azimuths in [−180, 180) [deg], so the windward point sits mid-plot."""
    return (np.asarray(theta, dtype=float) + 180.0) % 360.0 - 180.0


def plot_cp(results, run: str, *, ax: Axes | None = None, polar: bool = False) -> Axes:
    """A run's surface pressure coefficient against azimuth, with potential flow at its α.

    Parameters
    ----------
    results : xarray.Dataset, CampaignResults or path-like
        Campaign results with ``Cp`` and ``u_Cp`` on (run, theta).
    run : str
        The run id.
    ax : matplotlib.axes.Axes, optional
        Where to draw (a polar Axes when ``polar``); a new one when None.
    polar : bool
        Draw Cp as the radius about the section, the flow arriving from the left and θ increasing
        counter-clockwise (the sense of positive spin, docs/conventions.md).

    Returns
    -------
    matplotlib.axes.Axes

    Notes
    -----
    The band is Cp ± k·u(Cp), k = 2. The theory curve is Cp = 1 − (α + 2 sin θ)² at the run's
    wall-corrected α; it describes attached inviscid flow, so the leeward side departs from it.

    References
    ----------
    .. [1] J. D. Anderson, *Fundamentals of Aerodynamics*, 6th ed., McGraw-Hill, 2017, §3.15.
    """
    ds = results_dataset(results)
    if "Cp" not in ds:
        raise ValueError("the results hold no Cp: no run had a pressure log")
    if run not in set(ds["run"].values.tolist()):
        raise ValueError(f"the results hold no run {run!r}")
    row = ds.sel(run=run)
    alpha = float(row["alpha"])
    theta = _wrap(ds["theta"].values)
    order = np.argsort(theta)
    theta = theta[order]
    cp = np.asarray(row["Cp"].values, dtype=float)[order]
    u = np.asarray(row["u_Cp"].values, dtype=float)[order] if "u_Cp" in row else np.zeros_like(cp)
    if not np.isfinite(cp).any():
        raise ValueError(f"run {run!r} has no surface pressure data")
    fine = np.linspace(-180.0, 180.0, 721)
    ideal = theory.cp_surface(fine, alpha)
    k = COVERAGE_FACTOR
    with house_style():
        ax = new_axes(ax, polar=polar, size=(5.6, 5.0) if polar else FIGURE_SIZE)
        style = HOUSE_STYLE[0]
        to_x = np.radians if polar else np.asarray
        ax.fill_between(
            to_x(theta),
            cp - k * u,
            cp + k * u,
            color=style.color,
            alpha=0.25,
            linewidth=0,
            label="Cp ± expanded uncertainty (k = 2)",
        )
        ax.plot(
            to_x(theta),
            cp,
            color=style.color,
            marker=style.marker,
            markersize=3,
            linestyle=style.linestyle,
            label=f"measured, run {run}",
        )
        ax.plot(
            to_x(fine),
            ideal,
            color=THEORY_COLOR,
            linestyle="--",
            linewidth=1.0,
            label=rf"potential flow $1-(\alpha+2\sin\theta)^2$, $\alpha$ = {alpha:.3f}",
        )
        low = float(np.nanmin(cp - k * u))  # the bottom of the band
        if polar:
            _polar_frame(ax, run, float(np.nanmin([low, ideal.min()])))
        else:
            _cartesian_frame(ax, run, low, float(ideal.min()))
    return ax


def _polar_frame(ax: Axes, run: str, low: float) -> None:
    """Flow from the left, θ counter-clockwise; the radius from below ``low`` to 1.5.

    The radial labels are few (about four, none at the centre, where the rings are too close
    to read) and sit on a light box along the 112.5° ray, so that they neither run into each
    other nor vanish under the curves (at rest, labels every 0.5 overlapped at the centre).
    """
    ax.set_theta_zero_location("W")
    ax.set_theta_direction(1)
    inner = math.floor(low)
    ax.set_rlim(inner, 1.5)
    ticks = mpl.ticker.MaxNLocator(nbins=5).tick_values(inner, 1.5)
    ax.set_rticks([t for t in ticks if inner + 0.2 * (1.5 - inner) <= t < 1.5])
    ax.set_rlabel_position(112.5)
    ax.tick_params(axis="y", labelsize=7)
    for label in ax.get_yticklabels():
        label.set_bbox({"facecolor": "white", "edgecolor": "none", "alpha": 0.8, "pad": 1})
    ax.set_title(f"Cp around the section, run {run} (flow from the left)")
    ax.legend(loc="lower center", bbox_to_anchor=(0.5, -0.32), fontsize=7)


def _cartesian_frame(ax: Axes, run: str, low: float, ideal_min: float) -> None:
    """θ from −180° to 180°; Cp down to the band's bottom ``low``, or the theory's minimum."""
    ax.set_xlim(-180, 180)
    ax.set_xticks(np.arange(-180, 181, 45))
    ax.set_xlabel(r"azimuth $\theta$ from the windward point [deg]")
    ax.set_ylabel(r"pressure coefficient $C_p$")
    ax.set_title(f"Surface pressure, run {run}")
    # At high spin the potential-flow suction peak (1 - (α + 2)²) lies far below any
    # real one; the axis then keeps to the data and the theory line runs off it. At low
    # spin (peak above -5, e.g. -3 at α = 0) the whole theory curve stays in view.
    if ideal_min < min(-5.0, 1.0 + 1.5 * (low - 1.0)):
        ax.set_ylim(low - 0.3 * (1.5 - low), 1.5)
        ax.annotate("potential-flow minimum "
                    f"{ideal_min:.1f} off scale", xy=(0.02, 0.03),
                    xycoords="axes fraction", fontsize=7, color=THEORY_COLOR)  # fmt: skip
    ax.legend(loc="best")


#: The size of :func:`plot_cp_pair`'s own figure [in].
CP_PAIR_SIZE = (9.6, 4.8)


def plot_cp_pair(results, run: str, *, fig: Figure | None = None) -> Figure:
    """A run's Cp(θ) in cartesian and polar form, with its expanded uncertainty made visible.

    Parameters
    ----------
    results : xarray.Dataset, CampaignResults or path-like
        Campaign results with ``Cp`` and ``u_Cp``.
    run : str
        The run id.
    fig : matplotlib.figure.Figure, optional
        Where to draw; a new Figure when None.

    Returns
    -------
    matplotlib.figure.Figure
        Left: :func:`plot_cp` (cartesian) above a strip of the band's half-width k·u(Cp) against
        θ, so a band too thin to see at the scale of Cp still shows its size; right: the polar
        form. The title says when the run raised quality flags.
    """
    ds = results_dataset(results)
    with house_style():
        if fig is None:
            fig = Figure(figsize=CP_PAIR_SIZE, layout="constrained")
        grid = fig.add_gridspec(2, 2, height_ratios=(3.2, 1.0), width_ratios=(1.25, 1.0))
        ax_cp = fig.add_subplot(grid[0, 0])
        ax_u = fig.add_subplot(grid[1, 0], sharex=ax_cp)
        ax_polar = fig.add_subplot(grid[:, 1], projection="polar")
        plot_cp(ds, run, ax=ax_cp)
        plot_cp(ds, run, ax=ax_polar, polar=True)
        ax_cp.set_xlabel("")
        ax_cp.legend(loc="best", fontsize=6.5)
        row = ds.sel(run=run)
        theta = _wrap(ds["theta"].values)
        order = np.argsort(theta)
        u = np.asarray(row["u_Cp"].values, dtype=float)[order] if "u_Cp" in row else None
        if u is not None:
            style = HOUSE_STYLE[0]
            ax_u.fill_between(theta[order], 0, COVERAGE_FACTOR * u, color=style.color, alpha=0.35,
                              linewidth=0)  # fmt: skip
            ax_u.plot(theta[order], COVERAGE_FACTOR * u, color=style.color, linewidth=0.9)
            ax_u.set_ylim(bottom=0)
        ax_u.set_ylabel(r"$k\,u(C_p)$, k = 2", fontsize=7)
        ax_u.set_xlabel(r"azimuth $\theta$ from the windward point [deg]")
        # pad 8 clears the 270° label; with 14 the title ran off the top of the figure
        ax_polar.set_title("polar form (flow from the left)", fontsize=8, pad=8)
        ax_polar.legend().remove()
        flags = str(row["flags"].item()) if "flags" in row else ""
        if flags:
            fig.suptitle(f"run {run}: flagged ({flags.replace(';', ', ')})", fontsize=9)
    return fig


def plot_axes_sketch(ax: Axes | None = None) -> Axes:
    """A sketch of the model's axes and sign conventions (docs/conventions.md).

    x downstream, y the lift axis, z = x × y along the cylinder axis (out of the page);
    ω > 0 counter-clockwise seen from +z; θ from the windward point, increasing with positive
    spin; positive spin gives lift towards −y (CL < 0, CL = −2πα in potential flow).

    Parameters
    ----------
    ax : matplotlib.axes.Axes, optional

    Returns
    -------
    matplotlib.axes.Axes
    """
    with house_style():
        ax = new_axes(ax, size=(4.6, 3.4))
        ax.set_aspect("equal")
        ax.axis("off")
        ink = THEORY_COLOR
        ax.add_patch(mpl.patches.Circle((0, 0), 1.0, fill=False, color=ink, linewidth=1.4))
        arrow = {"arrowstyle": "-|>", "color": ink, "linewidth": 1.1, "mutation_scale": 10}
        # Free stream from the left.
        for yy in (-0.6, 0.0, 0.6):
            ax.annotate("", xy=(-1.5, yy), xytext=(-2.6, yy), arrowprops=arrow)
        ax.text(-2.6, 0.85, r"$U_\infty$", fontsize=9)
        # Axes at the centre: x downstream, y up, z out of the page.
        axis = dict(arrow, color=HOUSE_STYLE[0].color)
        ax.annotate("", xy=(2.3, 0), xytext=(0, 0), arrowprops=axis)
        ax.text(2.35, -0.1, "x", color=HOUSE_STYLE[0].color)
        ax.annotate("", xy=(0, 2.0), xytext=(0, 0), arrowprops=axis)
        ax.text(0.08, 1.95, "y (lift axis)", color=HOUSE_STYLE[0].color, fontsize=8)
        ax.plot([0], [0], marker="o", markersize=6, markerfacecolor="white",
                markeredgecolor=HOUSE_STYLE[0].color)  # fmt: skip
        ax.plot([0], [0], marker=".", markersize=3, color=HOUSE_STYLE[0].color)
        ax.text(-0.45, -0.35, "z", color=HOUSE_STYLE[0].color)
        # Positive spin: counter-clockwise seen from +z.
        spin = mpl.patches.FancyArrowPatch(
            (0.55, -0.35), (0.35, 0.55), connectionstyle="arc3,rad=0.55", **arrow
        )
        ax.add_patch(spin)
        ax.text(0.62, 0.12, r"$\omega > 0$", fontsize=8)
        # θ from the windward point (−R, 0), increasing with positive spin (towards −y).
        arc = np.radians(np.linspace(180, 240, 30))
        ax.plot(1.25 * np.cos(arc), 1.25 * np.sin(arc), color=HOUSE_STYLE[1].color, linewidth=1)
        ax.annotate("", xy=(1.25 * np.cos(arc[-1]), 1.25 * np.sin(arc[-1])),
                    xytext=(1.25 * np.cos(arc[-3]), 1.25 * np.sin(arc[-3])),
                    arrowprops=dict(arrow, color=HOUSE_STYLE[1].color))  # fmt: skip
        ax.plot([-1.0], [0.0], marker="o", markersize=3, color=HOUSE_STYLE[1].color)
        ax.text(-1.75, -0.95, r"$\theta$", color=HOUSE_STYLE[1].color)
        # The forces for positive spin: drag along +x, lift along −y.
        force = dict(arrow, color=HOUSE_STYLE[2].color, linewidth=1.6)
        ax.annotate("", xy=(0.9, -2.1), xytext=(0.9, -1.1), arrowprops=force)
        ax.text(1.0, -2.0, "L < 0 for ω > 0", color=HOUSE_STYLE[2].color, fontsize=8)
        ax.annotate("", xy=(2.0, -0.9), xytext=(1.2, -0.9), arrowprops=force)
        ax.text(1.55, -0.75, "D", color=HOUSE_STYLE[2].color, fontsize=8)
        ax.set_xlim(-2.8, 3.4)
        ax.set_ylim(-2.3, 2.3)
    return ax
