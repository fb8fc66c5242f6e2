"""What a synthetic campaign is: its specification, the faults it may plant, and its run schedule.

:class:`SynthSpec` holds everything the generator needs (its defaults make the demo,
:func:`demo_spec`); :class:`Fault` is a flaw planted on purpose in one data run; :func:`schedule`
lays out every run in time order with its zero and tare runs named.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from tunnelred.inputs.config import Configuration

__all__ = ["FAULT_KINDS", "Fault", "SynthSpec", "demo_spec", "twin_spec"]

#: Faults that :class:`SynthSpec` can plant, as named in truth.csv ``planted_fault``. Each is
#: named for the quality flag (:data:`tunnelred.engine.quality.FLAG_NAMES`) it is built to
#: raise; what each one changes in the forward model, and the unit of its ``size``, is in
#: :class:`Fault`.
FAULT_KINDS = (
    "spin_scatter",
    "speed_drift",
    "dead_tap",
    "zero_shift",
    "spin_drift",
    "temperature_drift",
    "stream_overlap",
    "tare_extrapolated",
    "overload",
    "few_revolutions",
    "cl_disagreement",
    "repeat_disagreement",
    "stagnation_cp",
    "speed_setpoint",
    "spin_setpoint",
)

#: Faults whose run carries a pressure log whatever the spec's pressure set points say.
_PRESSURE_FAULTS = ("dead_tap", "few_revolutions", "cl_disagreement", "stagnation_cp")


RPM = 2.0 * math.pi / 60.0  # rad/s per rpm


# ---------------------------------------------------------------------------------------------
# The specification of a synthetic campaign
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Fault:
    """A flaw planted on purpose in one data run.

    Each kind changes the forward model of the test, never its outputs: the logs are what the
    instruments would have recorded with that flaw. truth.csv keeps the true free-air values, so a
    faulty run's results depart from them where the flaw biases a measurement.

    Parameters
    ----------
    kind : str
        What goes wrong, one of :data:`FAULT_KINDS` (named for the flag it raises):

        - ``spin_scatter``: the drive holds the rpm badly (AR(1) scatter with the spec's
          ``spin_jitter_time``).
        - ``speed_drift``: the tunnel speed changes linearly over the record, rpm held.
        - ``dead_tap``: one tap flat-lines at the revolution-average pressure (its tubing leaks
          into the model's cavity).
        - ``zero_shift``: every balance zero steps just after the run, before its post-zero.
        - ``spin_drift``: the drive's rpm changes linearly over the record (its controller sags).
        - ``temperature_drift``: the air warms linearly over the record; density, viscosity and
          q follow it.
        - ``stream_overlap``: the tunnel log stops before the end of the record (the balance and
          pressure logs run on).
        - ``tare_extrapolated``: the run names only the spin-tare runs spun at most ``size``
          times its own rpm, as when the tare sweep stopped short of the data rpm; the spin
          must not be zero.
        - ``overload``: a knock on the model: the balance rings at 25 Hz under a Gaussian
          envelope (40 ms standard deviation) along the balance y axis, centred on a sample in
          mid-record; the ringing is odd about that sample, so it adds nothing to the mean load.
        - ``few_revolutions``: the acquisition stops early on every stream (the record is cut
          short); the run carries a pressure log.
        - ``cl_disagreement``: the pressure scanner's span is wrong (a wrong range setting):
          every tap reading, centrifugal head included, is ``1 + size`` times what it should be;
          the run carries a pressure log.
        - ``repeat_disagreement``: the pitot-static transducer reads ``size`` above the impact
          pressure (a zero offset): q, U, alpha and every coefficient of the run are biased
          alike, which only a repeat of the set point reveals.
        - ``stagnation_cp``: the scanner's reference port sees ``size`` above the tunnel static
          pressure (a leaking or misplaced reference tube), so every tap reads that much low;
          the run is at rest (``spin_ratio`` 0) and carries a pressure log.
        - ``speed_setpoint``, ``spin_setpoint``: runs.csv lists a set speed, or a set rpm,
          ``1 + size`` times the one the tunnel ran at (the set point mistyped in the run
          sheet); the measurements are clean. A ``spin_setpoint`` run must spin.
    config : str
        Configuration label of the run.
    speed : float
        Set tunnel speed of the run. [m/s]
    spin_ratio : float
        Nominal spin ratio of the run (the first run of the up sweep at this point). [-]
    size : float
        How large the flaw is, by kind: ``spin_scatter`` the relative standard deviation of the
        rpm [-]; ``speed_drift``, ``spin_drift`` the relative change of U, or of the rpm, from
        start to end of the record [-]; ``zero_shift`` the step of every channel's zero, as a
        fraction of that load's full scale [-]; ``dead_tap`` the index (0-based) of the tap;
        ``temperature_drift`` the change of T from start to end of the record [K];
        ``stream_overlap`` the fraction of the record the tunnel log covers (0 to 1) [-];
        ``tare_extrapolated`` the largest tare rpm named, as a fraction of the run's set rpm
        (0 to 1) [-]; ``overload`` the peak of the knock as a fraction of the Fy full scale [-];
        ``few_revolutions`` the record length [s]; ``cl_disagreement`` the scanner's relative
        span error [-]; ``repeat_disagreement`` the pitot zero offset [Pa]; ``stagnation_cp``
        the reference-pressure offset [Pa]; ``speed_setpoint``, ``spin_setpoint`` the relative
        error of the listed set point [-].

    Raises
    ------
    ValueError
        For an unknown kind, or a size or spin ratio the kind cannot take.

    Notes
    -----
    Every faulty run is followed by a clean retake at the same set point. A fault that biases
    the coefficients (``zero_shift``, ``repeat_disagreement``) makes the faulty run disagree with
    that retake; give it a second retake (``SynthSpec.retakes = 2``) so that the repeat check,
    which compares runs of one sweep direction, can tell which one is wrong.

    Examples
    --------
    >>> Fault("stagnation_cp", "plates", 9.0, 0.0, 5.0).kind
    'stagnation_cp'
    """

    kind: str
    config: str
    speed: float
    spin_ratio: float
    size: float

    def __post_init__(self):
        if self.kind not in FAULT_KINDS:
            raise ValueError(f"unknown fault kind {self.kind!r}; known: {', '.join(FAULT_KINDS)}")
        fractions = ("stream_overlap", "tare_extrapolated")
        if self.kind in fractions and not 0.0 < self.size < 1.0:
            raise ValueError(f"a {self.kind} fault takes a size between 0 and 1; got {self.size}")
        if self.kind == "few_revolutions" and not self.size > 0.0:
            raise ValueError(f"a few_revolutions fault takes a positive length; got {self.size}")
        if self.kind == "stagnation_cp" and self.spin_ratio != 0.0:
            raise ValueError("a stagnation_cp fault needs a run at rest (spin_ratio 0)")
        if self.kind in ("tare_extrapolated", "spin_setpoint") and self.spin_ratio == 0.0:
            raise ValueError(f"a {self.kind} fault needs a spinning run")


def _default_configurations():
    # The bare cylinder's mid-span pressure lift is 15 % above its whole-span balance lift (end
    # effects, see true_pressure_coefficients): its configuration allows for that difference.
    return (
        Configuration("plates", "end plates of 2 d diameter at both ends", True, 0.25),
        Configuration("bare", "no end plates", False, None, {"cl_agreement": 0.2}),
    )


@dataclass(frozen=True)
class SynthSpec:
    """Everything the synthetic-campaign generator needs; the defaults make the demo.

    Geometry, air and instruments are SI: lengths [m], pressures [Pa], temperatures [K], times
    [s], angles [deg], rates [Hz], speeds [m/s], rotation rates [rpm].

    Attributes
    ----------
    seed : int
        Seed of the numpy Generator; the whole campaign is a function of it.
    title, facility, date, notes : str
        [campaign] texts.
    start : str
        ISO 8601 time of the first run.
    diameter, span : float
        Model diameter d and loaded span b. [m]
    tunnel_height, tunnel_width : float
        Test-section height h (across which lift acts) and width. [m]
    flow_angle : float
        True flow angularity, toward +y. [deg]
    static_pressure_gradient : float
        Empty-tunnel dp/dx. [Pa/m]
    alignment_angle : float
        Balance x axis from tunnel x, toward +y. [deg]
    transducer_radius : float
        Radius of the pressure transducer on the spinning model. [m]
    configurations : tuple of Configuration
        Model configurations; one block of runs each.
    speeds : tuple of float
        Set tunnel speeds. [m/s]
    spin_ratios_up, spin_ratios_down : tuple of float
        Nominal spin ratios of the up sweep and of the down sweep that follows it. [-]
    pressure_speeds : tuple of float
        Speeds whose runs carry a pressure log. [m/s]
    pressure_spin_ratios : tuple of float
        Up-sweep spin ratios that carry a pressure log at those speeds. [-]
    repeat_point : tuple (str, float, float) or None
        (config, speed [m/s], spin ratio [-]) of the repeat runs, taken at the end of that block.
    repeat_count : int
        How many repeat runs.
    retakes : int
        Clean retakes after each faulty run, at its set point in the same sweep (at least 1).
        The repeat check compares runs of one sweep direction only; with two retakes it can
        tell a biased faulty run from them, while a pair cannot say which one is wrong.
    tare_rpms : tuple of float
        Spin rates of the spin-tare runs of each configuration. [rpm]
    rpm_step : float
        The set rpm is rounded to this step, as an operator would set it. [rpm]
    data_duration, wind_off_duration : float
        Record lengths of data runs and of zero and tare runs. [s]
    data_interval, wind_off_interval : float
        Time from one run's start to the next (record plus settling). [s]
    tunnel_rate, balance_rate, pressure_rate : float
        Sample rates of the three streams. [Hz]
    n_taps : int
        Surface taps at mid-span, spaced evenly in azimuth.
    tap_azimuth_scatter : float
        Standard deviation of the taps' installed azimuths about even spacing. [deg]
    tap_delay_range : (float, float)
        Tubing delays are drawn uniformly in this range. [s]
    temperature, temperature_rise : float
        Air temperature at the start, and its rise over the campaign (the tunnel warms). [K]
    pressure, pressure_change : float
        Barometric pressure at the start, and its change over the campaign. [Pa]
    relative_humidity : float
        Relative humidity, fraction. [-]
    speed_set_error : float
        Relative standard deviation of a run's mean speed about its set point. [-]
    turbulence : float
        Relative standard deviation of the AR(1) speed fluctuation. [-]
    turbulence_time : float
        Its correlation time. [s]
    speed_drift : float
        Relative standard deviation of the (linear) speed change over a clean record. [-]
    spin_jitter : float
        Relative standard deviation of the AR(1) rpm fluctuation. [-]
    spin_jitter_time : float
        Its correlation time. [s]
    shedding_strouhal : float
        Strouhal number of vortex shedding (frequency St U/d). [-]
    shedding_cl_rms : float
        RMS fluctuating lift coefficient at rest; it decays as exp(−(α/1.5)²). [-]
    channels : tuple of str
        Balance channel names.
    matrix : tuple of tuples
        3 × n linear calibration (rows Fx [N], Fy [N], Mz [N m], per volt).
    full_scale : (float, float, float)
        Fx [N], Fy [N], Mz [N m].
    zero_offsets : tuple of float
        Channel zeros at the start. [V]
    zero_drift : tuple of float
        Their linear drift. [V/h]
    balance_noise : float
        Standard deviation of white noise on each channel. [V]
    antialias_fraction : float
        Corner of the balance anti-alias filter (4th-order Butterworth magnitude) as a
        fraction of the balance rate. [-]
    tare_friction, tare_viscous, tare_windage : float
        Wind-off torque opposing the spin: ``friction + viscous |ω| + windage ω²``.
        [N m], [N m s/rad], [N m s²/rad²]
    tare_force : (float, float)
        Wind-off spin-induced Fx, Fy at ω = 1000 rad/s (∝ ω², Fy odd in ω). [N]
    imbalance : float
        Rotor imbalance m·e; the rotating force is ``imbalance ω²``. [kg m]
    pitot_noise : float
        White noise on dp_pitot. [Pa]
    tap_noise : float
        White noise on each tap reading, as a fraction of q. [-]
    tap_noise_floor : float
        White noise on each tap reading, absolute. [Pa]
    tachometer_noise : float
        Relative white noise of the tachometer. [-]
    encoder_counts : int
        Encoder counts per revolution.
    blockage, lift_interference, buoyancy : str, bool, bool
        [reduction] wall-correction choices; the forward model inverts exactly these.
    u_* : float
        Type-B standard uncertainties written into campaign.toml (invented instrument specs):
        geometry [m], angles [deg], gradient [Pa/m], scanner and pitot [Pa], pitot relative
        [-], thermometer [K], barometer [Pa], hygrometer [-], tachometer relative [-], encoder
        [deg], tubing delay [s], calibration relative [-].
    u_balance_fraction : (float, float, float)
        Balance channels' specification u as a fraction of full scale (Fx, Fy, Mz). [-]
    systematic_errors : bool
        Whether the instruments, geometry and calibration are off by one seeded draw from the
        declared u (:mod:`tunnelred.demo.systematics`): campaign.toml keeps the declared values,
        the forward model runs on the true ones and truth.csv records them. False (the demo):
        every declared value is exact.
    faults : tuple of Fault
        Flaws to plant.
    report, revision_history : tuple
        The [report] table's keys and values, and its revision history (revision, date, change).
    calibrations : tuple of (str, str, str)
        (instrument, calibration reference, date) written into [instruments.NAME].
    surface, photo : str
        [model] surface finish and photograph path (a drawing written beside campaign.toml).
    down_sweep_lift_offset : float
        A hysteresis planted on purpose: ΔCL added to the true free-air lift coefficient of
        every down-sweep run (not the repeats), so that up minus down is −offset at every spin
        ratio; 0 (the demo) plants none. [-]
    """

    seed: int = 2026
    title: str = "RS-12 rotor-sail model: spin-ratio sweeps with and without end plates"
    facility: str = (
        "SDT-1, an invented 1.0 m x 0.75 m closed-section low-speed tunnel (synthetic data)"
    )
    date: str = "2026-03-10"
    notes: str = "Synthetic demonstration campaign written by tunnelred.demo; see truth.csv."
    start: str = "2026-03-10T08:30:00"
    diameter: float = 0.125
    span: float = 0.74
    tunnel_height: float = 1.0
    tunnel_width: float = 0.75
    flow_angle: float = 0.25
    static_pressure_gradient: float = -1.0
    alignment_angle: float = 0.1
    transducer_radius: float = 0.02
    configurations: tuple[Configuration, ...] = field(default_factory=_default_configurations)
    speeds: tuple[float, ...] = (6.0, 9.0, 12.0)
    spin_ratios_up: tuple[float, ...] = (0.0, 0.5, 1.0, 1.5, 2.0, 2.5, 3.0, 3.5, 4.0)
    spin_ratios_down: tuple[float, ...] = (3.0, 2.0, 1.0, 0.0)
    pressure_speeds: tuple[float, ...] = (9.0,)
    pressure_spin_ratios: tuple[float, ...] = (0.0, 1.0, 2.0, 3.0, 4.0)
    repeat_point: tuple[str, float, float] | None = ("plates", 9.0, 2.0)
    repeat_count: int = 2
    retakes: int = 1
    tare_rpms: tuple[float, ...] = (400.0, 1000.0, 2000.0, 3000.0, 4000.0, 5000.0, 6000.0, 7500.0)
    rpm_step: float = 5.0
    data_duration: float = 4.0
    wind_off_duration: float = 3.0
    data_interval: float = 75.0
    wind_off_interval: float = 40.0
    tunnel_rate: float = 50.0
    balance_rate: float = 200.0
    pressure_rate: float = 500.0
    n_taps: int = 16
    tap_azimuth_scatter: float = 0.3
    tap_delay_range: tuple[float, float] = (0.4e-3, 0.9e-3)
    temperature: float = 291.4
    temperature_rise: float = 3.0
    pressure: float = 100850.0
    pressure_change: float = -150.0
    relative_humidity: float = 0.48
    speed_set_error: float = 0.003
    turbulence: float = 0.003
    turbulence_time: float = 0.3
    speed_drift: float = 0.0015
    spin_jitter: float = 0.002
    spin_jitter_time: float = 0.05
    shedding_strouhal: float = 0.2
    shedding_cl_rms: float = 0.3
    channels: tuple[str, ...] = ("N1", "N2", "N3")
    matrix: tuple[tuple[float, ...], ...] = (
        (8.0, 0.15, -0.30),
        (-0.20, 24.0, 0.40),
        (0.002, -0.005, 0.20),
    )
    full_scale: tuple[float, float, float] = (40.0, 120.0, 1.0)
    zero_offsets: tuple[float, ...] = (0.0123, -0.0315, 0.0871)
    zero_drift: tuple[float, ...] = (1.5e-3, 2.0e-3, -1.0e-3)
    balance_noise: float = 4e-4
    antialias_fraction: float = 0.4
    tare_friction: float = 0.012
    tare_viscous: float = 2.0e-5
    tare_windage: float = 4.0e-8
    tare_force: tuple[float, float] = (0.05, 0.08)
    imbalance: float = 2.0e-6
    pitot_noise: float = 0.05
    tap_noise: float = 0.004
    tap_noise_floor: float = 0.5
    tachometer_noise: float = 5e-4
    encoder_counts: int = 4096
    blockage: str = "allen-vincenti"
    lift_interference: bool = False
    buoyancy: bool = True
    u_diameter: float = 5e-5
    u_span: float = 5e-4
    u_height: float = 1e-3
    u_width: float = 1e-3
    u_flow_angle: float = 0.1
    u_static_pressure_gradient: float = 0.3
    u_alignment_angle: float = 0.05
    u_scanner: float = 1.5
    u_pitot: float = 0.1
    u_pitot_relative: float = 0.002
    u_thermometer: float = 0.1
    u_barometer: float = 20.0
    u_hygrometer: float = 0.02
    u_tachometer_relative: float = 0.001
    u_encoder: float = 0.1
    u_azimuth: float = 0.2
    u_tubing_delay: float = 5e-5
    u_matrix_relative: float = 0.001
    u_balance_fraction: tuple[float, float, float] = (0.0005, 0.0005, 0.0005)
    systematic_errors: bool = False
    faults: tuple[Fault, ...] = ()
    # The report's control block and the instruments' certificates (campaign.toml [report] and
    # calibration_* keys): an invented laboratory, client and staff.
    report: tuple[tuple[str, object], ...] = (
        ("number", "SDT-TR-2026-014"),
        ("revision", "B"),
        ("client", "Example Sail Systems (an invented client)"),
        ("client_address", "1 Harbour Row, Exampleport (invented)"),
        ("prepared_by", "A. Tester (invented)"),
        ("checked_by", "B. Reviewer (invented)"),
        ("approved_by", "C. Manager (invented)"),
        ("date_of_issue", "2026-03-24"),
        ("distribution", ["client (1 copy)", "laboratory file"]),
        ("laboratory", "Synthetic Demonstration Tunnel Laboratory (invented)"),
        ("laboratory_address", "Building 3, 10 Example Road, Sampletown (invented)"),
        ("location", "SDT-1 test section, Building 3 (invented)"),
        (
            "method",
            "Laboratory procedure SDT-P-07 rev. 3, spin-ratio sweeps of a rotating "
            "cylinder on the strain-gauge balance (invented)",
        ),  # fmt: skip
        ("deviations", "None."),
    )
    revision_history: tuple[tuple[str, str, str], ...] = (
        ("A", "2026-03-17", "first issue"),
        ("B", "2026-03-24", "calibration references added to the instrument list"),
    )
    calibrations: tuple[tuple[str, str, str], ...] = (
        ("balance", "SDT-CAL-B-2026-02 (invented)", "2026-02-20"),
        ("scanner", "SDT-CAL-S-2026-01 (invented)", "2026-01-12"),
        ("pitot", "SDT-CAL-P-2025-11 (invented)", "2025-11-05"),
        ("thermometer", "SDT-CAL-T-2025-09 (invented)", "2025-09-30"),
        ("barometer", "SDT-CAL-A-2025-09 (invented)", "2025-09-30"),
    )
    surface: str = "anodised aluminium, polished, Ra about 0.4 µm (invented)"
    photo: str = "model.png"  # a drawing of the model written beside campaign.toml
    down_sweep_lift_offset: float = 0.0


# ---------------------------------------------------------------------------------------------
# The run schedule
# ---------------------------------------------------------------------------------------------


@dataclass
class ScheduledRun:
    run: str
    kind: str  # "zero" | "tare" | "data"
    start: float  # seconds from the campaign start
    duration: float
    config: str = ""
    speed_set: float = math.nan  # [m/s]
    spin_set: float = math.nan  # [rpm]
    pressure: bool = False
    fault: Fault | None = None
    notes: str = ""
    leg: str = ""  # "up", "down" or "repeat" for a data run
    zero: tuple[str, ...] = ()
    tare: tuple[str, ...] = ()


def _set_rpm(spec: SynthSpec, speed: float, spin_ratio: float) -> float:
    rpm = spin_ratio * speed / (spec.diameter / 2.0) / RPM
    return round(rpm / spec.rpm_step) * spec.rpm_step


def _close(a: float, b: float) -> bool:
    return abs(a - b) < 1e-9


def schedule(spec: SynthSpec) -> list[ScheduledRun]:
    """Every run in time order, with its zero and tare runs named."""
    if spec.retakes < 1:
        raise ValueError(f"a faulty run needs at least one clean retake; retakes = {spec.retakes}")
    runs: list[ScheduledRun] = []
    counters = {"zero": 0, "tare": 0, "data": 0}
    prefix = {"zero": "Z", "tare": "T", "data": "R"}
    clock = [0.0]

    def add(kind, **kw):
        counters[kind] += 1
        duration = spec.data_duration if kind == "data" else spec.wind_off_duration
        interval = spec.data_interval if kind == "data" else spec.wind_off_interval
        run = ScheduledRun(f"{prefix[kind]}{counters[kind]:03d}", kind, clock[0], duration, **kw)
        clock[0] += interval
        runs.append(run)
        return run

    def zero():
        if not runs or runs[-1].kind != "zero":
            add("zero", notes="wind off, not spinning")

    faults = list(spec.faults)
    for cfg in spec.configurations:
        zero()
        for rpm in spec.tare_rpms:
            add("tare", config=cfg.label, spin_set=rpm, notes="wind off, spinning")
        zero()
        for speed in spec.speeds:
            points = [(a, "up") for a in spec.spin_ratios_up]
            points += [(a, "down") for a in spec.spin_ratios_down]
            if spec.repeat_point and spec.repeat_point[0] == cfg.label:
                if _close(spec.repeat_point[1], speed):
                    points += [(spec.repeat_point[2], "repeat")] * spec.repeat_count
            for alpha, leg in points:
                fault = None
                if leg == "up":
                    for f in faults:
                        if f.config == cfg.label and _close(f.speed, speed):
                            if _close(f.spin_ratio, alpha):
                                fault = f
                    if fault is not None:
                        faults.remove(fault)
                pressure = leg == "up" and any(_close(speed, s) for s in spec.pressure_speeds)
                pressure = pressure and any(_close(alpha, a) for a in spec.pressure_spin_ratios)
                common = dict(
                    config=cfg.label,
                    speed_set=speed,
                    spin_set=_set_rpm(spec, speed, alpha),
                    pressure=pressure or (fault is not None and fault.kind in _PRESSURE_FAULTS),
                )
                text = {"up": "up sweep", "down": "down sweep", "repeat": "repeat"}[leg]
                text += f", nominal alpha {alpha:g}"
                if fault is not None and fault.kind == "zero_shift":
                    zero()
                first = add("data", fault=fault, notes=text, leg=leg, **common)
                if fault is not None and fault.kind == "few_revolutions":
                    if fault.size >= first.duration:
                        raise ValueError(f"a few_revolutions fault shortens the record: {fault}")
                    first.duration = fault.size
                if fault is not None:
                    if fault.kind == "zero_shift":
                        zero()
                    for _ in range(spec.retakes):
                        add("data", notes=f"{text}, retake of {first.run}", leg=leg, **common)
            zero()
    if faults:
        raise ValueError(f"faults match no up-sweep run: {faults}")

    zeros = [(i, r.run) for i, r in enumerate(runs) if r.kind == "zero"]
    tares: dict[str, list[ScheduledRun]] = {}
    for r in runs:
        if r.kind == "tare":
            tares.setdefault(r.config, []).append(r)
    for i, r in enumerate(runs):
        if r.kind == "zero":
            continue
        before = [z for j, z in zeros if j < i]
        after = [z for j, z in zeros if j > i]
        r.zero = tuple(x for x in (before[-1:] + after[:1]))
        if r.kind == "data" and r.spin_set != 0.0:
            named = tares.get(r.config, [])
            if r.fault is not None and r.fault.kind == "tare_extrapolated":
                top = r.fault.size * abs(r.spin_set)
                named = [t for t in named if abs(t.spin_set) <= top]
                if not named:
                    raise ValueError(f"no tare run at or below {top:g} rpm for {r.fault}")
            r.tare = tuple(t.run for t in named)
    return runs


def demo_spec(seed: int = 2026) -> SynthSpec:
    """The demo scenario: the invented RS-12 rotor-sail model in the invented SDT-1 tunnel.

    Three speeds (6, 9, 12 m/s), spin ratios 0 to 4 up and 3 to 0 down, with and without end
    plates; spin tares at eight rpm per configuration; pressure logs at 9 m/s for alpha = 0,
    1, 2, 3, 4; two repeats at 9 m/s, alpha = 2 with plates; four planted faults, each
    followed by a clean retake (see sample_runs/README.md).

    Parameters
    ----------
    seed : int
        Seed of the random generator.

    Returns
    -------
    SynthSpec

    Examples
    --------
    >>> [f.kind for f in demo_spec().faults]
    ['spin_scatter', 'speed_drift', 'dead_tap', 'zero_shift']
    """
    return SynthSpec(
        seed=seed,
        faults=(
            Fault("spin_scatter", "plates", 12.0, 2.5, 0.05),
            Fault("speed_drift", "bare", 12.0, 1.5, 0.05),
            Fault("dead_tap", "plates", 9.0, 3.0, 6),
            Fault("zero_shift", "bare", 6.0, 2.0, 0.006),
        ),
    )


def twin_spec(seed: int = 31, **changes) -> SynthSpec:
    """A null campaign for comparisons: two entries of one bare model, nothing to find.

    Configurations ``one`` and ``two`` are the same model (one truth), run at 6 and 12 m/s,
    swept up from 0 to 3 in steps of 0.5 and down at 2.5, 1.5 and 0.5 (one truth both ways);
    no pressure logs, repeats or faults. ``changes`` replace fields, e.g.
    ``down_sweep_lift_offset`` to plant a hysteresis.

    Examples
    --------
    >>> [c.label for c in twin_spec().configurations], twin_spec().spin_ratios_down
    (['one', 'two'], (2.5, 1.5, 0.5))
    """
    twins = (
        Configuration("one", "bare cylinder, first entry", False, None, {"cl_agreement": 0.2}),
        Configuration("two", "bare cylinder, second entry", False, None, {"cl_agreement": 0.2}),
    )
    settings = dict(
        seed=seed,
        configurations=twins,
        speeds=(6.0, 12.0),
        spin_ratios_up=(0.0, 0.5, 1.0, 1.5, 2.0, 2.5, 3.0),
        spin_ratios_down=(2.5, 1.5, 0.5),
        pressure_speeds=(),
        repeat_point=None,
        repeat_count=0,
        tare_rpms=(400.0, 1500.0, 3500.0, 6000.0),
        wind_off_duration=1.0,
    )
    return SynthSpec(**(settings | changes))
