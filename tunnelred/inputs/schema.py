"""Every key of campaign.toml with its unit and meaning: the one list the loader's key checks
(tunnelred.inputs.config), the commented template of ``tunnelred init``
(tunnelred.inputs.template) and docs/input-format.md follow.

A key's default is not written here: ``field`` names the dataclass attribute of
tunnelred.inputs.config that holds it (``"TunnelConfig.u_height"``), and the template reads it
from there; None where the key has no single default (a table, or a default chosen by context).
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["Key", "KEYS", "TABLES", "names_by_table"]


@dataclass(frozen=True)
class Key:
    table: str  # the schema's name of its table (TABLES gives its TOML header)
    name: str
    unit: str  # type or kind of unit, as docs/input-format.md words it
    meaning: str
    field: str | None  # "Class.attribute" in tunnelred.inputs.config holding the default


#: Schema table name → its TOML header in the template, in the order the template writes them.
TABLES = {
    "campaign": "[campaign]",
    "report": "[report]",
    "revision": "[[report.revision_history]]",
    "tunnel": "[tunnel]",
    "model": "[model]",
    "configuration": "[configurations.A]",
    "balance": "[instruments.balance]",
    "scanner": "[instruments.scanner]",
    "pitot": "[instruments.pitot]",
    "thermometer": "[instruments.thermometer]",
    "barometer": "[instruments.barometer]",
    "hygrometer": "[instruments.hygrometer]",
    "tachometer": "[instruments.tachometer]",
    "encoder": "[instruments.encoder]",
    "tap": "[[taps]]",
    "reduction": "[reduction]",
    "tolerances": "[reduction.tolerances]",
}


def _calibration_keys(table: str) -> tuple[Key, Key]:
    """The two keys every instrument table has for its calibration certificate."""
    return (
        Key(
            table,
            "calibration_reference",
            "string",
            "the calibration certificate's reference",
            "Calibration.reference",
        ),
        Key(
            table,
            "calibration_date",
            "string or TOML date",
            "the date of that calibration",
            "Calibration.date",
        ),
    )


def _with_u(table: str, name: str, unit: str, meaning: str, owner: str) -> tuple[Key, Key]:
    """A measured quantity's key and its standard uncertainty ``u_<name>``: same table and unit,
    each held by the attribute of its own name in ``owner``."""
    return (
        Key(table, name, unit, meaning, f"{owner}.{name}"),
        Key(table, f"u_{name}", unit, "", f"{owner}.u_{name}"),
    )


# fmt: off
KEYS: tuple[Key, ...] = (
    # [campaign]
    Key("campaign", "title", "string", "shown on every report page", "CampaignInfo.title"),
    Key("campaign", "facility", "string", "the tunnel", "CampaignInfo.facility"),
    Key("campaign", "date", "string", "test dates, free text", "CampaignInfo.date"),
    Key("campaign", "notes", "string", "free text", "CampaignInfo.notes"),
    # [report]
    Key("report", "number", "string", "the report's unique identification, printed on every page", "ReportInfo.number"),  # noqa: E501
    Key("report", "revision", "string", "the current revision, printed on every page", "ReportInfo.revision"),  # noqa: E501
    Key("report", "revision_history", "tables", "[[report.revision_history]]: revision, date, change", "ReportInfo.revision_history"),  # noqa: E501
    Key("report", "client", "string", "the customer", "ReportInfo.client"),
    Key("report", "client_address", "string", "", "ReportInfo.client_address"),
    Key("report", "prepared_by", "string", "name on the 'Prepared by' signature line", "ReportInfo.prepared_by"),  # noqa: E501
    Key("report", "checked_by", "string", "name on the 'Checked by' signature line", "ReportInfo.checked_by"),  # noqa: E501
    Key("report", "approved_by", "string", "name on the 'Approved by' line: who authorises the report for issue", "ReportInfo.approved_by"),  # noqa: E501
    Key("report", "date_of_issue", "string", "", "ReportInfo.date_of_issue"),
    Key("report", "distribution", "list of strings", "who receives a copy", "ReportInfo.distribution"),  # noqa: E501
    Key("report", "laboratory", "string", "the laboratory's name", "ReportInfo.laboratory"),
    Key("report", "laboratory_address", "string", "", "ReportInfo.laboratory_address"),
    Key("report", "location", "string", "where the work was done, when not at the laboratory's address", "ReportInfo.location"),  # noqa: E501
    Key("report", "method", "string", "the test method or procedure reference", "ReportInfo.method"),  # noqa: E501
    Key("report", "deviations", "string", "additions to, deviations from or exclusions of the method", "ReportInfo.deviations"),  # noqa: E501
    # [revision]
    Key("revision", "revision", "string", "the revision (required in each table)", "RevisionEntry.revision"),  # noqa: E501
    Key("revision", "date", "string", "its date of issue", "RevisionEntry.date"),
    Key("revision", "change", "string", "what changed", "RevisionEntry.change"),
    # [tunnel]
    Key("tunnel", "section", "'closed'", "closed test section (the wall corrections assume solid walls)", "TunnelConfig.section"),  # noqa: E501
    *_with_u("tunnel", "height", "length", "wall-to-wall distance across which lift acts (y); above the model diameter", "TunnelConfig"),  # noqa: E501
    *_with_u("tunnel", "width", "length", "along the cylinder axis (z); at least the model span", "TunnelConfig"),  # noqa: E501
    *_with_u("tunnel", "flow_angle", "angle", "flow angularity in the x–y plane, positive toward +y (within ±45°)", "TunnelConfig"),  # noqa: E501
    *_with_u("tunnel", "static_pressure_gradient", "pressure/length", "empty-tunnel dp/dx along the test section (for buoyancy)", "TunnelConfig"),  # noqa: E501
    Key("tunnel", "q_source", "'pitot' or 'contraction'", "which tunnel-log column gives q: `dp_pitot` or `dp_contraction`", "TunnelConfig.q_source"),  # noqa: E501
    *_with_u("tunnel", "contraction_factor", "number", "q = factor × dp_contraction (q_source = 'contraction')", "TunnelConfig"),  # noqa: E501
    # [model]
    *_with_u("model", "diameter", "length", "d; reference area is d × span", "ModelConfig"),
    *_with_u("model", "span", "length", "b, the loaded span", "ModelConfig"),
    Key("model", "spans_section", "bool", "true: the model spans the section wall to wall (2-D corrections); false: 3-D", "ModelConfig.spans_section"),  # noqa: E501
    Key("model", "transducer_radius", "length", "radius r_t of the pressure transducer on the spinning model (0: on the axis; at most d/2)", "ModelConfig.transducer_radius"),  # noqa: E501
    Key("model", "max_spin_rate", "rotation rate", "the highest spin rate the model and its drive are rated for (e.g. `'6000 rpm'`); `tunnelred plan` warns loudly of any planned point above it", "ModelConfig.max_spin_rate"),  # noqa: E501
    Key("model", "surface", "string", "the surface finish, free text (printed in the report's Model section)", "ModelConfig.surface"),  # noqa: E501
    Key("model", "photo", "string", "a photograph of the model: a PNG or JPEG file inside the campaign folder, relative to it (a link out of the folder, a folder or another kind of file is refused); the report prints the path", "ModelConfig.photo"),  # noqa: E501
    # [configuration]
    Key("configuration", "description", "string", "", "Configuration.description"),
    Key("configuration", "end_plates", "bool", "", "Configuration.end_plates"),
    Key("configuration", "end_plate_diameter", "length", "larger than the model diameter", "Configuration.end_plate_diameter"),  # noqa: E501
    Key("configuration", "tolerances", "table", "quality-flag tolerances ([reduction.tolerances])", None),  # noqa: E501
    # [balance]
    Key("balance", "channels", "list of strings", "the balance-log columns, in matrix column order (unique; not a fixed log name such as `time`, `speed`, `T`)", "BalanceConfig.channels"),  # noqa: E501
    Key("balance", "matrix", "3 × n numbers", "rows Fx [N], Fy [N], Mz [N m]; entries per SI unit of each channel (N/V, …)", "BalanceConfig.matrix"),  # noqa: E501
    Key("balance", "second_order", "3 × n(n+1)/2 numbers", "coefficients of s_i·s_j for i ≤ j, row-major (s11, s12, …, s22, …)", "BalanceConfig.second_order"),  # noqa: E501
    Key("balance", "full_scale", "3 loads", "Fx, Fy [force], Mz [torque]", "BalanceConfig.full_scale"),  # noqa: E501
    Key("balance", "u_fraction_of_full_scale", "3 numbers", "type-B standard uncertainty per component, as a fraction of full scale", "BalanceConfig.u_fraction_of_full_scale"),  # noqa: E501
    Key("balance", "u_matrix_relative", "number", "relative standard uncertainty of the calibration (applied to each load)", "BalanceConfig.u_matrix_relative"),  # noqa: E501
    *_with_u("balance", "alignment_angle", "angle", "balance x axis relative to tunnel x, positive toward +y", "BalanceConfig"),  # noqa: E501
    Key("balance", "calibration_file", "string", "a CSV inside the campaign folder with the calibration coefficients (linear, optional second order) and optionally their covariance, in place of matrix and second_order; the covariance is propagated in place of u_matrix_relative (docs/input-format.md)", "BalanceConfig.calibration_file"),  # noqa: E501
    *_calibration_keys("balance"),
    # [scanner]
    Key("scanner", "full_scale", "pressure", "range of the pressure scanner (optional)", "InstrumentsConfig.scanner_full_scale"),  # noqa: E501
    Key("scanner", "u", "pressure", "type-B standard uncertainty of each tap reading", "InstrumentsConfig.u_scanner"),  # noqa: E501
    *_calibration_keys("scanner"),
    # [pitot]
    Key("pitot", "u", "pressure", "of dp_pitot (or dp_contraction)", "InstrumentsConfig.u_pitot"),
    Key("pitot", "u_relative", "number", "relative part, added in quadrature", "InstrumentsConfig.u_pitot_relative"),  # noqa: E501
    *_calibration_keys("pitot"),
    # [thermometer]
    Key("thermometer", "u", "temperature difference (K)", "", "InstrumentsConfig.u_thermometer"),
    *_calibration_keys("thermometer"),
    # [barometer]
    Key("barometer", "u", "pressure", "", "InstrumentsConfig.u_barometer"),
    *_calibration_keys("barometer"),
    # [hygrometer]
    Key("hygrometer", "u", "fraction", "", "InstrumentsConfig.u_hygrometer"),
    *_calibration_keys("hygrometer"),
    # [tachometer]
    Key("tachometer", "u_relative", "number", "of the spin rate", "InstrumentsConfig.u_tachometer_relative"),  # noqa: E501
    *_calibration_keys("tachometer"),
    # [encoder]
    Key("encoder", "u", "angle", "of the encoder angle", "InstrumentsConfig.u_encoder"),
    *_calibration_keys("encoder"),
    # [tap]
    Key("tap", "name", "string", "the pressure-log column (unique; letters, digits, `_ . -`; not a fixed log name)", "TapConfig.name"),  # noqa: E501
    *_with_u("tap", "azimuth", "angle", "tap azimuth θ from the windward point when the encoder reads 0 (stationary model: its fixed azimuth)", "TapConfig"),  # noqa: E501
    *_with_u("tap", "tubing_delay", "time", "pneumatic delay τ of the tap's tubing; the reading at time t belongs to azimuth θ(t) − ω τ", "TapConfig"),  # noqa: E501
    # [reduction]
    Key("reduction", "blockage", "'allen-vincenti', 'maskell', 'maskell-3d', 'none'", "wall-correction method; a 2-D method with spans_section = false is replaced by 'maskell-3d', with a notice", "ReductionConfig.blockage"),  # noqa: E501
    Key("reduction", "maskell_factor", "number", "Maskell's blockage factor θ; only with 'maskell' or 'maskell-3d'", "ReductionConfig.maskell_factor"),  # noqa: E501
    Key("reduction", "lift_interference", "bool", "apply the streamline-curvature correction for the lift (see docs/methods.md)", "ReductionConfig.lift_interference"),  # noqa: E501
    Key("reduction", "buoyancy", "bool", "subtract horizontal buoyancy from CD", "ReductionConfig.buoyancy"),  # noqa: E501
    Key("reduction", "cp_bins", "integer", "azimuth bins over 360° (8 or more)", "ReductionConfig.cp_bins"),  # noqa: E501
    Key("reduction", "base_arc", "2 angles", "leeward arc over which the base pressure is averaged (0 ≤ start < end ≤ 360)", "ReductionConfig.base_arc"),  # noqa: E501
    Key("reduction", "max_tap_gap", "angle", "largest azimuth gap without data that integration accepts (0 < gap ≤ 360)", "ReductionConfig.max_tap_gap"),  # noqa: E501
    Key("reduction", "tare_extrapolation", "'flag' or 'refuse'", "a data run's rpm outside its tare runs' range: reduce and flag, or fail the run", "ReductionConfig.tare_extrapolation"),  # noqa: E501
    Key("reduction", "tolerances", "table", "quality-flag tolerances ([reduction.tolerances])", "ReductionConfig.tolerances"),  # noqa: E501
    # [tolerances]
    Key("tolerances", "spin_scatter", "fraction", "std(α(t)) / mean(α) exceeds it", "Tolerances.spin_scatter"),  # noqa: E501
    Key("tolerances", "spin_drift", "fraction", "α changes by more than this fraction over the run", "Tolerances.spin_drift"),  # noqa: E501
    Key("tolerances", "speed_drift", "fraction", "U changes by more than this fraction over the run", "Tolerances.speed_drift"),  # noqa: E501
    Key("tolerances", "temperature_drift", "K", "T changes by more than this over the run", "Tolerances.temperature_drift"),  # noqa: E501
    Key("tolerances", "zero_shift", "fraction", "pre- and post-run zeros differ by more than this fraction of full scale", "Tolerances.zero_shift"),  # noqa: E501
    Key("tolerances", "overload", "fraction", "a load reaches this fraction of full scale", "Tolerances.overload"),  # noqa: E501
    Key("tolerances", "dead_tap", "Cp", "a tap's Cp departs from its neighbours' by more than this", "Tolerances.dead_tap"),  # noqa: E501
    Key("tolerances", "stream_overlap", "fraction", "the streams overlap over less than this fraction of the run", "Tolerances.stream_overlap"),  # noqa: E501
    Key("tolerances", "min_revolutions", "number", "a spinning pressure run holds fewer revolutions", "Tolerances.min_revolutions"),  # noqa: E501
    Key("tolerances", "agreement_k", "number", "coverage factor for balance-vs-pressure and repeat-run agreement", "Tolerances.agreement_k"),  # noqa: E501
    Key("tolerances", "cl_agreement", "fraction", "allowed relative difference between balance CL and mid-span pressure CL_p (end effects), on top of agreement_k × their combined u", "Tolerances.cl_agreement"),  # noqa: E501
    Key("tolerances", "stagnation_cp", "Cp", "an α = 0 run's maximum Cp differs from 1 by more", "Tolerances.stagnation_cp"),  # noqa: E501
    Key("tolerances", "speed_setpoint", "fraction", "the measured (uncorrected) U differs from speed_set by more than this fraction", "Tolerances.speed_setpoint"),  # noqa: E501
    Key("tolerances", "spin_setpoint", "fraction", "the measured |rpm| differs from |spin_set| by more than this fraction (a run set to 0 rpm: it spins)", "Tolerances.spin_setpoint"),  # noqa: E501
)
# fmt: on


def names_by_table() -> dict[str, tuple[str, ...]]:
    """The key names of each table, in schema order."""
    out: dict[str, list[str]] = {}
    for key in KEYS:
        out.setdefault(key.table, []).append(key.name)
    return {table: tuple(names) for table, names in out.items()}
