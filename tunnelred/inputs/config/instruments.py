"""The readers of campaign.toml's [instruments] (with [instruments.balance] and its calibration
file) and [[taps]] tables.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

from tunnelred.common.errors import brief
from tunnelred.inputs.calibration import read_calibration_text
from tunnelred.inputs.config.objects import (
    BalanceConfig,
    Calibration,
    InstrumentsConfig,
    TapConfig,
)
from tunnelred.inputs.config.reader import (
    COLUMN_NAME,
    FRACTION,
    NON_NEGATIVE,
    POSITIVE,
    TABLE_KEYS,
    Reader,
    campaign_file,
)
from tunnelred.inputs.streams import RESERVED_COLUMNS


def read_instruments(r: Reader, data: dict, root: Path) -> InstrumentsConfig:
    p = "instruments"
    names = (
        "balance",
        "scanner",
        "pitot",
        "thermometer",
        "barometer",
        "hygrometer",
        "tachometer",
        "encoder",
    )
    t = r.table(data, p, p, names)
    sub = {n: r.table(t, n, f"{p}.{n}", TABLE_KEYS[n]) for n in names}

    def u(name, key, kind, check=NON_NEGATIVE):
        return r.get(sub[name], f"{p}.{name}", key, kind, 0.0, check)

    return InstrumentsConfig(
        balance=_balance(r, t, root) if isinstance(t.get("balance"), dict) else None,
        scanner_full_scale=r.get(
            sub["scanner"], f"{p}.scanner", "full_scale", "pressure", None, POSITIVE
        ),
        u_scanner=u("scanner", "u", "pressure"),
        u_pitot=u("pitot", "u", "pressure"),
        u_pitot_relative=u("pitot", "u_relative", "fraction"),
        u_thermometer=u("thermometer", "u", "temperature_difference"),
        u_barometer=u("barometer", "u", "pressure"),
        u_hygrometer=u("hygrometer", "u", "fraction", FRACTION),
        u_tachometer_relative=u("tachometer", "u_relative", "fraction"),
        u_encoder=u("encoder", "u", "angle"),
        calibrations=_calibrations(r, sub),
    )


def _calibrations(r: Reader, tables: dict[str, dict]) -> dict[str, Calibration]:
    """Calibration reference and date of each [instruments.NAME] table that gives one."""
    out = {}
    for name, t in tables.items():
        path = f"instruments.{name}"
        reference = r.get(t, path, "calibration_reference", "str", "")
        when = t.get("calibration_date", "")
        if not isinstance(when, str):  # a bare TOML date (2026-01-15) reads as a date object
            when = str(when)
        if reference or when:
            out[name] = Calibration(reference, when)
    return out


def _balance(r: Reader, instruments: dict, root: Path) -> BalanceConfig | None:
    p = "instruments.balance"
    t = instruments["balance"]
    channels = t.get("channels")
    if "channels" not in t:
        r.problem(
            f"{p}.channels",
            "a list of the balance-log column names",
            "nothing",
            'Add channels = ["N1", "N2", …].',
            fatal=True,
        )
        return None
    if (
        not isinstance(channels, list)
        or not channels
        or not all(isinstance(c, str) and COLUMN_NAME.match(c) for c in channels)
    ):
        r.problem(
            f"{p}.channels",
            "a non-empty list of column names (letters, digits, _ . -)",
            brief(channels),
            fatal=True,
        )
        return None
    if len(set(channels)) != len(channels):
        r.problem(f"{p}.channels", "each channel once", brief(channels), fatal=True)
    for c in channels:
        if c in RESERVED_COLUMNS:
            r.problem(
                f"{p}.channels",
                f"names other than {', '.join(RESERVED_COLUMNS)}",
                repr(c),
                "Those columns have a fixed meaning.",
                fatal=True,
            )
    n = len(channels)
    calibration = _calibration_file(r, t, p, root, channels)
    second = None
    if calibration is not None:
        matrix, second = calibration.matrix, calibration.second_order
    elif t.get("calibration_file", "") != "":
        matrix = None  # the file's problems are reported
    else:
        matrix = _required_array(r, t, p, "matrix", (3, n))
    if "second_order" in t and calibration is None:
        second = r.matrix(t["second_order"], f"{p}.second_order", (3, n * (n + 1) // 2), fatal=True)
    if "full_scale" not in t:
        r.problem(f"{p}.full_scale", "3 loads: Fx, Fy [force], Mz [torque]", "nothing", fatal=True)
        full_scale = None
    else:
        full_scale = r.numbers(
            t["full_scale"], f"{p}.full_scale", ("force", "force", "torque"), fatal=True
        )
        if full_scale is not None and min(full_scale) <= 0:
            r.problem(f"{p}.full_scale", "3 positive loads", repr(t["full_scale"]), fatal=True)
            full_scale = None
    u_fs = (0.0005, 0.0005, 0.0005)
    if "u_fraction_of_full_scale" in t:
        got = r.numbers(
            t["u_fraction_of_full_scale"],
            f"{p}.u_fraction_of_full_scale",
            ("fraction",) * 3,
            fatal=False,
        )
        if got is not None and min(got) < 0:
            r.problem(f"{p}.u_fraction_of_full_scale", "3 values of zero or more", repr(got))
        elif got is not None:
            u_fs = got
    if None in (matrix, full_scale) or any(not math.isfinite(v) for row in matrix for v in row):
        return None
    return BalanceConfig(
        channels=tuple(channels),
        matrix=matrix,
        full_scale=full_scale,
        second_order=second,
        u_fraction_of_full_scale=u_fs,
        u_matrix_relative=r.get(t, p, "u_matrix_relative", "fraction", 0.0, NON_NEGATIVE),
        alignment_angle=r.get(t, p, "alignment_angle", "angle", 0.0),
        u_alignment_angle=r.get(t, p, "u_alignment_angle", "angle", 0.0, NON_NEGATIVE),
        calibration_file=calibration.file if calibration is not None else "",
        calibration_sha256=calibration.sha256 if calibration is not None else "",
        coefficient_covariance=calibration.covariance if calibration is not None else None,
    )


@dataclass(frozen=True)
class _FileCalibration:
    file: str
    matrix: tuple
    second_order: tuple | None
    covariance: tuple | None
    sha256: str


def _calibration_file(r: Reader, t: dict, p: str, root: Path, channels) -> _FileCalibration | None:
    """The calibration ``calibration_file`` names (inputs.calibration), or None if not given."""
    if t.get("calibration_file", "") == "":  # absent, or the template's empty default
        return None
    for key in ("matrix", "second_order"):
        if key in t:
            r.problem(f"{p}.{key}", f"no {key} beside calibration_file", "both",
                      "Give the calibration in one place: the file or campaign.toml.",
                      fatal=True)  # fmt: skip
    found = campaign_file(r, t, p, "calibration_file", root, fatal=True)
    if found is None:
        return None
    rel, raw = found
    table, problems = read_calibration_text(raw, channels, rel)
    r.problems.extend(problems)
    if table is None:
        r.fatal = True
        return None
    if table.covariance is not None and t.get("u_matrix_relative"):
        r.problem(f"{p}.u_matrix_relative", "no u_matrix_relative beside a covariance",
                  repr(t["u_matrix_relative"]),
                  f"{rel} gives the coefficients' covariance, propagated in its place; "
                  "remove u_matrix_relative (the simple option without a file).")  # fmt: skip
    return _FileCalibration(rel, table.matrix, table.second_order, table.covariance, table.sha256)


def _required_array(r: Reader, t: dict, p: str, key: str, shape):
    if key not in t:
        r.problem(f"{p}.{key}", f"a {shape[0]} × {shape[1]} array", "nothing", fatal=True)
        return None
    return r.matrix(t[key], f"{p}.{key}", shape, fatal=True)


def read_taps(r: Reader, data: dict) -> tuple[TapConfig, ...]:
    raw = data.get("taps", [])
    if not isinstance(raw, list) or not all(isinstance(t, dict) for t in raw):
        r.problem("taps", "[[taps]] tables", brief(raw), fatal=True)
        return ()
    taps, seen = [], set()
    for i, t in enumerate(raw):
        path = f"taps[{i}]"
        r.check_keys(t, path, TABLE_KEYS["tap"])
        name = r.get(t, path, "name", "str")
        if name is None:
            continue
        if not COLUMN_NAME.match(name) or name in RESERVED_COLUMNS:
            r.problem(
                f"{path}.name",
                "a column name (letters, digits, _ . -) not reserved",
                brief(name),
                fatal=True,
            )
        if name in seen:
            r.problem(f"{path}.name", "each tap name once", brief(name), fatal=True)
        seen.add(name)
        taps.append(
            TapConfig(
                name=name,
                azimuth=r.get(t, path, "azimuth", "angle", 0.0),
                tubing_delay=r.get(t, path, "tubing_delay", "time", 0.0, NON_NEGATIVE),
                u_azimuth=r.get(t, path, "u_azimuth", "angle", 0.0, NON_NEGATIVE),
                u_tubing_delay=r.get(t, path, "u_tubing_delay", "time", 0.0, NON_NEGATIVE),
            )
        )
    return tuple(taps)
