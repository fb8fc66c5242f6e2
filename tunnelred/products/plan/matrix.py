"""PLAN.csv: the planned test points, read and checked like runs.csv (file, row, reason).

Columns (docs/plan.md): ``point`` (optional label), ``config``, ``speed_set [unit]``, one of
``spin_ratio`` or ``spin_set [unit]`` per row, ``record [unit]``, and optionally
``tunnel_rate``, ``balance_rate``, ``pressure_rate`` ``[unit]`` (a pressure rate of 0 or blank:
no pressure log at that point).
"""

from __future__ import annotations

import csv
import io
import math
from dataclasses import dataclass
from pathlib import Path

from tunnelred.common.errors import InputError, Problem
from tunnelred.inputs.logs import column_twice, column_unknown
from tunnelred.inputs.readers import column_unit, optional_unit

__all__ = ["PlannedPoint", "read_matrix", "DEFAULT_RATES", "MATRIX_COLUMNS"]

#: Sample rates used where PLAN.csv gives none [Hz] (those of the demo campaign).
DEFAULT_RATES = {"tunnel_rate": 50.0, "balance_rate": 200.0, "pressure_rate": 0.0}

#: Every column PLAN.csv may hold, with its dimension (None: text or a plain number).
MATRIX_COLUMNS = {
    "point": None,
    "config": None,
    "speed_set": "speed",
    "spin_ratio": None,
    "spin_set": "rotation_rate",
    "record": "time",
    "tunnel_rate": "frequency",
    "balance_rate": "frequency",
    "pressure_rate": "frequency",
}
_REQUIRED = ("config", "speed_set", "record")


@dataclass(frozen=True)
class PlannedPoint:
    """One planned test point, SI: speed [m/s], spin [rad/s] or spin ratio [-], record [s]."""

    point: str
    line: int
    config: str
    speed_set: float
    spin_ratio: float | None  # given as a spin ratio, or None
    spin_set: float | None  # given as a spin rate [rad/s], or None
    record: float
    tunnel_rate: float
    balance_rate: float
    pressure_rate: float

    def omega(self, radius: float) -> float:
        """The planned spin rate [rad/s] (from the spin ratio at the set speed if given so)."""
        if self.spin_set is not None:
            return self.spin_set
        return float(self.spin_ratio) * self.speed_set / radius


def read_matrix(path, configurations) -> list[PlannedPoint]:
    """Read PLAN.csv (read-only) into planned points.

    Parameters
    ----------
    path : str or Path
        The matrix file.
    configurations : iterable of str
        The configuration labels campaign.toml defines.

    Returns
    -------
    list of PlannedPoint

    Raises
    ------
    InputError
        Listing every problem found, each with the file, row and column.
    """
    path = Path(path)
    file = path.name
    problems: list[Problem] = []
    try:
        text = path.read_bytes().decode("utf-8-sig")
    except OSError as exc:
        raise InputError(
            Problem(file, None, None, "a readable test matrix", exc.strerror or str(exc))
        ) from None
    except UnicodeDecodeError as exc:
        raise InputError(Problem(file, None, None, "UTF-8 text", str(exc))) from None
    reader = csv.reader(io.StringIO(text, newline=""))
    header = next(reader, None)
    if not header or not any(c.strip() for c in header):
        raise InputError(Problem(file, None, None, "a header row and one row a point", "none"))
    names, units = _header(file, header, problems)
    labels = set(configurations)
    points: list[PlannedPoint] = []
    for cells in reader:
        line = reader.line_num
        if not any(c.strip() for c in cells):
            continue
        if len(cells) != len(names):
            problems.append(Problem(file, line, None, f"{len(names)} fields", str(len(cells))))
            continue
        row = {n: c.strip() for n, c in zip(names, cells, strict=True) if n}
        point = _point(file, line, row, units, labels, len(points) + 1, problems)
        if point is not None:
            points.append(point)
    if not points and not problems:
        problems.append(Problem(file, None, None, "at least one planned point", "no rows"))
    if problems:
        raise InputError(problems)
    return points


def _header(file: str, header: list[str], problems: list[Problem]):
    names, units = [], {}
    for cell in header:
        cell = cell.strip()
        parsed = optional_unit(file, cell, problems)
        if parsed is None:
            names.append("")
            continue
        base, unit = parsed
        if base not in MATRIX_COLUMNS:
            problems.append(column_unknown(file, base, MATRIX_COLUMNS, repr(base)))
            names.append("")
            continue
        if base in names:
            problems.append(column_twice(file, base, f"{base!r} twice"))
        converted = column_unit(file, cell, base, unit, MATRIX_COLUMNS[base], problems)
        if converted is not None:
            units[base] = converted
        names.append(base)
    for name in _REQUIRED:
        if name not in names:
            problems.append(Problem(file, 1, name, f"a column {name!r}", "none", "Add it."))
    if "spin_ratio" not in names and "spin_set" not in names:
        problems.append(
            Problem(file, 1, "spin_ratio", "a column 'spin_ratio' or 'spin_set [rpm]'", "neither")
        )
    if problems:
        raise InputError(problems)
    return names, units


def _point(file, line, row, units, labels, index, problems) -> PlannedPoint | None:
    found = len(problems)

    def number(name: str, *, positive: bool = False, allow_zero: bool = False):
        text = row.get(name, "")
        if text == "":
            return None
        try:
            value = float(text)
        except ValueError:
            problems.append(Problem(file, line, name, "a number", repr(text)))
            return None
        if name in units:
            value = float(units[name](value))
        if not math.isfinite(value) or (
            positive and not (value > 0 or (allow_zero and value == 0))
        ):
            wanted = "a number at least 0" if allow_zero else "a positive number"
            problems.append(Problem(file, line, name, wanted, repr(text)))
            return None
        return value

    config = row.get("config", "")
    if config not in labels:
        problems.append(
            Problem(
                file,
                line,
                "config",
                f"a configuration of campaign.toml ({', '.join(sorted(labels))})",
                repr(config),
            )
        )
    speed = number("speed_set", positive=True)
    if speed is None and row.get("speed_set", "") == "":
        problems.append(Problem(file, line, "speed_set", "a set speed", "an empty cell"))
    record = number("record", positive=True)
    if record is None and row.get("record", "") == "":
        problems.append(Problem(file, line, "record", "a record length", "an empty cell"))
    ratio = number("spin_ratio")
    rate = number("spin_set")
    if (ratio is None) == (rate is None) and len(problems) == found:
        problems.append(
            Problem(
                file,
                line,
                "spin_ratio",
                "a spin ratio or a spin rate (spin_set), exactly one",
                "both" if ratio is not None else "neither",
            )
        )
    rates = {}
    for name, default in DEFAULT_RATES.items():
        value = number(name, positive=True, allow_zero=name == "pressure_rate")
        rates[name] = default if value is None else value
    if len(problems) > found:
        return None
    return PlannedPoint(
        point=row.get("point") or f"P{index:03d}",
        line=line,
        config=config,
        speed_set=float(speed),
        spin_ratio=ratio,
        spin_set=rate,
        record=float(record),
        **rates,
    )
