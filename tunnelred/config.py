"""campaign.toml → frozen, validated configuration objects.

Every quantity is held in SI units (angles in degrees, relative humidity as a fraction 0–1).
The schema is documented key by key in docs/input-format.md; this module is its one home.
Parsing and validation (``load_config``) follow the dataclasses.
"""

from __future__ import annotations

from dataclasses import dataclass, field

__all__ = [
    "CampaignInfo",
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
]

#: Loads the balance calibration yields, in this order: [N], [N], [N m].
LOAD_NAMES = ("Fx", "Fy", "Mz")

#: Names accepted for [reduction] blockage.
BLOCKAGE_METHODS = ("allen-vincenti", "maskell", "maskell-3d", "none")


@dataclass(frozen=True)
class CampaignInfo:
    title: str
    facility: str
    date: str = ""
    notes: str = ""


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
    agreement_k: float = 2.0  # coverage factor for balance/pressure and repeat agreement [-]
    stagnation_cp: float = 0.05  # |Cp_max - 1| allowed on alpha = 0 runs [-]


@dataclass(frozen=True)
class ReductionConfig:
    blockage: str = "allen-vincenti"  # one of BLOCKAGE_METHODS
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
    sha256: str = ""  # of campaign.toml's bytes

    def tap(self, name: str) -> TapConfig:
        for t in self.taps:
            if t.name == name:
                return t
        raise KeyError(name)
