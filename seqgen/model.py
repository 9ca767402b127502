"""Small immutable data types passed between stages.

The resolve stage produces a `Shot` (rig + sample + params + placed blocks +
channel segments + physics actions); checks read it; compile turns it into
`DeviceTable`s; emit writes those. Values are floats in SI units (physical
side) or in each output's own unit (table side).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Mapping

from .findings import SourcePos


@dataclass(frozen=True)
class Calibration:
    """Physical quantity -> output unit: linear (slope, offset) or a monotonic table."""

    quantity: str  # physical unit text, e.g. "W"
    dims: tuple
    kind: str  # "linear" | "table"
    slope: float = 1.0
    offset: float = 0.0
    table_phys: tuple = ()
    table_out: tuple = ()


@dataclass(frozen=True)
class Device:
    name: str
    timebase_hz: float
    min_interval_ticks: int
    memory_depth: int | None
    output_model: str  # "hold" | "linear"
    pos: SourcePos
    # wiring (README "Wiring"): None is the default, a free-running device started with the others at t = 0
    start_on: str | None = None  # digital output whose rising edge starts the device
    start_latency_s: float = 0.0  # from that edge to the device's start
    step_on: str | None = None  # digital output whose rising edges step the device one table row each
    step_latency_s: float = 0.0  # from a step edge to the new row's output
    clock_on: str | None = None  # digital output that is the device's external sample clock (one edge per row)
    clock_max_hz: float | None = None  # the fastest external clock the device takes
    wiring_pos: SourcePos | None = None  # the device's start/advance/clock key, for findings
    # what the device's trigger input takes (the rig's min_trigger_period / min_trigger_pulse / trigger_jitter)
    min_trigger_period_s: float = 0.0  # shortest time from one accepted rising edge to the next
    min_trigger_pulse_s: float = 0.0  # shortest high (and low) time of a pulse it sees
    trigger_jitter_s: float = 0.0  # spread of the time from an edge to its response
    trigger_pos: tuple = ()  # (rig key, SourcePos) of each of those three the rig states, for findings

    def trigger_key_pos(self, key: str) -> SourcePos | None:
        """Where the rig states `key` (e.g. "min_trigger_period") for this device, else None."""
        return next((p for k, p in self.trigger_pos if k == key), None)

    @property
    def edge_line(self) -> str | None:
        """The line that gets one generated edge per table row after the first (stepped or clocked), or None."""
        return self.step_on or self.clock_on

    @property
    def tick_s(self) -> float:
        return 1.0 / self.timebase_hz


@dataclass(frozen=True)
class Output:
    """One column of a device table (a digital/analog channel, or one part of a synth)."""

    name: str  # "cross_a_power", or "mw.freq" / "mw.amp" / "mw.phase"
    channel: str
    device: str
    kind: str  # "digital" | "analog" | "synth"
    unit: str  # output unit ("V", "Hz", "", "rad")
    lo: float
    hi: float
    bits: int | None
    safe: float  # physical units (or output units when uncalibrated)
    phys_unit: str
    phys_dims: tuple
    calibration: Calibration | None = None
    latency_rise_s: float = 0.0
    latency_fall_s: float = 0.0
    jitter_s: float = 0.0
    min_pulse_s: float = 0.0
    settling_s: float = 0.0  # a synth's frequency settling after a frequency write
    max_slew: float | None = None  # physical units per second
    tolerance: float | None = None  # output units
    hard_min: float | None = None
    hard_max: float | None = None
    pos: SourcePos = SourcePos("")
    code: str | None = None  # DAC code convention as the rig writes it (None: the default, see code_convention)
    reference_clock_hz: float | None = None  # a synth frequency part's reference clock: its word counts fclk / 2^bits

    @property
    def code_convention(self) -> str:
        """How a value becomes the integer the hardware takes (IEEE Std 1658-2011, DAC terminology):
        "digital" (0/1), "none" (no bits: no code), "offset_binary" (default for a range around 0: code 0 at
        lo, 2^(bits-1) at the middle), "twos_complement" (the offset-binary code minus 2^(bits-1), so the
        middle is 0) or "straight_binary" (default otherwise and for synth words: code 0 at lo)."""
        if self.kind == "digital":
            return "digital"
        if not self.bits:
            return "none"
        if self.code:
            return self.code
        return "offset_binary" if self.kind != "synth" and self.lo < 0 < self.hi else "straight_binary"

    @property
    def lsb(self) -> float:
        """One code step: span / 2^bits (so a bipolar range has an exact code at its middle and the top of the
        range, hi, is one LSB above the top code); a synth frequency with a reference clock: fclk / 2^bits."""
        if self.kind == "digital" or not self.bits:
            return 0.0
        if self.reference_clock_hz:
            return self.reference_clock_hz / 2 ** self.bits
        return (self.hi - self.lo) / 2 ** self.bits

    @property
    def code_zero(self) -> float:
        """The output value of code 0: value = code_zero + code x lsb (twos_complement: the signed code)."""
        if self.kind == "digital" or not self.bits:
            return 0.0
        if self.reference_clock_hz:
            return 0.0
        if self.code_convention == "twos_complement":
            return self.lo + 2 ** (self.bits - 1) * (self.hi - self.lo) / 2 ** self.bits
        return self.lo

    @property
    def sample_tolerance(self) -> float:
        if self.tolerance is not None:
            return self.tolerance
        lsb = self.lsb
        return lsb / 2 if lsb > 0 else (self.hi - self.lo) * 1e-4


@dataclass(frozen=True)
class Beam:
    name: str
    wavelength_m: float
    power_channel: str
    waist_m: float | None = None
    waist_y_m: float | None = None
    direction: tuple = (1.0, 0.0, 0.0)
    position_m: tuple = (0.0, 0.0, 0.0)
    role: str = "other"
    pos: SourcePos = SourcePos("")
    shutter: str | None = None  # digital channel of the beam's shutter, open at 1


@dataclass(frozen=True)
class Coil:
    name: str
    current_channel: str
    gradient_per_amp: float | None = None  # T/m per A
    bias_per_amp: float | None = None  # T per A
    curvature_per_amp: float | None = None  # T/m^2 per A
    axis: tuple = (0.0, 0.0, 1.0)
    max_current: float | None = None
    continuous_current: float | None = None
    i2t_limit: float | None = None  # A^2 s
    i2t_window: float | None = None
    pos: SourcePos = SourcePos("")
    field_grows_along: tuple | None = None  # unit vector: where |B| grows at the atoms during a push


@dataclass(frozen=True)
class Drive:
    name: str
    channel: str
    rabi_per_amplitude_hz: float  # Omega / 2 pi at amplitude 1
    kind: str = "microwave"
    light_shift_hz: float = 0.0
    pos: SourcePos = SourcePos("")
    # both None: rabi_per_amplitude_hz holds for every transition (the rig states neither)
    polarisation: str | tuple | None = None  # "sigma+" | "sigma-" | "pi" | unit (x, y, z), z along the bias field
    calibrated_on: tuple | None = None  # ((F, mF), (F, mF)): the transition rabi_per_amplitude_hz was measured on


@dataclass(frozen=True)
class ImagingSetup:
    name: str
    probe_beam: str | None = None
    camera_channel: str | None = None
    pixel_size_m: float | None = None
    magnification: float = 1.0
    field_of_view_m: float | None = None
    depth_of_field_m: float | None = None
    center_m: tuple = (0.0, 0.0, 0.0)
    aperture_radius_m: float | None = None
    pos: SourcePos = SourcePos("")
    # what predicted images need (all optional): resolution, probe saturation, camera, imaged state
    numerical_aperture: float | None = None
    lens_distance_m: float | None = None
    saturation_parameter: float | None = None
    saturation_factor: float = 1.0
    quantum_efficiency: float = 1.0
    imaged_F: int | None = None


@dataclass(frozen=True)
class Rig:
    name: str
    file: str
    sha256: str
    devices: Mapping[str, Device]
    outputs: Mapping[str, Output]
    channels: Mapping[str, tuple]  # channel name -> its output names
    beams: Mapping[str, Beam] = field(default_factory=dict)
    coils: Mapping[str, Coil] = field(default_factory=dict)
    drives: Mapping[str, Drive] = field(default_factory=dict)
    imaging: Mapping[str, ImagingSetup] = field(default_factory=dict)
    bias_field_t: float | None = None
    repetition_period_s: float | None = None


@dataclass(frozen=True)
class Sample:
    species: str
    F: int | None = None
    mF: int | None = None
    atoms: float | None = None
    temperature_k: float | None = None
    condensed: bool = False
    trap_frequencies_hz: tuple | None = None
    detection_floor: float | None = None
    pos: SourcePos = SourcePos("")


@dataclass(frozen=True)
class Param:
    name: str
    value: float
    dims: tuple
    text: str
    pos: SourcePos


@dataclass(frozen=True)
class Block:
    name: str
    start_s: float
    end_s: float
    pos: SourcePos
    anchor: str  # readable description, e.g. "after evaporate + 5 ms"
    anchor_block: str | None = None


@dataclass(frozen=True)
class Segment:
    """One write to one output: an instant `set` (t0 == t1) or a `ramp` over [t0, t1]."""

    output: str
    kind: str  # "set" | "ramp"
    t0: float
    t1: float
    v0: float | None  # physical units; None for a set
    v1: float
    block: str
    action: str  # action kind that produced it ("ramp", "trap_ramp", "pulse", ...)
    pos: SourcePos
    shape: str = "linear"
    tau_s: float | None = None
    table: tuple | None = None
    tolerance: float | None = None


@dataclass(frozen=True)
class PhysAction:
    """A physics-level action kept for the physics checks (SI values)."""

    kind: str
    block: str
    t0: float
    t1: float
    args: Mapping[str, object]
    pos: SourcePos
    index: int = 0


@dataclass(frozen=True)
class Accept:
    code: str
    block: str | None
    reason: str
    pos: SourcePos


@dataclass(frozen=True)
class Limits:
    max_excitation: float = 0.05
    max_adiabaticity: float = 0.1
    min_eta: float = 5.0
    angle_tolerance: float = 0.05
    weak_probe_angle: float = 0.3


@dataclass(frozen=True)
class Shot:
    file: str
    rig: Rig
    sample: Sample | None
    params: tuple  # of Param, in resolution order
    blocks: tuple  # of Block, in start order
    segments: tuple  # of Segment, by output then time
    phys: tuple  # of PhysAction
    accepts: tuple = ()
    sources: Mapping[str, str] = field(default_factory=dict)  # path -> sha256
    limits: Limits = Limits()
    leave_on: tuple = ()
    duration_s: float = 0.0

    def block(self, name: str) -> Block | None:
        for b in self.blocks:
            if b.name == name:
                return b
        return None

    def actions(self, *kinds: str) -> tuple:
        """The physics actions of these kinds, in the order of `phys` (a PhysAction tuple)."""
        return tuple(a for a in self.phys if a.kind in kinds)


@dataclass(frozen=True)
class DeviceTable:
    device: str
    tick_s: float
    ticks: object  # np.ndarray int64
    columns: tuple  # output names in column order
    values: object  # np.ndarray float64, shape (rows, columns), output units
    units: tuple
    kinds: tuple
    rows_per_segment: Mapping = field(default_factory=dict)  # (block, output, t0) -> rows
    # the integers the hardware takes, int64 rows x columns: value = code_zero + code x code_lsb per column
    # (conventions: Output.code_convention; "none": no bits, code 0, read `values`)
    codes: object = None
    code_conventions: tuple = ()
    code_bits: tuple = ()  # 1 for digital, 0 for "none"
    code_lsb: tuple = ()  # output units per code (1 for digital, 0 for "none")
    code_zero: tuple = ()  # output value of code 0


@dataclass(frozen=True)
class Compiled:
    tables: tuple  # of DeviceTable
    duration_s: float
    wiring: tuple = ()  # of Segment: the edges the rig's wiring needs, generated on the parents' lines (action "wiring")
    starts: Mapping = field(default_factory=dict)  # device -> its start time (s) when started by a trigger
