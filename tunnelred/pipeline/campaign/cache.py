"""The per-run cache: each run's key (over everything its reduction reads) and its .npz entry."""

from __future__ import annotations

import dataclasses
import functools
import hashlib
import json
import os
import stat
import tempfile
from pathlib import Path

import numpy as np
import pandas as pd

from tunnelred import __version__
from tunnelred.engine import quality, reduction
from tunnelred.pipeline.campaign.outcome import _Outcome
from tunnelred.products import store

_CACHE_DIR = ".cache"
_CACHE_SUFFIX = ".npz"


def _row_record(campaign, run_id: str) -> str:
    """A run's runs.csv row, with the hash of each log it names, as JSON text."""
    spec = campaign.runs[run_id]
    record = {f.name: getattr(spec, f.name) for f in dataclasses.fields(spec)}
    record["logs"] = {stream: [rel, campaign.file_hashes[rel]] for stream, rel in spec.logs.items()}
    return json.dumps(record, sort_keys=True, default=str)


def cache_key(campaign, run_id: str, *, monte_carlo: int = 0) -> str:
    """The cache key of one run's reduction: SHA-256 over everything that reduction reads.

    Parameters
    ----------
    campaign : tunnelred.inputs.readers.Campaign
    run_id : str
        A run of ``campaign``.
    monte_carlo : int
        Monte Carlo draws asked for.

    Returns
    -------
    str
        Hex digest over the tunnelred version and its code, the campaign.toml hash, the run's
        runs.csv row and the hashes of its logs, the same for every run it uses (zeros, tares,
        merged pressure runs), and ``monte_carlo``.
    """
    return _key(campaign, run_id, monte_carlo, {})


@functools.lru_cache(maxsize=1)
def _code_digest() -> str:
    """SHA-256 over tunnelred's own modules, so that edited code never reuses stale results."""
    digest = hashlib.sha256()
    package = Path(__file__).resolve().parents[2]  # tunnelred/
    for module in sorted(package.rglob("*.py")):
        digest.update(module.relative_to(package).as_posix().encode() + b"\0" + module.read_bytes())
    return digest.hexdigest()


def _calibration_sha(campaign) -> str:
    """SHA-256 of the balance calibration file, the one input outside campaign.toml and logs."""
    balance = campaign.config.instruments.balance
    return balance.calibration_sha256 if balance is not None else ""


def _key(campaign, run_id: str, monte_carlo: int, rows: dict[str, str]) -> str:
    # ``rows`` holds the row records made so far: zero and tare rows serve many runs.
    for rid in campaign.dependencies(run_id):
        if rid not in rows:
            rows[rid] = _row_record(campaign, rid)
    record = {
        "tunnelred": __version__,
        "code": _code_digest(),
        "config": campaign.config.sha256,
        "calibration": _calibration_sha(campaign),
        "monte_carlo": int(monte_carlo),
        "runs": [rows[rid] for rid in campaign.dependencies(run_id)],
    }
    text = json.dumps(record, sort_keys=True)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


# An entry is an .npz archive read with allow_pickle=False: arrays of numbers and one JSON
# document (``meta``), so that nothing in OUT can make tunnelred run code. Anything that does
# not parse, is not a regular file, is too large or names another key or run is a miss.
_CACHE_FORMAT = 1
_CACHE_MAX_BYTES = 256 * 2**20


def _plain(value):
    """JSON's fallback for numpy scalars and pandas' missing values."""
    if hasattr(value, "item"):
        return value.item()
    if value is pd.NA or value is None:
        return None
    raise TypeError(f"{type(value).__name__} is not cached")


def _entry(key: str, outcome: _Outcome) -> dict[str, np.ndarray]:
    meta: dict = {"format": _CACHE_FORMAT, "key": key, "run": outcome.run}
    meta["failures"] = outcome.failures
    arrays: dict[str, np.ndarray] = {}
    r = outcome.result
    if r is not None:
        record = {
            "run": r.run,
            "config": r.config,
            "values": r.values,
            "flags": [[f.name, f.value, f.tolerance, f.reason] for f in r.flags],
            "inputs": r.inputs,
            "profiles": list(r.profiles),
            "theta": r.theta is not None,
            "budgets": None,
        }
        if r.theta is not None:
            arrays["theta"] = np.asarray(r.theta)
        for i, array in enumerate(r.profiles.values()):
            arrays[f"profile_{i}"] = np.asarray(array)
        if r.budgets is not None:
            columns = []
            for i, name in enumerate(r.budgets.columns):
                column = r.budgets[name]
                if pd.api.types.is_numeric_dtype(column) and not pd.api.types.is_bool_dtype(column):
                    arrays[f"budget_{i}"] = column.to_numpy()
                    columns.append([str(name), None])
                else:
                    columns.append([str(name), column.tolist()])
            record["budgets"] = columns
        meta["result"] = record
    else:
        meta["result"] = None
    text = json.dumps(meta, default=_plain, allow_nan=True)
    arrays["meta"] = np.frombuffer(text.encode("utf-8"), dtype=np.uint8)
    return arrays


def _outcome_from(entry, key: str, run_id: str) -> _Outcome | None:
    meta = json.loads(entry["meta"].tobytes().decode("utf-8"))
    if meta.get("format") != _CACHE_FORMAT or meta.get("key") != key or meta.get("run") != run_id:
        return None
    record = meta["result"]
    if record is None:
        return _Outcome(run_id, failures=list(meta["failures"]))
    budgets = None
    if record["budgets"] is not None:
        budgets = pd.DataFrame(
            {
                name: entry[f"budget_{i}"] if values is None else pd.Series(values, dtype=object)
                for i, (name, values) in enumerate(record["budgets"])
            }
        )
    result = reduction.RunResult(
        run=str(record["run"]),
        config=str(record["config"]),
        values=dict(record["values"]),
        theta=entry["theta"] if record["theta"] else None,
        profiles={name: entry[f"profile_{i}"] for i, name in enumerate(record["profiles"])},
        flags=tuple(
            quality.Flag(str(n), float(v), float(t), str(w)) for n, v, t, w in record["flags"]
        ),
        budgets=budgets,
        inputs={str(k): str(v) for k, v in record["inputs"].items()},
    )
    if result.run != run_id:
        return None
    return _Outcome(run_id, result=result, failures=list(meta["failures"]))


def _cache_read(folder: Path, key: str, run_id: str) -> _Outcome | None:
    path = folder / f"{key}{_CACHE_SUFFIX}"
    try:
        # lstat, not open: a link, FIFO or device planted in the cache is never opened.
        info = os.lstat(path)
        if not stat.S_ISREG(info.st_mode) or info.st_size > _CACHE_MAX_BYTES:
            return None
        with np.load(path, allow_pickle=False) as entry:
            return _outcome_from(entry, key, run_id)
    except Exception:
        # Missing, torn, corrupt or foreign: a miss; the fresh outcome overwrites it.
        return None


def _cache_write(folder: Path, key: str, outcome: _Outcome) -> None:
    """Write one entry: a temporary file renamed into place, not synced (a torn entry is a miss)."""
    try:
        arrays = _entry(key, outcome)
    except (TypeError, ValueError):
        return  # an outcome JSON cannot hold is simply not cached
    target = store.contained(folder, folder / f"{key}{_CACHE_SUFFIX}")
    fd, name = tempfile.mkstemp(dir=folder, prefix=f".{key}.", suffix=".tmp")
    try:
        with os.fdopen(fd, "wb") as handle:
            np.savez(handle, **arrays)
        os.replace(name, target)
    except BaseException:
        Path(name).unlink(missing_ok=True)
        raise


def _cache_prune(folder: Path, keep: set[str]) -> None:
    """Remove every entry not in ``keep``, and anything else found in the cache folder."""
    names = {f"{key}{_CACHE_SUFFIX}" for key in keep}
    for entry in folder.iterdir():
        if entry.name not in names and not entry.is_dir():
            entry.unlink(missing_ok=True)
