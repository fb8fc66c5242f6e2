"""The frozen objects a campaign.toml becomes, and the names its values may take.

Every quantity is held in SI units (angles in degrees, relative humidity as a fraction 0–1).
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

from tunnelred.common.errors import Problem

#: Loads the balance calibration yields, in this order: [N], [N], [N m].
LOAD_NAMES = ("Fx", "Fy", "Mz")

#: Names accepted for [reduction] tare_extrapolation.
TARE_EXTRAPOLATION = ("flag", "refuse")

#: Fewest azimuth bins [reduction] cp_bins accepts (45° bins; fewer cannot resolve Cp(θ)).
MIN_CP_BINS = 8
#: Most azimuth bins it accepts (0.1° bins, finer than any tap layout or encoder resolves); the
#: binned arrays grow with it, and 10⁷ bins took gigabytes.
MAX_CP_BINS = 3600


@dataclass(frozen=True)
class CampaignInfo:
    """campaign.toml's [campaign] table: the title and facility the report's first page names,
    with an optional date and free-text notes (docs/input-format.md)."""

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
