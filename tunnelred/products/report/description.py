"""The sections that describe the test: model, test matrix and run log, test conditions,
instrumentation, procedures.
"""

from __future__ import annotations

from xml.sax.saxutils import escape

import numpy as np

from tunnelred.products import plotting
from tunnelred.products.report.data import (
    PROVISIONAL_MARK,
    ReportData,
    run_config,
    run_flags,
    run_provisional,
)
from tunnelred.products.report.formatting import (
    BLANK,
    RPM,
    fixed,
    format_uncertain,
    number_text,
    or_blank,
)
from tunnelred.products.report.layout import WIDTH, Builder, axes


def model_section(b: Builder, data: ReportData) -> None:
    b.section("Model")
    cfg = data.campaign.config if data.campaign is not None else None
    if cfg is None:
        b.add(b.p("The campaign folder was not given: the model is described by its results only."))
        return
    model, tunnel = cfg.model, cfg.tunnel
    b.add(
        b.p(
            "The item tested: a circular cylinder spun about its own axis (z), mounted across the "
            "test section on the force balance.",
            "intro",
        )
    )
    surface = str(getattr(model, "surface", "") or "")
    photo = str(getattr(model, "photo", "") or "")
    rows = [
        ["diameter d", f"{format_uncertain(1000 * model.diameter, 2000 * model.u_diameter)} mm"],
        ["span b", f"{format_uncertain(1000 * model.span, 2000 * model.u_span)} mm"],
        ["aspect ratio b/d", fixed(model.span / model.diameter, 2)],
        ["spans the section", "yes (two-dimensional)" if model.spans_section else "no"],
        ["surface", or_blank(surface)],
        ["photograph (file, not embedded)", or_blank(photo)],
        [
            "test section",
            f"{tunnel.section}, {fixed(tunnel.height, 3)} m (y) × {fixed(tunnel.width, 3)} m (z)",
        ],  # fmt: skip
        ["diameter / height d/h", fixed(model.diameter / tunnel.height, 4)],
    ]
    if model.transducer_radius:
        rows.append(["radius of the on-board transducer", f"{1000 * model.transducer_radius:g} mm"])
    b.table(["geometry", "value (± U, k = 2)"], rows, [1.4, 2.6],
            caption=f"{b.next_table()} Model and test section.")  # fmt: skip
    rows = []
    for label, c in cfg.configurations.items():
        plates = "yes" if c.end_plates else "no"
        if c.end_plates and c.end_plate_diameter:
            plates += f", diameter {1000 * c.end_plate_diameter:g} mm"
        rows.append([label, c.description, plates])
    b.table(["configuration", "description", "end plates"], rows, [1.0, 3.0, 1.6],
            caption=f"{b.next_table()} Configurations tested.")  # fmt: skip


def run_log_section(b: Builder, data: ReportData) -> None:
    ds = data.ds
    b.section("Test matrix and run log")
    alpha = data.column("alpha")
    configs, speeds = data.groups("config"), data.groups("speed")
    rows = []
    for label, idx in configs:
        row = [label or "(none)"]
        for _, members in speeds:
            both = np.intersect1d(idx, members)
            if both.size == 0:
                row.append("–")
                continue
            a = alpha[both]
            row.append(f"{both.size} runs, α {fixed(np.nanmin(a), 2)} to {fixed(np.nanmax(a), 2)}")
        rows.append(row)
    b.table(
        ["configuration"] + [label for label, _ in speeds],
        rows,
        [1.2] + [1.6] * len(speeds),
        caption=f"{b.next_table()} Test matrix: runs by configuration and tunnel speed, with "
        "their spin-ratio range.",
    )
    b.subsection("Run log")
    start = data.table["start"].astype(str) if "start" in data.table else [""] * len(data.runs)
    omega = data.column("omega")
    provisional = run_provisional(ds)
    rows = []
    for i, run in enumerate(data.runs):
        rows.append(
            [
                run + (f" {PROVISIONAL_MARK}" if provisional[i] else ""),
                str(start[i]).replace("T", " "),
                run_config(data, i),
                fixed(data.column("speed_set")[i], 1),
                fixed(data.column("spin_set")[i], 0),
                fixed(omega[i] * RPM, 0),
                fixed(alpha[i], 3),
                run_flags(ds)[i].replace(";", ", "),
            ]
        )
    b.table(
        [
            "run",
            "start",
            "config",
            "set U [m/s]",
            "set [rpm]",
            "measured [rpm]",
            "α",
            "flags",
        ],  # fmt: skip
        rows,
        [0.6, 1.5, 0.7, 0.7, 0.7, 0.8, 0.6, 2.2],
        caption=f"{b.next_table()} Run log: every data run in order, its set points, measured "
        "spin rate and spin ratio (wall-corrected), and the flags it raised"
        + (f"; {PROVISIONAL_MARK} a provisional run (see Summary)." if provisional.any() else "."),
    )
    _conditions(b, data)


def _conditions(b: Builder, data: ReportData) -> None:
    b.subsection("Test conditions")
    cols = {n: data.column(n) for n in ("U", "q", "Re", "Mach", "T", "p_baro", "RH", "rho")}
    rows = []
    for i, run in enumerate(data.runs):
        rows.append(
            [
                run,
                run_config(data, i),
                fixed(cols["U"][i], 2),
                fixed(cols["q"][i], 1),
                number_text(cols["Re"][i], 3),
                fixed(cols["Mach"][i], 3),
                fixed(cols["T"][i] - 273.15, 2),
                fixed(cols["p_baro"][i] / 1000, 2),
                fixed(100 * cols["RH"][i], 1),
                fixed(cols["rho"][i], 4),
            ]
        )
    b.table(
        [
            "run",
            "config",
            "U [m/s]",
            "q [Pa]",
            "Re",
            "Mach",
            "T [°C]",
            "p [kPa]",
            "RH [%]",
            "ρ [kg/m³]",
        ],  # fmt: skip
        rows,
        [0.8, 0.8, 0.8, 0.8, 1.0, 0.7, 0.8, 0.8, 0.7, 0.9],
        caption=f"{b.next_table()} Test conditions, run means: free stream wall-corrected (U, q, "
        "Re, Mach); air temperature T, barometric pressure p, relative humidity RH and density "
        "ρ (CIPM-2007).",
    )


#: Instruments: (name in campaign.toml, what it measures, how its declared uncertainty reads).
def _instrument_rows(cfg) -> list[list[str]]:
    ins = cfg.instruments
    bal = ins.balance
    calibrations = getattr(ins, "calibrations", {}) or {}

    def cal(name: str) -> list[str]:
        entry = calibrations.get(name)
        reference = str(getattr(entry, "reference", "") or "") if entry else ""
        when = str(getattr(entry, "date", "") or "") if entry else ""
        return [or_blank(reference), or_blank(when)]

    rows = []
    if bal is not None:
        fs = ", ".join(f"{number_text(f, 3)}" for f in bal.full_scale)
        u_fs = ", ".join(f"{100 * f:g} %" for f in bal.u_fraction_of_full_scale)
        text = f"{u_fs} of full scale ({fs} N, N, N·m)"
        if bal.coefficient_covariance is not None:
            count = len(bal.coefficient_covariance)
            text += f"; covariance of the {count} calibration coefficients ({bal.calibration_file})"
        elif bal.u_matrix_relative:
            text += f"; calibration matrix {100 * bal.u_matrix_relative:g} %"
        if bal.u_alignment_angle:
            text += f"; alignment {bal.u_alignment_angle:g}°"
        rows.append(["balance", "Fx, Fy, Mz (channels " + ", ".join(bal.channels) + ")", text,
                     *cal("balance")])  # fmt: skip
    if ins.scanner_full_scale is not None or ins.u_scanner:
        rows.append(["scanner", "surface-tap pressures", f"{number_text(ins.u_scanner, 3)} Pa",
                     *cal("scanner")])  # fmt: skip
    pitot = f"{number_text(ins.u_pitot, 3)} Pa"
    if ins.u_pitot_relative:
        pitot += f" + {100 * ins.u_pitot_relative:g} % of reading"
    rows.append(["pitot", "dynamic pressure", pitot, *cal("pitot")])
    rows.append(["thermometer", "air temperature", f"{number_text(ins.u_thermometer, 3)} K",
                 *cal("thermometer")])  # fmt: skip
    rows.append(["barometer", "barometric pressure", f"{number_text(ins.u_barometer, 3)} Pa",
                 *cal("barometer")])  # fmt: skip
    rows.append(["hygrometer", "relative humidity", f"{100 * ins.u_hygrometer:g} % RH",
                 *cal("hygrometer")])  # fmt: skip
    rows.append(["tachometer", "spin rate", f"{100 * ins.u_tachometer_relative:g} % of reading",
                 *cal("tachometer")])  # fmt: skip
    if ins.u_encoder:
        rows.append(["encoder", "model azimuth", f"{ins.u_encoder:g}°", *cal("encoder")])
    return rows


def instrumentation_section(b: Builder, data: ReportData) -> None:
    b.section("Instrumentation")
    if data.campaign is None:
        b.add(b.p("The campaign folder was not given: its instruments are not listed."))
        return
    b.add(
        b.p(
            "Each instrument with the standard uncertainty campaign.toml declares for it (type B "
            "in the budgets) and its calibration reference and date.",
            "intro",
        )
    )
    b.table(
        [
            "instrument",
            "measures",
            "declared standard uncertainty",
            "calibration reference",
            "calibrated",
        ],  # fmt: skip
        _instrument_rows(data.campaign.config),
        [0.9, 1.4, 2.2, 1.3, 0.8],
        caption=f"{b.next_table()} Instruments.",
    )


def procedures_section(b: Builder, data: ReportData) -> None:
    b.section("Procedures")
    control = data.control
    version = str(data.ds.attrs.get("tunnelred_version", ""))
    method = control.method or (
        "the zero, tare and data-run procedure described in this section, reduced as Data "
        f"reduction states (tunnelred {version})"
    )
    b.add(b.p(f"<b>Method.</b> {escape(method)}", markup=True))
    b.add(
        b.p(
            "<b>Additions to or deviations from the method.</b> "
            + escape(control.deviations or BLANK),
            markup=True,
        )
    )
    b.add(
        b.p(
            "<b>Zeros.</b> Wind-off, not-spinning balance readings (zero runs) are taken before "
            "and after each block of data runs; a data run subtracts the mean of the zeros it "
            "names, and the zero_shift flag compares them. <b>Tares.</b> Wind-off readings at "
            "spin (tare runs) give the spin tare, interpolated in spin rate and subtracted from "
            "the spinning data runs. <b>Data runs.</b> At each set tunnel speed the spin rate is "
            "stepped up and back down; each run is averaged over its whole record after the "
            "steadiness checks of the quality flags.",
            markup=True,
        )
    )
    b.add(
        b.p(
            "<b>Axes and sign conventions.</b> x downstream, y the lift axis, z = x × y along the "
            "cylinder axis; the spin rate ω is positive counter-clockwise seen from +z; spin ratio "
            "α = ωR/U is signed with ω; θ is measured on the surface from the windward point, "
            "increasing in the sense of positive spin. Positive spin gives lift towards −y, so CL "
            "is negative (CL = −2πα in potential flow); CM is the torque about +z on q·d·b·R and "
            "C_power the power to spin on q·U·d·b.",
            markup=True,
        )
    )
    ax = plotting.plot_axes_sketch(axes((4.6, 3.0)))
    b.figure(ax.figure, f"{b.next_figure()} Axes and sign conventions, seen from +z.",
             width=0.55 * WIDTH)  # fmt: skip
