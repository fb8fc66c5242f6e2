"""A new campaign folder to fill in: ``tunnelred init DEST``.

Writes a commented campaign.toml (every key of inputs.schema with its unit, default and meaning;
the defaults read from the dataclasses of inputs.config, so nothing here repeats them), a
runs.csv with its header and one example row of each run kind, and an operator's run sheet to
print. Required values are left for the user: they are written as comments, so ``tunnelred
check DEST`` lists each one as still to be filled, until it is.
"""

from __future__ import annotations

import csv
import dataclasses
import io
import os
import tempfile
import textwrap
from pathlib import Path

from tunnelred.common.errors import OutputFolderError
from tunnelred.inputs import config as _config
from tunnelred.inputs.readers import KINDS
from tunnelred.inputs.schema import KEYS, TABLES, Key

__all__ = ["TEMPLATE_FILES", "write_template", "campaign_toml_template", "default_text"]

#: The files ``tunnelred init`` writes, relative to DEST.
TEMPLATE_FILES = ("campaign.toml", "runs.csv", "run_sheet.csv")

_RUN_SHEET_ROWS = 40  # blank lines on the printed run sheet


def default_text(key: Key) -> str:
    """The key's default as TOML text, ``"required"``, or what decides it when nothing does."""
    if key.field is None:
        return "none"
    cls_name, attr = key.field.split(".")
    field = {f.name: f for f in dataclasses.fields(getattr(_config, cls_name))}[attr]
    if field.default is not dataclasses.MISSING:
        value = field.default
    elif field.default_factory is not dataclasses.MISSING:
        value = field.default_factory()
    else:
        return "required"
    return _toml(value)


def _toml(value) -> str:
    if value is None:
        return "none"
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return '"' + value.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(value, int | float):
        return repr(value)
    if isinstance(value, tuple | list):
        return "[" + ", ".join(_toml(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{}"
    if dataclasses.is_dataclass(value):
        return "the defaults of its table"
    return repr(value)


def _meaning(key: Key) -> str:
    if key.table == "tolerances":
        return f"flag raised when {key.meaning}"
    if key.meaning:
        return key.meaning
    if key.name.startswith("u_"):
        return f"standard uncertainty (k = 1) of {key.name[2:]}, in its unit"
    return ""


def campaign_toml_template() -> str:
    """campaign.toml with every key commented: unit, default and meaning above each."""
    lines = [
        "# campaign.toml written by `tunnelred init`: fill it in, then run `tunnelred check`.",
        "# Every key is listed with its unit, default and meaning (docs/input-format.md).",
        "# A key left commented out takes its default; a REQUIRED one must be written (remove",
        '# the "#" and give its value). A plain number is SI (m, Pa, K, s, N, N m; angles in',
        '# degrees); a string takes any unit: "110 mm", "0.3 deg", "1013 hPa".',
        "",
    ]
    by_table: dict[str, list[Key]] = {}
    for key in KEYS:
        by_table.setdefault(key.table, []).append(key)
    for table, header in TABLES.items():
        keys = by_table.get(table, [])
        if table == "configuration":
            lines.append(
                "# One table per configuration; its label is what runs.csv's config names."
            )
        if table in ("revision", "tap"):
            # An array table's header alone would make an empty entry, missing its required
            # key: it stays commented out until the first entry is written.
            lines.append("# One such table each: remove the '#' of the header and repeat it.")
            lines.append(f"# {header}")
        else:
            lines.append(header)
        for key in keys:
            if key.unit == "table":
                continue  # a sub-table, written as its own header
            default = default_text(key)
            unit = f" [{key.unit}]" if key.unit else ""
            meaning = _meaning(key)
            text = f"{key.name}{unit}: {meaning}" if meaning else f"{key.name}{unit}"
            lines.extend(textwrap.wrap(text, 98, initial_indent="# ", subsequent_indent="#   "))
            if default == "required":
                lines.append(f"# {key.name} =   # REQUIRED: fill in")
            elif default == "none":
                lines.append(f"# {key.name} =   # optional, no default")
            else:
                lines.append(f"# {key.name} = {default}")
        lines.append("")
    return "\n".join(lines)


def _runs_csv() -> str:
    """runs.csv: the header and one example row of each kind, in the order they are taken."""
    header = ["run", "kind", "config", "start", "balance_log", "pressure_log", "tunnel_log",
              "zero", "tare", "speed_set [m/s]", "spin_set [rpm]", "notes"]  # fmt: skip
    examples = {
        "zero": ["Z001", "zero", "A", "2026-01-01T09:00:00", "logs/Z001_balance.csv", "", "",
                 "", "", "0", "0", "example row (wind off, not spinning): replace"],
        "tare": ["T001", "tare", "A", "2026-01-01T09:05:00", "logs/T001_balance.csv", "", "",
                 "Z001", "", "0", "1000", "example row (wind off, spinning): replace"],
        "data": ["R001", "data", "A", "2026-01-01T09:20:00", "logs/R001_balance.csv",
                 "logs/R001_pressure.csv", "logs/R001_tunnel.csv", "Z001", "T001", "10", "1000",
                 "example row (wind on): replace"],
    }  # fmt: skip
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(header)
    for kind in KINDS:
        writer.writerow(examples[kind])
    return buffer.getvalue()


def _run_sheet_csv() -> str:
    """A sheet for the operator to print and fill in by hand at the tunnel, one line a run."""
    header = ["run", "kind (zero/tare/data)", "config", "set speed [m/s]", "set spin [rpm]",
              "start [hh:mm]", "zero before", "zero after", "logs saved", "operator",
              "remarks"]  # fmt: skip
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(["Run sheet", "campaign:", "", "date:", "", "tunnel:", "", "", "", "page:"])
    writer.writerow(header)
    for _ in range(_RUN_SHEET_ROWS):
        writer.writerow([""] * len(header))
    return buffer.getvalue()


def _write_atomically(path: Path, text: str) -> None:
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    try:
        with os.fdopen(fd, "w", encoding="utf-8", newline="") as stream:
            stream.write(text)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def write_template(dest, *, force: bool = False) -> list[Path]:
    """Write a campaign folder to fill in (TEMPLATE_FILES) into ``dest``.

    Parameters
    ----------
    dest : str or path-like
        The folder; created if absent.
    force : bool
        Write into a folder that already holds something (replacing only TEMPLATE_FILES).

    Returns
    -------
    list of Path
        The files written.

    Raises
    ------
    OutputFolderError
        ``dest`` is a file, or a folder that is not empty while ``force`` is false; nothing
        was written.
    """
    dest = Path(dest)
    if dest.exists() and not dest.is_dir():
        raise OutputFolderError(f"{dest} is a file, not a folder")
    if dest.is_dir() and any(dest.iterdir()) and not force:
        raise OutputFolderError(
            f"{dest} is not empty; choose a new folder, or give --force to write "
            f"{', '.join(TEMPLATE_FILES)} into it (replacing those files only)"
        )
    dest.mkdir(parents=True, exist_ok=True)
    (dest / "logs").mkdir(exist_ok=True)
    texts = {
        "campaign.toml": campaign_toml_template(),
        "runs.csv": _runs_csv(),
        "run_sheet.csv": _run_sheet_csv(),
    }
    written = []
    for name in TEMPLATE_FILES:
        _write_atomically(dest / name, texts[name])
        written.append(dest / name)
    return written
