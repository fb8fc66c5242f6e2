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

import importlib

_PUBLIC = {
    "plan_test": "core",
    "write_plan": "core",
    "read_plan": "core",
    "plan_folder": "core",
    "PlanResult": "core",
    "SAFETY": "core",
    "PLAN_FILES": "core",
    "PLAN_SUBFOLDER": "core",
    "NoiseLevels": "levels",
    "AirState": "levels",
    "PlannedPoint": "matrix",
    "read_matrix": "matrix",
}

__all__ = list(_PUBLIC)


def __getattr__(name: str):
    # Deferred, so that the command line reads the noise levels without pandas and xarray.
    module = _PUBLIC.get(name)
    if module is None:
        raise AttributeError(f"module 'tunnelred.products.plan' has no attribute {name!r}")
    return getattr(importlib.import_module(f"tunnelred.products.plan.{module}"), name)


def __dir__() -> list[str]:
    return sorted(__all__)
