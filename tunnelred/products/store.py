"""Campaign results in and out: the results Dataset, NetCDF/CSV files, atomic writes, provenance.

:data:`VARIABLES` is the one home of every result name's units and long name (docs/results.md);
``u_<X>``, ``u_<X>_mc`` and ``<X>_uncorrected`` are derived from ``X`` by rule, and the
``flag_<name>`` booleans from :data:`tunnelred.engine.quality.FLAG_NAMES`.

Every file tunnelred writes goes through :func:`atomic_path`: the content is written to a
temporary file in the destination folder, flushed to disk, then renamed over the destination, so a
reader never sees a half-written file, whatever interrupts the writer.
"""

from __future__ import annotations

import functools
import hashlib
import json
import os
import tempfile
from collections.abc import Iterable, Iterator
from contextlib import contextmanager
from datetime import UTC, datetime
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd
import xarray as xr

from tunnelred import __version__
from tunnelred.common.errors import InputError, OutsideError
from tunnelred.engine.quality import FLAG_NAMES, flag_columns

if TYPE_CHECKING:
    from tunnelred.engine.reduction import RunResult

__all__ = [
    "VARIABLES",
    "UNCORRECTED",
    "FAILURE_COLUMNS",
    "BUDGET_COLUMNS",
    "variable_metadata",
    "campaign_methods",
    "results_to_dataset",
    "run_table",
    "write_results",
    "read_results",
    "results_digest",
    "atomic_path",
    "atomic_write_bytes",
    "contained",
    "write_csv",
]

# An empty units string marks a variable that has none (text, booleans): CF gives such variables
# no `units` attribute at all.
_VARIABLES_BASE: dict[str, tuple[str, str]] = {
    "run": ("", "run id from runs.csv"),
    "theta": ("degree", "azimuth bin centre from the windward point, positive with positive spin"),
    "config": ("", "configuration label"),
    "start": ("", "start time of the run (ISO 8601)"),
    "speed_set": ("m s-1", "set tunnel speed"),
    "spin_set": ("rpm", "set spin rate"),
    "T": ("K", "air temperature"),
    "p_baro": ("Pa", "barometric pressure"),
    "RH": ("1", "relative humidity"),
    "rho": ("kg m-3", "air density (CIPM-2007)"),
    "mu": ("Pa s", "dynamic viscosity of air (Sutherland)"),
    "q": ("Pa", "free-stream dynamic pressure"),
    "U": ("m s-1", "free-stream speed"),
    "Re": ("1", "Reynolds number on the diameter"),
    "Mach": ("1", "free-stream Mach number (uncorrected)"),
    "omega": ("rad s-1", "spin rate, positive counter-clockwise seen from +z"),
    "alpha": ("1", "spin ratio omega R / U"),
    "Gamma": ("m2 s-1", "ideal circulation 2 pi omega R^2"),
    "CL": ("1", "lift coefficient from the balance"),
    "CD": ("1", "drag coefficient from the balance"),
    "CM": ("1", "torque coefficient T / (q d b R)"),
    "C_power": ("1", "power coefficient T omega / (q U d b)"),
    "L_D": ("1", "lift-to-drag ratio"),
    "CL_p": ("1", "lift coefficient from the mid-span surface pressure"),
    "CD_p": ("1", "drag coefficient from the mid-span surface pressure"),
    "CL_ideal": ("1", "potential-flow lift coefficient -2 pi alpha"),
    "lift_efficiency": ("1", "CL / CL_ideal"),
    "theta_stag": ("degree", "measured front stagnation azimuth"),
    "theta_stag_ideal": ("degree", "potential-flow front stagnation azimuth"),
    "Cp_max": ("1", "largest surface pressure coefficient"),
    "Cp_min": ("1", "smallest surface pressure coefficient"),
    "theta_Cp_min": ("degree", "azimuth of the smallest surface pressure coefficient"),
    "Cp_base": ("1", "base pressure coefficient, mean over the leeward arc"),
    "eps_solid": ("1", "solid-blockage velocity increment"),
    "eps_wake": ("1", "wake-blockage velocity increment"),
    "delta_CD_buoyancy": ("1", "horizontal-buoyancy drag coefficient removed"),
    "delta_alpha_lift": ("1", "lift-interference change of the spin ratio"),
    "spin_scatter": ("1", "relative standard deviation of the spin ratio over the run"),
    "spin_drift": ("1", "relative change of the spin ratio over the run"),
    "speed_drift": ("1", "relative change of the free-stream speed over the run"),
    "temperature_drift": ("K", "change of the air temperature over the run"),
    "zero_shift": ("1", "pre- to post-run zero difference as a fraction of full scale"),
    "revolutions": ("1", "revolutions during the pressure record"),
    "overload": ("1", "largest balance load as a fraction of its full scale"),
    "stream_overlap": ("1", "fraction of the run that every stream covers"),
    "dead_taps": ("", "taps excluded from the integration, ';'-separated"),
    "corr_CL_alpha": ("1", "correlation coefficient of CL with alpha"),
    "flags": ("", "raised quality flags, ';'-separated"),
    "provisional": ("", "reduced by the watch before the closing zero was in (opening zero only)"),
    "flag_reasons": ("", "why each flag was raised, 'name: reason' separated by ' | '"),
    "Cp": ("1", "surface pressure coefficient, binned in azimuth"),
    "Cp_count": ("1", "samples in the azimuth bin"),
    "Cp_ideal": ("1", "potential-flow surface pressure coefficient 1 - (alpha + 2 sin theta)^2"),
}

#: Every result name → (units, long_name); units "" means the variable has none.
VARIABLES: dict[str, tuple[str, str]] = _VARIABLES_BASE | {
    f"flag_{name}": ("", f"quality flag {name} raised") for name in FLAG_NAMES
}

#: The variables reported wall-corrected (``X``) and before the corrections (``X_uncorrected``).
UNCORRECTED = ("U", "q", "Re", "alpha", "CL", "CD", "CM", "C_power", "L_D", "CL_p", "CD_p", "Cp")

# Wall-corrected values carry the correction methods in a `method` attribute: those with an
# uncorrected twin, and the features computed from corrected ones.
_CORRECTED = frozenset(UNCORRECTED) | {
    "CL_ideal",
    "lift_efficiency",
    "Cp_max",
    "Cp_min",
    "theta_Cp_min",
    "Cp_base",
    "Cp_ideal",
}

_PROFILE_DIMS = ("run", "theta")

#: Columns of failures.csv.
FAILURE_COLUMNS = ("run", "file", "line", "reason")

#: Columns of budgets.csv.
BUDGET_COLUMNS = (
    "run",
    "output",
    "input",
    "value",
    "u",
    "sensitivity",
    "contribution",
    "share",
)

# OWASP "CSV Injection": a cell beginning with one of these is read as a formula by spreadsheets.
_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def _base_name(name: str) -> tuple[str, str]:
    """Split a derived name into (kind, base): kind is "", "u", "u_mc" or "uncorrected"."""
    if name in VARIABLES:
        return "", name
    if name.startswith("u_") and name.endswith("_mc") and _is_numeric(name[2:-3]):
        return "u_mc", name[2:-3]
    if name.startswith("u_") and _is_numeric(name[2:]):
        return "u", name[2:]
    if name.endswith("_uncorrected") and name[: -len("_uncorrected")] in UNCORRECTED:
        return "uncorrected", name[: -len("_uncorrected")]
    raise KeyError(name)


def _is_numeric(name: str) -> bool:
    try:
        return variable_metadata(name)[0] != ""
    except KeyError:
        return False


def variable_metadata(name: str) -> tuple[str, str]:
    """Units and long name of a result variable, including the derived names.

    Parameters
    ----------
    name : str
        A name of docs/results.md: ``CL``, ``u_CL``, ``CL_uncorrected``, ``u_CL_mc``, ``flag_…``.

    Returns
    -------
    units, long_name : str
        CF-style units ("" for a variable without units) and a long name.

    Raises
    ------
    KeyError
        For a name docs/results.md does not define.

    Examples
    --------
    >>> variable_metadata("u_U")
    ('m s-1', 'standard uncertainty (k = 1) of free-stream speed')
    >>> variable_metadata("CD_uncorrected")[1]
    'drag coefficient from the balance, before wall corrections'
    """
    kind, base = _base_name(name)
    units, long_name = VARIABLES[base] if kind in ("", "uncorrected") else variable_metadata(base)
    if kind == "u":
        return units, f"standard uncertainty (k = 1) of {long_name}"
    if kind == "u_mc":
        return units, f"Monte Carlo standard uncertainty (k = 1) of {long_name}"
    if kind == "uncorrected":
        return units, f"{long_name}, before wall corrections"
    return units, long_name


_ORDER = {name: i for i, name in enumerate(VARIABLES)}


def _column_order(name: str) -> tuple:
    """Sort key that keeps results in docs/results.md order, each X followed by its relatives."""
    core = name
    is_u = core.startswith("u_") and core not in VARIABLES
    core = core[2:] if is_u else core
    is_mc = is_u and core.endswith("_mc")
    core = core.removesuffix("_mc") if is_mc else core
    is_uncorrected = core.endswith("_uncorrected")
    core = core.removesuffix("_uncorrected")
    return (_ORDER.get(core, len(_ORDER)), is_uncorrected, is_u, is_mc)


def _is_corrected(name: str) -> bool:
    kind, base = _base_name(name)
    return kind in ("", "u", "u_mc") and base in _CORRECTED


def _method_text(methods: dict) -> str:
    """The `method` attribute of corrected variables: which wall corrections were applied."""
    parts = []
    for key in ("blockage", "maskell_factor", "lift_interference", "buoyancy"):
        if key in methods and methods[key] is not None:
            value = methods[key]
            if isinstance(value, bool):
                value = "on" if value else "off"
            parts.append(f"{key.replace('_', ' ')}: {value}")
    return "; ".join(parts)


def campaign_methods(campaign) -> dict:
    """The correction methods and options of a campaign's [reduction] table, for provenance."""
    red = campaign.config.reduction
    methods = {
        # The method the runs were corrected with (config resolved it once); what campaign.toml
        # asked for is kept beside it only when the two differ.
        "blockage": red.blockage,
        "maskell_factor": red.maskell_factor,
        "lift_interference": red.lift_interference,
        "buoyancy": red.buoyancy,
        "cp_bins": red.cp_bins,
        "base_arc": list(red.base_arc),
        "max_tap_gap": red.max_tap_gap,
        "tare_extrapolation": red.tare_extrapolation,
    }
    if red.blockage_requested != red.blockage:
        methods["blockage_requested"] = red.blockage_requested
    return methods


def _attrs(name: str, method: str) -> dict:
    units, long_name = variable_metadata(name)
    attrs = {"long_name": long_name}
    if units:
        attrs["units"] = units
    if method and _is_corrected(name):
        attrs["method"] = method
    if name.startswith("flag_"):
        # CF flag convention; on disk the boolean is an int8 0/1.
        attrs["flag_values"] = np.array([0, 1], dtype=np.int8)
        attrs["flag_meanings"] = "not_raised raised"
    return attrs


def _theta_grid(results: list[RunResult]) -> np.ndarray | None:
    grids = [np.asarray(r.theta, dtype=float) for r in results if r.theta is not None]
    if not grids:
        return None
    # Runs reduced with the same cp_bins share one grid; rounding keeps float noise from
    # splitting one bin centre into two.
    return np.unique(np.round(np.concatenate(grids), 9))


def results_to_dataset(
    results: list[RunResult], *, campaign=None, methods: dict | None = None
) -> xr.Dataset:
    """Gather the reduced runs into the campaign results Dataset (dims ``run`` and ``theta``).

    Parameters
    ----------
    results : list of RunResult
        The reduced data runs, in the order the rows should take.
    campaign : tunnelred.inputs.readers.Campaign, optional
        Gives the provenance: title, facility, configuration hash, every input file's hash, and
        the correction methods when ``methods`` is not given.
    methods : dict, optional
        Correction methods and options (``blockage``, ``lift_interference``, ``buoyancy``, …),
        recorded as JSON in the ``methods`` attribute and summarised in the ``method`` attribute
        of each wall-corrected variable.

    Returns
    -------
    xarray.Dataset
        Run-level variables on ``run``; profiles (``Cp`` …) on ``run`` × ``theta``, NaN for runs
        without a pressure log (no ``theta`` at all when no run has one). ``flags`` and every
        ``flag_<name>`` are derived from each result's flags. Each variable has CF ``units`` and
        ``long_name`` attributes (:func:`variable_metadata`).

    Raises
    ------
    ValueError
        A result holds a name docs/results.md does not define.
    """
    if methods is None:
        methods = campaign_methods(campaign) if campaign is not None else {}
    method = _method_text(methods)
    runs = np.array([r.run for r in results], dtype=object)

    names: dict[str, None] = {}
    for r in results:
        names.update(dict.fromkeys(r.values))
    derived_names = ("run", "config", "provisional", "flags", "flag_reasons")
    for derived in (*derived_names, *(f"flag_{n}" for n in FLAG_NAMES)):
        names.pop(derived, None)
    names = dict.fromkeys(sorted(names, key=_column_order))
    unknown = [n for n in names if not _known(n)]
    for r in results:
        unknown += [n for n in r.profiles if not _known(n) and n not in unknown]
    if unknown:
        raise ValueError(
            f"result names not defined in docs/results.md: {', '.join(sorted(unknown))}"
        )

    data: dict[str, xr.DataArray] = {}
    data["config"] = xr.DataArray(np.array([r.config for r in results], dtype=object), dims="run")
    for name in names:
        column = [r.values.get(name) for r in results]
        if any(isinstance(v, str) for v in column):
            array = np.array(["" if v is None else str(v) for v in column], dtype=object)
        else:
            array = np.array([np.nan if v is None else v for v in column], dtype=float)
        data[name] = xr.DataArray(array, dims="run")

    # Only the watch reduces before a run's closing zero is in; every other result is final.
    provisional = [bool(r.values.get("provisional", False)) for r in results]
    data["provisional"] = xr.DataArray(np.array(provisional, dtype=bool), dims="run")
    # The flags are rebuilt from the Flag objects: the campaign may have added some to a run.
    flag_rows = [flag_columns(r.flags) for r in results]
    for text in ("flags", "flag_reasons"):
        data[text] = xr.DataArray(np.array([f[text] for f in flag_rows], dtype=object), dims="run")
    for flag in FLAG_NAMES:
        column = np.array([f[f"flag_{flag}"] for f in flag_rows], dtype=bool)
        data[f"flag_{flag}"] = xr.DataArray(column, dims="run")

    coords = {"run": runs}
    theta = _theta_grid(results)
    if theta is not None:
        coords["theta"] = theta
        profile_names = sorted({n for r in results for n in r.profiles}, key=_column_order)
        for name in profile_names:
            block = np.full((len(results), theta.size), np.nan)
            for i, r in enumerate(results):
                if name in r.profiles and r.theta is not None:
                    where = np.searchsorted(theta, np.round(np.asarray(r.theta, float), 9))
                    block[i, where] = r.profiles[name]
            data[name] = xr.DataArray(block, dims=_PROFILE_DIMS)

    ds = xr.Dataset(data, coords=coords)
    for name in ds.variables:
        ds[name].attrs = _attrs(str(name), method)
    ds.attrs = _provenance(results, campaign, methods)
    return ds


def _known(name: str) -> bool:
    try:
        _base_name(name)
    except KeyError:
        return False
    return True


def _provenance(results: list[RunResult], campaign, methods: dict) -> dict:
    if campaign is not None:
        info = campaign.config.campaign
        title, facility = info.title, info.facility
        config_sha256 = campaign.config.sha256
        campaign_path = str(Path(campaign.root).resolve())
        inputs = {}
        for rel in campaign.file_hashes:
            try:
                inputs[rel] = campaign.file_hashes[rel]
            except OSError:
                # A missing or unreadable input is a failed run's problem, reported there.
                inputs[rel] = ""
        balance = campaign.config.instruments.balance
        if balance is not None and balance.calibration_file:
            inputs[balance.calibration_file] = balance.calibration_sha256
    else:
        title = facility = config_sha256 = campaign_path = ""
        inputs = {}
        for r in results:
            inputs.update(r.inputs)
    return {
        "Conventions": "CF-1.10",
        "title": title,
        "facility": facility,
        "tunnelred_version": __version__,
        "config_sha256": config_sha256,
        "campaign_path": campaign_path,
        "input_sha256": json.dumps(dict(sorted(inputs.items()))),
        "methods": json.dumps(methods, sort_keys=True),
        "created": datetime.now(UTC).isoformat(timespec="seconds"),
    }


def run_table(ds: xr.Dataset) -> pd.DataFrame:
    """The run-level variables of a results Dataset as a table, one row a run.

    Parameters
    ----------
    ds : xarray.Dataset
        Campaign results (:func:`results_to_dataset` or :func:`read_results`).

    Returns
    -------
    pandas.DataFrame
        Column ``run`` first, then every variable whose only dimension is ``run`` (no ``Cp``).
    """
    columns = {"run": ds["run"].values.astype(object)}
    for name, var in ds.data_vars.items():
        if var.dims == ("run",):
            values = var.values
            columns[str(name)] = values.astype(object) if values.dtype.kind in "OUS" else values
    return pd.DataFrame(columns)


def _escape_cell(value):
    if isinstance(value, str) and value.startswith(_FORMULA_START):
        return "'" + value
    return value


def write_csv(table: pd.DataFrame, path) -> Path:
    """Write a table as CSV, atomically, its text cells unable to pass for spreadsheet formulas.

    Only text is escaped (OWASP "CSV Injection"): a number such as -0.25 stays a number. The
    rows are streamed to the file in chunks, so a large budget table is never one string.
    """
    table = table.copy()
    for column in table.columns:
        values = table[column]
        if not (pd.api.types.is_numeric_dtype(values) or pd.api.types.is_bool_dtype(values)):
            table[column] = values.map(_escape_cell).astype(object)
    with atomic_path(path) as tmp, open(tmp, "w", encoding="utf-8", newline="") as handle:
        # RFC 4180 line ends (CRLF); they also make the writer quote a cell holding a lone CR or LF.
        table.to_csv(handle, index=False, lineterminator="\r\n", chunksize=1_000)
    return Path(path)


def _with_columns(table: pd.DataFrame | None, columns: tuple[str, ...]) -> pd.DataFrame:
    if table is None:
        table = pd.DataFrame(columns=list(columns))
    extra = [c for c in table.columns if c not in columns]
    return table.reindex(columns=[*columns, *extra])


def _provenance_json(ds: xr.Dataset) -> bytes:
    record = dict(ds.attrs)
    for key in ("input_sha256", "methods"):
        if isinstance(record.get(key), str):
            record[key] = json.loads(record[key])
    return (json.dumps(record, indent=2, default=str) + "\n").encode("utf-8")


def write_results(
    ds: xr.Dataset,
    out_dir,
    *,
    failures: pd.DataFrame | None = None,
    budgets: pd.DataFrame | None = None,
) -> dict[str, Path]:
    """Write the campaign results to a folder, every file atomically.

    Parameters
    ----------
    ds : xarray.Dataset
        Campaign results from :func:`results_to_dataset`.
    out_dir : str or path-like
        The output folder; made if missing.
    failures : pandas.DataFrame, optional
        One row a failed run: run, file, line, reason. failures.csv is always written (header
        only when there are none).
    budgets : pandas.DataFrame, optional
        Uncertainty budgets: run, output, input, value, u, sensitivity, contribution, share.

    Returns
    -------
    dict of str to Path
        File name → path of each file written: results.nc (NetCDF-4), results.csv (one row a
        run, text cells guarded against spreadsheet formulas), provenance.json (the provenance
        of results.csv), failures.csv, budgets.csv.
    """
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    paths = {
        name: out / name
        for name in ("results.nc", "results.csv", "provenance.json", "failures.csv", "budgets.csv")
    }
    with atomic_path(paths["results.nc"]) as tmp:
        try:
            ds.to_netcdf(tmp, engine="netcdf4", format="NETCDF4")
        except RuntimeError as exc:  # the HDF5 library's word for a write that failed
            raise OSError(f"results.nc: {exc}; is the disk full?") from None
    write_csv(run_table(ds), paths["results.csv"])
    atomic_write_bytes(paths["provenance.json"], _provenance_json(ds))
    failures = _with_columns(failures, FAILURE_COLUMNS)
    failures["line"] = failures["line"].astype("Int64")
    write_csv(failures, paths["failures.csv"])
    write_csv(_with_columns(budgets, BUDGET_COLUMNS), paths["budgets.csv"])
    return paths


# Attributes that change with every reduction although the results do not.
_VOLATILE_ATTRS = ("created",)


def results_digest(ds: xr.Dataset, *tables: pd.DataFrame | None) -> str:
    """SHA-256 over the content of a results Dataset (and tables written beside it).

    Every variable and coordinate (name, dims, attributes, values) and the Dataset's attributes
    except the time of writing: two reductions that computed the same numbers from the same inputs
    give the same digest, whether the runs came from the cache or were reduced anew, so their files
    and figures need not be written again. Values are hashed as written: NaN payloads and the sign
    of zero are not results, and text is hashed as text whatever its dtype.
    """
    digest = hashlib.sha256()

    def feed(head: dict, values) -> None:
        digest.update(json.dumps(head, sort_keys=True, default=str).encode() + b"\0")
        values = np.asarray(values)
        if values.dtype.kind in "fc":
            canonical = np.where(np.isnan(values), np.nan, values) + 0.0
            digest.update(np.ascontiguousarray(canonical, dtype=values.dtype).tobytes())
        elif values.dtype.kind in "biu":
            digest.update(np.ascontiguousarray(values).tobytes())
        else:
            digest.update(json.dumps([str(v) for v in values.ravel()]).encode())

    for name in [*sorted(map(str, ds.coords)), *sorted(map(str, ds.data_vars))]:
        array = ds[name]
        feed({"name": name, "dims": list(array.dims), "attrs": array.attrs}, array.values)
    feed({k: v for k, v in ds.attrs.items() if k not in _VOLATILE_ATTRS}, ())
    for table in tables:
        if table is None:
            feed({"table": None}, ())
            continue
        for column in table.columns:
            feed({"column": str(column)}, table[column].to_numpy())
    return digest.hexdigest()


def read_results(out_dir_or_file) -> xr.Dataset:
    """Read campaign results back from results.nc (or the folder that holds it).

    Parameters
    ----------
    out_dir_or_file : str or path-like
        An output folder of :func:`write_results`, or the path of a results.nc.

    Returns
    -------
    xarray.Dataset
        Loaded into memory; the file is closed again.
    """
    path = Path(out_dir_or_file)
    if path.is_dir():
        path = path / "results.nc"
    hint = "Reduce the campaign first (tunnelred reduce CAMPAIGN -o OUT) and give OUT."
    if not path.is_file():
        found = "no results.nc" if path.parent.is_dir() else "no such folder"
        if (path.parent / "campaign.toml").is_file():
            found = "a campaign folder (it holds campaign.toml, not results)"
        raise InputError.single(path.parent, None, None, "a results folder", found, hint)
    try:
        with xr.open_dataset(path, engine="netcdf4") as ds:
            ds = ds.load()
    except (OSError, ValueError, KeyError, TypeError, RuntimeError) as exc:
        raise InputError.single(
            path,
            None,
            None,
            "a NetCDF results file written by tunnelred reduce",
            f"a file that cannot be read as one ({type(exc).__name__}: {exc})",
            "Reduce the campaign again into this folder to rewrite it.",
        ) from None
    return ds


@functools.cache
def _file_mode() -> int:
    # mkstemp makes 0600 files; a results file should get the permissions any new file would.
    umask = os.umask(0)
    os.umask(umask)
    return 0o666 & ~umask


def _fsync_path(path: Path) -> None:
    with open(path, "rb+") as handle:
        os.fsync(handle.fileno())


def fsync_dir(path: Path) -> None:
    """Make a rename inside ``path`` durable (a no-op where the OS cannot sync a folder)."""
    # The rename itself is durable only once the folder is synced; not possible on every OS.
    try:
        fd = os.open(path, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def contained(root, path) -> Path:
    """``path`` with its folder resolved (links followed), checked to lie inside ``root``.

    The one containment test every write into an output folder goes through: a path built from
    names a user wrote (a log path with a link and ``..`` in it, a run id) may point anywhere
    once links are followed, so the check is made on the resolved path, and the resolved path is
    what gets written. The last name is kept as it is, not followed: every write renames a
    finished file into place, which replaces a link there instead of writing through it.

    Raises
    ------
    OutsideError
        ``path`` resolves outside ``root``.

    Examples
    --------
    >>> import tempfile
    >>> root = Path(tempfile.mkdtemp())
    >>> contained(root, root / "a" / ".." / "b.txt") == root.resolve() / "b.txt"
    True
    >>> contained(root, root / ".." / "b.txt")
    Traceback (most recent call last):
    ...
    tunnelred.common.errors.OutsideError: ../b.txt is outside the output folder
    """
    base = Path(os.path.realpath(root))
    path = Path(path)
    resolved = Path(os.path.realpath(path))
    if path.name not in ("", ".", "..") and resolved != base:
        resolved = Path(os.path.realpath(path.parent)) / path.name
    if resolved != base and not resolved.is_relative_to(base):
        try:
            shown = os.path.relpath(resolved, base)
        except ValueError:
            shown = str(resolved)
        raise OutsideError(f"{shown} is outside the output folder")
    return resolved


@contextmanager
def atomic_path(path) -> Iterator[Path]:
    """A temporary path to write to; renamed over ``path`` only if the block completes.

    The temporary file sits in the destination folder (a rename across file systems is not
    atomic), is flushed to disk before the rename, and is removed if the block raises anything,
    KeyboardInterrupt included; the old ``path``, if any, is then left as it was.

    Parameters
    ----------
    path : str or path-like
        The destination file; its folder is made if missing.

    Yields
    ------
    pathlib.Path
        The temporary file (it exists, empty) to write the content to.

    Examples
    --------
    >>> import tempfile
    >>> from pathlib import Path
    >>> folder = Path(tempfile.mkdtemp())
    >>> with atomic_path(folder / "note.txt") as tmp:
    ...     _ = tmp.write_text("done")
    >>> (folder / "note.txt").read_text()
    'done'
    """
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, name = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    os.close(fd)
    tmp = Path(name)
    try:
        yield tmp
        _fsync_path(tmp)
        os.chmod(tmp, _file_mode())
        os.replace(tmp, path)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    fsync_dir(path.parent)


def atomic_write_bytes(path, data: bytes | Iterable[bytes]) -> Path:
    """Write bytes to ``path`` atomically (see :func:`atomic_path`).

    Parameters
    ----------
    path : str or path-like
        The destination file.
    data : bytes or iterable of bytes
        The content, whole or in chunks (a generator is consumed inside the atomic block, so an
        exception it raises leaves the old file intact).

    Returns
    -------
    pathlib.Path

    Examples
    --------
    >>> import tempfile
    >>> from pathlib import Path
    >>> target = Path(tempfile.mkdtemp()) / "a.bin"
    >>> atomic_write_bytes(target, [b"ab", b"cd"]).read_bytes()
    b'abcd'
    """
    path = Path(path)
    chunks = [data] if isinstance(data, bytes | bytearray | memoryview) else data
    with atomic_path(path) as tmp, open(tmp, "wb") as handle:
        for chunk in chunks:
            handle.write(chunk)
    return path
