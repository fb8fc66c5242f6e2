"""The campaign folder → validated runs and their logs as xarray Datasets in SI units.

:func:`open_campaign` reads campaign.toml and runs.csv and checks every reference between them
and the logs; :meth:`Campaign.load_run` parses one run's logs with :mod:`tunnelred.inputs.logs`. The
schema enforced here is docs/input-format.md. Every problem is collected (never only the first)
as a :class:`~tunnelred.common.errors.Problem`.

The package's modules: :mod:`~tunnelred.inputs.readers.objects` (the holders),
:mod:`~tunnelred.inputs.readers.runs` (runs.csv read into rows),
:mod:`~tunnelred.inputs.readers.rows` (rows → checked RunSpecs and the checks between runs);
this module holds :class:`Campaign` and :func:`open_campaign`. Every public name stays importable
from ``tunnelred.inputs.readers``.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path

import xarray as xr

from tunnelred.common.errors import InputError, Problem, bounded
from tunnelred.inputs.config import CampaignConfig, load_config
from tunnelred.inputs.files import MAX_LOG_BYTES, Refusal, inside_campaign, read_regular
from tunnelred.inputs.logs import (
    LogInfo,
    _parse_log,
    _read_header,
    log_columns,
    read_log,
    split_line,
    stream_hints,
)
from tunnelred.inputs.readers.objects import KINDS, STREAMS, FileHashes, RunData, RunSpec
from tunnelred.inputs.readers.rows import build_runs, run_closure
from tunnelred.inputs.readers.runs import (
    column_unit,
    log_cells,
    optional_unit,
    read_runs,
    run_lists,
    runs_header,
    runs_records,
)
from tunnelred.inputs.streams import STREAMS as STREAM_SPECS
from tunnelred.inputs.units import parse_header

__all__ = [
    "STREAMS",
    "KINDS",
    "RunSpec",
    "RunData",
    "LogInfo",
    "Campaign",
    "open_campaign",
    "read_log",
    "log_columns",
    "column_unit",
    "optional_unit",
    "runs_records",
    "runs_header",
    "run_lists",
    "log_cells",
    "run_closure",
]

# ---------------------------------------------------------------------------------------------
# The campaign


@dataclass(repr=False)
class Campaign:
    """An opened campaign folder: its configuration, its runs and every problem found.

    ``problems`` holds all problems; :meth:`run_problems` those that stop one run.
    ``file_hashes`` maps each input's relative path to its SHA-256. ``log_info`` holds what the
    full parse of each log found (filled by ``check_logs=True`` and by :meth:`load_run`).
    ``unreadable_runs`` lists runs.csv ids whose row was too broken to become a RunSpec.
    """

    root: Path
    config: CampaignConfig
    runs: dict[str, RunSpec]
    problems: list[Problem]
    file_hashes: Mapping[str, str]
    log_info: dict[str, LogInfo] = field(default_factory=dict)
    unreadable_runs: tuple[str, ...] = ()
    _global: list[Problem] = field(default_factory=list)
    _by_run: dict[str, list[Problem]] = field(default_factory=dict)
    _by_file: dict[str, list[Problem]] = field(default_factory=dict)
    _columns: dict[str, tuple[dict, dict, dict, str]] = field(default_factory=dict)

    @property
    def notices(self) -> tuple[Problem, ...]:
        """Things campaign.toml made config decide that stop no run (a substituted method)."""
        return self.config.notices if self.config is not None else ()

    # -- lists of runs
    def data_runs(self) -> list[RunSpec]:
        return [r for r in self.runs.values() if r.kind == "data"]

    def zero_runs(self) -> list[RunSpec]:
        return [r for r in self.runs.values() if r.kind == "zero"]

    def tare_runs(self) -> list[RunSpec]:
        return [r for r in self.runs.values() if r.kind == "tare"]

    def dependencies(self, run_id: str) -> list[str]:
        """The run and every run its reduction reads (:attr:`RunSpec.uses`, transitively)."""
        return run_closure(run_id, lambda rid: self.runs[rid].uses if rid in self.runs else ())

    def shared_problems(self) -> list[Problem]:
        """Problems that stop every run: those of campaign.toml and of runs.csv as a whole."""
        return list(self._global)

    def run_problems(self, run_id: str) -> list[Problem]:
        """Problems that keep ``run_id`` from being reduced.

        Those of campaign.toml and of runs.csv as a whole, of the run's row and logs, and of the
        rows and logs of the zero and tare runs it uses.
        """
        if run_id not in self.runs and run_id not in self._by_run:
            raise KeyError(f"runs.csv has no run {run_id!r}")
        found = list(self._global)
        for rid in self.dependencies(run_id):
            found += self._by_run.get(rid, [])
            spec = self.runs.get(rid)
            for rel in spec.logs.values() if spec else ():
                found += self._by_file.get(rel, [])
        return list(dict.fromkeys(found))

    def _parse_file(self, rel: str):
        required, optional, hints, stream = self._columns[rel]
        ds, problems, info, sha = _parse_log(
            self.root / rel, rel, required, optional, hints, stream
        )
        if sha:
            self.file_hashes._set(rel, sha)
        new = [p for p in problems if p not in self._by_file.get(rel, [])]
        self._by_file[rel] = list(dict.fromkeys(self._by_file.get(rel, []) + problems))
        self.problems += new
        if info is not None:
            self.log_info[rel] = info
        return ds

    def load_run(self, run_id: str) -> RunData:
        """Parse and validate one run's logs.

        Raises
        ------
        InputError
            Listing every problem of the run (see :meth:`run_problems`), including those of its
            logs found now.
        KeyError
            When runs.csv has no such run.
        """
        spec = self.runs.get(run_id)
        if spec is None:
            if run_id in self._by_run:
                raise InputError(self.run_problems(run_id))
            raise KeyError(f"runs.csv has no run {run_id!r}")
        known = self.run_problems(run_id)
        if known:
            raise InputError(known)
        datasets: dict[str, xr.Dataset] = {}
        for rel in dict.fromkeys(spec.logs.values()):
            ds = self._parse_file(rel)
            if ds is not None:
                datasets[rel] = ds
        problems = self.run_problems(run_id)
        if problems:
            raise InputError(problems)
        streams = {}
        for stream, rel in spec.logs.items():
            ds = datasets[rel]
            required, optional = log_columns(self.config, stream, spinning=True)
            names = [n for n in ds.data_vars if n in required or n in optional]
            part = ds[names]
            part.attrs = dict(ds.attrs, stream=stream)
            streams[stream] = part
        return RunData(spec, streams)

    # -- display
    def __repr__(self) -> str:
        kinds = ", ".join(
            f"{len([r for r in self.runs.values() if r.kind == k])} {k}" for k in KINDS
        )
        title = self.config.campaign.title if self.config else "?"
        return (
            f"<Campaign {title!r} at {self.root}: {len(self.runs)} runs ({kinds}), "
            f"{len(self.problems)} problems>"
        )

    def _repr_html_(self) -> str:
        import html

        labels = sorted({r.config for r in self.runs.values()})
        head = "".join(f"<th>{html.escape(k)}</th>" for k in KINDS)
        body = ""
        for label in labels:
            counts = [
                sum(r.config == label and r.kind == k for r in self.runs.values()) for k in KINDS
            ]
            cells = "".join(f"<td>{n}</td>" for n in counts)
            body += f"<tr><th>{html.escape(label or '(none)')}</th>{cells}</tr>"
        title = html.escape(self.config.campaign.title)
        return (
            f"<p><b>{title}</b> — {html.escape(self.config.campaign.facility)}; "
            f"{len(self.runs)} runs, {len(self.problems)} problems</p>"
            f"<table><tr><th>config</th>{head}</tr>{body}</table>"
        )


# Bytes read for a log's header when its data are left for later (check_logs=False); a header
# longer than this is read in full by the full parse, which judges it.
_HEADER_BYTES = 1 << 16


def _header_names(path: Path) -> set[str]:
    """Base names in a log's first line (for cross-log rules; problems come from the parse)."""
    first = read_regular(path, MAX_LOG_BYTES, head=_HEADER_BYTES)
    if isinstance(first, Refusal):
        return set()
    line = first.splitlines()[0] if first else b""
    cells = split_line(line.decode("utf-8-sig", errors="replace")) or []
    names = set()
    for cell in cells:
        try:
            names.add(parse_header(cell)[0])
        except ValueError:
            continue
    return names


def open_campaign(path, *, check_logs: bool = True, closing_zero_pending: bool = False) -> Campaign:
    """Open a campaign folder: read campaign.toml and runs.csv and check every reference.

    Parameters
    ----------
    path : str or Path
        The campaign folder.
    check_logs : bool
        True: parse every log fully and collect its problems (the data are not kept).
        False: check each log's header row only, so that a large campaign opens quickly; the
        logs' data are checked by :meth:`Campaign.load_run`.
    closing_zero_pending : bool
        For the watch only (``tunnelred reduce`` never sets it): a data run naming two zeros of
        which the one after it has no row yet is opened as *provisional*, with its opening zero
        alone (:attr:`RunSpec.provisional`), instead of failing for the missing zero.

    Returns
    -------
    Campaign

    Raises
    ------
    InputError
        When campaign.toml or runs.csv is unusable as a whole (missing, not parsable, a
        required value or column missing or invalid), listing every problem found in both.
        Otherwise problems are collected in ``Campaign.problems``.

    Examples
    --------
    >>> from tunnelred.inputs.readers import open_campaign
    >>> campaign = open_campaign("sample_runs/broken")  # doctest: +SKIP
    >>> len(campaign.problems) > 0  # doctest: +SKIP
    True
    """
    root = Path(path)
    if not root.is_dir():
        raise InputError(
            Problem(
                str(root),
                None,
                None,
                "a campaign folder",
                "no such folder",
                "Give the folder that holds campaign.toml and runs.csv.",
            )
        )
    # campaign.toml and runs.csv are held to the rules of the logs (inputs.files)
    outside = [
        Problem(name, None, None, found.expected, found.found, found.hint)
        for name in ("campaign.toml", "runs.csv")
        if isinstance(found := inside_campaign(root, name), Refusal)
    ]
    if outside:
        raise InputError(outside)
    config, problems = load_config(root / "campaign.toml")
    config_problems = list(problems)
    rows, units, runs_fatal = read_runs(root / "runs.csv", problems)
    if config is None or runs_fatal:
        raise InputError(bounded(problems))
    # A problem of one runs.csv row stops that run (and those using it), not the campaign.
    global_problems = [p for p in problems if not (p.file == "runs.csv" and (p.line or 1) > 1)]
    runs, by_run, unreadable = build_runs(
        root, rows, units, config, problems, closing_zero_pending=closing_zero_pending
    )
    global_problems = config_problems + [p for p in global_problems if p not in config_problems]

    def stop_all(p: Problem):
        problems.append(p)
        global_problems.append(p)

    used = {s for spec in runs.values() for s in spec.logs}
    for stream_spec in STREAM_SPECS:
        missing = stream_spec.declared(config) if stream_spec.name in used else None
        if missing is not None:
            stop_all(missing)

    files = {}
    for spec in runs.values():
        existing = {s: rel for s, rel in spec.logs.items() if (root / rel).is_file()}
        headers = set().union(*(_header_names(root / rel) for rel in existing.values()))
        spinning = bool(spec.spin_set) if spec.spin_set is not None else "speed" in headers
        for stream, rel in existing.items():
            required, optional = log_columns(config, stream, spinning=spinning)
            prev = files.get(rel)
            if prev is not None:
                required = prev[0] | required
                optional = prev[1] | optional
                hints = prev[2] | stream_hints(stream)
                streams = prev[3] if stream in prev[3].split("+") else f"{prev[3]}+{stream}"
            else:
                hints, streams = stream_hints(stream), stream
            optional = {k: v for k, v in optional.items() if k not in required}
            files[rel] = (required, optional, hints, streams)
    hashes = FileHashes(root, ["campaign.toml", "runs.csv", *files])
    campaign = Campaign(
        root=root,
        config=config,
        runs=runs,
        problems=problems,
        file_hashes=hashes,
        unreadable_runs=tuple(unreadable),
        _global=global_problems,
        _by_run=by_run,
        _columns=files,
    )
    for rel in files:
        if check_logs:
            campaign._parse_file(rel)
        else:
            required, optional, hints, stream = files[rel]
            first = read_regular(root / rel, MAX_LOG_BYTES, name=rel, head=_HEADER_BYTES)
            if isinstance(first, Refusal):
                # unreadable now (permissions, or changed since runs.csv was checked): the
                # runs that use it fail with the reason, the others go on
                found = [Problem(rel, None, None, first.expected, first.found, first.hint)]
            else:
                found = _read_header(first, rel, required, optional, hints).problems
            campaign._by_file[rel] = found
            campaign.problems += found
    campaign.problems = bounded(campaign.problems)
    return campaign
