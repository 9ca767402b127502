"""Finding codes of the `hardware.*` family: what the devices can play.

Each code is a value: rules report it by reference, so a misspelt name fails at import.
"""

from ._code import Code

EXPOSURE_TOO_SHORT = Code(
    "hardware.exposure-too-short", "error", stage="physics",
    source=("the rig file's camera channel; the camera must be exposing while the probe is on (common "
            "practice, no source)"),
    doc="""
    The camera exposure is shorter than the probe pulse: both start
    together, so the end of the probe light is not recorded and the image
    under-counts the absorption. Make `exposure` at least the probe
    `duration`.""")

JITTER = Code(
    "hardware.jitter", "warning", stage="timeline",
    source="the rig file's jitter per channel (e.g. a mechanical shutter's timing spread)",
    doc="""
    Two edges of one channel closer together than the channel's declared
    timing jitter: the second may come before the first has settled, so the
    pulse may be much shorter than written or missing.""")

MEMORY_DEPTH = Code(
    "hardware.memory-depth", "error", stage="tables",
    source="the rig file's memory_depth per device",
    doc="""
    A device table longer than the device's memory depth cannot be loaded.
    The message says how many rows over and which blocks contribute most;
    loosen ramp tolerances or shorten ramps there.""")

MIN_INTERVAL = Code(
    "hardware.min-interval", "error", stage="tables",
    source="the rig file's min_interval per device",
    doc="""
    Two rows of a device table closer than the device's minimum interval
    between updates (for example two edges 1 us apart on a device that updates
    every 2 us). The finding points at the write that made the later row (its
    output, block and line) and names the output of the other row; when a
    channel's latency moved an edge onto the other it says so, with the time
    written and the time the edge is commanded. The fix says how far to move
    the edge to clear every fixed row (ramp-interior rows give way on their
    own), or to lengthen a ramp whose own two rows crowd. Move the events
    apart.""")

MODULATION_UNREACHABLE = Code(
    "hardware.modulation-unreachable", "error", stage="physics",
    source=("sampling theorem, Proc. IRE 37, 10 (1949) (from memory); the rig file's device timebase "
            "and minimum interval"),
    doc="""
    A barrier's modulation is put on an analog (or digital) channel, i.e.
    as rows of a channel table, but the channel's device cannot update fast
    enough: a modulation at frequency f needs an update rate above 2 f
    (timebase / minimum interval of the device). Put the modulation on a
    synth channel (a frequency source), or lower the frequency.""")

OUT_OF_RANGE = Code(
    "hardware.out-of-range", "error", stage="timeline",
    source="the rig file's output ranges (the hardware's data sheet values)",
    doc="""
    A value that, after calibration, lies outside the output's range (for
    example 11 V on a +-10 V analog output, or a synth frequency above its
    maximum). The hardware would clip or wrap it. The fix says whether to
    raise or lower the value and names the limit in the channel's physical
    unit (through its calibration, kept within its hard limits), or check the
    calibration.""")

OUTSIDE_CALIBRATION = Code(
    "hardware.outside-calibration", "warning", stage="timeline",
    source="the rig file's calibration table (measured points)",
    doc="""
    A value on a channel calibrated by a table lies beyond the table's
    measured points. There seqgen continues the calibration as a straight
    line with the slope of the table's end interval, which is a guess: an AOM's
    diffraction efficiency saturates, a photodiode clips. Measure the
    calibration out to the values the sequence uses, or stay inside the
    table.""")

PULSE_TOO_SHORT = Code(
    "hardware.pulse-too-short", "error", stage="timeline",
    source="the rig file's minimum pulse width per digital channel",
    doc="""
    A digital pulse shorter than the channel's declared minimum width (a
    shutter driver or a camera trigger input that needs a minimum high time).""")

RAMP_UNDERSAMPLED = Code(
    "hardware.ramp-undersampled", "warning", stage="compile",
    source=("the rig file's min_interval and timebase per device; piecewise-constant and "
            "piecewise-linear approximation error bounds (A Practical Guide to Splines, Springer "
            "(1978))"),
    doc="""
    A ramp changes faster than its device can follow within the ramp's
    tolerance: rows of a device table may not be closer than the device's
    minimum interval (nor than one tick), so between two rows the output holds
    (or, on a linearly interpolating device, draws a straight line) while the
    intended curve moves on. The message gives the largest deviation from the
    intended curve found at the device's ticks (output units) and how many
    times the tolerance that is. The build is still written, with the closest
    rows the device allows. Make the ramp slower, loosen its `tolerance:` (or
    the channel's), or drive the channel from a device with a shorter minimum
    interval. A step-and-hold output approximating a curve of slope y' with
    rows h apart is off by up to y' h / 2; interpolating rows, by up to
    h^2 |y''| / 8 (A Practical Guide to Splines, Springer (1978)).""")

SWEEP_STEPPED = Code(
    "hardware.sweep-stepped", "note", stage="compile",
    source=("the rig file's min_interval per device; step-and-hold error y' h / 2 of a ramp of slope y' with rows "
            "h apart (A Practical Guide to Splines, Springer (1978)); a frequency staircase counts only through "
            "what it does to the atoms, which the physics checks follow"),
    doc="""
    A synthesizer's frequency sweep that gives no `tolerance:` (nor its
    channel) plays as a staircase of rows no closer than the device's
    minimum interval. Half an LSB of a frequency word (a fraction of a hertz
    on a 32-bit word) is no bound any table-driven synthesizer meets, so a
    sweep is not held to it: this note says how many rows the sweep became
    and how far the staircase strays from the straight line. The physics
    checks propagate the atoms through the staircase as played (transfer of
    an adiabatic passage, a pulse's detuning), so steps that matter for the
    atoms show up there. Give the sweep a `tolerance:` to be warned
    (`hardware.ramp-undersampled`) when the steps exceed it.""")

BEAM_SHUTTERED = Code(
    "hardware.beam-shuttered", "error", stage="physics",
    source=("the rig file's beam `shutter:` with the shutter channel's latency and jitter; the channel's table as "
            "played (seqgen.predict.played)"),
    doc="""
    A beam that an image or a barrier needs is behind its shutter (the
    rig's beam `shutter:`, a digital channel open at 1) while it should
    shine: the shutter, as played after its latency, is closed during part
    or all of the probe pulse or the barrier (error: the camera records no
    absorption, the atoms see no sheet). Open it before the pulse, and
    close it after. When the shutter is open throughout but opens or closes
    less than its `jitter:` from the pulse, the edge may land inside the
    pulse on some shots (warning; under half the jitter, on about half the
    shots or more: error, common practice, no source): leave at least the
    jitter between the shutter's edge and the pulse.""")

RESOLUTION = Code(
    "hardware.resolution", "warning", stage="timeline",
    source=("DAC quantization error of half a least significant bit, LSB = span / 2^bits (IEEE Std 1658-2011, "
            "DAC terminology)"),
    doc="""
    A ramp asks for a tolerance finer than the output can resolve: with
    `bits` over its range (one LSB = span / 2^bits), a DAC output is within
    half an LSB of the wanted value, never closer (up to one LSB in the top
    half-code, where the range's end has no code of its own). The compiled
    ramp then deviates from the intended curve by at least that much, more
    than the tolerance asked for.""")

SYNTH_SETTLING = Code(
    "hardware.synth-settling", "warning", stage="timeline",
    source=("the rig file's settling time per synth channel (the device's data sheet: frequency switching and "
            "settling time)"),
    doc="""
    A synth's amplitude turns on less than its settling time after its
    frequency was written: for the first part of the pulse the output is
    still on its way to the new frequency, so the pulse is played partly off
    the line. Write the frequency at least the settling time before the
    amplitude rises (a `clock_pulse` with `frequency:` does this by itself).""")

SLEW = Code(
    "hardware.slew", "error", stage="timeline",
    source="the rig file's max_slew per channel (e.g. a coil driver's voltage compliance)",
    doc="""
    A ramp faster than the channel's maximum slew rate (physical units per
    second): a coil's current cannot follow it faster than its driver's
    compliance allows. A step (a set) is not judged: a driver slews a
    commanded step at its own rate, which the played values do not model
    yet (they hold the new value from the step on).""")

WIRING_BAD = Code(
    "hardware.wiring-bad", "error", stage="resolve",
    source="the rig file's device wiring (start, advance, clock)",
    doc="""
    A device's wiring names a line that cannot carry it: an unknown channel,
    a channel that is not digital, a line of the device itself, or an
    external clock faster than the device takes. Name a digital channel of
    another device (and a max_rate the device's minimum interval allows).""")

WIRING_CYCLE = Code(
    "hardware.wiring-cycle", "error", stage="resolve",
    source="the rig file's device wiring; a device cannot start before the device that starts it",
    doc="""
    The devices' wiring forms a loop (A starts or steps B, B starts or steps
    A): no device of the loop can run first. Make one device of the loop
    free-running (`start: free`, `advance: timebase`, `clock: internal`).""")

WIRING_LINE_SHARED = Code(
    "hardware.wiring-line-shared", "error", stage="resolve",
    source="the rig file's device wiring",
    doc="""
    One line wires two things (two devices started or stepped by it, or a
    start and a step): every edge seqgen generates for one would also start
    or step the other. Give each wiring its own digital line.""")

WIRING_LINE_WRITTEN = Code(
    "hardware.wiring-line-written", "error", stage="tables",
    source="the rig file's device wiring",
    doc="""
    The sequence writes a line that the rig's wiring uses: seqgen generates
    that line's edges (start triggers, step or clock edges), and the
    sequence's own writes would start the device twice or step it off its
    rows. Remove the writes of that line from the sequence.""")

WIRING_BEFORE_START = Code(
    "hardware.wiring-before-start", "error", stage="tables",
    source="the rig file's trigger latency per wired device",
    doc="""
    A wired device gets a row before it can play it: a triggered device starts
    at a fixed time near the start of the shot (its start edge, at the
    parent's first row after row 0, plus the trigger latency), so a row
    before that (a write at t = 0 included) is not played on time; a stepped
    device's row whose edge, one step latency ahead, falls before t = 0,
    where no line can play. Move the device's first write later (to the time
    stated).""")

WIRING_EDGES_TOO_CLOSE = Code(
    "hardware.wiring-edges-too-close", "error", stage="tables",
    source="the rig file's min_pulse of the wiring line (default 1 us) and min_interval of its device",
    doc="""
    Two rows of a stepped or externally clocked device are closer than one
    generated edge needs (a pulse of the line's min_pulse, else 1 us, and as
    long a gap): the line cannot give each row its own edge. Space those
    writes further apart.""")

WIRING_CLOCK = Code(
    "hardware.wiring-clock", "error", stage="tables",
    source="the rig file's clock line and max_rate per externally clocked device",
    doc="""
    An externally clocked device gets a row the clock cannot give: a row time
    off the clock line's tick grid (its device's timebase), or two rows
    closer than 1 / max_rate. Put the writes on the clock line's grid and no
    closer than the device's maximum rate.""")

WIRING_TRIGGER_PERIOD = Code(
    "hardware.wiring-trigger-period", "error", stage="tables",
    source="the rig file's min_trigger_period and trigger_jitter per wired device; the margin of twice the "
           "jitter is common practice, no source",
    doc="""
    Two edges seqgen generates for a stepped or externally clocked device
    come closer than the device's trigger input accepts: its
    min_trigger_period, plus twice its trigger_jitter (two responses may each
    be one jitter early or late). The device would miss an edge and play the
    rest of its table one row late. Space the writes that make those rows
    further apart (the fix gives the offset in the block).""")

WIRING_TRIGGER_PULSE = Code(
    "hardware.wiring-trigger-pulse", "error", stage="tables",
    source="the rig file's min_trigger_pulse per wired device",
    doc="""
    A stepped or externally clocked device states min_trigger_pulse: each
    generated pulse is made that long, and needs as long a low time before
    the next one. Two of the device's rows are closer than that pulse and its
    gap, so the device would see a pulse too short, or two edges as one.
    Space the writes that make those rows further apart (the fix gives the
    offset in the block).""")
