"""campaign.toml → frozen, validated configuration objects.

Every quantity is held in SI units (angles in degrees, relative humidity as a fraction 0–1).
The schema is documented key by key in docs/input-format.md; this package is its one home:
objects.py holds the dataclasses, reader.py the `Reader` that collects problems with their line
and key, tables.py and instruments.py the reader of each table, and ``load_config`` here puts
them together. Every public name stays importable from ``tunnelred.inputs.config``.
"""

from __future__ import annotations

import hashlib
import re
import tomllib
from dataclasses import replace
from pathlib import Path

from tunnelred.common.errors import Problem, bounded
from tunnelred.inputs.config.instruments import read_instruments, read_taps
from tunnelred.inputs.config.objects import (
    LOAD_NAMES,
    MAX_CP_BINS,
    MIN_CP_BINS,
    TARE_EXTRAPOLATION,
    BalanceConfig,
    Calibration,
    CampaignConfig,
    CampaignInfo,
    Configuration,
    InstrumentsConfig,
    ModelConfig,
    ReductionConfig,
    ReportInfo,
    RevisionEntry,
    TapConfig,
    Tolerances,
    TunnelConfig,
)
from tunnelred.inputs.config.reader import TABLE_KEYS, Reader
from tunnelred.inputs.config.tables import (
    read_configurations,
    read_model,
    read_reduction,
    read_report,
    read_tunnel,
)
from tunnelred.inputs.files import (
    MAX_CONFIG_BYTES,
    Refusal,
    read_regular,
)
from tunnelred.inputs.methods import BLOCKAGE_METHODS
from tunnelred.inputs.streams import Q_SOURCES

__all__ = [
    "CampaignInfo",
    "ReportInfo",
    "RevisionEntry",
    "Calibration",
    "TunnelConfig",
    "ModelConfig",
    "Configuration",
    "BalanceConfig",
    "InstrumentsConfig",
    "TapConfig",
    "Tolerances",
    "ReductionConfig",
    "CampaignConfig",
    "BLOCKAGE_METHODS",
    "LOAD_NAMES",
    "Q_SOURCES",
    "TARE_EXTRAPOLATION",
    "MIN_CP_BINS",
    "MAX_CP_BINS",
    "load_config",
]

_TOP = (
    "campaign",
    "report",
    "tunnel",
    "model",
    "configurations",
    "instruments",
    "taps",
    "reduction",
)


def load_config(path) -> tuple[CampaignConfig | None, list[Problem]]:
    """Read and validate campaign.toml.

    Every problem in the file is collected, not only the first.

    Parameters
    ----------
    path : str or Path
        The campaign.toml file (opened read-only).

    Returns
    -------
    config : CampaignConfig or None
        None when the file cannot be read, is not valid TOML, or a required value is missing or
        invalid. When only optional values are invalid, the configuration is built with their
        documented defaults in their place, so that the logs can still be checked against it;
        the problems are returned all the same, and a campaign treats them as concerning every
        run.
    problems : list of Problem
        Each with the file, the line of the key (where it can be found) and the dotted key.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (folder / "campaign.toml").write_text('''
    ... [campaign]
    ... title = "Demo"
    ... facility = "Tunnel 1"
    ... [tunnel]
    ... height = "1.2 m"
    ... width = 0.9
    ... [model]
    ... diameter = "110 mm"
    ... span = 0.9
    ... [configurations.A]
    ... ''')
    >>> config, problems = load_config(folder / "campaign.toml")
    >>> config.model.diameter, problems
    (0.11, [])
    """
    path = Path(path)
    file = path.name
    raw_bytes = read_regular(path, MAX_CONFIG_BYTES, name=file)
    if isinstance(raw_bytes, Refusal):
        hint = raw_bytes.hint
        if raw_bytes.expected == "an existing file":
            hint = "Each campaign folder needs a campaign.toml."
        return None, [Problem(file, None, None, raw_bytes.expected, raw_bytes.found, hint)]
    try:
        text = raw_bytes.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = raw_bytes[: exc.start].count(b"\n") + 1
        return None, [
            Problem(
                file,
                line,
                None,
                "UTF-8 text",
                f"byte 0x{raw_bytes[exc.start]:02x} at offset {exc.start}",
                "Save campaign.toml as UTF-8.",
            )
        ]
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        match = re.search(r"line (\d+)", str(exc))
        return None, [
            Problem(
                file,
                int(match.group(1)) if match else None,
                None,
                "valid TOML",
                str(exc),
                "Fix the TOML syntax there.",
            )
        ]
    except RecursionError:
        return None, [
            Problem(
                file,
                None,
                None,
                "TOML nested a few levels deep",
                "arrays or tables nested too deeply to read",
                "Check for unbalanced brackets or braces.",
            )
        ]
    except ValueError as exc:  # an integer longer than Python converts (4300 digits)
        return None, [
            Problem(file, None, None, "numbers of ordinary size", str(exc), "Check the numbers.")
        ]
    r = Reader(file, text)
    for key in data:
        if key not in _TOP:
            r.problem(key, f"a table of {', '.join(_TOP)}", repr(key), "Check the spelling.")
    config = _build(r, data, path.parent)
    if r.fatal or config is None:
        return None, bounded(r.problems)
    return _replace_sha(config, hashlib.sha256(raw_bytes).hexdigest()), bounded(r.problems)


def _replace_sha(config: CampaignConfig, sha: str) -> CampaignConfig:
    return replace(config, sha256=sha)


def _build(r: Reader, data: dict, root: Path) -> CampaignConfig | None:
    t = r.table(data, "campaign", "campaign", TABLE_KEYS["campaign"], required=True)
    nonempty = (lambda v: bool(v.strip()), "a non-empty string")
    info = CampaignInfo(
        title=r.get(t, "campaign", "title", "str", check=nonempty),
        facility=r.get(t, "campaign", "facility", "str", check=nonempty),
        date=r.get(t, "campaign", "date", "str", ""),
        notes=r.get(t, "campaign", "notes", "str", ""),
    )
    tunnel = read_tunnel(r, data)
    model = read_model(r, data, tunnel, root)
    configurations = read_configurations(r, data, model)
    instruments = read_instruments(r, data, root)
    taps = read_taps(r, data)
    reduction = read_reduction(r, data, model)
    report = read_report(r, data)
    if r.fatal:
        return None
    return CampaignConfig(
        info,
        tunnel,
        model,
        configurations,
        instruments,
        taps,
        reduction,
        report=report,
        notices=tuple(r.notices),
    )
