"""What the plan expects the model to do: the free-air CL, CD, CM against spin ratio.

A prior is stated, never hidden: the plan's outputs name it. Three kinds:

- ``"illustrative"``: a built-in curve **shaped like published rotating-cylinder measurements,
  not measured data** (lift short of potential flow and saturating at high spin ratio, more of
  it with end plates; drag dipping at moderate spin and rising again; a torque growing with the
  spin ratio). Good enough to size loads and uncertainties before a test, nothing more.
- ``"potential"``: potential flow, CL = −2πα up to Prandtl's limit 4π, CD = CM = 0: an upper
  bound of the lift (and so of the lift loads), not an estimate.
- a results folder (or results.nc / results.csv) of an earlier campaign: its CL, CD, CM against
  α, per configuration, interpolated linearly (flagged runs left out; held constant beyond the
  measured range, which the plan reports).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from tunnelred.common.errors import InputError, Problem
from tunnelred.physics import theory

__all__ = ["Prior", "make_prior", "PRIOR_KINDS"]

PRIOR_KINDS = ("illustrative", "potential")

# The illustrative curve's shape (invented numbers, see the module docstring): saturation lift
# with and without end plates, small-alpha lift slope as a fraction of potential flow.
_CL_SATURATION = {True: 10.0, False: 6.0}
_LIFT_FRACTION = 0.6


@dataclass(frozen=True)
class Prior:
    """Expected free-air coefficients: ``coefficients(config, alpha) -> (CL, CD, CM)``."""

    name: str  # how the outputs name it
    description: str
    end_plates: dict[str, bool] = field(default_factory=dict)
    table: dict[str, tuple[np.ndarray, ...]] = field(default_factory=dict)  # results prior

    def coefficients(self, config: str, alpha: float) -> tuple[float, float, float, bool]:
        """CL, CD, CM at spin ratio ``alpha``, and whether alpha lies outside the prior's data."""
        if self.name == "potential":
            cl = float(np.clip(theory.lift_coefficient(alpha), -4 * np.pi, 4 * np.pi))
            return cl, 0.0, 0.0, False
        if self.name == "illustrative":
            saturation = _CL_SATURATION[bool(self.end_plates.get(config, False))]
            cl = -saturation * np.tanh(2 * np.pi * _LIFT_FRACTION * alpha / saturation)
            a2 = alpha * alpha
            cd = 1.2 - 0.6 * np.tanh(a2 / 2.0) + 0.04 * a2
            cm = -0.05 * alpha * abs(alpha) - 0.01 * alpha
            return float(cl), float(cd), float(cm), False
        a, cl, cd, cm = self.table[config]
        outside = bool(alpha < a[0] or alpha > a[-1])
        return (*(float(np.interp(alpha, a, y)) for y in (cl, cd, cm)), outside)


def make_prior(prior: str | Path, end_plates: dict[str, bool], configs) -> Prior:
    """The prior named by ``prior``: "illustrative", "potential" or a results folder/file.

    Raises
    ------
    InputError
        A results prior that cannot be read or lacks a planned configuration.
    """
    if isinstance(prior, str) and prior in PRIOR_KINDS:
        text = {
            "illustrative": "illustrative curve shaped like published rotating-cylinder "
            "data (not measured data)",
            "potential": "potential flow CL = -2 pi alpha (an upper bound), CD = CM = 0",
        }[prior]
        return Prior(prior, text, dict(end_plates))
    if not Path(prior).exists():
        raise InputError(
            Problem(
                "prior",
                None,
                None,
                f"one of {', '.join(PRIOR_KINDS)}, or a results folder or results.nc",
                repr(str(prior)),
            )
        )
    return _results_prior(Path(prior), configs)


def _results_prior(path: Path, configs) -> Prior:
    # Imported here: reading results needs xarray and netCDF, which the built-in priors do not.
    from tunnelred.products.store import read_results

    try:
        ds = read_results(path)
    except (OSError, ValueError, KeyError) as exc:
        raise InputError(
            Problem(str(path), None, None, "a results folder, results.nc or results.csv", str(exc))
        ) from None
    table = {}
    problems = []
    flagged = ds["flags"].to_numpy().astype(str) if "flags" in ds else None
    for config in sorted(set(configs)):
        keep = ds["config"].to_numpy().astype(str) == config
        if flagged is not None:
            keep &= flagged == ""
        names = ("alpha", "CL", "CD", "CM")
        columns = [ds[n].to_numpy().astype(float)[keep] for n in names]
        finite = np.all([np.isfinite(c) for c in columns], axis=0)
        columns = [c[finite] for c in columns]
        if columns[0].size < 2:
            problems.append(
                Problem(
                    str(path),
                    None,
                    "config",
                    f"at least two unflagged runs of configuration {config!r}",
                    f"{columns[0].size}",
                    "Plan that configuration with a built-in prior, or from another folder.",
                )
            )
            continue
        order = np.argsort(columns[0])
        table[config] = tuple(c[order] for c in columns)
    if problems:
        raise InputError(problems)
    return Prior(f"results:{path}", f"results of an earlier campaign ({path})", table=table)
