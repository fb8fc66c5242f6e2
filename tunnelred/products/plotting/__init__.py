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
"""

from __future__ import annotations

import contextlib
import json
import math
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path

import matplotlib as mpl
import numpy as np
import pandas as pd
import xarray as xr
from matplotlib.axes import Axes
from matplotlib.figure import Figure

from tunnelred.physics import conditions, theory
from tunnelred.products import store

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
_THEORY_COLOR = "#333333"
_BOUND_COLOR = "#777777"

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
_FIGURE_SIZE = (6.4, 4.4)
_SAME_RE = 0.05  # runs whose Re differ by less than 5 % form one Reynolds-number group
_NEAREST_ZEROS = 20  # zero runs shown in the drift panel, nearest in time to the run


@contextlib.contextmanager
def house_style() -> Iterator[None]:
    """Context in which figures are drawn in the house style (fonts, grid, line widths)."""
    with mpl.rc_context(_RC):
        yield


def _new_axes(ax: Axes | None, *, polar: bool = False, size=_FIGURE_SIZE) -> Axes:
    if ax is not None:
        return ax
    fig = Figure(figsize=size, layout="constrained")
    return fig.add_subplot(projection="polar" if polar else None)


def results_dataset(results) -> xr.Dataset:
    """The results Dataset from a Dataset, a CampaignResults or an output folder / results.nc.

    Parameters
    ----------
    results : xarray.Dataset, CampaignResults, str or path-like

    Returns
    -------
    xarray.Dataset
    """
    if isinstance(results, xr.Dataset):
        return results
    if hasattr(results, "dataset"):
        return results.dataset
    return store.read_results(results)


def _values(ds: xr.Dataset, name: str) -> np.ndarray:
    if name not in ds:
        return np.full(ds.sizes["run"], np.nan)
    return np.asarray(ds[name].values, dtype=float)


def _sig(x: float, digits: int = 2) -> str:
    """x to ``digits`` significant figures; powers of ten in mathtext outside 1e-3 … 1e4."""
    if not np.isfinite(x) or x == 0:
        return f"{x:g}"
    exponent = math.floor(math.log10(abs(x)))
    if -3 <= exponent < 4:
        return f"{x:.{max(digits - 1 - exponent, 0)}f}"
    mantissa = x / 10**exponent
    return rf"{mantissa:.{digits - 1}f}$\times10^{{{exponent}}}$"


def group_runs(results, by: str) -> list[tuple[str, np.ndarray]]:
    """The runs in groups by configuration, tunnel speed or Reynolds number.

    Parameters
    ----------
    results : xarray.Dataset, CampaignResults or path-like
    by : str
        ``"series"`` (one group per configuration and speed, labelled with whichever of the two
        varies in the campaign), ``"config"`` (the label), ``"speed"`` (the set speed, else the
        measured one to 1 m/s) or ``"re"`` (runs within 5 % of the group's lowest Re).

    Returns
    -------
    list of (str, numpy.ndarray)
        Each group's label and its positions along ``run``, in a stable order.
    """
    ds = results_dataset(results)
    n = ds.sizes["run"]
    if by == "config":
        labels = [str(c) for c in ds["config"].values] if "config" in ds else [""] * n
        return [(lab, np.flatnonzero(np.array(labels) == lab)) for lab in dict.fromkeys(labels)]
    if by == "series":
        return _series_groups(ds)
    if by == "speed":
        speed = _values(ds, "speed_set")
        # Runs without a set point are grouped by their measured speed to the nearest 1 m/s.
        speed = np.where(np.isfinite(speed), speed, np.round(_values(ds, "U")))
        keys = np.round(speed, 1)
        out = []
        for key in np.unique(keys[np.isfinite(keys)]):
            out.append((f"U = {key:g} m/s", np.flatnonzero(keys == key)))
        return out
    if by == "re":
        re = _values(ds, "Re")
        order = np.argsort(re)
        out, current = [], []
        for i in order:
            if not np.isfinite(re[i]):
                continue
            if current and re[i] > re[current[0]] * (1 + _SAME_RE):
                out.append(current)
                current = []
            current.append(i)
        if current:
            out.append(current)
        return [(f"Re ≈ {_sig(float(np.mean(re[g])))}", np.array(g)) for g in out]
    raise ValueError(f"by must be 'series', 'config', 'speed' or 're', not {by!r}")


def _series_groups(ds: xr.Dataset) -> list[tuple[str, np.ndarray]]:
    """One group per configuration and tunnel speed, labelled by what varies in the campaign."""
    configs = group_runs(ds, "config")
    speeds = group_runs(ds, "speed")
    out = []
    for config, in_config in configs:
        for speed, at_speed in speeds:
            idx = np.intersect1d(in_config, at_speed)
            if idx.size == 0:
                continue
            parts = ([config or "all runs"] if len(configs) > 1 else []) + (
                [speed] if len(speeds) > 1 else []
            )
            out.append((", ".join(parts) or config or "all runs", idx))
    # Runs without a speed at all (no set point, no measured U) still get drawn.
    grouped = np.concatenate([g for _, g in out]) if out else np.array([], dtype=int)
    rest = np.setdiff1d(np.arange(ds.sizes["run"]), grouped)
    if rest.size:
        out.append(("other runs", rest))
    return out


def _check_name(ds: xr.Dataset, name: str) -> None:
    if name not in COEFFICIENT_LABELS or name == "alpha":
        known = ", ".join(k for k in COEFFICIENT_LABELS if k != "alpha")
        raise ValueError(f"cannot plot {name!r} against alpha; choose one of {known}")
    if name not in ds:
        raise ValueError(f"the results hold no {name!r}")


def _theory_lines(ax: Axes, ds: xr.Dataset, name: str) -> None:
    """The potential-flow CL = −2πα over the data's α range and Prandtl's |CL| = 4π bound."""
    alpha = _values(ds, "alpha")
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
        color=_THEORY_COLOR,
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
            color=_BOUND_COLOR,
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
_LEAST_JOINED = 3  # distinct set spin rates a sweep leg needs to be drawn as a line
_DOWN_DASH = (0, (1, 1.5))  # a sweep leg of decreasing spin: dotted, whatever the series


def flagged_runs(results) -> np.ndarray:
    """Which runs raised at least one quality flag (``flags`` not empty), as a bool array."""
    ds = results_dataset(results)
    if "flags" not in ds:
        return np.zeros(ds.sizes["run"], dtype=bool)
    return np.array([isinstance(f, str) and f != "" for f in ds["flags"].values])


def sweep_legs(results) -> list[tuple[str, np.ndarray]]:
    """The sweep legs of the results as (direction, positions along ``run``).

    Parameters
    ----------
    results : xarray.Dataset, CampaignResults or path-like

    Returns
    -------
    list of (str, numpy.ndarray)
        ``"up"``, ``"down"`` or ``"single"`` and the positions of the leg's runs, as
        :func:`tunnelred.products.compare.find_sweeps` groups them (one configuration, one speed,
        one direction of the set spin rate in time), those with at least three set spin rates
        (a retake of one or two set points is not a curve to follow). Empty when the results
        lack the set points that define a sweep.
    """
    return [(s.leg, positions) for s, positions in _joined_sweeps(results_dataset(results))]


def _joined_sweeps(ds: xr.Dataset) -> list:
    """(Sweep, positions along ``run``) of each leg with at least three set spin rates."""
    # compare imports this module's style at import time; it is needed only when drawing.
    from tunnelred.products import compare

    if "config" not in ds or "alpha" not in ds:
        return []
    index = {str(r): i for i, r in enumerate(ds["run"].values)}
    return [
        (s, np.array([index[r] for r in s.runs], dtype=int))
        for s in compare.find_sweeps(ds)
        # Retakes at one or two set points make a "leg" too short to follow as a curve.
        if np.unique(s.arrays["spin_point"]).size >= _LEAST_JOINED
    ]


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
    x, ux = _values(ds, xname), _values(ds, f"u_{xname}")
    y, uy = _values(ds, yname), _values(ds, f"u_{yname}")
    alpha = _values(ds, "alpha")
    flagged = flagged_runs(ds)
    owner = np.full(ds.sizes["run"], -1)
    for g, (label, idx, style) in enumerate(groups):
        _error_points(ax, x, y, ux, uy, idx, style, label)
        owner[idx] = g
    directions = set()
    if join:
        # compare imports this module's style at import time; it is needed only when drawing.
        from tunnelred.products.compare.sweeps import gap_limit, point_alpha, split_at_gaps

        legs = _joined_sweeps(ds)
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
        ax.plot([], [], color=_BOUND_COLOR, linestyle="-", label="sweep, spin increasing")
        ax.plot([], [], color=_BOUND_COLOR, linestyle=_DOWN_DASH, label="sweep, spin decreasing")


def _styled(groups: list[tuple[str, np.ndarray]]) -> list[tuple[str, np.ndarray, SeriesStyle]]:
    return [
        (label or "all runs", idx, HOUSE_STYLE[i % len(HOUSE_STYLE)])
        for i, (label, idx) in enumerate(groups)
    ]


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
        ax = _new_axes(ax)
        if theory:
            _theory_lines(ax, ds, name)
        groups = _styled(group_runs(ds, by))
        _draw_runs(ax, ds, "alpha", name, groups, join=join)
        if uncorrected and f"{name}_uncorrected" in ds:
            for label, idx, style in groups:
                ax.plot(
                    _values(ds, "alpha_uncorrected")[idx],
                    _values(ds, f"{name}_uncorrected")[idx],
                    color=style.color,
                    marker=style.marker,
                    markerfacecolor="none",
                    linestyle="none",
                    label=f"_{label}, uncorrected",  # one neutral legend key stands for all
                    gid=UNCORRECTED_GID,
                    zorder=2,
                )
            ax.plot([], [], color=_BOUND_COLOR, marker="o", markerfacecolor="none",
                    linestyle="none", label="hollow: before wall corrections")  # fmt: skip
        ax.set_xlabel(COEFFICIENT_LABELS["alpha"])
        ax.set_ylabel(COEFFICIENT_LABELS[name])
        _legend(ax)
    return ax


def _legend(ax: Axes) -> None:
    """The legend titled with the coverage factor; beside the axes when it is long."""
    count = len(ax.get_legend_handles_labels()[1])
    if count > 6:
        ax.legend(title=_K_TEXT, loc="upper left", bbox_to_anchor=(1.02, 1.0), fontsize=7,
                  title_fontsize=7, borderaxespad=0.0)  # fmt: skip
    else:
        ax.legend(title=_K_TEXT, loc="best", fontsize=7, title_fontsize=7)


def plot_drag_polar(results, *, ax: Axes | None = None, by: str = "series") -> Axes:
    """The drag polar: CL against CD, each run with k = 2 bars in both, sweeps joined.

    Parameters
    ----------
    results : xarray.Dataset, CampaignResults or path-like
    ax : matplotlib.axes.Axes, optional
    by : str
        Grouping of the runs (:func:`group_runs`).

    Returns
    -------
    matplotlib.axes.Axes
        Wall-corrected values; flagged runs ringed; each sweep leg joined in order of α.
    """
    ds = results_dataset(results)
    for name in ("CL", "CD"):
        if name not in ds:
            raise ValueError(f"the results hold no {name!r}")
    with house_style():
        ax = _new_axes(ax)
        _draw_runs(ax, ds, "CD", "CL", _styled(group_runs(ds, by)))
        ax.set_xlabel(COEFFICIENT_LABELS["CD"])
        ax.set_ylabel(COEFFICIENT_LABELS["CL"])
        ax.set_title("Drag polar")
        _legend(ax)
    return ax


def plot_pressure_lift(results, *, ax: Axes | None = None, by: str = "series") -> Axes:
    """CL from ∮Cp (mid-span pressure) against CL from the balance, with the line of equality.

    Parameters
    ----------
    results : xarray.Dataset, CampaignResults or path-like
        Results with ``CL`` and ``CL_p``.
    ax : matplotlib.axes.Axes, optional
    by : str
        Grouping of the runs (:func:`group_runs`).

    Returns
    -------
    matplotlib.axes.Axes
        Runs with both values, k = 2 bars in both; flagged runs ringed; no sweep lines (the
        points are compared with the line CL_p = CL, not followed along α).
    """
    ds = results_dataset(results)
    for name in ("CL", "CL_p"):
        if name not in ds:
            raise ValueError(f"the results hold no {name!r}")
    both = np.isfinite(_values(ds, "CL")) & np.isfinite(_values(ds, "CL_p"))
    if not both.any():
        raise ValueError("no run has both CL and CL_p")
    sub = ds.isel(run=np.flatnonzero(both))
    with house_style():
        ax = _new_axes(ax)
        values = np.concatenate([_values(sub, "CL"), _values(sub, "CL_p")])
        lo, hi = float(np.nanmin(values)), float(np.nanmax(values))
        pad = 0.05 * (hi - lo or 1.0)
        ax.plot([lo - pad, hi + pad], [lo - pad, hi + pad], color=_THEORY_COLOR, linewidth=1.0,
                linestyle="--", label=r"$C_{L,p} = C_L$", zorder=1)  # fmt: skip
        _draw_runs(ax, sub, "CL", "CL_p", _styled(group_runs(sub, by)), join=False)
        ax.set_xlabel(r"lift coefficient from the balance $C_L$")
        ax.set_ylabel(COEFFICIENT_LABELS["CL_p"])
        ax.set_title("Lift from surface pressure against lift from the balance")
        _legend(ax)
    return ax


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
        ax = _new_axes(ax, polar=polar, size=(5.6, 5.0) if polar else _FIGURE_SIZE)
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
            color=_THEORY_COLOR,
            linestyle="--",
            linewidth=1.0,
            label=rf"potential flow $1-(\alpha+2\sin\theta)^2$, $\alpha$ = {alpha:.3f}",
        )
        if polar:
            ax.set_theta_zero_location("W")
            ax.set_theta_direction(1)
            low = float(np.nanmin([np.nanmin(cp - k * u), ideal.min()]))
            ax.set_rlim(math.floor(low), 1.5)
            ax.set_title(f"Cp around the section, run {run} (flow from the left)")
            ax.legend(loc="lower center", bbox_to_anchor=(0.5, -0.32), fontsize=7)
        else:
            ax.set_xlim(-180, 180)
            ax.set_xticks(np.arange(-180, 181, 45))
            ax.set_xlabel(r"azimuth $\theta$ from the windward point [deg]")
            ax.set_ylabel(r"pressure coefficient $C_p$")
            ax.set_title(f"Surface pressure, run {run}")
            # At high spin the potential-flow suction peak (1 - (α + 2)²) lies far below any
            # real one; the axis then keeps to the data and the theory line runs off it. At low
            # spin (peak above -5, e.g. -3 at α = 0) the whole theory curve stays in view.
            low = float(np.nanmin(cp - k * u))
            if ideal.min() < min(-5.0, 1.0 + 1.5 * (low - 1.0)):
                ax.set_ylim(low - 0.3 * (1.5 - low), 1.5)
                ax.annotate("potential-flow minimum "
                            f"{ideal.min():.1f} off scale", xy=(0.02, 0.03),
                            xycoords="axes fraction", fontsize=7, color=_THEORY_COLOR)  # fmt: skip
            ax.legend(loc="best")
    return ax


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
            fig = Figure(figsize=(9.6, 4.6), layout="constrained")
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
        ax_polar.set_title("polar form (flow from the left)", fontsize=8, pad=14)
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
        ax = _new_axes(ax, size=(4.6, 3.4))
        ax.set_aspect("equal")
        ax.axis("off")
        ink = _THEORY_COLOR
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


def _stream_time_label(ax: Axes) -> None:
    ax.set_xlabel("time from the start of the run [s]")


def plot_run_diagnostics(campaign, run: str, *, fig: Figure | None = None) -> Figure:
    """Diagnostics of one run from its raw logs: α(t), U(t) and the balance zero drift.

    Parameters
    ----------
    campaign : tunnelred.inputs.readers.Campaign or path-like
        The opened campaign (:func:`tunnelred.inputs.readers.open_campaign`) or its folder.
    run : str
        A data run of the campaign.
    fig : matplotlib.figure.Figure, optional
        Where to draw three stacked panels; a new Figure when None.

    Returns
    -------
    matplotlib.figure.Figure

    Notes
    -----
    α(t) = ω(t) R / U(t) on the common time base of
    :func:`tunnelred.physics.conditions.spin_steadiness`, with its mean and the band
    mean·(1 ± spin_scatter tolerance); U(t) from :func:`tunnelred.physics.conditions.free_stream`
    (uncorrected), with mean·(1 ± speed_drift tolerance).
    The zero panel shows each wind-off zero run's mean channel signals against clock time (the
    zeros nearest the run), those the run uses filled, the run's start marked: a step or trend
    there is what the zero_shift flag judges.
    """
    from tunnelred.inputs.readers import open_campaign

    if not hasattr(campaign, "load_run"):
        campaign = open_campaign(campaign, check_logs=False)
    cfg = campaign.config
    data = campaign.load_run(run)
    spec = data.spec
    tol = cfg.tolerances_for(spec.config)
    with house_style():
        if fig is None:
            fig = Figure(figsize=(7.0, 8.0), layout="constrained")
        ax_alpha, ax_speed, ax_zero = fig.subplots(3, 1)
        style_a, style_u, _ = HOUSE_STYLE[:3]

        flow = None
        if "tunnel" in data.streams:
            flow = conditions.free_stream(data.streams["tunnel"], cfg)
        t_spin, omega, source = conditions.spin_rate(data.streams)
        if flow is not None and source != "none":
            steady = conditions.spin_steadiness(
                t_spin, omega, flow["time"].values, flow["U"].values, cfg.model.diameter / 2
            )
            mean = steady.alpha_mean
            ax_alpha.plot(steady.time, steady.alpha, color=style_a.color, linewidth=0.8)
            ax_alpha.axhline(mean, color=_THEORY_COLOR, linewidth=1.0, label=f"mean {mean:.4f}")
            band = abs(mean) * tol.spin_scatter
            ax_alpha.axhspan(
                mean - band,
                mean + band,
                color=style_a.color,
                alpha=0.12,
                label=f"mean ± {100 * tol.spin_scatter:g} % (spin_scatter tolerance)",
            )
            ax_alpha.set_title(
                f"Spin ratio, run {run} ({source}): scatter {100 * steady.scatter:.2f} %, "
                f"drift {100 * steady.drift:+.2f} %"
            )
            ax_alpha.legend(loc="best")
        else:
            ax_alpha.set_title(f"Spin ratio, run {run}: not spinning or no tunnel log")
        ax_alpha.set_ylabel(r"$\alpha(t)$")
        _stream_time_label(ax_alpha)

        if flow is not None:
            t, U = flow["time"].values, flow["U"].values
            stats = conditions.series_statistics(U, t)
            ax_speed.plot(t, U, color=style_u.color, linewidth=0.8)
            ax_speed.axhline(stats.mean, color=_THEORY_COLOR, linewidth=1.0)
            band = stats.mean * tol.speed_drift
            ax_speed.axhspan(
                stats.mean - band,
                stats.mean + band,
                color=style_u.color,
                alpha=0.12,
                label=f"mean ± {100 * tol.speed_drift:g} % (speed_drift tolerance)",
            )
            ax_speed.set_title(
                f"Free-stream speed (uncorrected): mean {stats.mean:.2f} m/s, "
                f"drift {100 * stats.drift / stats.mean:+.2f} %"
            )
            ax_speed.legend(loc="best")
        ax_speed.set_ylabel(r"$U(t)$ [m/s]")
        _stream_time_label(ax_speed)

        _zero_panel(ax_zero, campaign, spec)
    return fig


def _zero_panel(ax: Axes, campaign, spec) -> None:
    balance = campaign.config.instruments.balance
    zeros = [z for z in campaign.zero_runs() if not campaign.run_problems(z.run)]
    if balance is None or not zeros:
        ax.set_title("Balance zeros: no readable wind-off zero runs")
        return
    start = pd.Timestamp(spec.start)
    zeros.sort(key=lambda z: abs((pd.Timestamp(z.start) - start).total_seconds()))
    zeros = sorted(zeros[:_NEAREST_ZEROS], key=lambda z: z.start)
    used = set(spec.zero)
    times, means, units = [], [], {}
    for z in zeros:
        stream = campaign.load_run(z.run).streams["balance"]
        t = stream["time"].values
        times.append(pd.Timestamp(z.start) + pd.to_timedelta(0.5 * (t[0] + t[-1]), unit="s"))
        means.append([float(stream[c].values.mean()) for c in balance.channels])
        units = {c: stream[c].attrs.get("units", "") for c in balance.channels}
    means = np.array(means)
    is_used = np.array([z.run in used for z in zeros])
    # Channels differ in size; each is shown as its departure from its own first zero.
    relative = means - means[0]
    for j, channel in enumerate(balance.channels):
        style = HOUSE_STYLE[j % len(HOUSE_STYLE)]
        unit = f" [{units[channel]}]" if units.get(channel) else ""
        ax.plot(
            times,
            relative[:, j],
            color=style.color,
            linestyle=style.linestyle,
            marker=style.marker,
            markerfacecolor="none",
            label=f"{channel}{unit}",
        )
        ax.plot(
            np.array(times, dtype=object)[is_used],
            relative[is_used, j],
            color=style.color,
            marker=style.marker,
            linestyle="none",
        )
    ax.axvline(start, color=_THEORY_COLOR, linestyle="--", linewidth=1.0, label=f"run {spec.run}")
    ax.set_title("Balance wind-off zeros (filled: those the run uses)")
    ax.set_ylabel("mean signal minus the first zero's")
    ax.set_xlabel("clock time")
    locator = mpl.dates.AutoDateLocator()
    ax.xaxis.set_major_locator(locator)
    ax.xaxis.set_major_formatter(mpl.dates.ConciseDateFormatter(locator))
    ax.legend(loc="best", ncols=2)


def plot_comparison(
    results, name: str = "CL", *, by: str = "config", ax: Axes | None = None
) -> Axes:
    """Compare groups of runs — configurations, speeds or Reynolds numbers — on one coefficient.

    Parameters
    ----------
    results : xarray.Dataset, CampaignResults or path-like
        Campaign results.
    name : str
        The coefficient against α (as :func:`plot_coefficient`).
    by : str
        ``"config"``, ``"speed"`` or ``"re"``: one colour per group.
    ax : matplotlib.axes.Axes, optional
        Where to draw; a new one when None.

    Returns
    -------
    matplotlib.axes.Axes

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
        ax = _new_axes(ax)
        _draw_runs(ax, ds, "alpha", name, groups)
        ax.set_xlabel(COEFFICIENT_LABELS["alpha"])
        ax.set_ylabel(COEFFICIENT_LABELS[name])
        title = {"config": "configuration", "speed": "tunnel speed", "re": "Reynolds number"}[by]
        ax.set_title(f"{name} by {title}")
        _legend(ax)
    return ax


#: Steadiness measures, their flag and their axis label (values as fractions unless stated).
_STEADINESS = {
    "spin_scatter": ("spin-ratio scatter std(α)/|α|", 100.0, "%"),
    "spin_drift": ("spin-ratio drift over the run", 100.0, "%"),
    "speed_drift": ("tunnel-speed drift over the run", 100.0, "%"),
    "temperature_drift": ("temperature drift over the run", 1.0, "K"),
    "zero_shift": ("zero shift, fraction of full scale", 100.0, "%"),
}


def plot_steadiness(
    results, name: str = "spin_scatter", *, tolerance: float | None = None, ax: Axes | None = None
) -> Axes:
    """One steadiness measure for every run, in run order, against its tolerance.

    Parameters
    ----------
    results : xarray.Dataset, CampaignResults or path-like
        Campaign results.
    name : str
        ``"spin_scatter"`` (default), ``"spin_drift"``, ``"speed_drift"``,
        ``"temperature_drift"`` or ``"zero_shift"`` (docs/results.md).
    tolerance : float, optional
        The limit drawn, in the measure's own unit (a fraction, or K); default: the campaign's
        ``[reduction.tolerances]`` value recorded in the results, else the documented default.
    ax : matplotlib.axes.Axes, optional
        Where to draw; a new one when None.

    Returns
    -------
    matplotlib.axes.Axes

    Notes
    -----
    Runs whose ``flag_<name>`` is raised are drawn with a distinct marker and labelled with their
    run id, so the run to repeat stands out at a glance; a configuration's own tolerance (set in
    ``[configurations.LABEL.tolerances]``) decides the flag even where it differs from the line.
    """
    from tunnelred.inputs.config import Tolerances  # only the documented defaults are needed here

    if name not in _STEADINESS:
        raise ValueError(f"no steadiness measure {name!r}; choose one of {sorted(_STEADINESS)}")
    ds = results_dataset(results)
    label, scale, unit = _STEADINESS[name]
    if tolerance is None:
        recorded = ds.attrs.get("tolerances")
        tolerance = json.loads(recorded).get(name) if recorded else getattr(Tolerances(), name)
    values = np.abs(_values(ds, name)) * scale
    runs = [str(r) for r in ds["run"].values]
    flagged = (
        np.asarray(ds[f"flag_{name}"].values, dtype=bool)
        if f"flag_{name}" in ds
        else np.zeros(len(runs), dtype=bool)
    )
    order = np.arange(len(runs))
    good, bad = HOUSE_STYLE[0], HOUSE_STYLE[1]
    with house_style():
        ax = _new_axes(ax)
        ax.plot(order[~flagged], values[~flagged], linestyle="none", marker=good.marker,
                color=good.color, label="runs")  # fmt: skip
        if flagged.any():
            ax.plot(order[flagged], values[flagged], linestyle="none", marker=bad.marker,
                    markersize=9, color=bad.color, label="flagged")  # fmt: skip
            for i in np.flatnonzero(flagged):
                ax.annotate(runs[i], (order[i], values[i]), textcoords="offset points",
                            xytext=(6, 4), color=bad.color)  # fmt: skip
        ax.axhline(tolerance * scale, color=_BOUND_COLOR, linestyle="--",
                   label=f"tolerance {_sig(tolerance * scale)} {unit}")  # fmt: skip
        step = max(1, len(runs) // 12)
        ax.set_xticks(order[::step], [runs[i] for i in order[::step]], rotation=45, ha="right")
        ax.set_xlabel("run")
        ax.set_ylabel(f"{label} [{unit}]")
        ax.set_ylim(bottom=0)
        ax.set_title(label)
        ax.legend(loc="best")
    return ax


def representative_runs(results, count: int = 3) -> list[str]:
    """Runs that span the campaign's spin ratios, for Cp figures and budgets.

    Parameters
    ----------
    results : xarray.Dataset, CampaignResults or path-like
    count : int
        How many runs at most.

    Returns
    -------
    list of str
        Run ids with surface pressure data (any run when none has it), unflagged ones preferred,
        one per distinct |α| (to 0.01), closest to evenly spaced quantiles of |α| (smallest,
        middle, largest for three), in that order.
    """
    ds = results_dataset(results)
    runs = np.asarray(ds["run"].values, dtype=object)
    alpha = np.abs(_values(ds, "alpha"))
    ok = np.isfinite(alpha)
    if "Cp" in ds:
        has_cp = np.isfinite(np.asarray(ds["Cp"].values, dtype=float)).any(axis=1)
        if (ok & has_cp).any():
            ok &= has_cp
    if "flags" in ds:
        clean = np.array([not f for f in ds["flags"].values])
        if (ok & clean).sum() >= min(count, ok.sum()):
            ok &= clean
    candidates = np.flatnonzero(ok)
    if candidates.size == 0:
        return []
    # Repeats and the other sweep leg sit at the same spin ratio: one run per distinct |alpha|.
    _, first = np.unique(np.round(alpha[candidates], 2), return_index=True)
    candidates = candidates[np.sort(first)]
    targets = np.quantile(alpha[candidates], np.linspace(0.0, 1.0, count))
    chosen: list[str] = []
    for target in targets:
        free = [i for i in candidates if runs[i] not in chosen]
        if not free:
            break
        best = min(free, key=lambda i: abs(alpha[i] - target))
        chosen.append(str(runs[best]))
    return chosen


def _save(fig: Figure, path: Path) -> Path:
    with store.atomic_path(path) as tmp:
        fig.savefig(tmp, format="png", dpi=200)
    return path


def standard_figures(results) -> list[tuple[str, str, tuple]]:
    """The standard figures of the results, as jobs: (file name, drawing function, arguments).

    Each job is drawn by :func:`draw_standard_figure`; the jobs are independent, so they may be
    drawn in any order and in other processes (:func:`save_standard_figures`).
    """
    ds = results_dataset(results)
    jobs: list[tuple[str, str, tuple]] = []
    present = [
        n for n in ("CL", "CD", "CM", "C_power", "L_D", "CL_p", "CD_p") if _has_values(ds, n)
    ]
    jobs += [(f"{name}_alpha.png", "plot_coefficient", (name,)) for name in present]
    if {"CL", "CD"} <= set(present):
        jobs.append(("drag_polar.png", "plot_drag_polar", ()))
    if {"CL", "CL_p"} <= set(present) and _has_both(ds, "CL", "CL_p"):
        jobs.append(("CL_p_CL.png", "plot_pressure_lift", ()))
    if len(group_runs(ds, "speed")) > 1:
        for name in [n for n in ("CL", "CD") if n in present]:
            for by in ("speed", "re"):
                jobs.append((f"{name}_by_{by}.png", "plot_comparison", (name, by)))
    for name in [n for n in ("spin_scatter", "speed_drift") if _has_values(ds, n)]:
        jobs.append((f"{name}.png", "plot_steadiness", (name,)))
    if "Cp" in ds:
        jobs += [(f"cp_{run}.png", "plot_cp_pair", (run,)) for run in representative_runs(ds)]
    return jobs


# The functions a job may name: a job that travels to another process names its drawer.
_DRAWERS = {
    "plot_coefficient": lambda ds, name: plot_coefficient(ds, name).figure,
    "plot_drag_polar": lambda ds: plot_drag_polar(ds).figure,
    "plot_pressure_lift": lambda ds: plot_pressure_lift(ds).figure,
    "plot_comparison": lambda ds, name, by: plot_comparison(ds, name, by=by).figure,
    "plot_steadiness": lambda ds, name: plot_steadiness(ds, name).figure,
    "plot_cp_pair": lambda ds, run: plot_cp_pair(ds, run),
}


def draw_standard_figure(results, job: tuple[str, str, tuple], out_dir) -> Path:
    """Draw one job of :func:`standard_figures` into ``out_dir``/figures (atomically)."""
    name, drawer, args = job
    fig = _DRAWERS[drawer](results_dataset(results), *args)
    return _save(fig, Path(out_dir) / "figures" / name)


def draw_standard_figures(results, jobs, out_dir) -> list[Path]:
    """Draw several jobs of :func:`standard_figures` (one task of a process pool)."""
    ds = results_dataset(results)
    return [draw_standard_figure(ds, job, out_dir) for job in jobs]


def save_standard_figures(results, out_dir, *, executor=None, helpers: int = 0) -> list[Path]:
    """Write the standard figures to ``out_dir``/figures/*.png (200 dpi, each atomically).

    Parameters
    ----------
    results : xarray.Dataset, CampaignResults or path-like
    out_dir : str or path-like
        The output folder; figures/ is made inside it.
    executor : concurrent.futures.Executor, optional
        Processes to share the drawing with: ``helpers`` of them each draw an equal share of the
        figures while this process draws its own.
    helpers : int
        How many of the executor's processes to use.

    Returns
    -------
    list of pathlib.Path
        ``<X>_alpha.png`` for each of CL, CD, CM, C_power, L_D, CL_p, CD_p with finite values;
        ``<X>_by_speed.png`` and ``<X>_by_re.png`` for CL and CD when the campaign ran more than
        one speed; ``spin_scatter.png`` and ``speed_drift.png`` (:func:`plot_steadiness`);
        ``cp_<run>.png`` (:func:`plot_cp_pair`) for the :func:`representative_runs`; in the
        order of :func:`standard_figures`.
    """
    ds = results_dataset(results)
    (Path(out_dir) / "figures").mkdir(parents=True, exist_ok=True)
    jobs = standard_figures(ds)
    shares = max(1, 1 + (helpers if executor is not None else 0))
    # Job i goes to share i mod n: neighbouring jobs (the same kind of figure) are spread out.
    futures = [
        executor.submit(draw_standard_figures, ds, jobs[k::shares], out_dir)
        for k in range(1, shares)
        if jobs[k::shares]
    ]
    mine = jobs[0::shares]
    drawn = dict(zip(mine, draw_standard_figures(ds, mine, out_dir), strict=True))
    for k, future in enumerate(futures, start=1):
        drawn.update(zip(jobs[k::shares], future.result(), strict=True))
    return [drawn[job] for job in jobs]


def _has_both(ds: xr.Dataset, a: str, b: str) -> bool:
    return bool((np.isfinite(_values(ds, a)) & np.isfinite(_values(ds, b))).any())


def _has_values(ds: xr.Dataset, name: str) -> bool:
    return name in ds and bool(np.isfinite(_values(ds, name)).any())
