"""The run-level model: the vectorised map from a run's inputs to every reported quantity.

Evaluated over a leading batch axis, it gives the nominal values, the GUM sensitivities (one
batched call) and the Monte Carlo draws with the same code (the package docstring). One evaluation
takes five named steps, each returning what the next reads: the free stream as measured
(:class:`FreeStream`), the balance's coefficients, the taps' Cp (:class:`TapCp`), the pressure
forces, then the wall corrections and the potential-flow comparison, which fill the outputs.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from tunnelred.engine.reduction.loads import CalibrationStep
from tunnelred.engine.reduction.taps import PressureModel
from tunnelred.physics import air, balance, conditions, corrections, pressure, theory

#: The balance's coefficients, uncorrected, as balance.force_coefficients names them.
BALANCE_COEFFICIENTS = ("CL", "CD", "CM", "C_power", "L_D")


@dataclass(frozen=True)
class FreeStream:
    """The air and the flow of one evaluation as measured, before any wall correction.

    Arrays over the batch axis: ``temperature`` [K], ``pressure`` [Pa], ``humidity`` [0–1],
    ``rho`` [kg/m³], ``mu`` [Pa s], ``q`` [Pa], ``U`` [m/s], ``Re`` [-], ``omega`` [rad/s],
    ``alpha`` [-]; ``q_coef`` and ``U_coef``, the q and U the coefficients are formed with; and the
    geometry drawn with them: ``diameter``, ``span``, ``height`` [m].
    """

    temperature: np.ndarray
    pressure: np.ndarray
    humidity: np.ndarray
    rho: np.ndarray
    mu: np.ndarray
    q: np.ndarray
    U: np.ndarray
    Re: np.ndarray
    omega: np.ndarray
    alpha: np.ndarray
    q_coef: np.ndarray
    U_coef: np.ndarray
    diameter: np.ndarray
    span: np.ndarray
    height: np.ndarray

    @property
    def radius(self) -> np.ndarray:
        return self.diameter / 2


@dataclass(frozen=True)
class TapCp:
    """The taps' Cp at the pressure points, uncorrected (``[..., points]``), and each point's
    azimuth error δ [deg] (assigned minus true azimuth), which moves the measured features."""

    cp: np.ndarray
    delta: np.ndarray


def _free_stream(x: dict) -> FreeStream:
    """Air data, q, U, Re and the spin from the instruments' readings and their errors."""
    temperature = x["T"] + x["T_spec"]
    p = x["p"] + x["p_spec"]
    rh = np.clip(x["RH"] + x["RH_spec"], 0.0, 1.0)
    qc = x["dp"] + x["dp_spec"]
    if "k_contraction" in x:
        qc = qc * x["k_contraction"]
    rho = air.density(temperature, p, rh)
    mu = air.viscosity(temperature)
    q_u = conditions.dynamic_pressure(qc, p)
    U_u = conditions.velocity(q_u, rho)
    # The coefficients' q carries the flow's unsteadiness over the record, which their loads (and
    # tap readings) follow; the run's mean q, U, Re do not (air_data_inputs).
    q_coef, U_coef = q_u, U_u
    if "dp_flow" in x:
        q_coef = conditions.dynamic_pressure(qc + x["dp_flow"], p)
        U_coef = conditions.velocity(q_coef, rho)
    d = x["diameter"]
    radius = d / 2
    omega = x["omega"] * (1 + x["omega_spec"])
    Re = conditions.reynolds_number(rho, U_u, d, mu)
    alpha = conditions.spin_ratio(omega, radius, U_u)
    return FreeStream(
        temperature, p, rh, rho, mu, q_u, U_u, Re, omega, alpha, q_coef, U_coef, d, x["span"],
        x["height"],
    )  # fmt: skip


def _balance_coefficients(
    x: dict, fs: FreeStream, calibration: CalibrationStep | None
) -> dict[str, np.ndarray]:
    """The uncorrected force coefficients from the net loads in wind axes."""
    loads = [
        # The tare was read through the same calibration as the run.
        (x[n] + x[f"{n}_spec"] - x[f"{n}_tare"] - x.get(f"{n}_tare_interp", 0.0)) * x["calibration"]
        for n in ("Fx", "Fy", "Mz")
    ]
    if calibration is not None:
        step = (x["calibration_coefficients"] - calibration.coefficients) @ (
            calibration.sensitivity.T
        )
        loads = [load + step[..., k] for k, load in enumerate(loads)]
    drag, lift = balance.balance_to_wind(loads[0], loads[1], x["alignment"] - x["flow_angle"])
    return balance.force_coefficients(
        lift, drag, loads[2], fs.q_coef, fs.U_coef, fs.omega, fs.diameter, fs.span
    )


def _tap_cp(x: dict, fs: FreeStream, pm: PressureModel, transducer_radius: float) -> TapCp:
    """Each point's Cp from its readings, the rotation head and the taps' azimuth errors."""
    head = pressure.centrifugal_head(fs.rho, fs.omega, fs.radius, transducer_radius)
    # Each point pools its taps' samples: their scanner ports' errors and azimuth errors enter in
    # the shares of their samples; an azimuth error δ (assigned minus true azimuth) read the curve
    # at θ − δ, so Cp(θ) is the reading plus its slope times δ.
    delta = x["tap_azimuth"] @ pm.share.T + x["encoder"][..., None]
    # The delays were turned into azimuth with the measured spin rate: its error too.
    delta = delta - np.degrees((fs.omega - pm.omega)[..., None] * pm.delay)
    p_tap = x["p_bin"] + x["p_scanner"] @ pm.share.T + pm.slope * delta + head[..., None]
    return TapCp(p_tap / fs.q_coef[..., None], delta)


def _pressure_forces(
    x: dict, theta: np.ndarray, cp: np.ndarray, max_gap: float
) -> tuple[np.ndarray, np.ndarray]:
    """CL_p and CD_p, ∮Cp with the quadrature's own error at the points' spacing."""
    CL_p, CD_p = pressure.integrate_cp(theta, cp, max_gap=max_gap)
    if "quadrature_CL_p" in x:
        CL_p, CD_p = CL_p + x["quadrature_CL_p"], CD_p + x["quadrature_CD_p"]
    return CL_p, CD_p


def run_model(
    cfg,
    *,
    has_balance: bool,
    pressure_points: PressureModel | None = None,
    integrate: bool = False,
    calibration: CalibrationStep | None = None,
):
    """The vectorised map from run-level inputs to every reported quantity.

    ``pressure_points`` is the run's :class:`PressureModel` (None: no pressure log);
    ``integrate`` is False when its points leave a gap too wide for the pressure forces;
    ``calibration`` adds the loads' change with the balance coefficients (calibration_file).
    """
    theta_bins = None if pressure_points is None else pressure_points.theta
    model_cfg, red = cfg.model, cfg.reduction
    # Config resolved the method once (the 3-D substitution included); it is applied as it is.
    method = corrections.METHODS[red.blockage]

    def model(x: dict) -> dict:
        fs = _free_stream(x)
        q_u = fs.q
        out = {
            "T": fs.temperature,
            "p_baro": fs.pressure,
            "RH": fs.humidity,
            "rho": fs.rho,
            "mu": fs.mu,
            "Mach": conditions.mach_number(fs.U, air.speed_of_sound(fs.temperature)),
            "omega": fs.omega,
            "Gamma": conditions.circulation(fs.omega, fs.radius),
        }
        nan = np.full_like(q_u, np.nan)
        if has_balance:
            coeffs = _balance_coefficients(x, fs, calibration)
        else:
            coeffs = {k: nan for k in BALANCE_COEFFICIENTS}
        taps = None
        CL_p, CD_p = nan, nan
        if pressure_points is not None:
            taps = _tap_cp(x, fs, pressure_points, model_cfg.transducer_radius)
            if integrate:
                CL_p, CD_p = _pressure_forces(x, theta_bins, taps.cp, red.max_tap_gap)
        wc = corrections.wall_correction(
            method,
            diameter=fs.diameter,
            height=fs.height,
            span=fs.span,
            width=x["width"],
            drag_coefficient=coeffs["CD"] if has_balance else CD_p,
            lift_coefficient=coeffs["CL"] if has_balance else CL_p,
            dynamic_pressure=q_u,
            static_pressure_gradient=x["dpdx"],
            blockage_factor=red.maskell_factor,
            lift_interference=red.lift_interference,
            buoyancy=red.buoyancy,
            spans_section=model_cfg.spans_section,
        )
        corrected = corrections.apply_wall_correction(
            wc,
            U=fs.U,
            q=q_u,
            alpha=fs.alpha,
            Re=fs.Re,
            CL=coeffs["CL"],
            CD=coeffs["CD"],
            CM=coeffs["CM"],
            C_power=coeffs["C_power"],
            CL_p=CL_p,
            CD_p=CD_p,
            Cp=None if taps is None else taps.cp,
            truncation=x["wall_truncation"],
        )
        for name in ("U", "q", "Re", "alpha", "CL", "CD", "CM", "C_power", "CL_p", "CD_p"):
            out[name] = np.broadcast_to(corrected[name], q_u.shape)
        out["L_D"] = np.where(out["CD"] != 0, out["CL"] / out["CD"], np.nan)
        uncorrected = {"q": q_u, "U": fs.U, "Re": fs.Re, "alpha": fs.alpha}
        uncorrected.update(CL_p=CL_p, CD_p=CD_p, **coeffs)
        for name, value in uncorrected.items():
            out[f"{name}_uncorrected"] = value
        for name in ("eps_solid", "eps_wake", "delta_CD_buoyancy", "delta_alpha_lift"):
            out[name] = np.broadcast_to(getattr(wc, name), q_u.shape)
        # The potential-flow comparison is part of the model, so that it carries an uncertainty.
        out["CL_ideal"] = theory.lift_coefficient(out["alpha"])
        with np.errstate(invalid="ignore", divide="ignore"):
            out["lift_efficiency"] = np.where(
                out["alpha"] != 0, out["CL"] / out["CL_ideal"], np.nan
            )
        out["theta_stag_ideal"] = theory.stagnation_angles(out["alpha"])[0]
        for name in ("theta_stag", "Cp_max", "Cp_min", "theta_Cp_min", "Cp_base"):
            out[name] = nan
        if taps is not None:
            out["Cp"] = corrected["Cp"]
            out["Cp_uncorrected"] = taps.cp
            features = theory.surface_features(theta_bins, out["Cp"], base_arc=red.base_arc)
            # An azimuth error moves the measured features along θ with the whole curve.
            mean_delta = np.mean(taps.delta, axis=-1)
            for name, value in features.items():
                shift = mean_delta if name.startswith("theta") else 0.0
                out[name] = np.broadcast_to(value - shift, q_u.shape)
        return out

    return model
