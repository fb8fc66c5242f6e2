"""Synthetic campaigns with known truth: the demo data and the end-to-end tests.

:func:`make_campaign` writes a complete campaign folder (campaign.toml, runs.csv, logs/) from a
:class:`~tunnelred.demo.spec.SynthSpec` by running the forward model of the test
(:mod:`tunnelred.demo.forward`), and a ``truth.csv`` holding, per data run, the free-air
coefficients the reduction should recover (:mod:`tunnelred.demo.truth`) and the in-tunnel
(uncorrected) values the forward model produced. :func:`write_demo_campaign` writes the invented
demo scenario of ``sample_runs/``.

A :class:`~tunnelred.demo.spec.Fault` changes the forward model for one run (an unsteady drive, a
drifting tunnel, a leaking tap, a knock on the model, a wrong pitot or scanner reference, …), each
kind built to raise one quality flag; every faulty run is followed by a clean retake.
"""

from __future__ import annotations

import math
import shutil
from datetime import datetime, timedelta
from pathlib import Path

import numpy as np
import pandas as pd

from tunnelred.demo.forward import (
    Ambient,
    air_viscosity,
    ar1,
    channel_signals,
    imbalance_loads,
    in_tunnel,
    knock,
    moist_air_density,
    pitot_reading,
    stream_times,
    tare_loads,
    tubing_head,
    tunnel_cp,
    wind_to_balance,
    zero_signals,
)
from tunnelred.demo.spec import RPM, ScheduledRun, SynthSpec, demo_spec, schedule
from tunnelred.demo.systematics import Systematics, draw_systematics
from tunnelred.demo.truth import GRID

__all__ = ["make_campaign", "write_demo_campaign"]


class _Writer:
    """Simulates each run and writes its logs; collects runs.csv rows and the truth table."""

    def __init__(self, dest: Path, spec: SynthSpec):
        self.dest = dest
        self.spec = spec
        self.rng = np.random.default_rng(spec.seed)
        self.runs = schedule(spec)
        self.t0 = datetime.fromisoformat(spec.start)
        end = self.runs[-1].start + self.runs[-1].duration
        self.ambient = Ambient(spec, end)
        self.configs = {c.label: c for c in spec.configurations}
        self.matrix = np.asarray(spec.matrix, dtype=float)
        n = spec.n_taps
        self.tap_azimuth = np.round(
            np.arange(n) * 360.0 / n + spec.tap_azimuth_scatter * self.rng.standard_normal(n), 2
        )
        self.tap_delay = np.round(self.rng.uniform(*spec.tap_delay_range, n), 5)
        self.tap_names = tuple(f"tap{k + 1:02d}" for k in range(n))
        # The declared values above go to campaign.toml; the physics runs on the true ones.
        data_runs = sum(r.kind == "data" for r in self.runs)
        if spec.systematic_errors:
            self.errors = draw_systematics(spec, data_runs)
        else:
            self.errors = Systematics.none(n, data_runs)
        self.physics = self.errors.true_spec(spec)
        self.true_matrix = np.asarray(self.physics.matrix, dtype=float)
        self.data_index = -1
        self.zero_steps = []
        for r in self.runs:
            if r.fault is not None and r.fault.kind == "zero_shift":
                volts = channel_signals(r.fault.size * np.asarray(spec.full_scale), self.matrix)
                self.zero_steps.append((r.start + r.duration + 1.0, np.asarray(volts)))
        self.rows: list[dict] = []
        self.truth: list[dict] = []

    # --- files -----------------------------------------------------------------------------

    def _write_csv(self, rel: str, columns: dict[str, tuple[np.ndarray, int]]) -> str:
        frame = pd.DataFrame({name: np.round(v, dec) for name, (v, dec) in columns.items()})
        path = self.dest / rel
        path.parent.mkdir(parents=True, exist_ok=True)
        frame.to_csv(path, index=False, float_format="%.8g", lineterminator="\n")
        return rel

    def _balance_log(self, r: ScheduledRun, t, loads, omega) -> str:
        s = self.spec
        signals = channel_signals(loads, self.true_matrix)
        signals = signals + zero_signals(s, r.start + t, self.zero_steps)
        signals = signals + s.balance_noise * self.rng.standard_normal(signals.shape)
        cols = {"time [s]": (t, 5)}
        for k, name in enumerate(s.channels):
            cols[f"{name} [V]"] = (signals[:, k], 5)
        rpm = omega / RPM * (1.0 + s.tachometer_noise * self.rng.standard_normal(t.size))
        rpm = rpm * (1.0 + self.errors.tachometer)
        cols["speed [rpm]"] = (rpm, 1)
        return self._write_csv(f"logs/{r.run}_balance.csv", cols)

    # --- runs ------------------------------------------------------------------------------

    def _spin(self, n, dt, omega_set, scatter):
        if omega_set == 0.0:
            return np.zeros(n)
        s = self.spec
        return omega_set * (1.0 + scatter * ar1(self.rng, n, dt, s.spin_jitter_time))

    def wind_off(self, r: ScheduledRun) -> None:
        s = self.spec
        t = stream_times(self.rng, s.balance_rate, r.duration)
        omega_set = 0.0 if r.kind == "zero" else r.spin_set * RPM
        dt = 1.0 / s.balance_rate
        omega = self._spin(t.size, dt, omega_set, s.spin_jitter)
        angle = self.rng.uniform(0, 2 * np.pi) + np.cumsum(omega) * dt
        loads = tare_loads(s, omega) + imbalance_loads(s, omega, angle)
        log = self._balance_log(r, t, loads, omega)
        self._row(r, balance_log=log)

    def data(self, r: ScheduledRun) -> None:
        s = self.spec
        true = self.physics  # geometry, flow angle, alignment as they really are
        errors = self.errors
        self.data_index += 1
        rng = self.rng
        cfg = self.configs[r.config]
        fault = r.fault.kind if r.fault is not None else ""
        base_rate = 2.0 * max(s.tunnel_rate, s.balance_rate, s.pressure_rate)
        dt = 1.0 / base_rate
        tb = np.arange(-0.05, r.duration + 0.05, dt)
        n = tb.size
        inside = (tb >= 0.0) & (tb <= r.duration)

        drift = r.fault.size if fault == "speed_drift" else s.speed_drift * rng.standard_normal()
        U_mean = r.speed_set * (1.0 + s.speed_set_error * rng.standard_normal())
        turbulence = ar1(rng, n, dt, s.turbulence_time)
        U = U_mean * (1.0 + drift * (tb / r.duration - 0.5) + s.turbulence * turbulence)
        scatter = r.fault.size if fault == "spin_scatter" else s.spin_jitter
        omega = self._spin(n, dt, r.spin_set * RPM, scatter)
        if fault == "spin_drift":
            omega = omega * (1.0 + r.fault.size * (tb / r.duration - 0.5))
        T, p, RH = self.ambient(r.start + tb, rng, dt)
        if fault == "temperature_drift":
            T = T + r.fault.size * (tb / r.duration - 0.5)
        rho = moist_air_density(T, p, RH)
        mu = air_viscosity(T)
        q = 0.5 * rho * U**2
        # A model at rest is indexed at encoder zero, so its taps sit at their azimuths.
        angle0 = rng.uniform(0, 2 * np.pi) if r.spin_set != 0.0 else 0.0
        angle = angle0 + np.concatenate([[0.0], np.cumsum(omega[1:]) * dt])

        # Run-level truth at the record's mean conditions.
        T_m, p_m, RH_m = (float(np.mean(x[inside])) for x in (T, p, RH))
        rho_m = float(moist_air_density(T_m, p_m, RH_m))
        mu_m = float(air_viscosity(T_m))
        q_m = float(np.mean(q[inside]))
        omega_m = float(np.mean(omega[inside]))
        U_m = math.sqrt(2.0 * q_m / rho_m)
        # A planted hysteresis offsets the down sweep's true lift (0 in the demo).
        offset = s.down_sweep_lift_offset if r.leg == "down" else 0.0
        state = in_tunnel(true, cfg.end_plates, U_m, q_m, omega_m, rho_m, mu_m, lift_offset=offset)

        # Tunnel log.
        tt = stream_times(rng, s.tunnel_rate, r.duration)
        U_t, rho_t, p_t = (np.interp(tt, tb, x) for x in (U, rho, p))
        dp = pitot_reading(rho_t, U_t, p_t) * (1.0 + errors.pitot_gain)
        dp = dp + errors.pitot_zero[self.data_index] + s.pitot_noise * rng.standard_normal(tt.size)
        if fault == "repeat_disagreement":
            dp = dp + r.fault.size
        tunnel_cols = {
            "time [s]": (tt, 4),
            "dp_pitot [Pa]": (dp, 3),
            "T [degC]": (np.interp(tt, tb, T) + errors.thermometer - 273.15, 2),
            "p_baro [hPa]": ((p_t + errors.barometer) / 100.0, 2),
            "RH [%]": (100.0 * (np.interp(tt, tb, RH) + errors.hygrometer), 1),
        }
        if fault == "stream_overlap":
            kept = tt <= r.fault.size * r.duration
            tunnel_cols = {name: (v[kept], dec) for name, (v, dec) in tunnel_cols.items()}
        tunnel_log = self._write_csv(f"logs/{r.run}_tunnel.csv", tunnel_cols)

        # Balance log: quasi-steady loads sample by sample, shedding, tare, imbalance.
        t_b = stream_times(rng, s.balance_rate, r.duration)
        U_b, q_b, w_b = (np.interp(t_b, tb, x) for x in (U, q, omega))
        rho_b, mu_b = np.interp(t_b, tb, rho), np.interp(t_b, tb, mu)
        sample = in_tunnel(true, cfg.end_plates, U_b, q_b, w_b, rho_b, mu_b, lift_offset=offset)
        area = true.diameter * true.span
        f_shed = s.shedding_strouhal * U_mean / true.diameter
        wander = np.cumsum(rng.standard_normal(t_b.size)) * math.sqrt(
            2.0 * np.pi * 0.1 * f_shed / s.balance_rate
        )
        phase = 2.0 * np.pi * f_shed * t_b + wander
        cl_rms = s.shedding_cl_rms * math.exp(-((state["alpha"] / 1.5) ** 2))
        lift = (sample["CL_uncorrected"] + cl_rms * math.sqrt(2.0) * np.sin(phase)) * q_b * area
        drag = (sample["CD_uncorrected"] + 0.1 * cl_rms * np.sin(2.0 * phase)) * q_b * area
        torque = sample["CM_uncorrected"] * q_b * area * true.diameter / 2.0
        fx, fy = wind_to_balance(drag, lift, true.alignment_angle - true.flow_angle)
        loads = np.stack([fx, fy, torque], axis=-1) + errors.balance_loads[self.data_index]
        loads = loads + tare_loads(s, w_b) + imbalance_loads(s, w_b, np.interp(t_b, tb, angle))
        if fault == "overload":
            loads[:, 1] += knock(t_b, r.fault.size * s.full_scale[1])
        balance_log = self._balance_log(r, t_b, loads, w_b)

        pressure_log = ""
        if r.pressure:
            pressure_log = self._pressure_log(r, tb, q, rho, omega, angle, state, fault)

        self._row(r, balance_log=balance_log, tunnel_log=tunnel_log, pressure_log=pressure_log)
        row = {
            "run": r.run,
            "config": r.config,
            "planted_fault": fault,
            "speed_set": r.speed_set,
            "spin_set": r.spin_set,
            "has_pressure": bool(r.pressure),
            "T": T_m,
            "p_baro": p_m,
            "RH": RH_m,
            "rho": rho_m,
            "mu": mu_m,
            "omega": omega_m,
            "Gamma": 2.0 * math.pi * omega_m * (true.diameter / 2.0) ** 2,
        }
        # + 0.0 turns the -0.0 of a run at rest into 0.0.
        for k in ("U", "q", "Re", "alpha", "CL", "CD", "CM", "C_power", "CL_p", "CD_p"):
            row[k] = float(state[k]) + 0.0
        row["L_D"] = row["CL"] / row["CD"]
        row["CL_ideal"] = -2.0 * np.pi * row["alpha"] + 0.0
        for k in ("eps_solid", "eps_wake", "delta_CD_buoyancy"):
            row[k] = float(state[k])
        for k in ("U", "q", "Re", "alpha", "CL", "CD", "CM", "C_power", "CL_p", "CD_p"):
            row[f"{k}_uncorrected"] = float(state[f"{k}_uncorrected"]) + 0.0
        row["L_D_uncorrected"] = row["CL_uncorrected"] / row["CD_uncorrected"]
        if s.systematic_errors:
            row.update(errors.truth_columns(s, self.data_index, self.tap_names))
        self.truth.append(row)

    def _pressure_log(self, r, tb, q, rho, omega, angle, state, fault) -> str:
        s = self.spec
        errors = self.errors
        rng = self.rng
        tp = stream_times(rng, s.pressure_rate, r.duration)
        q_p, rho_p, w_p = (np.interp(tp, tb, x) for x in (q, rho, omega))
        head = tubing_head(rho_p, w_p, self.physics.diameter / 2.0, s.transducer_radius)
        # Each tap where it really is, through the tubing it really has.
        delayed = tp[:, None] - (self.tap_delay + errors.tap_delay)[None, :]
        azimuth = np.deg2rad(self.tap_azimuth + errors.tap_azimuth)
        theta = np.interp(delayed, tb, angle) + azimuth[None, :]
        cp = tunnel_cp(theta, state)
        if fault == "dead_tap":
            k = int(r.fault.size)
            cp[:, k] = np.mean(tunnel_cp(GRID, state))
        noise = np.hypot(s.tap_noise * q_p, s.tap_noise_floor)[:, None]
        taps = cp * q_p[:, None] - head[:, None] + noise * rng.standard_normal(cp.shape)
        taps = taps + errors.scanner[None, :]
        if fault == "cl_disagreement":
            taps = taps * (1.0 + r.fault.size)
        elif fault == "stagnation_cp":
            taps = taps - r.fault.size
        encoder = np.rad2deg(np.interp(tp, tb, angle)) + errors.encoder
        counts = np.floor(np.mod(encoder, 360.0) / 360.0 * s.encoder_counts)
        cols = {"time [s]": (tp, 5), "angle [deg]": (counts * 360.0 / s.encoder_counts, 3)}
        for k, name in enumerate(self.tap_names):
            cols[f"{name} [Pa]"] = (taps[:, k], 2)
        return self._write_csv(f"logs/{r.run}_pressure.csv", cols)

    def _row(self, r: ScheduledRun, *, balance_log="", tunnel_log="", pressure_log="") -> None:
        start = self.t0 + timedelta(seconds=round(r.start))
        # A mistyped set point: the run sheet lists what the tunnel did not run at.
        fault = r.fault.kind if r.fault is not None else ""
        speed_set = r.speed_set * (1.0 + r.fault.size) if fault == "speed_setpoint" else r.speed_set
        spin_set = r.spin_set * (1.0 + r.fault.size) if fault == "spin_setpoint" else r.spin_set
        self.rows.append(
            {
                "run": r.run,
                "kind": r.kind,
                "config": r.config,
                "start": start.isoformat(timespec="seconds"),
                "balance_log": balance_log,
                "tunnel_log": tunnel_log,
                "pressure_log": pressure_log,
                "zero": ";".join(r.zero),
                "tare": ";".join(r.tare),
                "speed_set [m/s]": "" if math.isnan(speed_set) else f"{speed_set:g}",
                "spin_set [rpm]": "" if math.isnan(spin_set) else f"{spin_set:g}",
                "notes": r.notes,
            }
        )

    def write(self) -> pd.DataFrame:
        for r in self.runs:
            if r.kind == "data":
                self.data(r)
            else:
                self.wind_off(r)
        if self.spec.photo:
            (self.dest / self.spec.photo).write_bytes(model_drawing())
        (self.dest / "campaign.toml").write_text(_campaign_toml(self), encoding="utf-8")
        pd.DataFrame(self.rows).to_csv(self.dest / "runs.csv", index=False, lineterminator="\n")
        truth = pd.DataFrame(self.truth)
        truth.to_csv(
            self.dest / "truth.csv", index=False, float_format="%.10g", lineterminator="\n"
        )
        return truth


def _toml_value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, str):
        return '"' + v.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(v, int | float | np.floating | np.integer):
        return repr(float(v)) if isinstance(v, float | np.floating) else str(int(v))
    return "[" + ", ".join(_toml_value(x) for x in v) + "]"


def model_drawing(width: int = 240, height: int = 120) -> bytes:
    """A PNG drawing of the demo model (a cylinder between two end plates), standing in for the
    photograph a facility would file; written with zlib so that it is byte-identical each time."""
    import struct
    import zlib

    image = np.full((height, width), 255, dtype=np.uint8)
    image[height // 2 - 14 : height // 2 + 14, 30 : width - 30] = 150  # the cylinder, side on
    image[height // 2 - 28 : height // 2 + 28, 24:30] = 40  # end plates (2 d)
    image[height // 2 - 28 : height // 2 + 28, width - 30 : width - 24] = 40
    raw = b"".join(b"\x00" + row.tobytes() for row in image)

    def chunk(kind: bytes, body: bytes) -> bytes:
        return (
            struct.pack(">I", len(body))
            + kind
            + body
            + struct.pack(">I", zlib.crc32(kind + body) & 0xFFFFFFFF)
        )

    header = struct.pack(">IIBBBBB", width, height, 8, 0, 0, 0, 0)  # 8-bit greyscale
    return (
        b"\x89PNG\r\n\x1a\n"
        + chunk(b"IHDR", header)
        + chunk(b"IDAT", zlib.compress(raw, 9))
        + chunk(b"IEND", b"")
    )


def _campaign_toml(w: _Writer) -> str:
    s = w.spec
    lines = [
        "# Synthetic campaign written by tunnelred.demo (invented scenario, not data).",
        "",
    ]

    calibrated = {name: (ref, date) for name, ref, date in s.calibrations}

    def table(name, items, *, array=False):
        lines.append(f"[[{name}]]" if array else f"[{name}]")
        instrument = name.removeprefix("instruments.")
        if name.startswith("instruments.") and instrument in calibrated:
            reference, date = calibrated[instrument]
            items = [*items, ("calibration_reference", reference), ("calibration_date", date)]
        lines.extend(f"{k} = {_toml_value(v)}" for k, v in items)
        lines.append("")

    table(
        "campaign",
        [("title", s.title), ("facility", s.facility), ("date", s.date), ("notes", s.notes)],
    )
    table("report", list(s.report))
    for revision, date, change in s.revision_history:
        items = [("revision", revision), ("date", date), ("change", change)]
        table("report.revision_history", items, array=True)
    table(
        "tunnel",
        [
            ("section", "closed"),
            ("height", f"{s.tunnel_height * 1000:g} mm"),
            ("u_height", f"{s.u_height * 1000:g} mm"),
            ("width", s.tunnel_width),
            ("u_width", s.u_width),
            ("flow_angle", f"{s.flow_angle:g} deg"),
            ("u_flow_angle", f"{s.u_flow_angle:g} deg"),
            ("static_pressure_gradient", s.static_pressure_gradient),
            ("u_static_pressure_gradient", s.u_static_pressure_gradient),
            ("q_source", "pitot"),
        ],
    )
    table(
        "model",
        [
            ("diameter", f"{s.diameter * 1000:g} mm"),
            ("u_diameter", f"{s.u_diameter * 1000:g} mm"),
            ("span", s.span),
            ("u_span", s.u_span),
            ("spans_section", True),
            ("transducer_radius", f"{s.transducer_radius * 1000:g} mm"),
            ("surface", s.surface),
            *([("photo", s.photo)] if s.photo else []),
        ],
    )
    for c in s.configurations:
        items = [("description", c.description), ("end_plates", c.end_plates)]
        if c.end_plate_diameter is not None:
            items.append(("end_plate_diameter", c.end_plate_diameter))
        table(f"configurations.{c.label}", items)
        if c.tolerance_overrides:
            table(f"configurations.{c.label}.tolerances", list(c.tolerance_overrides.items()))
    table(
        "instruments.balance",
        [
            ("channels", list(s.channels)),
            ("matrix", [list(row) for row in s.matrix]),
            ("full_scale", list(s.full_scale)),
            ("u_fraction_of_full_scale", list(s.u_balance_fraction)),
            ("u_matrix_relative", s.u_matrix_relative),
            ("alignment_angle", f"{s.alignment_angle:g} deg"),
            ("u_alignment_angle", f"{s.u_alignment_angle:g} deg"),
        ],
    )
    table("instruments.scanner", [("full_scale", 2500.0), ("u", s.u_scanner)])
    table("instruments.pitot", [("u", s.u_pitot), ("u_relative", s.u_pitot_relative)])
    table("instruments.thermometer", [("u", s.u_thermometer)])
    table("instruments.barometer", [("u", f"{s.u_barometer / 100:g} hPa")])
    table("instruments.hygrometer", [("u", s.u_hygrometer)])
    table("instruments.tachometer", [("u_relative", s.u_tachometer_relative)])
    table("instruments.encoder", [("u", f"{s.u_encoder:g} deg")])
    for name, az, delay in zip(w.tap_names, w.tap_azimuth, w.tap_delay, strict=True):
        lines.append("[[taps]]")
        lines.append(f"name = {_toml_value(name)}")
        lines.append(f'azimuth = "{az:g} deg"')
        lines.append(f"u_azimuth = {_toml_value(s.u_azimuth)}")
        lines.append(f'tubing_delay = "{delay * 1000:g} ms"')
        lines.append(f'u_tubing_delay = "{s.u_tubing_delay * 1000:g} ms"')
        lines.append("")
    table(
        "reduction",
        [
            ("blockage", s.blockage),
            ("lift_interference", s.lift_interference),
            ("buoyancy", s.buoyancy),
        ],
    )
    return "\n".join(lines)


# ---------------------------------------------------------------------------------------------
# Public entry points
# ---------------------------------------------------------------------------------------------


def make_campaign(dest, spec: SynthSpec) -> pd.DataFrame:
    """Write a synthetic campaign folder with known truth.

    Parameters
    ----------
    dest : str or path-like
        Folder to write; created if absent. Its ``campaign.toml``, ``runs.csv``, ``truth.csv``
        and ``logs/`` are replaced; nothing else in it is touched.
    spec : SynthSpec
        The scenario.

    Returns
    -------
    pandas.DataFrame
        The truth table (also written as ``truth.csv``): one row a data run, keyed by ``run``,
        with the free-air values under the names of docs/results.md (``U``, ``q``, ``Re``,
        ``alpha``, ``CL``, ``CD``, ``CM``, ``C_power``, ``L_D``, ``CL_p``, ``CD_p``, …), the
        in-tunnel values as ``<X>_uncorrected``, the correction sizes (``eps_solid``,
        ``eps_wake``, ``delta_CD_buoyancy``), the run-mean air, ``planted_fault`` ("" for a clean
        run) and ``has_pressure``. ``CL_p`` and ``CD_p`` are given for every run, with a
        pressure log or not.

    Notes
    -----
    The forward model is described in the module docstring. The whole folder is a function of
    ``spec`` (numpy Generator seeded with ``spec.seed``): two writes are byte-identical.

    Examples
    --------
    >>> import tempfile
    >>> from dataclasses import replace
    >>> spec = replace(demo_spec(), speeds=(8.0,), spin_ratios_up=(0.0, 2.0),
    ...                spin_ratios_down=(), configurations=demo_spec().configurations[:1],
    ...                tare_rpms=(2000.0, 3000.0), repeat_point=None, faults=(),
    ...                pressure_speeds=())
    >>> with tempfile.TemporaryDirectory() as d:
    ...     truth = make_campaign(d, spec)
    >>> truth["run"].tolist()
    ['R001', 'R002']
    """
    dest = Path(dest)
    dest.mkdir(parents=True, exist_ok=True)
    if (dest / "logs").exists():
        shutil.rmtree(dest / "logs")
    return _Writer(dest, spec).write()


def write_demo_campaign(dest, *, seed: int = 2026) -> pd.DataFrame:
    """Write the demo campaign (``tunnelred demo DEST``; also how sample_runs/ is made).

    Parameters
    ----------
    dest : str or path-like
        Folder to write.
    seed : int
        Seed of the random generator; 2026 gives sample_runs/.

    Returns
    -------
    pandas.DataFrame
        The truth table, as :func:`make_campaign`.
    """
    return make_campaign(dest, demo_spec(seed))
