"""The run-level model: the vectorised map from a run's inputs to every reported quantity.

Evaluated over a leading batch axis, it gives the nominal values, the GUM sensitivities (one
batched call) and the Monte Carlo draws with the same code (the package docstring).
"""

from __future__ import annotations

import numpy as np

from tunnelred.engine.reduction.loads import CalibrationStep
from tunnelred.engine.reduction.taps import PressureModel
from tunnelred.physics import air, balance, conditions, corrections, pressure, theory


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
        # The coefficients' q carries the flow's unsteadiness over the record, which their loads
        # (and tap readings) follow; the run's mean q, U, Re do not (air_data_inputs).
        q_coef, U_coef = q_u, U_u
        if "dp_flow" in x:
            q_coef = conditions.dynamic_pressure(qc + x["dp_flow"], p)
            U_coef = conditions.velocity(q_coef, rho)
        d, b, h = x["diameter"], x["span"], x["height"]
        radius = d / 2
        omega = x["omega"] * (1 + x["omega_spec"])
        alpha_u = conditions.spin_ratio(omega, radius, U_u)
        Re_u = conditions.reynolds_number(rho, U_u, d, mu)
        out = {
            "T": temperature,
            "p_baro": p,
            "RH": rh,
            "rho": rho,
            "mu": mu,
            "Mach": conditions.mach_number(U_u, air.speed_of_sound(temperature)),
            "omega": omega,
            "Gamma": conditions.circulation(omega, radius),
        }
        nan = np.full_like(q_u, np.nan)
        if has_balance:
            loads = [
                # The tare was read through the same calibration as the run.
                (x[n] + x[f"{n}_spec"] - x[f"{n}_tare"] - x.get(f"{n}_tare_interp", 0.0))
                * x["calibration"]
                for n in ("Fx", "Fy", "Mz")
            ]
            if calibration is not None:
                step = (x["calibration_coefficients"] - calibration.coefficients) @ (
                    calibration.sensitivity.T
                )
                loads = [load + step[..., k] for k, load in enumerate(loads)]
            drag, lift = balance.balance_to_wind(
                loads[0], loads[1], x["alignment"] - x["flow_angle"]
            )
            coeffs = balance.force_coefficients(lift, drag, loads[2], q_coef, U_coef, omega, d, b)
        else:
            coeffs = {k: nan for k in ("CL", "CD", "CM", "C_power", "L_D")}
        cp_u = None
        CL_p, CD_p = nan, nan
        if theta_bins is not None:
            pm = pressure_points
            head = pressure.centrifugal_head(rho, omega, radius, model_cfg.transducer_radius)
            # Each point pools its taps' samples: their scanner ports' errors and azimuth errors
            # enter in the shares of their samples; an azimuth error δ (assigned minus true
            # azimuth) read the curve at θ − δ, so Cp(θ) is the reading plus its slope times δ.
            delta = x["tap_azimuth"] @ pm.share.T + x["encoder"][..., None]
            # The delays were turned into azimuth with the measured spin rate: its error too.
            delta = delta - np.degrees((omega - pm.omega)[..., None] * pm.delay)
            p_tap = x["p_bin"] + x["p_scanner"] @ pm.share.T + pm.slope * delta + head[..., None]
            cp_u = p_tap / q_coef[..., None]
        if theta_bins is not None and integrate:
            CL_p, CD_p = pressure.integrate_cp(theta_bins, cp_u, max_gap=red.max_tap_gap)
            if "quadrature_CL_p" in x:  # the rule's own error at the points' spacing
                CL_p, CD_p = CL_p + x["quadrature_CL_p"], CD_p + x["quadrature_CD_p"]
        cd_for_wake = coeffs["CD"] if has_balance else CD_p
        cl_for_lift = coeffs["CL"] if has_balance else CL_p
        wc = corrections.wall_correction(
            method,
            diameter=d,
            height=h,
            span=b,
            width=x["width"],
            drag_coefficient=cd_for_wake,
            lift_coefficient=cl_for_lift,
            dynamic_pressure=q_u,
            static_pressure_gradient=x["dpdx"],
            blockage_factor=red.maskell_factor,
            lift_interference=red.lift_interference,
            buoyancy=red.buoyancy,
            spans_section=model_cfg.spans_section,
        )
        corrected = corrections.apply_wall_correction(
            wc,
            U=U_u,
            q=q_u,
            alpha=alpha_u,
            Re=Re_u,
            CL=coeffs["CL"],
            CD=coeffs["CD"],
            CM=coeffs["CM"],
            C_power=coeffs["C_power"],
            CL_p=CL_p,
            CD_p=CD_p,
            Cp=cp_u,
            truncation=x["wall_truncation"],
        )
        for name in ("U", "q", "Re", "alpha", "CL", "CD", "CM", "C_power", "CL_p", "CD_p"):
            out[name] = np.broadcast_to(corrected[name], q_u.shape)
        out["L_D"] = np.where(out["CD"] != 0, out["CL"] / out["CD"], np.nan)
        uncorrected = {"q": q_u, "U": U_u, "Re": Re_u, "alpha": alpha_u, "CL_p": CL_p, "CD_p": CD_p}
        uncorrected.update(coeffs)
        for name, value in uncorrected.items():
            out[f"{name}_uncorrected"] = value
        out["eps_solid"] = np.broadcast_to(wc.eps_solid, q_u.shape)
        out["eps_wake"] = np.broadcast_to(wc.eps_wake, q_u.shape)
        out["delta_CD_buoyancy"] = np.broadcast_to(wc.delta_CD_buoyancy, q_u.shape)
        out["delta_alpha_lift"] = np.broadcast_to(wc.delta_alpha_lift, q_u.shape)
        # The potential-flow comparison is part of the model, so that it carries an uncertainty.
        out["CL_ideal"] = theory.lift_coefficient(out["alpha"])
        with np.errstate(invalid="ignore", divide="ignore"):
            out["lift_efficiency"] = np.where(
                out["alpha"] != 0, out["CL"] / out["CL_ideal"], np.nan
            )
        out["theta_stag_ideal"] = theory.stagnation_angles(out["alpha"])[0]
        for name in ("theta_stag", "Cp_max", "Cp_min", "theta_Cp_min", "Cp_base"):
            out[name] = nan
        if cp_u is not None:
            out["Cp"] = corrected["Cp"]
            out["Cp_uncorrected"] = cp_u
            features = theory.surface_features(theta_bins, out["Cp"], base_arc=red.base_arc)
            # An azimuth error moves the measured features along θ with the whole curve.
            mean_delta = np.mean(delta, axis=-1)
            for name, value in features.items():
                shift = mean_delta if name.startswith("theta") else 0.0
                out[name] = np.broadcast_to(value - shift, q_u.shape)
        return out

    return model
