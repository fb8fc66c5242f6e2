"""Run diagnostics from the raw logs (α(t), U(t), the balance zeros) and the steadiness measures of
every run against their tolerances.
"""

from __future__ import annotations

import json

import matplotlib as mpl
import numpy as np
import pandas as pd
from matplotlib.axes import Axes
from matplotlib.figure import Figure

from tunnelred.physics import conditions
from tunnelred.products.plotting.runs import results_dataset, run_values
from tunnelred.products.plotting.style import (
    BOUND_COLOR,
    HOUSE_STYLE,
    THEORY_COLOR,
    house_style,
    new_axes,
    significant,
)

_NEAREST_ZEROS = 20  # zero runs shown in the drift panel, nearest in time to the run


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
        flow = None
        if "tunnel" in data.streams:
            flow = conditions.free_stream(data.streams["tunnel"], cfg)
        _alpha_panel(ax_alpha, data, flow, cfg.model.diameter / 2, tol, run)
        _speed_panel(ax_speed, flow, tol)
        _zero_panel(ax_zero, campaign, spec)
    return fig


def _tolerance_band(ax: Axes, mean: float, scale: float, tol, name: str, color) -> None:
    """The band mean ± scale × the tolerance ``name`` (a fraction), labelled with it."""
    fraction = getattr(tol, name)
    band = scale * fraction
    ax.axhspan(
        mean - band,
        mean + band,
        color=color,
        alpha=0.12,
        label=f"mean ± {100 * fraction:g} % ({name} tolerance)",
    )


def _alpha_panel(ax: Axes, data, flow, radius: float, tol, run: str) -> None:
    """α(t) of the run with its mean and the spin_scatter band (or why there is none)."""
    style = HOUSE_STYLE[0]
    t_spin, omega, source = conditions.spin_rate(data.streams)
    if flow is not None and source != "none":
        steady = conditions.spin_steadiness(
            t_spin, omega, flow["time"].values, flow["U"].values, radius
        )
        mean = steady.alpha_mean
        ax.plot(steady.time, steady.alpha, color=style.color, linewidth=0.8)
        ax.axhline(mean, color=THEORY_COLOR, linewidth=1.0, label=f"mean {mean:.4f}")
        _tolerance_band(ax, mean, abs(mean), tol, "spin_scatter", style.color)
        ax.set_title(
            f"Spin ratio, run {run} ({source}): scatter {100 * steady.scatter:.2f} %, "
            f"drift {100 * steady.drift:+.2f} %"
        )
        ax.legend(loc="best")
    else:
        ax.set_title(f"Spin ratio, run {run}: not spinning or no tunnel log")
    ax.set_ylabel(r"$\alpha(t)$")
    _stream_time_label(ax)


def _speed_panel(ax: Axes, flow, tol) -> None:
    """U(t) (uncorrected) with its mean and the speed_drift band."""
    style = HOUSE_STYLE[1]
    if flow is not None:
        t, U = flow["time"].values, flow["U"].values
        stats = conditions.series_statistics(U, t)
        ax.plot(t, U, color=style.color, linewidth=0.8)
        ax.axhline(stats.mean, color=THEORY_COLOR, linewidth=1.0)
        _tolerance_band(ax, stats.mean, stats.mean, tol, "speed_drift", style.color)
        ax.set_title(
            f"Free-stream speed (uncorrected): mean {stats.mean:.2f} m/s, "
            f"drift {100 * stats.drift / stats.mean:+.2f} %"
        )
        ax.legend(loc="best")
    ax.set_ylabel(r"$U(t)$ [m/s]")
    _stream_time_label(ax)


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
    ax.axvline(start, color=THEORY_COLOR, linestyle="--", linewidth=1.0, label=f"run {spec.run}")
    ax.set_title("Balance wind-off zeros (filled: those the run uses)")
    ax.set_ylabel("mean signal minus the first zero's")
    ax.set_xlabel("clock time")
    locator = mpl.dates.AutoDateLocator()
    ax.xaxis.set_major_locator(locator)
    ax.xaxis.set_major_formatter(mpl.dates.ConciseDateFormatter(locator))
    ax.legend(loc="best", ncols=2)


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
        Where to draw; a new one when None. Returns the Axes drawn on.

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
    values = np.abs(run_values(ds, name)) * scale
    runs = [str(r) for r in ds["run"].values]
    flagged = (
        np.asarray(ds[f"flag_{name}"].values, dtype=bool)
        if f"flag_{name}" in ds
        else np.zeros(len(runs), dtype=bool)
    )
    order = np.arange(len(runs))
    good, bad = HOUSE_STYLE[0], HOUSE_STYLE[1]
    with house_style():
        ax = new_axes(ax)
        ax.plot(order[~flagged], values[~flagged], linestyle="none", marker=good.marker,
                color=good.color, label="runs")  # fmt: skip
        if flagged.any():
            ax.plot(order[flagged], values[flagged], linestyle="none", marker=bad.marker,
                    markersize=9, color=bad.color, label="flagged")  # fmt: skip
            for i in np.flatnonzero(flagged):
                ax.annotate(runs[i], (order[i], values[i]), textcoords="offset points",
                            xytext=(6, 4), color=bad.color)  # fmt: skip
        ax.axhline(tolerance * scale, color=BOUND_COLOR, linestyle="--",
                   label=f"tolerance {significant(tolerance * scale)} {unit}")  # fmt: skip
        step = max(1, len(runs) // 12)
        ax.set_xticks(order[::step], [runs[i] for i in order[::step]], rotation=45, ha="right")
        ax.set_xlabel("run")
        ax.set_ylabel(f"{label} [{unit}]")
        ax.set_ylim(bottom=0)
        ax.set_title(label)
        ax.legend(loc="best")
    return ax
