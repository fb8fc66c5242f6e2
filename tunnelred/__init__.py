"""tunnelred: reduce wind-tunnel data from rotating-cylinder tests.

The public names, for scripts and notebooks::

    import tunnelred as tr
    campaign = tr.open_campaign("sample_runs")
    results = tr.reduce_campaign("sample_runs", "out")
    tr.write_report("out")

Imports are deferred so that ``tunnelred --help`` answers at once.
"""

from __future__ import annotations

import importlib

__version__ = "0.1.0.dev0"

_PUBLIC = {
    "open_campaign": "inputs.readers",
    "reduce_run": "engine.reduction",
    "reduce_campaign": "pipeline.campaign",
    "read_results": "products.store",
    "write_report": "products.report",
    "plan_test": "products.plan",
    "InputError": "common.errors",
    "ReductionError": "common.errors",
}

__all__ = ["__version__", *_PUBLIC]


def __getattr__(name: str):
    module = _PUBLIC.get(name)
    if module is None:
        raise AttributeError(f"module 'tunnelred' has no attribute {name!r}")
    return getattr(importlib.import_module(f"tunnelred.{module}"), name)


def __dir__() -> list[str]:
    return sorted(__all__)
