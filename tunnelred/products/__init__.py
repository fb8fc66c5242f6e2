"""Stage 4, products: the results folder, figures, the PDF report and comparisons.

Importing the stage registers the ``ds.tunnelred`` accessor on xarray.Dataset
(tunnelred.products.accessor), so results opened anywhere carry it.
"""

from tunnelred.products import accessor as _accessor  # noqa: F401  (registers ds.tunnelred)
