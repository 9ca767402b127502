"""Finding codes of the `safety.*` family: hard limits, coil ratings and outputs left on.

Each code is a value: rules report it by reference, so a misspelt name fails at import.
"""

from ._code import Code

COIL_CURRENT = Code(
    "safety.coil-current", "error", stage="timeline",
    source="the rig file's coil max_current (the coil's or its supply's rating)",
    doc="""
    A write that asks a coil for more current than the rig file's
    `max_current` for that coil (in either direction), the rating of the
    coil or of its supply. A supply may fold back or trip; a coil may be
    damaged. This is separate from the channel's hard limit (the lab's safety
    limit for that output) and from coil heating (the average load). Lower
    the current; raise `max_current` only with the coil's data.""")

COIL_HEATING = Code(
    "safety.coil-heating", "error", stage="timeline",
    source=("Joule heating P = I^2 R; continuous-current rating over the repetition period (common "
            "practice, no source)"),
    doc="""
    A coil carries more RMS current over the apparatus's repetition period
    than its continuous rating (`continuous_current`), or more I^2 t in any
    window of `i2t_window` than its `i2t_limit`. Joule heating goes as I^2 R:
    the RMS over a full shot cycle (sequence plus dead time until the next
    shot, `repetition_period` of the rig) is what warms the coil. Shorten the
    high-current pulses or lengthen the repetition period.""")

HARD_LIMIT = Code(
    "safety.hard-limit", "error", stage="timeline",
    source="the rig file's hard limits (the lab's safety limits for coils and lasers)",
    doc="""
    A physical value beyond a hard limit of the rig (coil current, laser
    power). No build may ever exceed these. Hard limits are a second line of
    defence: they never replace the hardware interlocks.""")

LEFT_ON = Code(
    "safety.left-on", "error", stage="timeline",
    source="common practice (no source): every output ends at its safe value",
    doc="""
    An output whose last value is not its safe value, so it stays on after
    the sequence ends: a coil left carrying current, a high-power beam left on.
    Coil currents and beam powers are errors; other outputs warnings. List
    outputs that must stay on under `end: {leave_on: [...]}`.""")
