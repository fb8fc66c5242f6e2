"""``OUT/figures/live.png``: the lift and drag of the runs reduced so far (`live_figure`)."""

from __future__ import annotations

from datetime import datetime
from pathlib import Path

import numpy as np

from tunnelred.live.status import FIGURE_FILE
from tunnelred.products import store


def live_figure(results, *, stamp: str | None = None):
    """CL and CD against the spin ratio for the runs so far, flagged runs circled and labelled.

    Parameters
    ----------
    results : xarray.Dataset, CampaignResults or path-like
        Campaign results (see :func:`tunnelred.products.plotting.results_dataset`).
    stamp : str, optional
        When the figure was drawn, shown in its top right corner (the watch gives the time of
        the reduction it shows).

    Returns
    -------
    matplotlib.figure.Figure
        Two Axes: CL with the potential-flow line −2πα, and CD; wall-corrected values with
        expanded-uncertainty bars (k = 2), drawn by
        :func:`tunnelred.products.plotting.plot_coefficient`. Each flagged run is circled and
        labelled with its run id; the latest run (the last in run order) is drawn as a large
        star labelled ``latest run <id>``; a provisional result adds "provisional" to both.

    Notes
    -----
    The potential-flow line is the Kutta–Joukowski lift of a spinning cylinder, CL = −2πα
    (docs/conventions.md); it holds while the stagnation points stay on the surface, |α| ≤ 2.

    References
    ----------
    .. [1] J. D. Anderson, *Fundamentals of Aerodynamics*, 6th ed., McGraw-Hill, 2017, §3.15–3.16.

    Examples
    --------
    >>> import xarray as xr
    >>> ds = xr.Dataset({"config": ("run", ["A"]), "alpha": ("run", [1.0]),
    ...                  "CL": ("run", [-2.5]), "CD": ("run", [0.8]), "flags": ("run", [""])},
    ...                 coords={"run": ["r1"]})
    >>> [ax.get_ylabel() for ax in live_figure(ds).axes]
    ['lift coefficient $C_L$', 'drag coefficient $C_D$']
    """
    from matplotlib.figure import Figure  # deferred: `tunnelred --help` need not load matplotlib

    from tunnelred.products import plotting

    ds = plotting.results_dataset(results)
    fig = Figure(figsize=(11.0, 4.4), layout="constrained")
    axes = fig.subplots(1, 2)
    runs = [str(r) for r in ds["run"].values]
    flagged = np.array([bool(f) for f in ds["flags"].values]) if "flags" in ds else None
    provisional = ds["provisional"].values.astype(bool) if "provisional" in ds else None

    def worded(i: int, text: str) -> str:
        return f"{text} (provisional)" if provisional is not None and provisional[i] else text

    for ax, name in zip(axes, ("CL", "CD"), strict=True):
        if name not in ds:
            ax.set_title(f"no {name} yet")
            continue
        plotting.plot_coefficient(ds, name, ax=ax, uncorrected=False, theory=name == "CL")
        x, y = ds["alpha"].values, ds[name].values
        if flagged is not None and flagged.any():
            ax.plot(
                x[flagged],
                y[flagged],
                linestyle="none",
                marker="o",
                markersize=14,
                markerfacecolor="none",
                markeredgecolor="black",
                markeredgewidth=1.5,
                label="flagged run",
                zorder=4,
            )
            for i in np.flatnonzero(flagged):
                ax.annotate(
                    worded(i, runs[i]),
                    (x[i], y[i]),
                    xytext=(8, 8),
                    textcoords="offset points",
                    fontsize=8,
                    fontweight="bold",
                )
        if runs:
            last = len(runs) - 1
            ax.plot(
                x[last:],
                y[last:],
                linestyle="none",
                marker="*",
                markersize=16,
                markerfacecolor="gold",
                markeredgecolor="black",
                label=worded(last, f"latest run {runs[last]}"),
                zorder=5,
            )
        legend = ax.get_legend()
        ax.legend(title=legend.get_title().get_text() if legend else None)
    if stamp:
        fig.suptitle(f"updated {stamp}", x=0.99, ha="right", fontsize=9)
    return fig


def live_figure_into(staging, ds) -> dict[str, Path]:
    """figures/live.png, drawn into the new generation with the results it shows, so that the
    switch to it brings the figure along (none while no run has results)."""
    if not ds.sizes.get("run", 0):
        return {}
    name = f"figures/{FIGURE_FILE}"
    path = staging.file(name)
    with store.atomic_path(path) as tmp:
        stamp = datetime.now().isoformat(sep=" ", timespec="seconds")
        live_figure(ds, stamp=stamp).savefig(tmp, format="png", dpi=100)
    return {name: path}
