"""One specification per instrument stream: the one home of what a stream's log is.

Each :class:`StreamSpec` says which runs.csv column names the log, the columns the log must and
may hold (base name → dimension, units.DIMENSIONS), the hints its problems carry, the run kinds
that need it, its column names with a fixed meaning (which no tap or balance channel may take)
and what campaign.toml must declare for it. :mod:`tunnelred.inputs.readers`,
:mod:`tunnelred.inputs.logs`, :mod:`tunnelred.inputs.config` and :mod:`tunnelred.live` read
:data:`STREAMS`; the reduction (:mod:`tunnelred.engine.reduction`) reads the parsed stream by
name from ``RunData.streams``.

This module imports no other tunnelred module but common.errors, so that config may read it.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

from tunnelred.common.errors import Problem

if TYPE_CHECKING:
    from tunnelred.inputs.config import CampaignConfig

__all__ = [
    "StreamSpec",
    "STREAMS",
    "STREAM_NAMES",
    "FIXED_COLUMNS",
    "RESERVED_COLUMNS",
    "stream_spec",
]

#: The tunnel log's column of the dynamic pressure for each [tunnel] q_source.
Q_SOURCES = {"pitot": "dp_pitot", "contraction": "dp_contraction"}

#: Columns any log may hold, with the same meaning in each: time, motor speed, encoder angle.
_SHARED = {"time": "time", "speed": "rotation_rate", "angle": "angle"}


@dataclass(frozen=True)
class StreamSpec:
    """What one instrument stream's log is and which runs need it.

    ``columns(config, spinning)`` gives the (required, optional) columns of its log, base name →
    dimension (None: any unit, as a balance channel's); ``spinning`` is true when the run spins.
    ``fixed`` are its column names with a fixed meaning and dimension. ``hints`` are the hints
    of the log's header problems: by missing column name, ``missing`` for any other missing
    column, ``extra`` for an extra one. ``needed_by`` are the run kinds whose row must name this
    log; a data run must name at least one stream with ``loads`` (the model's loads come from
    it). ``declared(config)`` is the problem of a campaign.toml that lacks what the log needs
    (checked when some run names such a log), or None.
    """

    name: str
    columns: Callable[[CampaignConfig, bool], tuple[dict, dict]]
    fixed: Mapping[str, str] = field(default_factory=lambda: dict(_SHARED))
    hints: Mapping[str, str] = field(default_factory=dict)
    needed_by: tuple[str, ...] = ()
    loads: bool = False
    declared: Callable[[CampaignConfig], Problem | None] = lambda config: None

    @property
    def log_column(self) -> str:
        """The runs.csv column naming the log."""
        return f"{self.name}_log"


def _balance_columns(config: CampaignConfig, spinning: bool) -> tuple[dict, dict]:
    channels = config.instruments.balance.channels if config.instruments.balance else ()
    required = {"time": "time"} | {c: None for c in channels}
    return required, {"speed": _SHARED["speed"], "angle": _SHARED["angle"]}


def _balance_declared(config: CampaignConfig) -> Problem | None:
    if config.instruments.balance is not None:
        return None
    return Problem(
        "campaign.toml",
        None,
        "instruments.balance",
        "an [instruments.balance] table (runs name balance logs)",
        "none",
        "Add the balance channels and calibration matrix.",
    )


def _pressure_columns(config: CampaignConfig, spinning: bool) -> tuple[dict, dict]:
    required = {"time": "time"} | {t.name: "pressure" for t in config.taps}
    optional = {"speed": _SHARED["speed"]}
    # a spinning run's taps are placed by the encoder angle
    (required if spinning else optional)["angle"] = _SHARED["angle"]
    return required, optional


def _pressure_declared(config: CampaignConfig) -> Problem | None:
    if config.taps:
        return None
    return Problem(
        "campaign.toml",
        None,
        "taps",
        "[[taps]] tables (runs name pressure logs)",
        "none",
        "Declare each tap's name and azimuth.",
    )


_TUNNEL_FIXED = {
    "time": "time",
    "dp_pitot": "pressure",
    "dp_contraction": "pressure",
    "T": "temperature",
    "p_baro": "pressure",
    "RH": "fraction",
    "speed": "rotation_rate",
    "angle": "angle",
}


def _tunnel_columns(config: CampaignConfig, spinning: bool) -> tuple[dict, dict]:
    q = Q_SOURCES[config.tunnel.q_source]
    other = next(c for c in Q_SOURCES.values() if c != q)
    required = {c: _TUNNEL_FIXED[c] for c in ("time", q, "T", "p_baro", "RH")}
    optional = {c: _TUNNEL_FIXED[c] for c in (other, "speed", "angle")}
    return required, optional


#: Every stream, in the order runs.csv's columns and `tunnelred check` list them.
STREAMS: tuple[StreamSpec, ...] = (
    StreamSpec(
        name="balance",
        columns=_balance_columns,
        hints={"missing": "Every [instruments.balance] channel needs its column."},
        needed_by=("zero", "tare"),
        loads=True,
        declared=_balance_declared,
    ),
    StreamSpec(
        name="pressure",
        columns=_pressure_columns,
        hints={
            "extra": "A tap column must be declared in campaign.toml [[taps]]; declare it "
            "or remove the column.",
            "missing": "Every [[taps]] entry needs its column in the pressure log.",
            "angle": "A spinning run's pressure log needs the encoder angle to place its taps.",
        },
        loads=True,
        declared=_pressure_declared,
    ),
    StreamSpec(
        name="tunnel",
        columns=_tunnel_columns,
        fixed=_TUNNEL_FIXED,
        needed_by=("data",),
    ),
)

#: The streams' names (the keys of ``RunSpec.logs`` and ``RunData.streams``).
STREAM_NAMES: tuple[str, ...] = tuple(s.name for s in STREAMS)

_BY_NAME = {s.name: s for s in STREAMS}

#: Dimension of every log column with a fixed name, over all streams (see units.DIMENSIONS).
FIXED_COLUMNS: dict[str, str] = {name: dim for s in STREAMS for name, dim in s.fixed.items()}

#: Log columns with a fixed meaning, which a tap or balance channel may not be named.
RESERVED_COLUMNS: tuple[str, ...] = tuple(dict.fromkeys(n for s in STREAMS for n in s.fixed))


def stream_spec(name: str) -> StreamSpec:
    """The specification of the stream ``name``; ValueError for an unknown one."""
    try:
        return _BY_NAME[name]
    except KeyError:
        raise ValueError(f"unknown stream {name!r}") from None
