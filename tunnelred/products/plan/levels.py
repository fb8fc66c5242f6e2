"""The stated assumptions of a plan: noise levels and air (light: the command line reads them)."""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["NoiseLevels", "AirState"]


@dataclass(frozen=True)
class NoiseLevels:
    """The random fluctuations the plan assumes (defaults: the demo campaign's invented levels;
    put the facility's own, from an earlier entry, in their place).

    turbulence : relative standard deviation of the speed U(t) [-]; q fluctuates by twice it,
        and the loads with q.
    turbulence_time : its correlation time [s] (an AR(1) fluctuation).
    balance_noise : white noise on each load per sample, as a fraction of its full scale [-].
    pitot_noise : white noise on the q reading per sample [Pa].
    spin_jitter : relative standard deviation of the spin rate [-]; spin_jitter_time its
        correlation time [s].
    tap_noise, tap_noise_floor : white noise on each tap reading per sample, as a fraction of
        q [-] and absolute [Pa], added in quadrature.
    unsteady_cl : RMS of the fluctuating lift coefficient of vortex shedding at rest [-],
        falling with the spin as exp(-(alpha / unsteady_cl_decay)^2) (spin suppresses shedding),
        at f = St U / d with St = 0.2 (common practice).
    shedding_bandwidth : relative full width at half maximum of the shedding's spectral peak
        [-] (a Lorentzian line: correlation cos(2 pi f t) exp(-pi B f t)); a narrow band
        averages out of a record's mean faster than white noise of the same variance.
    imbalance : rotor imbalance m e [kg m]: a force m e omega^2 rotating with the model, on the
        balance's Fx and Fy once per revolution (in the data and the spin-tare records).
    wind_off_record : length of the zero and spin-tare records [s].
    """

    turbulence: float = 0.003
    turbulence_time: float = 0.3
    balance_noise: float = 1e-4
    pitot_noise: float = 0.05
    spin_jitter: float = 0.002
    spin_jitter_time: float = 0.05
    tap_noise: float = 0.004
    tap_noise_floor: float = 0.5
    unsteady_cl: float = 0.3
    unsteady_cl_decay: float = 1.5
    shedding_bandwidth: float = 0.1
    imbalance: float = 2.0e-6
    wind_off_record: float = 3.0


@dataclass(frozen=True)
class AirState:
    """The air the plan assumes: temperature [K], barometric pressure [Pa], RH fraction [-]."""

    T: float = 293.15
    p_baro: float = 101325.0
    RH: float = 0.5
