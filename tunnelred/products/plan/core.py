"""plan_test and write_plan: the plan of a test matrix, its outputs and where they go."""

from __future__ import annotations

import json
from dataclasses import asdict, dataclass, field
from pathlib import Path

import pandas as pd
import xarray as xr

from tunnelred import __version__
from tunnelred.common.errors import InputError, OutputFolderError, Problem
from tunnelred.inputs.config import load_config
from tunnelred.products.plan.levels import AirState, NoiseLevels
from tunnelred.products.plan.matrix import PlannedPoint, read_matrix
from tunnelred.products.plan.predict import PointPrediction, predict_point
from tunnelred.products.plan.prior import make_prior
from tunnelred.products.store import atomic_write_bytes, write_csv

__all__ = [
    "plan_test",
    "write_plan",
    "read_plan",
    "PlanResult",
    "NoiseLevels",
    "AirState",
    "PlannedPoint",
    "SAFETY",
    "PLAN_FILES",
    "plan_folder",
]

#: The caution every plan output carries.
SAFETY = (
    "A spinning model stores energy and can shed parts: run only within the limits its and the "
    "drive's designers set, behind the guards the facility requires, under the facility's "
    "safety rules, local codes and licensed engineering practice. This plan replaces none of them."
)

#: What write_plan writes into OUT (figures under figures/).
PLAN_FILES = ("plan.csv", "plan.nc", "plan_budgets.csv", "plan.json")


@dataclass
class PlanResult:
    """A predicted test matrix: one row a point (``table``), budgets and the stated assumptions."""

    table: pd.DataFrame
    budgets: pd.DataFrame
    assumptions: dict = field(default_factory=dict)
    points: list[PointPrediction] = field(default_factory=list)

    @property
    def warnings(self) -> list[str]:
        return [f"{p.point.point}: {w}" for p in self.points for w in p.warnings]

    def to_dataset(self) -> xr.Dataset:
        ds = xr.Dataset.from_dataframe(self.table.set_index("point"))
        ds.attrs.update(
            {
                "title": "tunnelred pre-test uncertainty analysis",
                "tunnelred_version": __version__,
                "assumptions": json.dumps(self.assumptions),
                "safety": SAFETY,
            }
        )
        return ds


def plan_test(
    campaign,
    matrix,
    *,
    prior="illustrative",
    noise: NoiseLevels | None = None,
    air: AirState | None = None,
    target: tuple[str, float] | None = None,
    eps_limit: float = 0.05,
) -> PlanResult:
    """Predict every point of a planned test matrix.

    Parameters
    ----------
    campaign : str or Path
        The campaign folder (its campaign.toml; runs.csv is not read).
    matrix : str or Path
        PLAN.csv (docs/plan.md).
    prior : str or Path
        "illustrative" (a built-in curve shaped like published rotating-cylinder data, NOT
        measured data), "potential" (potential flow, an upper bound of lift) or the results
        folder of an earlier campaign.
    noise : NoiseLevels, optional
        The random fluctuations assumed; defaults documented on the class.
    air : AirState, optional
        The air assumed (default 20 °C, 101325 Pa, RH 0.5).
    target : (str, float), optional
        An output and the standard uncertainty wanted for it, e.g. ("CL", 0.01): the record
        length that reaches it is reported per point (``record_for_u_CL``).
    eps_limit : float
        The total blockage eps above which a point is warned of a large wall correction.

    Returns
    -------
    PlanResult

    Raises
    ------
    InputError
        campaign.toml or the matrix has problems (each with file, row and reason).
    """
    noise = noise or NoiseLevels()
    air = air or AirState()
    campaign = Path(campaign)
    cfg, problems = load_config(campaign / "campaign.toml")
    if cfg is None:
        raise InputError(problems)
    if cfg.instruments.balance is None:
        raise InputError(
            Problem("campaign.toml", None, "instruments.balance", "a balance to plan loads", "none")
        )
    points = read_matrix(matrix, cfg.configurations)
    end_plates = {k: c.end_plates for k, c in cfg.configurations.items()}
    chosen = make_prior(prior, end_plates, {p.config for p in points})
    if target is not None and f"u_{target[0]}" not in _target_names():
        raise InputError(
            Problem("target", None, None, f"one of {', '.join(_target_names())}", target[0])
        )
    predictions = [
        predict_point(cfg, p, chosen, noise, air, target=target, eps_limit=eps_limit)
        for p in points
    ]
    table = pd.DataFrame([p.values for p in predictions])
    budgets = [p.budgets for p in predictions if p.budgets is not None]
    assumptions = {
        "prior": chosen.name,
        "prior_description": chosen.description,
        "noise": asdict(noise),
        "air": asdict(air),
        "target": list(target) if target else None,
        "eps_limit": eps_limit,
        "blockage": cfg.reduction.blockage,
        "overload_tolerance": [cfg.tolerances_for(p.config).overload for p in points][0],
        "campaign_sha256": cfg.sha256,
    }
    return PlanResult(
        table, pd.concat(budgets) if budgets else pd.DataFrame(), assumptions, predictions
    )


def _target_names() -> list[str]:
    from tunnelred.products.plan.predict import PREDICTED

    return [f"u_{n}" for n in PREDICTED]


#: The subfolder of a results folder a plan is written to, where ``tunnelred report`` finds it.
PLAN_SUBFOLDER = "plan"


def plan_folder(out, campaign=None) -> Path:
    """Where a plan for ``out`` is written: ``out`` itself, or ``out/plan`` in a results folder.

    ``out`` may be missing, empty, a folder holding an earlier plan (replaced), or a tunnelred
    results folder (the plan goes beside the results, in its ``plan/`` subfolder, which the
    reduction never touches).

    Raises
    ------
    OutputFolderError
        ``out`` is inside the campaign folder, a file, not writable, or a non-empty folder that
        is neither a plan nor a results folder.
    """
    from tunnelred.products.results_folder import check_location, folder_kind

    # force and kind=None: the folder is judged here, since check_location's way out (--force)
    # is not a plan's (other files beside a plan's would be mistaken for its own), and a
    # results folder is not refused but given the plan in its plan/.
    checked = check_location(Path(out), campaign, force=True, kind=None)
    kind = folder_kind(checked) if checked.is_dir() else None
    if kind == "results":
        return checked / PLAN_SUBFOLDER
    if kind is None and checked.is_dir() and any(checked.iterdir()):
        raise OutputFolderError(
            f"{checked} is not empty and holds neither a plan nor tunnelred results; choose a "
            "new or empty folder, an earlier plan's folder (replaced) or a results folder (the "
            "plan goes into its plan/)"
        )
    return checked


def write_plan(result: PlanResult, out, campaign=None) -> list[Path]:
    """Write plan.csv, plan.nc, plan_budgets.csv, plan.json and figures/ into ``out``.

    ``out`` is written as the results folder is (:mod:`tunnelred.products.results_folder`):
    locked, the files of one plan written into a new generation and switched to at once, so
    that ``out`` shows the previous plan whole or this one whole, never a mix; nothing outside
    ``out``. Use :func:`plan_folder` to place a plan beside results. Returns the paths as seen
    from ``out`` (links into its current generation).

    Raises
    ------
    OutputFolderError
        ``out`` cannot be used (a file, not writable, a results folder, a non-empty folder
        that is neither a plan nor a results folder, another process writing it) or the plan
        could not be written whole (the previous plan, if any, is kept).
    """
    from tunnelred.products.plan.figures import save_plan_figures
    from tunnelred.products.results_folder import open_results_folder

    out = Path(out)
    if out.exists() and not out.is_dir():
        raise OutputFolderError(f"{out} exists and is not a folder")
    with open_results_folder(out, campaign, kind="plan") as folder:
        with folder.stage() as staging:
            paths = [write_csv(result.table, staging.file("plan.csv"))]
            ds = result.to_dataset()
            paths.append(atomic_write_bytes(staging.file("plan.nc"), ds.to_netcdf(engine="scipy")))
            paths.append(write_csv(result.budgets, staging.file("plan_budgets.csv")))
            meta = dict(result.assumptions, safety=SAFETY, tunnelred_version=__version__)
            text = json.dumps(meta, indent=2).encode()
            paths.append(atomic_write_bytes(staging.file("plan.json"), text))
            paths += save_plan_figures(
                result.table,
                staging.file("figures"),
                overload=float(result.assumptions["overload_tolerance"]),
                eps_limit=float(result.assumptions["eps_limit"]),
            )
        return [folder.root / Path(p).relative_to(staging.path) for p in paths]


def read_plan(folder) -> tuple[pd.DataFrame, dict] | None:
    """A plan in ``folder`` or in its ``plan/`` subfolder (plan.csv and plan.json), or None.

    Raises InputError when the plan's files cannot be read.
    """
    from tunnelred.products.results_folder import generation_of

    folder = Path(folder)
    if (folder / PLAN_SUBFOLDER / "plan.json").is_file():
        folder = folder / PLAN_SUBFOLDER
    # Both files from one generation, even while a new plan is being switched to.
    folder = generation_of(folder)
    if not (folder / "plan.csv").is_file() or not (folder / "plan.json").is_file():
        return None
    try:
        return pd.read_csv(folder / "plan.csv"), json.loads((folder / "plan.json").read_text())
    except (OSError, ValueError) as exc:  # a damaged plan is said, never a traceback
        raise InputError(
            Problem(str(folder), None, None, "a plan written by tunnelred plan", str(exc))
        ) from None
