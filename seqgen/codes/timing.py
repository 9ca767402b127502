"""Finding codes of the `timing.*` family: times and their order.

Each code is a value: rules report it by reference, so a misspelt name fails at import.
"""

from ._code import Code

ANCHOR_CYCLE = Code(
    "timing.anchor-cycle", "error", stage="resolve",
    source="seqgen's own rule",
    doc="""
    Blocks anchored on each other in a circle, so none can be placed. The
    message names every member of the cycle.""")

BAD_ANCHOR = Code(
    "timing.bad-anchor", "error", stage="resolve",
    source="seqgen's own rule",
    doc="""
    An anchor that cannot be read. Forms: `at: 1.2 s`, `after: NAME`,
    `after: NAME + 5 ms`, `with: NAME`, `with: NAME + 2 ms`.""")

BEFORE_START = Code(
    "timing.before-start", "error", stage="compile",
    source="seqgen's own rule",
    doc="""
    After moving an edge earlier by its channel's latency (a shutter that needs
    3 ms to open must be told 3 ms early), the command would fall before the
    start of the sequence (t = 0). Start the block later, or anchor the
    sequence so there is room for the latency.""")

LATENCY_REORDER = Code(
    "timing.latency-reorder", "error", stage="timeline",
    source="seqgen's own rule: compensation must keep the order of a channel's edges",
    doc="""
    With different rise and fall latencies (a mechanical shutter that opens in
    3 ms but closes in 2 ms), moving each edge earlier by its own latency can
    swap two edges: a pulse shorter than the difference of the latencies would
    be commanded to close before it opens. Lengthen the pulse or use a faster
    switch (an AOM) for short pulses.""")

OVERLAP = Code(
    "timing.overlap", "error", stage="timeline",
    source="seqgen's own rule: one output holds one value at a time",
    doc="""
    Two actions write one output at overlapping times (a set inside a ramp,
    two ramps that overlap, or two different values set at the same instant).
    The message names both actions and both source lines. Move one of them, or
    split the block.""")

RAMP_TOO_FAST = Code(
    "timing.ramp-too-fast", "error", stage="timeline",
    source="seqgen's own rule: a ramp needs at least two table rows",
    doc="""
    A ramp shorter than the device's minimum interval between rows cannot be
    produced: the device can only jump. Judged as compile places the ramp's
    two end rows (both moved earlier by the channel's latency and rounded to
    the tick), so a ramp of exactly the minimum interval passes wherever it
    starts. The fix names the minimum interval, a whole number of ticks, which
    always passes. Make the ramp longer, use a set, or use a faster device.""")

SUB_TICK = Code(
    "timing.sub-tick", "note", stage="timeline",
    source="seqgen's rounding rule: nearest tick, exact halves round to the later tick",
    doc="""
    A time that is not a whole number of its device's ticks. seqgen rounds it
    to the nearest tick (an exact half rounds to the later tick) and reports the
    shift so that nothing moves silently.""")

UNKNOWN_BLOCK = Code(
    "timing.unknown-block", "error", stage="resolve",
    source="seqgen's own rule",
    doc="""
    An anchor (`after:` / `with:`) or an acceptance names a block that does not
    exist.""")
