"""campaign.toml → frozen, validated configuration objects.

Every quantity is held in SI units (angles in degrees, relative humidity as a fraction 0–1).
The schema is documented key by key in docs/input-format.md; this module is its one home.
Parsing and validation (``load_config``) follow the dataclasses.
"""

from __future__ import annotations

import hashlib
import math
import re
import tomllib
from dataclasses import dataclass, field, replace
from pathlib import Path

from tunnelred.common.errors import InputError, Problem, bounded, brief
from tunnelred.inputs.calibration import read_calibration_text
from tunnelred.inputs.files import (
    MAX_CONFIG_BYTES,
    MAX_NAMED_FILE_BYTES,
    Refusal,
    inside_campaign,
    read_regular,
)
from tunnelred.inputs.methods import BLOCKAGE_CHOICES, BLOCKAGE_METHODS, resolve_blockage
from tunnelred.inputs.schema import names_by_table
from tunnelred.inputs.units import parse_quantity

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

#: Loads the balance calibration yields, in this order: [N], [N], [N m].
LOAD_NAMES = ("Fx", "Fy", "Mz")

#: Names accepted for [tunnel] q_source, and the tunnel-log column each one reads.
Q_SOURCES = {"pitot": "dp_pitot", "contraction": "dp_contraction"}

#: Names accepted for [reduction] tare_extrapolation.
TARE_EXTRAPOLATION = ("flag", "refuse")

#: Fewest azimuth bins [reduction] cp_bins accepts (45° bins; fewer cannot resolve Cp(θ)).
MIN_CP_BINS = 8
#: Most azimuth bins it accepts (0.1° bins, finer than any tap layout or encoder resolves); the
#: binned arrays grow with it, and 10⁷ bins took gigabytes.
MAX_CP_BINS = 3600


@dataclass(frozen=True)
class CampaignInfo:
    title: str
    facility: str
    date: str = ""
    notes: str = ""


@dataclass(frozen=True)
class RevisionEntry:
    """One line of the report's revision history."""

    revision: str
    date: str = ""
    change: str = ""


@dataclass(frozen=True)
class ReportInfo:
    """The [report] table: report control and what ISO/IEC 17025:2017 §7.8.2.1 asks a report to
    state. Every field is optional free text; the report prints a blank line where one is empty."""

    number: str = ""  # the report's unique identification
    revision: str = ""
    revision_history: tuple[RevisionEntry, ...] = ()
    client: str = ""
    client_address: str = ""
    prepared_by: str = ""
    checked_by: str = ""
    approved_by: str = ""  # who authorises the report for issue
    date_of_issue: str = ""
    distribution: tuple[str, ...] = ()
    laboratory: str = ""  # the laboratory's name; [campaign] facility when empty
    laboratory_address: str = ""
    location: str = ""  # where the work was done, when not at the laboratory's address
    method: str = ""  # the test method (procedure reference), printed under Procedures
    deviations: str = ""  # additions to, deviations from or exclusions of the method


@dataclass(frozen=True)
class Calibration:
    """An instrument's calibration certificate: its reference and date (free text)."""

    reference: str = ""
    date: str = ""


@dataclass(frozen=True)
class TunnelConfig:
    """The test section. Lengths [m], angles [deg], gradient [Pa/m]."""

    height: float  # wall-to-wall distance across which lift acts (y)
    width: float  # along the cylinder axis (z)
    section: str = "closed"
    u_height: float = 0.0
    u_width: float = 0.0
    flow_angle: float = 0.0  # flow angularity in the x-y plane, positive toward +y [deg]
    u_flow_angle: float = 0.0
    static_pressure_gradient: float = 0.0  # empty-tunnel dp/dx [Pa/m]
    u_static_pressure_gradient: float = 0.0
    q_source: str = "pitot"  # "pitot" | "contraction"
    contraction_factor: float = 1.0  # q_ref = factor * dp_contraction [-]
    u_contraction_factor: float = 0.0


@dataclass(frozen=True)
class ModelConfig:
    """The cylinder. Lengths [m]."""

    diameter: float
    span: float
    u_diameter: float = 0.0
    u_span: float = 0.0
    spans_section: bool = True  # True: wall to wall (2-D); False: 3-D corrections apply
    transducer_radius: float = 0.0  # radius of the pressure transducer on the spinning model
    # the highest spin rate the model and its drive are rated for [rad/s]; None: not stated
    max_spin_rate: float | None = None
    surface: str = ""  # finish of the model's surface, free text
    photo: str = ""  # a photograph of the model: an image file, relative to the campaign folder

    @property
    def radius(self) -> float:
        return self.diameter / 2.0


@dataclass(frozen=True)
class Configuration:
    """One model configuration, named by its label in runs.csv ``config``."""

    label: str
    description: str = ""
    end_plates: bool = False
    end_plate_diameter: float | None = None  # [m]
    # [configurations.LABEL.tolerances]: values that replace [reduction.tolerances] for this
    # configuration's runs (a bare cylinder's end effects, say)
    tolerance_overrides: dict[str, float] = field(default_factory=dict)


@dataclass(frozen=True)
class BalanceConfig:
    """Force balance: loads = matrix · s + second_order · (s_i s_j, i ≤ j), s = signal − zero.

    ``matrix`` is 3 × n (rows Fx [N], Fy [N], Mz [N m]; columns the channels, per SI unit of the
    channel's signal); ``second_order`` is 3 × n(n+1)/2, products in row-major order of i ≤ j.
    A channel already in N or N m is taken with the matrix the identity.
    """

    channels: tuple[str, ...]
    matrix: tuple[tuple[float, ...], ...]
    full_scale: tuple[float, float, float]  # Fx [N], Fy [N], Mz [N m]
    second_order: tuple[tuple[float, ...], ...] | None = None
    u_fraction_of_full_scale: tuple[float, float, float] = (0.0005, 0.0005, 0.0005)
    u_matrix_relative: float = 0.0
    alignment_angle: float = 0.0  # balance x axis relative to tunnel x, positive toward +y [deg]
    u_alignment_angle: float = 0.0
    # From calibration_file (inputs.calibration): the file, the SHA-256 of its bytes (part of
    # every cache key) and the covariance of the coefficients c = hstack([matrix,
    # second_order]) row by row, propagated in place of u_matrix_relative; None: not given.
    calibration_file: str = ""
    calibration_sha256: str = ""
    coefficient_covariance: tuple[tuple[float, ...], ...] | None = None


@dataclass(frozen=True)
class InstrumentsConfig:
    """Type-B standard uncertainties of the instruments (SI; hygrometer as a fraction)."""

    balance: BalanceConfig | None = None
    scanner_full_scale: float | None = None  # [Pa]
    u_scanner: float = 0.0  # [Pa]
    u_pitot: float = 0.0  # [Pa] on dp_pitot or dp_contraction
    u_pitot_relative: float = 0.0  # [-]
    u_thermometer: float = 0.0  # [K]
    u_barometer: float = 0.0  # [Pa]
    u_hygrometer: float = 0.0  # [-]
    u_tachometer_relative: float = 0.0  # [-]
    u_encoder: float = 0.0  # [deg]
    # calibration reference and date of each instrument that states one, by its table's name
    calibrations: dict[str, Calibration] = field(default_factory=dict)


@dataclass(frozen=True)
class TapConfig:
    """A surface pressure tap. ``azimuth`` is its angle from the windward point when the encoder
    reads zero [deg]; ``tubing_delay`` the pneumatic lag of its tubing [s]."""

    name: str
    azimuth: float = 0.0
    tubing_delay: float = 0.0
    u_azimuth: float = 0.0
    u_tubing_delay: float = 0.0


@dataclass(frozen=True)
class Tolerances:
    """Quality-flag tolerances; defaults documented in docs/input-format.md."""

    spin_scatter: float = 0.02  # relative standard deviation of alpha(t) [-]
    spin_drift: float = 0.02  # relative change of alpha over the run [-]
    speed_drift: float = 0.01  # relative change of U over the run [-]
    temperature_drift: float = 0.5  # change of T over the run [K]
    zero_shift: float = 0.002  # pre/post zero difference as a fraction of full scale [-]
    overload: float = 0.9  # fraction of full scale [-]
    dead_tap: float = 0.15  # |Cp_tap - Cp_neighbours| over their overlap [-]
    stream_overlap: float = 0.95  # fraction of the run all streams cover [-]
    min_revolutions: float = 20.0  # for phase binning [-]
    # coverage factor for balance/pressure, repeat and dead-tap agreement [-]: a two-sided
    # normal test at 2.6 raises on 0.93 % of runs whose u is right (2 Phi(-2.6)), inside the
    # 1 % false-flag target (at 2 it would be 4.6 %)
    agreement_k: float = 2.6
    # relative difference between whole-span balance CL and mid-span pressure CL_p that end
    # effects are expected to make, allowed on top of the uncertainty [-]
    cl_agreement: float = 0.0
    stagnation_cp: float = 0.05  # |Cp_max - 1| allowed on alpha = 0 runs [-]
    speed_setpoint: float = 0.1  # |U - speed_set| / speed_set [-]
    spin_setpoint: float = 0.1  # ||rpm| - spin_set| / spin_set [-]


@dataclass(frozen=True)
class ReductionConfig:
    # The method the runs are corrected with, resolved once here (inputs.methods): the one
    # campaign.toml names, or the 3-D method in place of a 2-D one on a model that does not span
    # the section; ``blockage_requested`` keeps what campaign.toml said.
    blockage: str = "allen-vincenti"  # one of BLOCKAGE_METHODS
    blockage_requested: str = "allen-vincenti"
    maskell_factor: float | None = None  # Maskell's blockage factor; None: the method's default
    lift_interference: bool = False
    buoyancy: bool = True
    cp_bins: int = 72
    base_arc: tuple[float, float] = (160.0, 200.0)  # leeward arc for the base Cp [deg]
    max_tap_gap: float = 30.0  # largest azimuth gap integrate_cp accepts [deg]
    tare_extrapolation: str = "flag"  # "flag" | "refuse"
    tolerances: Tolerances = field(default_factory=Tolerances)


@dataclass(frozen=True)
class CampaignConfig:
    campaign: CampaignInfo
    tunnel: TunnelConfig
    model: ModelConfig
    configurations: dict[str, Configuration]
    instruments: InstrumentsConfig
    taps: tuple[TapConfig, ...]
    reduction: ReductionConfig
    report: ReportInfo = field(default_factory=ReportInfo)
    sha256: str = ""  # of campaign.toml's bytes
    # Things worth saying that do not stop a run (a substituted correction method, say).
    notices: tuple[Problem, ...] = ()

    def tolerances_for(self, label: str) -> Tolerances:
        """The tolerances that apply to a configuration's runs."""
        configuration = self.configurations.get(label)
        if configuration is None or not configuration.tolerance_overrides:
            return self.reduction.tolerances
        return replace(self.reduction.tolerances, **configuration.tolerance_overrides)

    def campaign_files(self) -> tuple[str, ...]:
        """The campaign files campaign.toml names besides the logs (relative to the campaign).

        Whatever copies a campaign (the watch's snapshot) copies these with campaign.toml.
        """
        balance = self.instruments.balance
        named = (self.model.photo, balance.calibration_file if balance is not None else "")
        return tuple(name for name in named if name)

    def tap(self, name: str) -> TapConfig:
        for t in self.taps:
            if t.name == name:
                return t
        raise KeyError(name)


# ---------------------------------------------------------------------------------------------
# campaign.toml → CampaignConfig

_REQUIRED = object()
_LABEL = re.compile(r"^[A-Za-z0-9_-]+$")
#: What a tap or balance-channel name may be: it is a CSV column's base name.
COLUMN_NAME = re.compile(r"^[A-Za-z_][A-Za-z0-9_.-]*$")
#: Log columns with a fixed meaning, which a tap or balance channel may not be named.
RESERVED_COLUMNS = ("time", "speed", "angle", "dp_pitot", "dp_contraction", "T", "p_baro", "RH")

_POSITIVE = (lambda v: v > 0, "a positive value")
_NON_NEGATIVE = (lambda v: v >= 0, "a value of zero or more")
_FRACTION = (lambda v: 0 <= v <= 1, "a fraction from 0 to 1")

# kind → how to say it; kinds other than these are units.DIMENSIONS keys.
_PLAIN_KINDS = {"str": "a string", "bool": "true or false", "int": "an integer"}

#: Image files a model photograph may be (by their first bytes, not their name).
_IMAGE_SIGNATURES = {b"\x89PNG\r\n\x1a\n": "PNG", b"\xff\xd8\xff": "JPEG"}

#: The keys each table accepts, from the one list of campaign.toml's keys (inputs.schema);
#: [reduction.tolerances] takes the fields of Tolerances.
_KEYS = {table: names for table, names in names_by_table().items() if table != "tolerances"}
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

_TOLERANCE_KINDS = {"temperature_drift": "temperature_difference"}


def _key_lines(text: str) -> dict[str, int]:
    """Line numbers of the tables and keys of a TOML text, by dotted path (``taps[2].name``).

    tomllib keeps no positions; this light scan recovers them for error messages only.
    """
    lines: dict[str, int] = {}
    prefix = ""
    counts: dict[str, int] = {}
    header = re.compile(r"^\s*(\[\[?)\s*([^\[\]]+?)\s*\]\]?\s*(#.*)?$")
    key = re.compile(r"""^\s*("[^"]*"|'[^']*'|[A-Za-z0-9_.-]+)\s*=""")
    for number, line in enumerate(text.splitlines(), start=1):
        if m := header.match(line):
            name = ".".join(part.strip().strip("\"'") for part in m.group(2).split("."))
            if m.group(1) == "[[":
                index = counts.get(name, 0)
                counts[name] = index + 1
                name = f"{name}[{index}]"
            prefix = name
            lines.setdefault(prefix, number)
        elif m := key.match(line):
            dotted = f"{prefix}.{m.group(1).strip(chr(34) + chr(39))}".lstrip(".")
            lines.setdefault(dotted, number)
    return lines


class _Reader:
    """Collects problems while campaign.toml's tables are read into dataclass fields."""

    def __init__(self, file: str, text: str):
        self.file = file
        self.problems: list[Problem] = []
        self.notices: list[Problem] = []
        self.fatal = False
        self._lines = _key_lines(text)

    def line(self, path: str) -> int | None:
        while path:
            if path in self._lines:
                return self._lines[path]
            path = path.rpartition(".")[0]
        return None

    def problem(self, path: str, expected: str, found: str, hint: str = "", *, fatal=False):
        self.problems.append(Problem(self.file, self.line(path), path, expected, found, hint))
        self.fatal = self.fatal or fatal

    def notice(self, path: str, expected: str, found: str, hint: str = "") -> None:
        self.notices.append(Problem(self.file, self.line(path), path, expected, found, hint))

    def table(self, data: dict, key: str, path: str, allowed, *, required=False) -> dict:
        if key not in data:
            if required:
                self.problem(path, f"a [{path}] table", "none", f"Add [{path}].", fatal=True)
            return {}
        value = data[key]
        if not isinstance(value, dict):
            self.problem(path, f"a [{path}] table", brief(value), fatal=required)
            return {}
        self.check_keys(value, path, allowed)
        return value

    def check_keys(self, value: dict, path: str, allowed) -> None:
        for name in value:
            if name not in allowed:
                self.problem(
                    f"{path}.{name}",
                    f"a key of [{path}] ({', '.join(allowed)})",
                    brief(name),
                    "Check the spelling; docs/input-format.md lists every key.",
                )

    def get(self, table: dict, path: str, key: str, kind: str, default=_REQUIRED, check=None):
        """The value of ``key`` converted to ``kind``; the default (or None, fatally) if bad."""
        full = f"{path}.{key}"
        required = default is _REQUIRED
        if key not in table:
            if required:
                self.problem(
                    full,
                    f"{key} ({_describe(kind)})",
                    "nothing",
                    f"Add {key} to [{path}].",
                    fatal=True,
                )
                return None
            return default
        value = self.convert(table[key], kind, full, fatal=required)
        if value is None:
            return None if required else default
        if check is not None and not check[0](value):
            self.problem(full, check[1], brief(table[key]), fatal=required)
            return None if required else default
        return value

    def convert(self, raw, kind: str, path: str, *, fatal: bool):
        if kind == "str":
            ok = isinstance(raw, str)
        elif kind == "bool":
            ok = isinstance(raw, bool)
        elif kind == "int":
            ok = isinstance(raw, int) and not isinstance(raw, bool)
        else:
            try:
                return parse_quantity(raw, kind, file=self.file, key=path)
            except InputError as exc:
                for p in exc.problems:
                    self.problem(path, p.expected, p.found, p.hint, fatal=fatal)
                return None
        if not ok:
            self.problem(path, _describe(kind), brief(raw), fatal=fatal)
            return None
        return raw

    def choice(self, table: dict, path: str, key: str, choices, default):
        value = self.get(table, path, key, "str", default)
        if value not in choices:
            self.problem(
                f"{path}.{key}",
                f"one of {', '.join(map(repr, choices))}",
                brief(value),
                "docs/input-format.md lists the names.",
            )
            return default
        return value

    def numbers(self, raw, path: str, kinds, *, fatal: bool) -> tuple[float, ...] | None:
        """A list of quantities, one kind per entry."""
        if not isinstance(raw, list) or len(raw) != len(kinds):
            self.problem(path, f"a list of {len(kinds)} values", brief(raw), fatal=fatal)
            return None
        values = [
            self.convert(v, k, f"{path}[{i}]", fatal=fatal)
            for i, (v, k) in enumerate(zip(raw, kinds, strict=True))
        ]
        return None if any(v is None for v in values) else tuple(values)

    def matrix(self, raw, path: str, shape: tuple[int, int], *, fatal: bool):
        rows, cols = shape
        found_shape = _shape(raw)
        if found_shape != shape:
            self.problem(
                path,
                f"a {rows} × {cols} array of numbers",
                _shape_text(raw, found_shape),
                f"One row per load ({', '.join(LOAD_NAMES)}), one column per channel.",
                fatal=fatal,
            )
            return None
        out = []
        for i, row in enumerate(raw):
            values = self.numbers(row, f"{path}[{i}]", ["fraction"] * cols, fatal=fatal)
            if values is None:
                return None
            out.append(values)
        return tuple(out)


def _describe(kind: str) -> str:
    from tunnelred.inputs.units import DIMENSIONS

    return _PLAIN_KINDS.get(kind) or DIMENSIONS[kind][2]


def _shape(raw) -> tuple[int, int] | None:
    if not isinstance(raw, list) or not raw or not all(isinstance(r, list) for r in raw):
        return None
    widths = {len(r) for r in raw}
    return (len(raw), widths.pop()) if len(widths) == 1 else None


def _shape_text(raw, shape) -> str:
    if shape is not None:
        return f"{shape[0]} × {shape[1]}"
    if isinstance(raw, list) and all(isinstance(r, list) for r in raw):
        return f"rows of lengths {[len(r) for r in raw]}"
    return brief(raw)


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
    r = _Reader(file, text)
    for key in data:
        if key not in _TOP:
            r.problem(key, f"a table of {', '.join(_TOP)}", repr(key), "Check the spelling.")
    config = _build(r, data, path.parent)
    if r.fatal or config is None:
        return None, bounded(r.problems)
    return _replace_sha(config, hashlib.sha256(raw_bytes).hexdigest()), bounded(r.problems)


def _replace_sha(config: CampaignConfig, sha: str) -> CampaignConfig:
    from dataclasses import replace

    return replace(config, sha256=sha)


def _build(r: _Reader, data: dict, root: Path) -> CampaignConfig | None:
    t = r.table(data, "campaign", "campaign", _KEYS["campaign"], required=True)
    nonempty = (lambda v: bool(v.strip()), "a non-empty string")
    info = CampaignInfo(
        title=r.get(t, "campaign", "title", "str", check=nonempty),
        facility=r.get(t, "campaign", "facility", "str", check=nonempty),
        date=r.get(t, "campaign", "date", "str", ""),
        notes=r.get(t, "campaign", "notes", "str", ""),
    )
    tunnel = _tunnel(r, data)
    model = _model(r, data, tunnel, root)
    configurations = _configurations(r, data, model)
    instruments = _instruments(r, data, root)
    taps = _taps(r, data)
    reduction = _reduction(r, data, model)
    report = _report(r, data)
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


def _report(r: _Reader, data: dict) -> ReportInfo:
    """[report]: report control, every key optional free text (a list for distribution)."""
    p = "report"
    t = r.table(data, p, p, _KEYS[p])
    texts = {
        key: r.get(t, p, key, "str", "")
        for key in _KEYS[p]
        if key not in ("revision_history", "distribution")
    }
    distribution = t.get("distribution", [])
    if isinstance(distribution, str):
        distribution = [distribution]
    if not isinstance(distribution, list) or not all(isinstance(d, str) for d in distribution):
        r.problem(f"{p}.distribution", "a list of strings", repr(distribution))
        distribution = []
    history = []
    raw = t.get("revision_history", [])
    if not isinstance(raw, list) or not all(isinstance(h, dict) for h in raw):
        r.problem(f"{p}.revision_history", "[[report.revision_history]] tables", repr(raw)[:60])
        raw = []
    for i, h in enumerate(raw):
        path = f"{p}.revision_history[{i}]"
        r.check_keys(h, path, _KEYS["revision"])
        revision = r.get(h, path, "revision", "str", "")
        if not revision:
            r.problem(f"{path}.revision", "revision (a string)", "nothing", "Add revision = ….")
            continue
        history.append(
            RevisionEntry(
                revision, r.get(h, path, "date", "str", ""), r.get(h, path, "change", "str", "")
            )
        )
    return ReportInfo(**texts, revision_history=tuple(history), distribution=tuple(distribution))


def _campaign_file(
    r: _Reader, t: dict, path: str, key: str, root: Path, *, fatal: bool = False
) -> tuple[str, bytes] | None:
    """The relative path and bytes of the file ``key`` names, if it is a regular file inside the
    campaign folder (links followed); None, with the problem, otherwise or when not given."""
    text = r.get(t, path, key, "str", "")
    if not text:
        return None
    found = inside_campaign(root, text)  # the rules of every input file (inputs.files)
    if not isinstance(found, Refusal):
        rel, resolved = found
        found = read_regular(resolved, MAX_NAMED_FILE_BYTES, name=text)
        if not isinstance(found, Refusal):
            return rel, found
    r.problem(f"{path}.{key}", found.expected, found.found, found.hint, fatal=fatal)
    return None


def _photo(r: _Reader, t: dict, path: str, root: Path) -> str:
    """The model photograph's path when it names an image file inside the campaign folder."""
    found = _campaign_file(r, t, path, "photo", root)
    if found is None:
        return ""
    rel, head = found
    if not any(head.startswith(sig) for sig in _IMAGE_SIGNATURES):
        r.problem(f"{path}.photo", f"an image file ({', '.join(_IMAGE_SIGNATURES.values())})",
                  f"{rel!r}, which is not one", "Save the photograph as PNG or JPEG.")  # fmt: skip
        return ""
    return rel


def _tunnel(r: _Reader, data: dict) -> TunnelConfig | None:
    p = "tunnel"
    t = r.table(data, p, p, _KEYS[p], required=True)
    section = r.choice(t, p, "section", ("closed",), "closed")
    height = r.get(t, p, "height", "length", check=_POSITIVE)
    width = r.get(t, p, "width", "length", check=_POSITIVE)
    if None in (height, width):
        return None
    return TunnelConfig(
        height=height,
        width=width,
        section=section,
        u_height=r.get(t, p, "u_height", "length", 0.0, _NON_NEGATIVE),
        u_width=r.get(t, p, "u_width", "length", 0.0, _NON_NEGATIVE),
        flow_angle=r.get(
            t, p, "flow_angle", "angle", 0.0, (lambda v: abs(v) < 45, "a flow angle within ±45°")
        ),
        u_flow_angle=r.get(t, p, "u_flow_angle", "angle", 0.0, _NON_NEGATIVE),
        static_pressure_gradient=r.get(t, p, "static_pressure_gradient", "pressure_gradient", 0.0),
        u_static_pressure_gradient=r.get(
            t, p, "u_static_pressure_gradient", "pressure_gradient", 0.0, _NON_NEGATIVE
        ),
        q_source=r.choice(t, p, "q_source", tuple(Q_SOURCES), "pitot"),
        contraction_factor=r.get(t, p, "contraction_factor", "fraction", 1.0, _POSITIVE),
        u_contraction_factor=r.get(t, p, "u_contraction_factor", "fraction", 0.0, _NON_NEGATIVE),
    )


def _model(r: _Reader, data: dict, tunnel: TunnelConfig | None, root: Path) -> ModelConfig | None:
    p = "model"
    t = r.table(data, p, p, _KEYS[p], required=True)
    diameter = r.get(t, p, "diameter", "length", check=_POSITIVE)
    span = r.get(t, p, "span", "length", check=_POSITIVE)
    if None in (diameter, span):
        return None
    if tunnel is not None and diameter >= tunnel.height:
        r.problem(
            f"{p}.diameter",
            f"a diameter below the tunnel height ({tunnel.height:g} m)",
            f"{diameter:g} m",
            "Check the units of both.",
            fatal=True,
        )
    if tunnel is not None and span > tunnel.width * (1 + 1e-9):
        r.problem(
            f"{p}.span",
            f"a span no wider than the tunnel ({tunnel.width:g} m)",
            f"{span:g} m",
            "Check the units of both.",
            fatal=True,
        )
    within = (lambda v: 0 <= v <= diameter / 2, f"a radius from 0 to d/2 = {diameter / 2:g} m")
    return ModelConfig(
        diameter=diameter,
        span=span,
        u_diameter=r.get(t, p, "u_diameter", "length", 0.0, _NON_NEGATIVE),
        u_span=r.get(t, p, "u_span", "length", 0.0, _NON_NEGATIVE),
        spans_section=r.get(t, p, "spans_section", "bool", True),
        transducer_radius=r.get(t, p, "transducer_radius", "length", 0.0, within),
        max_spin_rate=r.get(t, p, "max_spin_rate", "rotation_rate", None, _POSITIVE),
        surface=r.get(t, p, "surface", "str", ""),
        photo=_photo(r, t, p, root),
    )


def _tolerance_values(r: _Reader, parent: dict, path: str, *, given_only: bool) -> dict:
    """Tolerances of a ``tolerances`` table: every one (defaults filled), or just those given."""
    table = r.table(parent, "tolerances", path, tuple(Tolerances.__dataclass_fields__))
    defaults = Tolerances()
    values = {}
    for name in Tolerances.__dataclass_fields__:
        if given_only and name not in table:
            continue
        check = _NON_NEGATIVE if name == "cl_agreement" else _POSITIVE
        kind = _TOLERANCE_KINDS.get(name, "fraction")
        values[name] = r.get(table, path, name, kind, getattr(defaults, name), check)
    return values


def _configurations(r: _Reader, data: dict, model) -> dict[str, Configuration]:
    p = "configurations"
    tables = data.get(p)
    if not isinstance(tables, dict) or not tables:
        r.problem(
            p,
            "at least one [configurations.LABEL] table",
            repr(tables),
            "Add e.g. [configurations.A].",
            fatal=True,
        )
        return {}
    out = {}
    for label, t in tables.items():
        path = f"{p}.{label}"
        if not _LABEL.match(label):
            r.problem(path, "a label of letters, digits, '-' and '_'", brief(label))
        t = r.table(tables, label, path, _KEYS["configuration"])
        plate_check = None
        if model is not None:
            plate_check = (
                lambda v: v > model.diameter,
                f"an end-plate diameter above the model's ({model.diameter:g} m)",
            )
        out[label] = Configuration(
            label=label,
            description=r.get(t, path, "description", "str", ""),
            end_plates=r.get(t, path, "end_plates", "bool", False),
            end_plate_diameter=r.get(t, path, "end_plate_diameter", "length", None, plate_check),
            tolerance_overrides=_tolerance_values(r, t, f"{path}.tolerances", given_only=True),
        )
    return out


def _instruments(r: _Reader, data: dict, root: Path) -> InstrumentsConfig:
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
    sub = {n: r.table(t, n, f"{p}.{n}", _KEYS[n]) for n in names}

    def u(name, key, kind, check=_NON_NEGATIVE):
        return r.get(sub[name], f"{p}.{name}", key, kind, 0.0, check)

    return InstrumentsConfig(
        balance=_balance(r, t, root) if isinstance(t.get("balance"), dict) else None,
        scanner_full_scale=r.get(
            sub["scanner"], f"{p}.scanner", "full_scale", "pressure", None, _POSITIVE
        ),
        u_scanner=u("scanner", "u", "pressure"),
        u_pitot=u("pitot", "u", "pressure"),
        u_pitot_relative=u("pitot", "u_relative", "fraction"),
        u_thermometer=u("thermometer", "u", "temperature_difference"),
        u_barometer=u("barometer", "u", "pressure"),
        u_hygrometer=u("hygrometer", "u", "fraction", _FRACTION),
        u_tachometer_relative=u("tachometer", "u_relative", "fraction"),
        u_encoder=u("encoder", "u", "angle"),
        calibrations=_calibrations(r, sub),
    )


def _calibrations(r: _Reader, tables: dict[str, dict]) -> dict[str, Calibration]:
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


def _balance(r: _Reader, instruments: dict, root: Path) -> BalanceConfig | None:
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
        u_matrix_relative=r.get(t, p, "u_matrix_relative", "fraction", 0.0, _NON_NEGATIVE),
        alignment_angle=r.get(t, p, "alignment_angle", "angle", 0.0),
        u_alignment_angle=r.get(t, p, "u_alignment_angle", "angle", 0.0, _NON_NEGATIVE),
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


def _calibration_file(r: _Reader, t: dict, p: str, root: Path, channels) -> _FileCalibration | None:
    """The calibration ``calibration_file`` names (inputs.calibration), or None if not given."""
    if t.get("calibration_file", "") == "":  # absent, or the template's empty default
        return None
    for key in ("matrix", "second_order"):
        if key in t:
            r.problem(f"{p}.{key}", f"no {key} beside calibration_file", "both",
                      "Give the calibration in one place: the file or campaign.toml.",
                      fatal=True)  # fmt: skip
    found = _campaign_file(r, t, p, "calibration_file", root, fatal=True)
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


def _required_array(r: _Reader, t: dict, p: str, key: str, shape):
    if key not in t:
        r.problem(f"{p}.{key}", f"a {shape[0]} × {shape[1]} array", "nothing", fatal=True)
        return None
    return r.matrix(t[key], f"{p}.{key}", shape, fatal=True)


def _taps(r: _Reader, data: dict) -> tuple[TapConfig, ...]:
    raw = data.get("taps", [])
    if not isinstance(raw, list) or not all(isinstance(t, dict) for t in raw):
        r.problem("taps", "[[taps]] tables", brief(raw), fatal=True)
        return ()
    taps, seen = [], set()
    for i, t in enumerate(raw):
        path = f"taps[{i}]"
        r.check_keys(t, path, _KEYS["tap"])
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
                tubing_delay=r.get(t, path, "tubing_delay", "time", 0.0, _NON_NEGATIVE),
                u_azimuth=r.get(t, path, "u_azimuth", "angle", 0.0, _NON_NEGATIVE),
                u_tubing_delay=r.get(t, path, "u_tubing_delay", "time", 0.0, _NON_NEGATIVE),
            )
        )
    return tuple(taps)


def _reduction(r: _Reader, data: dict, model) -> ReductionConfig:
    p = "reduction"
    t = r.table(data, p, p, _KEYS[p])
    spans = model.spans_section if model is not None else True
    requested = r.choice(
        t, p, "blockage", BLOCKAGE_METHODS, "allen-vincenti" if spans else "maskell-3d"
    )
    used, note = resolve_blockage(requested, spans)
    if note:
        r.notice(f"{p}.blockage", "a method that fits the model", repr(requested), note + ".")
    maskell_factor = r.get(t, p, "maskell_factor", "fraction", None, _POSITIVE)
    if maskell_factor is not None and not used.takes_factor:
        takers = ", ".join(repr(c.name) for c in BLOCKAGE_CHOICES.values() if c.takes_factor)
        r.problem(
            f"{p}.maskell_factor",
            f"maskell_factor only with a method that has one ({takers})",
            f"blockage {used.name!r}",
            "Remove maskell_factor or choose one of those methods.",
        )
        maskell_factor = None
    base_arc = (160.0, 200.0)
    if "base_arc" in t:
        got = r.numbers(t["base_arc"], f"{p}.base_arc", ("angle", "angle"), fatal=False)
        if got is not None and not (0 <= got[0] < got[1] <= 360):
            r.problem(f"{p}.base_arc", "two angles 0 ≤ start < end ≤ 360", repr(t["base_arc"]))
        elif got is not None:
            base_arc = got
    tolerances = Tolerances(**_tolerance_values(r, t, f"{p}.tolerances", given_only=False))
    return ReductionConfig(
        blockage=used.name,
        blockage_requested=requested,
        maskell_factor=maskell_factor,
        lift_interference=r.get(t, p, "lift_interference", "bool", False),
        buoyancy=r.get(t, p, "buoyancy", "bool", True),
        cp_bins=r.get(
            t,
            p,
            "cp_bins",
            "int",
            72,
            (
                lambda v: MIN_CP_BINS <= v <= MAX_CP_BINS,
                f"an integer from {MIN_CP_BINS} to {MAX_CP_BINS}",
            ),
        ),
        base_arc=base_arc,
        max_tap_gap=r.get(
            t,
            p,
            "max_tap_gap",
            "angle",
            30.0,
            (lambda v: 0 < v <= 360, "an angle above 0 and up to 360"),
        ),
        tare_extrapolation=r.choice(t, p, "tare_extrapolation", TARE_EXTRAPOLATION, "flag"),
        tolerances=tolerances,
    )
