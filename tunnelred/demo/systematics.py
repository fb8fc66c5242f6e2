"""True systematic errors of a synthetic campaign, drawn from the uncertainties it declares.

A real campaign.toml states each instrument's standard uncertainty; the instrument itself is off
by one unknown amount. :func:`draw_systematics` draws those amounts, seeded, from the declared
standard uncertainties of :class:`~tunnelred.demo.spec.SynthSpec` (normal, mean 0): the forward
model then runs with the true values (:meth:`Systematics.true_spec`, the instrument readings in
:mod:`tunnelred.demo.writer`) while campaign.toml keeps the declared ones. The reduction never
sees the errors; truth.csv records them (:meth:`Systematics.truth_columns`).

Which errors persist over the campaign and which are new each run follows the instrument:

- per campaign (one calibration, one installation): model diameter and span, test-section height
  and width, flow angle, static-pressure gradient, balance alignment, balance calibration
  factor, each tap's azimuth and tubing delay, each scanner port's offset, encoder zero,
  tachometer gain, pitot gain, thermometer, barometer and hygrometer offsets;
- per run (re-zeroed or load-dependent): the pitot transducer's zero and each balance channel's
  specification error (nonlinearity and hysteresis at that run's loads).

Like :mod:`tunnelred.demo.forward`, nothing here imports the reduction's formulas.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

from tunnelred.demo.spec import SynthSpec

__all__ = ["Systematics", "draw_systematics"]

#: Distinct stream of the seed for the systematic errors, so that drawing them leaves every
#: other random number of the campaign (noise, set-point errors) as it was.
_STREAM = 15

#: The declared geometry and installation values a campaign-wide error shifts, each with the
#: SynthSpec field of its declared standard uncertainty.
_SHIFTED = (
    ("diameter", "u_diameter"),
    ("span", "u_span"),
    ("tunnel_height", "u_height"),
    ("tunnel_width", "u_width"),
    ("flow_angle", "u_flow_angle"),
    ("static_pressure_gradient", "u_static_pressure_gradient"),
    ("alignment_angle", "u_alignment_angle"),
)


@dataclass(frozen=True)
class Systematics:
    """True minus declared (or reading minus true, for an instrument) of every input.

    Geometry [m], angles [deg], gradient [Pa/m], delays [s], pressures [Pa], temperature [K],
    humidity and gains as fractions [-]. ``pitot_zero`` and ``balance_loads`` have one entry a
    data run, in schedule order; ``balance_loads`` is (runs, 3): Fx, Fy [N], Mz [N m].
    """

    diameter: float = 0.0
    span: float = 0.0
    tunnel_height: float = 0.0
    tunnel_width: float = 0.0
    flow_angle: float = 0.0
    static_pressure_gradient: float = 0.0
    alignment_angle: float = 0.0
    calibration: float = 0.0  # the true matrix is the declared one times (1 + calibration)
    tap_azimuth: np.ndarray = field(default_factory=lambda: np.zeros(0))
    tap_delay: np.ndarray = field(default_factory=lambda: np.zeros(0))
    # per tap port, added to its reading
    scanner: np.ndarray = field(default_factory=lambda: np.zeros(0))
    encoder: float = 0.0  # added to the encoder angle
    tachometer: float = 0.0  # relative gain error of the rpm reading
    pitot_gain: float = 0.0
    thermometer: float = 0.0
    barometer: float = 0.0
    hygrometer: float = 0.0
    pitot_zero: np.ndarray = field(default_factory=lambda: np.zeros(0))
    balance_loads: np.ndarray = field(default_factory=lambda: np.zeros((0, 3)))

    @classmethod
    def none(cls, n_taps: int, data_runs: int) -> Systematics:
        """Every declared value exact (the demo)."""
        taps = np.zeros(n_taps)
        return cls(
            tap_azimuth=taps,
            tap_delay=taps,
            scanner=taps,
            pitot_zero=np.zeros(data_runs),
            balance_loads=np.zeros((data_runs, 3)),
        )

    def true_spec(self, spec: SynthSpec) -> SynthSpec:
        """The spec the physics runs on: the declared geometry and calibration plus the errors."""
        matrix = tuple(tuple(v * (1.0 + self.calibration) for v in row) for row in spec.matrix)
        shifted = {name: getattr(spec, name) + getattr(self, name) for name, _ in _SHIFTED}
        return replace(spec, **shifted, matrix=matrix)

    def truth_columns(self, spec: SynthSpec, data_index: int, tap_names) -> dict[str, float]:
        """truth.csv's record of the true values behind one data run (its index in order)."""
        true = self.true_spec(spec)
        row = {f"true_{name}": getattr(true, name) for name, _ in _SHIFTED}
        row |= {
            "error_calibration": self.calibration,
            "error_encoder": self.encoder,
            "error_tachometer": self.tachometer,
            "error_pitot_gain": self.pitot_gain,
            "error_pitot_zero": float(self.pitot_zero[data_index]),
            "error_thermometer": self.thermometer,
            "error_barometer": self.barometer,
            "error_hygrometer": self.hygrometer,
        }
        for k, name in enumerate(("Fx", "Fy", "Mz")):
            row[f"error_balance_{name}"] = float(self.balance_loads[data_index, k])
        for k, tap in enumerate(tap_names):
            row[f"error_azimuth_{tap}"] = float(self.tap_azimuth[k])
            row[f"error_delay_{tap}"] = float(self.tap_delay[k])
            row[f"error_scanner_{tap}"] = float(self.scanner[k])
        return row


def draw_systematics(spec: SynthSpec, data_runs: int) -> Systematics:
    """One seeded draw of every systematic error, from the standard uncertainties ``spec`` declares.

    Parameters
    ----------
    spec : SynthSpec
        The declared values and their ``u_*`` (as written into campaign.toml).
    data_runs : int
        Number of data runs (for the errors that are new each run).

    Returns
    -------
    Systematics
        Normal draws, mean 0, standard deviation the declared u; a function of ``spec.seed``.

    Examples
    --------
    >>> from tunnelred.demo.spec import demo_spec
    >>> e = draw_systematics(demo_spec(), 3)
    >>> e.tap_azimuth.shape, e.balance_loads.shape
    ((16,), (3, 3))
    """
    rng = np.random.default_rng([spec.seed, _STREAM])
    n = spec.n_taps
    u_balance = np.asarray(spec.u_balance_fraction) * np.asarray(spec.full_scale)
    # The pitot's declared u combines an offset and a relative part (of the mean reading):
    # the offset is its zero, the relative part its gain.
    # Keywords are evaluated in order: the draws come in the same sequence as ever.
    return Systematics(
        **{name: rng.normal(0.0, getattr(spec, u)) for name, u in _SHIFTED},
        calibration=rng.normal(0.0, spec.u_matrix_relative),
        tap_azimuth=rng.normal(0.0, spec.u_azimuth, n),
        tap_delay=rng.normal(0.0, spec.u_tubing_delay, n),
        scanner=rng.normal(0.0, spec.u_scanner, n),
        encoder=rng.normal(0.0, spec.u_encoder),
        tachometer=rng.normal(0.0, spec.u_tachometer_relative),
        pitot_gain=rng.normal(0.0, spec.u_pitot_relative),
        thermometer=rng.normal(0.0, spec.u_thermometer),
        barometer=rng.normal(0.0, spec.u_barometer),
        hygrometer=rng.normal(0.0, spec.u_hygrometer),
        pitot_zero=rng.normal(0.0, spec.u_pitot, data_runs),
        balance_loads=rng.normal(0.0, 1.0, (data_runs, 3)) * u_balance,
    )
