"""A balance calibration from a CSV file: its coefficients and their covariance.

``[instruments.balance] calibration_file`` names a CSV inside the campaign folder
(docs/input-format.md, "Balance calibration file"). One row a coefficient::

    coefficient,value,Fx:N1,Fx:N2,...          (covariance columns: optional)
    Fx:N1,8.0,1.2e-6,...
    Fx:N1*N2,0.003,...

A coefficient is ``LOAD:TERM``: LOAD one of Fx, Fy, Mz; TERM a channel (linear) or ``A*B`` the
product of two channels (second order). Values are per SI unit of the channel signals, as
campaign.toml's ``matrix``. Every linear coefficient is required; a second-order one left out is
zero. The covariance columns, when present, name the same coefficients in the same order as the
rows: the square, symmetric, positive semi-definite covariance of the coefficients (for a least-
squares calibration fit, σ²(XᵀX)⁻¹), in the coefficients' units squared.

The covariance is returned over the coefficient vector ``c = hstack([matrix, second_order])``
flattened row by row (load by load: its linear terms, then its products in the row-major order
s11, s12, …, s22, … of ``BalanceConfig.second_order``).
"""

from __future__ import annotations

import csv
import hashlib
import io
import math
from dataclasses import dataclass

import numpy as np

from tunnelred.common.errors import Problem

__all__ = ["CalibrationTable", "LOADS", "read_calibration_text", "coefficient_names"]

LOADS = ("Fx", "Fy", "Mz")

_SYMMETRY = 1e-9  # relative asymmetry of the covariance accepted (rounding in the file)


@dataclass(frozen=True)
class CalibrationTable:
    matrix: tuple[tuple[float, ...], ...]  # 3 × n
    second_order: tuple[tuple[float, ...], ...] | None  # 3 × n(n+1)/2, None: no product terms
    covariance: tuple[tuple[float, ...], ...] | None  # K × K over c (module docstring)
    sha256: str


def coefficient_names(channels, *, second_order: bool) -> list[str]:
    """The ids of the coefficient vector c, in its order (``Fx:N1``, …, ``Fx:N1*N1``, …)."""
    n = len(channels)
    terms = list(channels)
    if second_order:
        i, j = np.triu_indices(n)
        terms += [f"{channels[a]}*{channels[b]}" for a, b in zip(i, j, strict=True)]
    return [f"{load}:{term}" for load in LOADS for term in terms]


def _term_key(term: str, channels: list[str]) -> str | None:
    """The canonical term of ``term`` (a product in channel order), or None if unknown."""
    if term in channels:
        return term
    a, sep, b = term.partition("*")
    if not sep or a not in channels or b not in channels:
        return None
    ia, ib = sorted((channels.index(a), channels.index(b)))
    return f"{channels[ia]}*{channels[ib]}"


def read_calibration_text(
    raw: bytes, channels, file: str
) -> tuple[CalibrationTable | None, list[Problem]]:
    """Parse a calibration CSV's bytes for the balance ``channels``; problems name file and line."""
    channels = list(channels)
    problems: list[Problem] = []

    def bad(line, column, expected, found, hint=""):
        problems.append(Problem(file, line, column, expected, found, hint))

    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        bad(None, None, "UTF-8 text", f"byte 0x{raw[exc.start]:02x} at offset {exc.start}")
        return None, problems
    rows = [
        (number, row)
        for number, row in enumerate(csv.reader(io.StringIO(text)), start=1)
        if row and any(c.strip() for c in row) and not row[0].lstrip().startswith("#")
    ]
    if not rows:
        bad(None, None, "a header row 'coefficient,value[,covariance columns]'", "an empty file")
        return None, problems
    header_line, header = rows[0]
    header = [c.strip() for c in header]
    if header[:2] != ["coefficient", "value"]:
        bad(header_line, None, "the header 'coefficient,value' first", repr(",".join(header[:2])))
        return None, problems
    cov_ids = header[2:]
    ids: list[str] = []
    values: dict[str, float] = {}
    cov_rows: list[list[float]] = []
    for line, row in rows[1:]:
        cells = [c.strip() for c in row]
        load, _, term = cells[0].partition(":")
        key = _term_key(term, channels)
        if load not in LOADS or key is None:
            bad(line, "coefficient", f"LOAD:TERM, LOAD one of {', '.join(LOADS)}, TERM a "
                f"channel ({', '.join(channels)}) or a product A*B", repr(cells[0]))  # fmt: skip
            continue
        name = f"{load}:{key}"
        if name in values:
            bad(line, "coefficient", "each coefficient once", repr(cells[0]))
            continue
        if len(cells) != len(header):
            bad(line, None, f"{len(header)} cells as the header", f"{len(cells)}")
            continue
        try:
            numbers = [float(c) for c in cells[1:]]
        except ValueError:
            bad(line, None, "numbers after the coefficient's name", repr(",".join(cells[1:])))
            continue
        if not all(math.isfinite(v) for v in numbers):
            bad(line, None, "finite numbers", repr(",".join(cells[1:])))
            continue
        ids.append(name)
        values[name] = numbers[0]
        cov_rows.append(numbers[1:])
    if problems:
        return None, problems
    missing = [n for n in coefficient_names(channels, second_order=False) if n not in values]
    if missing:
        bad(None, "coefficient", "every linear coefficient (3 loads × the channels)",
            f"none for {', '.join(missing)}", "A zero coefficient is written as 0.")  # fmt: skip
        return None, problems
    has_second = any("*" in n for n in ids)
    order = coefficient_names(channels, second_order=has_second)
    c = np.array([values.get(n, 0.0) for n in order])
    width = len(channels) + (len(channels) * (len(channels) + 1) // 2 if has_second else 0)
    table = c.reshape(3, width)
    matrix = tuple(tuple(map(float, r[: len(channels)])) for r in table)
    second = tuple(tuple(map(float, r[len(channels) :])) for r in table) if has_second else None
    covariance = None
    if cov_ids:
        canonical = []
        for cid in cov_ids:
            load, _, term = cid.partition(":")
            key = _term_key(term, channels)
            canonical.append(f"{load}:{key}" if key is not None else cid)
        if canonical != ids:
            bad(header_line, None, "covariance columns naming the rows' coefficients in the "
                "rows' order", ",".join(cov_ids))  # fmt: skip
            return None, problems
        given = np.array(cov_rows)
        scale = float(np.max(np.abs(given))) or 1.0
        if np.max(np.abs(given - given.T)) > _SYMMETRY * scale:
            bad(None, None, "a symmetric covariance", "cov[i, j] ≠ cov[j, i]")
            return None, problems
        given = 0.5 * (given + given.T)
        if np.linalg.eigvalsh(given)[0] < -_SYMMETRY * scale or np.any(np.diag(given) < 0):
            bad(None, None, "a positive semi-definite covariance", "a negative eigenvalue",
                "A covariance from a least-squares fit is σ²(XᵀX)⁻¹.")  # fmt: skip
            return None, problems
        full = np.zeros((len(order), len(order)))
        where = [order.index(n) for n in ids]
        full[np.ix_(where, where)] = given
        covariance = tuple(tuple(map(float, r)) for r in full)
    return CalibrationTable(matrix, second, covariance, hashlib.sha256(raw).hexdigest()), []
