"""The standard figure set of an output folder, as jobs that this process and pool processes draw
alike, each PNG written atomically.
"""

from __future__ import annotations

from pathlib import Path

from matplotlib.axes import Axes
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from tunnelred.products import store
from tunnelred.products.plotting.coefficients import (
    plot_coefficient,
    plot_comparison,
    plot_drag_polar,
    plot_pressure_lift,
)
from tunnelred.products.plotting.cp import CP_PAIR_SIZE, plot_cp_pair
from tunnelred.products.plotting.diagnostics import plot_steadiness
from tunnelred.products.plotting.runs import (
    group_runs,
    has_both,
    has_values,
    representative_runs,
    results_dataset,
    sweeps_shared,
)
from tunnelred.products.plotting.style import FIGURE_SIZE, house_style

#: Resolution of the standard PNGs: 960 × 660 pixels for a coefficient figure, sharp on a screen
#: and in print at its size (the report draws its own figures, at its own resolution).
PNG_DPI = 150
# zlib level 3 instead of PNG's usual 6: a third less time encoding, files 2 % larger.
_PNG_OPTIONS = {"compress_level": 3}


def save_figure(fig: Figure, path: Path) -> Path:
    """Write ``fig`` as a PNG at ``path`` (:data:`PNG_DPI`), atomically."""
    with store.atomic_path(path) as tmp:
        fig.savefig(tmp, format="png", dpi=PNG_DPI, pil_kwargs=_PNG_OPTIONS)
    return path


def standard_figures(results) -> list[tuple[str, str, tuple]]:
    """The standard figures of the results, as jobs: (file name, drawing function, arguments).

    Each job is drawn by :func:`draw_standard_figure`; the jobs are independent, so they may be
    drawn in any order and in other processes (:func:`save_standard_figures`).
    """
    ds = results_dataset(results)
    jobs: list[tuple[str, str, tuple]] = []
    present = [n for n in ("CL", "CD", "CM", "C_power", "L_D", "CL_p", "CD_p") if has_values(ds, n)]
    jobs += [(f"{name}_alpha.png", "plot_coefficient", (name,)) for name in present]
    if {"CL", "CD"} <= set(present):
        jobs.append(("drag_polar.png", "plot_drag_polar", ()))
    if {"CL", "CL_p"} <= set(present) and has_both(ds, "CL", "CL_p"):
        jobs.append(("CL_p_CL.png", "plot_pressure_lift", ()))
    if len(group_runs(ds, "speed")) > 1:
        for name in [n for n in ("CL", "CD") if n in present]:
            for by in ("speed", "re"):
                jobs.append((f"{name}_by_{by}.png", "plot_comparison", (name, by)))
    for name in [n for n in ("spin_scatter", "speed_drift") if has_values(ds, n)]:
        jobs.append((f"{name}.png", "plot_steadiness", (name,)))
    if "Cp" in ds:
        jobs += [(f"cp_{run}.png", "plot_cp_pair", (run,)) for run in representative_runs(ds)]
    return jobs


def _axes(fig: Figure) -> Axes:
    """One Axes on ``fig`` in the house style, as a figure drawn on its own makes it."""
    with house_style():
        return fig.add_subplot()


# The functions a job may name (a job that travels to another process names its drawer), each
# drawing on the blank Figure it is given, of the job's size (_SIZES).
_DRAWERS = {
    "plot_coefficient": lambda fig, ds, name: plot_coefficient(ds, name, ax=_axes(fig)),
    "plot_drag_polar": lambda fig, ds: plot_drag_polar(ds, ax=_axes(fig)),
    "plot_pressure_lift": lambda fig, ds: plot_pressure_lift(ds, ax=_axes(fig)),
    "plot_comparison": lambda fig, ds, name, by: plot_comparison(ds, name, by=by, ax=_axes(fig)),
    "plot_steadiness": lambda fig, ds, name: plot_steadiness(ds, name, ax=_axes(fig)),
    "plot_cp_pair": lambda fig, ds, run: plot_cp_pair(ds, run, fig=fig),
}
_SIZES = {"plot_cp_pair": CP_PAIR_SIZE}  # FIGURE_SIZE for the others


def _blank_figure(drawer: str, kept: dict | None) -> Figure:
    """A blank Figure for a job of ``drawer``: new, or the one of its size in ``kept``, cleared.

    A kept Figure keeps its Agg canvas, whose renderer keeps the text metrics and mathtext
    layouts of the figures drawn before (the same labels recur): a tenth less drawing time, the
    same pixels.
    """
    size = _SIZES.get(drawer, FIGURE_SIZE)
    if kept is None:
        return Figure(figsize=size, layout="constrained")
    fig = kept.get(size)
    if fig is None:
        fig = kept[size] = Figure(figsize=size, layout="constrained")
        FigureCanvasAgg(fig)
    else:
        fig.clear()
    return fig


def draw_standard_figure(results, job: tuple[str, str, tuple], out_dir, *, _kept=None) -> Path:
    """Draw one job of :func:`standard_figures` into ``out_dir``/figures (atomically)."""
    name, drawer, args = job
    fig = _blank_figure(drawer, _kept)
    _DRAWERS[drawer](fig, results_dataset(results), *args)
    return save_figure(fig, Path(out_dir) / "figures" / name)


def draw_standard_figures(results, jobs, out_dir) -> list[Path]:
    """Draw several jobs of :func:`standard_figures` (one task of a process pool)."""
    ds = results_dataset(results)
    kept: dict = {}  # one Figure a size, drawn on again job after job
    with sweeps_shared(ds):
        return [draw_standard_figure(ds, job, out_dir, _kept=kept) for job in jobs]


def save_standard_figures(results, out_dir, *, executor=None, helpers: int = 0) -> list[Path]:
    """Write the standard figures to ``out_dir``/figures/*.png (:data:`PNG_DPI`, each atomically).

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
