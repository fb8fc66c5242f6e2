"""Plausibility: physical ranges of a run's air data and spin rate, as input problems.

A log can be dimensionally valid and still impossible: a ``T [K]`` header over a column logged in
degrees Celsius gives 20 K and ρ ≈ 20 kg/m³, a ``p_baro [Pa]`` header over hectopascals gives
ρ ≈ 0.007 kg/m³. The units layer cannot see that; the values can. :func:`run_problems` judges
each sample of a run against the ranges of :data:`RANGES` (the air as the reduction computes it,
:func:`tunnelred.physics.conditions.free_stream`) and the spin rate against the model's rated
``[model] max_spin_rate``. Each problem names the file, the first offending line, the value and
the likely cause. ``tunnelred check`` lists them and ``reduce`` does not reduce such a run.

The set points (measured U against ``speed_set``, spin rate against ``spin_set``) are not input
problems but flags (:data:`tunnelred.engine.quality.CHECKS`), since a run can legitimately miss
its set point.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from tunnelred.common.errors import Problem, TunnelredError
from tunnelred.engine.quality import RPM_PER_RAD_S
from tunnelred.physics import conditions

__all__ = ["Range", "RANGES", "run_problems", "campaign_problems"]


@dataclass(frozen=True)
class Range:
    """The plausible range of one per-sample quantity, and where the range comes from."""

    name: str  # column of the tunnel log or of conditions.free_stream
    low: float
    high: float
    unit: str
    what: str  # for the problem's "expected" text
    source: str  # why these limits
    hint: str


#: Plausible ranges of the air data, in SI; a sample outside is an input problem.
RANGES: tuple[Range, ...] = (
    Range(
        "T",
        233.15,
        333.15,
        "K",
        "an air temperature from -40 to +60 degC",
        "air in an atmospheric low-speed tunnel (common practice); the WMO surface records are "
        "-89.2 and +56.7 degC (from memory), a climatic tunnel rarely goes below -40 degC",
        "Check the unit in the header: degC logged under [K] reads about 20 K, degF under "
        "[degC] above 60 degC.",
    ),
    Range(
        "p_baro",
        50e3,
        110e3,
        "Pa",
        "a barometric pressure from 500 to 1100 hPa",
        "ICAO Doc 7488/3 standard atmosphere: 505 hPa at 5.5 km altitude (from memory); the "
        "highest sea-level pressure recorded is 1083.8 hPa (WMO, from memory)",
        "Check the unit in the header: hPa logged under [Pa] reads about 1000 Pa.",
    ),
    Range(
        "rho",
        0.5,
        1.7,
        "kg/m^3",
        "an air density from 0.5 to 1.7 kg/m^3",
        "ideal-gas density of dry air p/(R T), R = 287.05 J/(kg K), over the T and p_baro ranges "
        "above: 0.52 to 1.64 kg/m^3 (ICAO Doc 7488/3: 1.225 kg/m^3 at sea level)",
        "Check the units of T and p_baro in the header.",
    ),
    Range(
        "Mach",
        0.0,
        0.3,
        "-",
        "a Mach number below 0.3, where the incompressible wall corrections hold",
        "the blockage and lift-interference corrections and Cp as used here are "
        "incompressible; the density change is about M^2/2 = 4.5 % at M = 0.3 "
        "(common practice: Barlow, Rae and Pope, Low-Speed Wind Tunnel Testing, 3rd ed., "
        "1999, ch. 9 and 10, from memory)",
        "Check the unit of the pressure difference in the header (mbar logged under [Pa] "
        "reads 100 times too high) and of T and p_baro.",
    ),
)


def _outside(values: np.ndarray, low: float, high: float) -> np.ndarray:
    with np.errstate(invalid="ignore"):
        return np.isfinite(values) & ((values < low) | (values > high))


def _problem(file: str, index: int, column: str, expected: str, found: str, hint: str):
    # The log's first data row is its line 2 (line 1 is the header).
    return Problem(file, int(index) + 2, column, expected, found, hint)


def run_problems(config, data, fs=None) -> list[Problem]:
    """Implausible air data and spin rates of one loaded run (empty when all is plausible).

    Parameters
    ----------
    config : CampaignConfig
        The campaign's configuration (q source, model).
    data : RunData
        The run's parsed logs (``Campaign.load_run``).
    fs : xarray.Dataset, optional
        :func:`tunnelred.physics.conditions.free_stream` of the tunnel stream, when the caller
        has it already.

    Returns
    -------
    list of Problem
        One per quantity out of range, at the first line where it is, quoting the value, the
        range (:data:`RANGES`) and what to check.

    Examples
    --------
    >>> [r.name for r in RANGES]
    ['T', 'p_baro', 'rho', 'Mach']
    """
    problems: list[Problem] = []
    tunnel = data.streams.get("tunnel")
    if tunnel is not None:
        file = str(tunnel.attrs.get("file", "tunnel log"))
        if fs is None:
            fs = conditions.free_stream(tunnel, config)
        for r in RANGES:
            values = (tunnel[r.name] if r.name in tunnel else fs[r.name]).to_numpy()
            bad = _outside(values, r.low, r.high)
            if bad.any():
                first = int(np.argmax(bad))
                found = f"{values[first]:.4g} {r.unit} ({int(bad.sum())} of {bad.size} samples)"
                column = r.name if r.name in tunnel else None
                problems.append(_problem(file, first, column, r.what, found, r.hint))
    limit = config.model.max_spin_rate
    if limit is not None:
        # Every stream that measures the spin is judged: one reading too fast is wrong either way.
        for stream, ds in data.streams.items():
            if "speed" not in ds and "angle" not in ds:
                continue
            t, omega, source = conditions.spin_rate({stream: ds})
            bad = _outside(np.abs(omega), 0.0, limit)
            if bad.any():
                first = int(np.argmax(bad))
                row = int(np.searchsorted(ds["time"].to_numpy(), t[first]))
                problems.append(
                    _problem(
                        str(ds.attrs.get("file", stream)),
                        row,
                        "speed" if source == "tachometer" else "angle",
                        f"a spin rate within the model's rated {limit * RPM_PER_RAD_S:.0f} rpm "
                        "([model] max_spin_rate)",
                        f"{abs(omega[first]) * RPM_PER_RAD_S:.0f} rpm from the {source}",
                        "Check the unit of the spin column (rpm against rad/s or Hz) and the "
                        "rated limit; never exceed a model's rating (facility safety rules).",
                    )
                )
    return problems


def campaign_problems(campaign) -> list[Problem]:
    """:func:`run_problems` of every run whose logs parse, each problem once (``check``).

    Runs whose own inputs already have problems are left to those problems.
    """
    found: dict[Problem, None] = {}
    for run_id, spec in campaign.runs.items():
        if campaign.run_problems(run_id) or not spec.logs:
            continue
        try:
            data = campaign.load_run(run_id)
            found.update(dict.fromkeys(run_problems(campaign.config, data)))
        except TunnelredError:
            continue  # reported by the campaign itself, or by reduce with its reason
    return list(found)
