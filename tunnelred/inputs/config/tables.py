"""The readers of campaign.toml's [report], [tunnel], [model], [configurations] and [reduction]
tables.
"""

from __future__ import annotations

import re
from pathlib import Path

from tunnelred.common.errors import brief
from tunnelred.inputs.config.objects import (
    MAX_CP_BINS,
    MIN_CP_BINS,
    TARE_EXTRAPOLATION,
    Configuration,
    ModelConfig,
    ReductionConfig,
    ReportInfo,
    RevisionEntry,
    Tolerances,
    TunnelConfig,
)
from tunnelred.inputs.config.reader import (
    NON_NEGATIVE,
    POSITIVE,
    TABLE_KEYS,
    Reader,
    campaign_file,
)
from tunnelred.inputs.methods import BLOCKAGE_CHOICES, BLOCKAGE_METHODS, resolve_blockage
from tunnelred.inputs.streams import Q_SOURCES

_LABEL = re.compile(r"^[A-Za-z0-9_-]+$")

#: Image files a model photograph may be (by their first bytes, not their name).
_IMAGE_SIGNATURES = {b"\x89PNG\r\n\x1a\n": "PNG", b"\xff\xd8\xff": "JPEG"}

#: Tolerances that are not fractions, and the kind of quantity each one is.
_TOLERANCE_KINDS = {"temperature_drift": "temperature_difference"}


def read_report(r: Reader, data: dict) -> ReportInfo:
    """[report]: report control, every key optional free text (a list for distribution)."""
    p = "report"
    t = r.table(data, p, p, TABLE_KEYS[p])
    texts = {
        key: r.get(t, p, key, "str", "")
        for key in TABLE_KEYS[p]
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
        r.check_keys(h, path, TABLE_KEYS["revision"])
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


def _photo(r: Reader, t: dict, path: str, root: Path) -> str:
    """The model photograph's path when it names an image file inside the campaign folder."""
    found = campaign_file(r, t, path, "photo", root)
    if found is None:
        return ""
    rel, head = found
    if not any(head.startswith(sig) for sig in _IMAGE_SIGNATURES):
        r.problem(f"{path}.photo", f"an image file ({', '.join(_IMAGE_SIGNATURES.values())})",
                  f"{rel!r}, which is not one", "Save the photograph as PNG or JPEG.")  # fmt: skip
        return ""
    return rel


def read_tunnel(r: Reader, data: dict) -> TunnelConfig | None:
    p = "tunnel"
    t = r.table(data, p, p, TABLE_KEYS[p], required=True)
    section = r.choice(t, p, "section", ("closed",), "closed")
    height = r.get(t, p, "height", "length", check=POSITIVE)
    width = r.get(t, p, "width", "length", check=POSITIVE)
    if None in (height, width):
        return None
    return TunnelConfig(
        height=height,
        width=width,
        section=section,
        u_height=r.get(t, p, "u_height", "length", 0.0, NON_NEGATIVE),
        u_width=r.get(t, p, "u_width", "length", 0.0, NON_NEGATIVE),
        flow_angle=r.get(
            t, p, "flow_angle", "angle", 0.0, (lambda v: abs(v) < 45, "a flow angle within ±45°")
        ),
        u_flow_angle=r.get(t, p, "u_flow_angle", "angle", 0.0, NON_NEGATIVE),
        static_pressure_gradient=r.get(t, p, "static_pressure_gradient", "pressure_gradient", 0.0),
        u_static_pressure_gradient=r.get(
            t, p, "u_static_pressure_gradient", "pressure_gradient", 0.0, NON_NEGATIVE
        ),
        q_source=r.choice(t, p, "q_source", tuple(Q_SOURCES), "pitot"),
        contraction_factor=r.get(t, p, "contraction_factor", "fraction", 1.0, POSITIVE),
        u_contraction_factor=r.get(t, p, "u_contraction_factor", "fraction", 0.0, NON_NEGATIVE),
    )


def read_model(
    r: Reader, data: dict, tunnel: TunnelConfig | None, root: Path
) -> ModelConfig | None:
    p = "model"
    t = r.table(data, p, p, TABLE_KEYS[p], required=True)
    diameter = r.get(t, p, "diameter", "length", check=POSITIVE)
    span = r.get(t, p, "span", "length", check=POSITIVE)
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
        u_diameter=r.get(t, p, "u_diameter", "length", 0.0, NON_NEGATIVE),
        u_span=r.get(t, p, "u_span", "length", 0.0, NON_NEGATIVE),
        spans_section=r.get(t, p, "spans_section", "bool", True),
        transducer_radius=r.get(t, p, "transducer_radius", "length", 0.0, within),
        max_spin_rate=r.get(t, p, "max_spin_rate", "rotation_rate", None, POSITIVE),
        surface=r.get(t, p, "surface", "str", ""),
        photo=_photo(r, t, p, root),
    )


def _tolerance_values(r: Reader, parent: dict, path: str, *, given_only: bool) -> dict:
    """Tolerances of a ``tolerances`` table: every one (defaults filled), or just those given."""
    table = r.table(parent, "tolerances", path, tuple(Tolerances.__dataclass_fields__))
    defaults = Tolerances()
    values = {}
    for name in Tolerances.__dataclass_fields__:
        if given_only and name not in table:
            continue
        check = NON_NEGATIVE if name == "cl_agreement" else POSITIVE
        kind = _TOLERANCE_KINDS.get(name, "fraction")
        values[name] = r.get(table, path, name, kind, getattr(defaults, name), check)
    return values


def read_configurations(r: Reader, data: dict, model) -> dict[str, Configuration]:
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
        t = r.table(tables, label, path, TABLE_KEYS["configuration"])
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


def read_reduction(r: Reader, data: dict, model) -> ReductionConfig:
    p = "reduction"
    t = r.table(data, p, p, TABLE_KEYS[p])
    spans = model.spans_section if model is not None else True
    requested = r.choice(
        t, p, "blockage", BLOCKAGE_METHODS, "allen-vincenti" if spans else "maskell-3d"
    )
    used, note = resolve_blockage(requested, spans)
    if note:
        r.notice(f"{p}.blockage", "a method that fits the model", repr(requested), note + ".")
    maskell_factor = r.get(t, p, "maskell_factor", "fraction", None, POSITIVE)
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
