"""Run-quality flags: each check compares a measured value with a tolerance from campaign.toml.

A flag never deletes a run; it travels with it into the results and the report.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["Flag", "FLAG_NAMES"]

#: Every flag kind, in the order the report lists them (docs/results.md).
FLAG_NAMES = (
    "spin_scatter",
    "spin_drift",
    "speed_drift",
    "temperature_drift",
    "zero_shift",
    "tare_extrapolated",
    "overload",
    "dead_tap",
    "stream_overlap",
    "few_revolutions",
    "cl_disagreement",
    "repeat_disagreement",
    "stagnation_cp",
)


@dataclass(frozen=True)
class Flag:
    """A raised flag: its kind, the measured value, the tolerance it broke, and why it matters."""

    name: str
    value: float
    tolerance: float
    reason: str

    def __str__(self) -> str:
        return f"{self.name}: {self.reason}"
