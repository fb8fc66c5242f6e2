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

from tunnelred.common.deferred import deferred_names

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

# Deferred, so that the command line reads the noise levels without pandas and xarray.
__getattr__, __dir__ = deferred_names("tunnelred.products.plan", _PUBLIC, __all__)
