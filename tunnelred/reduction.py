"""One run end to end: conditions, balance, pressure, corrections, uncertainty and flags."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .quality import Flag

__all__ = ["RunResult"]


@dataclass
class RunResult:
    """Everything reduced from one data run.

    ``values`` holds the per-run scalars (and the few strings: ``config``, ``start``,
    ``dead_taps``) named as in docs/results.md, including ``u_X`` and ``X_uncorrected``.
    ``profiles`` holds arrays on ``theta`` (``Cp``, ``u_Cp``, ``Cp_uncorrected``, ``Cp_count``,
    ``Cp_ideal``); both are empty of pressure entries for a run without a pressure log.
    ``inputs`` maps every file the run used (its own logs and those of its zero and tare runs,
    relative to the campaign folder) to its SHA-256.
    """

    run: str
    config: str
    values: dict[str, float | str]
    theta: np.ndarray | None = None
    profiles: dict[str, np.ndarray] = field(default_factory=dict)
    flags: tuple[Flag, ...] = ()
    budgets: pd.DataFrame | None = None
    inputs: dict[str, str] = field(default_factory=dict)
