"""Coefficient figures: a coefficient against the spin ratio with k = 2 bars and its sweep legs
joined, the drag polar, pressure lift against balance lift, and the comparison of groups of runs.

Every figure function takes ``results`` (an xarray.Dataset, CampaignResults or the path of a
results folder or results.nc, read by :func:`results_dataset`) and ``ax`` (the
matplotlib.axes.Axes to draw on; a new Figure's Axes when None), and returns the Axes drawn on;
``by`` groups the runs (:func:`group_runs`). Their docstrings list only what differs.
"""

from __future__ import annotations

import numpy as np
import xarray as xr
from matplotlib.axes import Axes

from tunnelred.physics import theory
from tunnelred.products.plotting.runs import (
    flagged_runs,
    group_runs,
    joined_sweeps,
    results_dataset,
    run_values,
)
from tunnelred.products.plotting.style import (
    BOUND_COLOR,
    COEFFICIENT_LABELS,
    COVERAGE_FACTOR,
    HOUSE_STYLE,
    THEORY_COLOR,
    SeriesStyle,
    coverage_legend,
    house_style,
    new_axes,
    styled,
)


def _check_name(ds: xr.Dataset, name: str) -> None:
    if name not in COEFFICIENT_LABELS or name == "alpha":
        known = ", ".join(k for k in COEFFICIENT_LABELS if k != "alpha")
        raise ValueError(f"cannot plot {name!r} against alpha; choose one of {known}")
    _require(ds, name)


def _require(ds: xr.Dataset, *names: str) -> None:
    for name in names:
        if name not in ds:
            raise ValueError(f"the results hold no {name!r}")


def _theory_lines(ax: Axes, ds: xr.Dataset, name: str) -> None:
    """The potential-flow CL = −2πα over the data's α range and Prandtl's |CL| = 4π bound."""
    alpha = run_values(ds, "alpha")
    finite = alpha[np.isfinite(alpha)]
    if name not in ("CL", "CL_p") or finite.size == 0:
        return
    # Beyond |alpha| = 2 the stagnation points leave the surface and the line would pass the
    # bound it derives from; it stops where it meets Prandtl's limit.
    lo = max(min(finite.min(), 0.0), -2.0)
    hi = min(max(finite.max(), 0.0), 2.0)
    grid = np.linspace(lo, hi, 201)
    ax.plot(
        grid,
        theory.lift_coefficient(grid),
        color=THEORY_COLOR,
        linestyle="-",
        linewidth=1.0,
        label=r"potential flow $C_L = -2\pi\alpha$",
        zorder=1,
    )
    # The bound on the side(s) the data reach: positive spin gives negative lift.
    sides = ([-1.0] if hi > 0 else []) + ([1.0] if lo < 0 else [])
    for j, sign in enumerate(sides):
        ax.axhline(
            sign * theory.PRANDTL_LIMIT,
            color=BOUND_COLOR,
            linestyle=":",
            linewidth=1.0,
            label=r"Prandtl's limit $|C_L| = 4\pi$" if j == 0 else None,
            zorder=1,
        )


def _error_points(ax: Axes, x, y, ux, uy, idx, style: SeriesStyle, label: str):
    """The runs ``idx`` as markers with expanded-uncertainty bars (k = 2) in both directions."""
    k = COVERAGE_FACTOR
    return ax.errorbar(
        x[idx],
        y[idx],
        xerr=k * ux[idx],
        yerr=k * uy[idx],
        color=style.color,
        marker=style.marker,
        linestyle="none",
        elinewidth=0.8,
        label=label,
        zorder=3,
    )


#: The ring drawn around a flagged run's point, in every figure of runs.
_FLAG_RING = {
    "marker": "o",
    "markersize": 12,
    "markerfacecolor": "none",
    "markeredgecolor": "#000000",
    "markeredgewidth": 1.2,
    "linestyle": "none",
}
FLAGGED_LABEL = "flagged run (ringed)"
UNCORRECTED_GID = "uncorrected"  # the gid of the hollow markers of values before corrections


_DOWN_DASH = (0, (1, 1.5))  # a sweep leg of decreasing spin: dotted, whatever the series


def _draw_runs(
    ax: Axes,
    ds: xr.Dataset,
    xname: str,
    yname: str,
    groups: list[tuple[str, np.ndarray, SeriesStyle]],
    *,
    join: bool = True,
) -> None:
    """Each group's runs with k = 2 bars; flagged runs ringed; each sweep leg joined by a line.

    A leg is joined in order of α; flagged runs stay out of the line (they are drawn and ringed,
    so the curve shows the runs that passed their checks), and the line breaks at every step in
    α wider than the campaign's gap limit (:func:`tunnelred.products.compare.gap_limit` of the
    sweep legs: no straight line is drawn where no run was measured). Increasing-spin and single
    legs are solid, decreasing-spin legs dotted, both in the group's colour; each line has the
    gid ``"sweep"``.
    """
    x, ux = run_values(ds, xname), run_values(ds, f"u_{xname}")
    y, uy = run_values(ds, yname), run_values(ds, f"u_{yname}")
    alpha = run_values(ds, "alpha")
    flagged = flagged_runs(ds)
    owner = np.full(ds.sizes["run"], -1)
    for g, (label, idx, style) in enumerate(groups):
        _error_points(ax, x, y, ux, uy, idx, style, label)
        owner[idx] = g
    directions = set()
    if join:
        # compare imports plotting's style at import time; it is needed only when drawing.
        from tunnelred.products.compare.sweeps import gap_limit, point_alpha, split_at_gaps

        legs = joined_sweeps(ds)
        limit = gap_limit([point_alpha(sweep) for sweep, _ in legs])
        for sweep, positions in legs:
            leg = sweep.leg
            for _, idx, style in groups:
                part = positions[np.isin(positions, idx) & ~flagged[positions]]
                part = part[np.isfinite(x[part]) & np.isfinite(y[part]) & np.isfinite(alpha[part])]
                part = part[np.argsort(alpha[part], kind="stable")]
                down = leg == "down"
                # A line never bridges a step in α wider than the data support.
                for piece in split_at_gaps(alpha[part], limit):
                    if piece.size < 2:
                        continue
                    directions.add("down" if down else "up")
                    ax.plot(
                        x[part[piece]],
                        y[part[piece]],
                        color=style.color,
                        linestyle=_DOWN_DASH if down else "-",
                        linewidth=0.9,
                        zorder=2,
                        gid="sweep",
                    )
    if flagged.any():
        ax.plot(x[flagged], y[flagged], label=FLAGGED_LABEL, zorder=4, **_FLAG_RING)
    # Neutral legend keys for the two kinds of join, only when a campaign has both.
    if directions == {"up", "down"}:
        ax.plot([], [], color=BOUND_COLOR, linestyle="-", label="sweep, spin increasing")
        ax.plot([], [], color=BOUND_COLOR, linestyle=_DOWN_DASH, label="sweep, spin decreasing")


def plot_coefficient(
    results,
    name: str = "CL",
    *,
    ax: Axes | None = None,
    by: str = "series",
    uncorrected: bool = True,
    theory: bool = True,
    join: bool = True,
) -> Axes:
    """A coefficient against the spin ratio, with expanded-uncertainty bars in both.

    Parameters
    ----------
    results : xarray.Dataset, CampaignResults or path-like
        Campaign results (see :func:`results_dataset`).
    name : str
        ``CL``, ``CD``, ``CM``, ``C_power``, ``L_D``, ``CL_p`` or ``CD_p``.
    ax : matplotlib.axes.Axes, optional
        Where to draw; a new Figure's Axes when None.
    by : str
        Group the runs by ``"series"`` (configuration and speed, the default), ``"config"``,
        ``"speed"`` or ``"re"`` (:func:`group_runs`); each group gets a house style.
    uncorrected : bool
        Also draw the values before wall corrections (hollow markers, no bars).
    theory : bool
        For CL and CL_p, draw the potential-flow line CL = −2πα and Prandtl's |CL| = 4π.
    join : bool
        Join the runs of each sweep leg (:func:`sweep_legs`) within each group.

    Returns
    -------
    matplotlib.axes.Axes

    Notes
    -----
    Wall-corrected values are drawn with filled markers and error bars of ±k·u (k = 2) in α and in
    the coefficient; uncorrected ones with hollow markers of the same style. Flagged runs are
    ringed and left out of the sweep lines; legs of decreasing spin are dotted. The
    potential-flow line is drawn where it holds, while the stagnation points stay on the surface
    (|α| ≤ 2); it ends on Prandtl's limit |CL| = 4π.

    References
    ----------
    .. [1] J. D. Anderson, *Fundamentals of Aerodynamics*, 6th ed., McGraw-Hill, 2017, §3.15–3.16.

    Examples
    --------
    >>> ds = xr.Dataset(
    ...     {"config": ("run", ["A", "A"]), "alpha": ("run", [0.5, 1.0]),
    ...      "u_alpha": ("run", [0.01, 0.01]), "CL": ("run", [-2.5, -5.0]),
    ...      "u_CL": ("run", [0.05, 0.05])}, coords={"run": ["r1", "r2"]})
    >>> ax = plot_coefficient(ds, "CL", uncorrected=False)
    >>> ax.get_ylabel()
    'lift coefficient $C_L$'
    """
    ds = results_dataset(results)
    _check_name(ds, name)
    with house_style():
        ax = new_axes(ax)
        if theory:
            _theory_lines(ax, ds, name)
        groups = styled(group_runs(ds, by))
        _draw_runs(ax, ds, "alpha", name, groups, join=join)
        if uncorrected and f"{name}_uncorrected" in ds:
            for label, idx, style in groups:
                ax.plot(
                    run_values(ds, "alpha_uncorrected")[idx],
                    run_values(ds, f"{name}_uncorrected")[idx],
                    color=style.color,
                    marker=style.marker,
                    markerfacecolor="none",
                    linestyle="none",
                    label=f"_{label}, uncorrected",  # one neutral legend key stands for all
                    gid=UNCORRECTED_GID,
                    zorder=2,
                )
            ax.plot([], [], color=BOUND_COLOR, marker="o", markerfacecolor="none",
                    linestyle="none", label="hollow: before wall corrections")  # fmt: skip
        ax.set_xlabel(COEFFICIENT_LABELS["alpha"])
        ax.set_ylabel(COEFFICIENT_LABELS[name])
        coverage_legend(ax)
    return ax


def plot_drag_polar(results, *, ax: Axes | None = None, by: str = "series") -> Axes:
    """The drag polar: CL against CD, each run with k = 2 bars in both, sweeps joined.

    Returns
    -------
    matplotlib.axes.Axes
        Wall-corrected values; flagged runs ringed; each sweep leg joined in order of α.
    """
    ds = results_dataset(results)
    _require(ds, "CL", "CD")
    with house_style():
        ax = new_axes(ax)
        _draw_runs(ax, ds, "CD", "CL", styled(group_runs(ds, by)))
        ax.set_xlabel(COEFFICIENT_LABELS["CD"])
        ax.set_ylabel(COEFFICIENT_LABELS["CL"])
        ax.set_title("Drag polar")
        coverage_legend(ax)
    return ax


def plot_pressure_lift(results, *, ax: Axes | None = None, by: str = "series") -> Axes:
    """CL from ∮Cp (mid-span pressure) against CL from the balance, with the line of equality.

    The results need ``CL`` and ``CL_p``.

    Returns
    -------
    matplotlib.axes.Axes
        Runs with both values, k = 2 bars in both; flagged runs ringed; no sweep lines (the
        points are compared with the line CL_p = CL, not followed along α).
    """
    ds = results_dataset(results)
    _require(ds, "CL", "CL_p")
    both = np.isfinite(run_values(ds, "CL")) & np.isfinite(run_values(ds, "CL_p"))
    if not both.any():
        raise ValueError("no run has both CL and CL_p")
    sub = ds.isel(run=np.flatnonzero(both))
    with house_style():
        ax = new_axes(ax)
        values = np.concatenate([run_values(sub, "CL"), run_values(sub, "CL_p")])
        lo, hi = float(np.nanmin(values)), float(np.nanmax(values))
        pad = 0.05 * (hi - lo or 1.0)
        ax.plot([lo - pad, hi + pad], [lo - pad, hi + pad], color=THEORY_COLOR, linewidth=1.0,
                linestyle="--", label=r"$C_{L,p} = C_L$", zorder=1)  # fmt: skip
        _draw_runs(ax, sub, "CL", "CL_p", styled(group_runs(sub, by)), join=False)
        ax.set_xlabel(r"lift coefficient from the balance $C_L$")
        ax.set_ylabel(COEFFICIENT_LABELS["CL_p"])
        ax.set_title("Lift from surface pressure against lift from the balance")
        coverage_legend(ax)
    return ax


def plot_comparison(
    results, name: str = "CL", *, by: str = "config", ax: Axes | None = None
) -> Axes:
    """Compare groups of runs — configurations, speeds or Reynolds numbers — on one coefficient.

    Parameters
    ----------
    name : str
        The coefficient against α (as :func:`plot_coefficient`).
    by : str
        ``"config"``, ``"speed"`` or ``"re"``: one colour per group.

    Notes
    -----
    Each group of ``by`` has its colour; within it, each configuration (grouping by speed or
    Re) or each speed (grouping by configuration) has its marker, and the legend names both.
    Each sweep leg is joined in order of α, so runs of another sweep are never joined across;
    flagged runs are ringed and left out of the lines; bars are ±2u (k = 2). Wall-corrected
    values only.
    """
    ds = results_dataset(results)
    _check_name(ds, name)
    if by not in ("config", "speed", "re"):
        raise ValueError(f"by must be 'config', 'speed' or 're', not {by!r}")
    inner = group_runs(ds, "speed" if by == "config" else "config")
    outer = group_runs(ds, by)
    groups = []
    for i, (label, idx) in enumerate(outer):
        colour = HOUSE_STYLE[i % len(HOUSE_STYLE)]
        for j, (inner_label, members) in enumerate(inner):
            part = np.intersect1d(idx, members)
            if part.size == 0:
                continue
            mark = HOUSE_STYLE[j % len(HOUSE_STYLE)].marker
            text = label if len(inner) < 2 else f"{label}, {inner_label or 'all runs'}"
            groups.append((text, part, SeriesStyle(colour.color, mark, colour.linestyle)))
    with house_style():
        ax = new_axes(ax)
        _draw_runs(ax, ds, "alpha", name, groups)
        ax.set_xlabel(COEFFICIENT_LABELS["alpha"])
        ax.set_ylabel(COEFFICIENT_LABELS[name])
        title = {"config": "configuration", "speed": "tunnel speed", "re": "Reynolds number"}[by]
        ax.set_title(f"{name} by {title}")
        coverage_legend(ax)
    return ax
