"""tunnelred: reduce wind-tunnel data from rotating-cylinder tests.

The public names, for scripts and notebooks::

    import tunnelred as tr
    campaign = tr.open_campaign("sample_runs")
    results = tr.reduce_campaign("sample_runs", "out")
    tr.write_report("out")

Imports are deferred so that ``tunnelred --help`` answers at once.
"""

from __future__ import annotations

from tunnelred.common.deferred import deferred_names

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

__getattr__, __dir__ = deferred_names("tunnelred", _PUBLIC, __all__)
