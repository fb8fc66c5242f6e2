"""Pre-test uncertainty analysis: predicted loads, corrections and uncertainties of a test matrix.

``tunnelred plan CAMPAIGN --matrix PLAN.csv -o OUT`` and :func:`plan_test`. The campaign folder
supplies the tunnel, model, instruments, taps and tolerances (its runs.csv may be empty); the
matrix the planned points (:mod:`tunnelred.products.plan.matrix`); a stated prior the expected
coefficients (:mod:`tunnelred.products.plan.prior`); stated noise levels the random parts
(:class:`NoiseLevels`). Each point is predicted by the reduction's own run model
(:mod:`tunnelred.products.plan.predict`). docs/plan.md explains every number.

Spinning models store energy: a plan that passes the model's ``max_spin_rate`` says so loudly,
but the facility's safety rules, local codes and licensed engineering practice decide what may
be run.
"""

from __future__ import annotations

import json
from dataclasses import asdict, dataclass, field
from pathlib import Path

import pandas as pd
import xarray as xr

from tunnelred import __version__
from tunnelred.common.errors import InputError, Problem
from tunnelred.inputs.config import load_config
from tunnelred.products.plan.matrix import PlannedPoint, read_matrix
from tunnelred.products.plan.predict import AirState, NoiseLevels, PointPrediction, predict_point
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


def write_plan(result: PlanResult, out) -> list[Path]:
    """Write plan.csv, plan.nc, plan_budgets.csv, plan.json and figures/ into ``out``.

    Each file is written whole or not at all (atomic rename); nothing outside ``out``.
    """
    from tunnelred.products.plan.figures import save_plan_figures

    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    paths = [write_csv(result.table, out / "plan.csv")]
    ds = result.to_dataset()
    paths.append(atomic_write_bytes(out / "plan.nc", ds.to_netcdf(engine="scipy")))
    paths.append(write_csv(result.budgets, out / "plan_budgets.csv"))
    meta = dict(result.assumptions, safety=SAFETY, tunnelred_version=__version__)
    paths.append(atomic_write_bytes(out / "plan.json", json.dumps(meta, indent=2).encode()))
    paths += save_plan_figures(
        result.table,
        out / "figures",
        overload=float(result.assumptions["overload_tolerance"]),
        eps_limit=float(result.assumptions["eps_limit"]),
    )
    return paths


def read_plan(folder) -> tuple[pd.DataFrame, dict] | None:
    """A plan written beside results (plan.csv and plan.json in ``folder``), or None."""
    folder = Path(folder)
    if not (folder / "plan.csv").is_file() or not (folder / "plan.json").is_file():
        return None
    return pd.read_csv(folder / "plan.csv"), json.loads((folder / "plan.json").read_text())
