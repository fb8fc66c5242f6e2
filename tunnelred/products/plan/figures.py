"""The plan's figures: predicted U(CL) against spin ratio per speed, load fractions, corrections."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
from matplotlib.figure import Figure

from tunnelred.products.plotting.standard import save_figure
from tunnelred.products.plotting.style import house_style, new_axes

__all__ = ["plot_uncertainty", "plot_load_fractions", "plot_corrections", "save_plan_figures"]


def _by_speed(table: pd.DataFrame):
    for (config, speed), rows in table.groupby(["config", "speed_set"], sort=True):
        yield f"{config}, {speed:g} m/s", rows.sort_values("alpha")


def plot_uncertainty(table: pd.DataFrame, output: str = "CL", *, ax=None):
    """Predicted expanded uncertainty U (k = 2) of ``output`` against spin ratio, per speed."""
    ax = new_axes(ax)
    for label, rows in _by_speed(table):
        ax.plot(rows["alpha"], rows[f"Uk2_{output}"], marker="o", label=label)
    ax.set_xlabel("spin ratio α [-]")
    ax.set_ylabel(f"predicted U({output}), k = 2 [-]")
    ax.set_title(f"Pre-test uncertainty of {output}")
    ax.legend(fontsize="small")
    return ax


def plot_load_fractions(table: pd.DataFrame, limit: float, *, ax=None):
    """Predicted peak balance loads as fractions of full scale, per point, with the limit."""
    ax = new_axes(ax)
    x = np.arange(len(table))
    for k, name in enumerate(("Fx", "Fy", "Mz")):
        ax.bar(x + (k - 1) * 0.27, table[f"{name}_peak_fraction"], width=0.27, label=name)
    ax.axhline(limit, color="k", linestyle="--", linewidth=1, label=f"overload {limit:g}")
    ax.set_xticks(x, table["point"], rotation=90, fontsize="x-small")
    ax.set_ylabel("peak load / full scale [-]")
    ax.set_title("Balance loads (mean + 3 sd of the samples)")
    ax.legend(fontsize="small")
    return ax


def plot_corrections(table: pd.DataFrame, eps_limit: float, *, ax=None):
    """Wall-correction size: eps (solid + wake) and the relative CL, CD changes, per point."""
    ax = new_axes(ax)
    for label, rows in _by_speed(table):
        ax.plot(rows["alpha"], 100 * rows["eps_total"], marker="o", label=f"eps, {label}")
        ax.plot(rows["alpha"], 100 * rows["CD_correction"], marker="x", linestyle=":",
                label=f"CD change, {label}")  # fmt: skip
    ax.axhline(100 * eps_limit, color="k", linestyle="--", linewidth=1, label="stated eps limit")
    ax.set_xlabel("spin ratio α [-]")
    ax.set_ylabel("correction [%]")
    ax.set_title("Size of the wall corrections")
    ax.legend(fontsize="x-small")
    return ax


def save_plan_figures(table: pd.DataFrame, folder, *, overload: float, eps_limit: float):
    """Write the plan's figures into ``folder`` (each atomically); returns their paths."""
    folder = Path(folder)
    paths = []
    with house_style():
        for name, draw in (
            ("plan_U_CL.png", lambda ax: plot_uncertainty(table, "CL", ax=ax)),
            ("plan_loads.png", lambda ax: plot_load_fractions(table, overload, ax=ax)),
            ("plan_corrections.png", lambda ax: plot_corrections(table, eps_limit, ax=ax)),
        ):
            fig = Figure(figsize=(6.4, 4.4), layout="constrained")
            draw(fig.add_subplot())
            paths.append(save_figure(fig, folder / name))
    return paths
