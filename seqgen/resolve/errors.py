"""Finding codes raised while resolving params, units, rigs and the timing graph."""

from ..registry import declare

S = "seqgen's own rule"
VERSION = declare("schema.version", "error", """
    The `seqgen:` (or `seqgen_rig:`) version key is missing or names a format
    version this seqgen does not read. This release reads version 1.""", S, "schema")
EMPTY = declare("schema.empty-sequence", "error", """
    The sequence has no blocks with actions, so there is nothing to run.""", S, "resolve")
MISSING_UNIT = declare("schema.missing-unit", "error", """
    A physical quantity was given as a bare number. seqgen never guesses units:
    write '5 ms', not 5.""", S, "resolve")
WRONG_DIMENSION = declare("schema.wrong-dimension", "error", """
    A quantity has the wrong dimension for its place: a time where a power is
    expected, volts on a channel calibrated in watts.""", "SI Brochure, 9th ed. (2019)", "resolve")
BAD_UNIT = declare("schema.unknown-unit", "error", """
    A unit name that is not known. Units follow the SI and common lab usage
    (ms, us, mW, G/cm, MHz); 'u' stands for micro.""", "SI Brochure, 9th ed. (2019)", "resolve")
EXPRESSION = declare("schema.bad-expression", "error", """
    An expression that cannot be read or uses something not allowed. Allowed:
    numbers with units, param names, + - * / **, parentheses, pi, e and the
    functions sqrt exp log log10 sin cos tan abs min max. Nothing else is
    evaluated: no attributes, no imports, no other calls.""", S, "resolve")
UNDEFINED = declare("schema.undefined-param", "error", """
    An expression names something that is neither a param nor a unit.""", S, "resolve")
PARAM_CYCLE = declare("schema.param-cycle", "error", """
    Params that depend on each other in a circle, so none can be computed.
    The message names every member of the cycle.""", S, "resolve")
ZERO_DIV = declare("schema.division-by-zero", "error", """
    An expression divides by zero.""", S, "resolve")
OVERFLOW = declare("schema.overflow", "error", """
    An expression overflows or gives a non-finite or absurd value (a huge
    exponent, a 1e30 s hold).""", S, "resolve")
NON_FINITE = declare("schema.non-finite", "error", """
    A value is NaN or infinite (.nan / .inf in YAML).""", S, "resolve")
NEGATIVE_DURATION = declare("schema.negative-duration", "error", """
    A duration (over:, duration:, hold) is zero or negative where a positive
    time is required.""", S, "resolve")
UNKNOWN_CHANNEL = declare("schema.unknown-channel", "error", """
    An action names a channel the rig does not have. The hint names the closest
    channel of the rig.""", S, "resolve")
UNKNOWN_NAME = declare("schema.unknown-name", "error", """
    An action names a beam, coil, drive or imaging setup the rig does not have,
    or a rig entry names a channel it does not define.""", S, "resolve")
DUPLICATE_BLOCK = declare("schema.duplicate-block", "error", """
    Two blocks share one name (possibly one brought in by `use:`). Block names
    are how anchors and acceptances refer to blocks, so they must be unique.""", S, "resolve")
USE_CYCLE = declare("schema.use-cycle", "error", """
    Files that `use` each other in a circle. The message lists the chain.""", S, "resolve")
USE_OUTSIDE_ROOT = declare("schema.use-outside-root", "error", """
    A `use:` entry names a file outside the project root: the nearest folder
    above the top-level sequence that holds a pyproject.toml, .git or
    seqgen.toml (else the sequence's own folder). Refused so that a sequence
    cannot pull in files from elsewhere on the machine by `../` or an absolute
    path. Move the file into the project, or allow it explicitly with
    `--allow-outside-root` or the environment variable SEQGEN_ALLOW_OUTSIDE=1.""", S, "load")
CAL_NOT_MONOTONIC = declare("schema.calibration-not-monotonic", "error", """
    A calibration table whose physical or output column is not strictly
    monotonic cannot be inverted: one output value would map to two physical
    values. Re-measure or drop the offending points.""", "monotone interpolation: SIAM J. Numer. Anal. 17, 238 (1980)", "resolve")
BAD_RIG = declare("schema.bad-rig", "error", """
    A rig entry is inconsistent (a range whose low end is above its high end,
    a channel on an unknown device, a zero timebase).""", S, "resolve")
UNKNOWN_BLOCK = declare("timing.unknown-block", "error", """
    An anchor (`after:` / `with:`) or an acceptance names a block that does not
    exist.""", S, "resolve")
ANCHOR_CYCLE = declare("timing.anchor-cycle", "error", """
    Blocks anchored on each other in a circle, so none can be placed. The
    message names every member of the cycle.""", S, "resolve")
BAD_ANCHOR = declare("timing.bad-anchor", "error", """
    An anchor that cannot be read. Forms: `at: 1.2 s`, `after: NAME`,
    `after: NAME + 5 ms`, `with: NAME`, `with: NAME + 2 ms`.""", S, "resolve")
BAD_SAMPLE = declare("schema.bad-sample", "error", """
    The sample names an unknown species or an impossible state (|mF| > F).""", S, "resolve")
FRAGMENT = declare("schema.fragment", "note", """
    The file says `fragment: true`: it holds blocks and params for other
    sequences to `use` and names no rig, so it is only checked for syntax
    and schema on its own. Check the sequences that use it for the rest.""", S, "resolve")
PARAM_RANGE = declare("schema.param-out-of-range", "error", """
    A param's value lies outside the bounds its definition states:
    `params: {tof: {value: 14 ms, min: 1 ms, max: 30 ms}}`. The bounds are
    the author's own statement of what values the param may take (a time of
    flight that must stay positive, a power a fibre can carry); both are
    optional and inclusive, and are compared after conversion to SI units
    (within a relative 1e-12, so `1000 us` meets `min: 1 ms`). They hold for
    the base `value:`, for every scan value (each shot outside them fails with
    this finding, the other shots run, and `seqgen check` prints the param
    range where it fires) and for a value computed from other params by an
    expression; a `use:` entry that overrides the param is held to the bounds
    of the file that defines it. A bound is a quantity of the param's
    dimension (or a bare 0); `min:` above `max:` is reported here too. Fix
    the value, or change the bound if the value is meant.""", S, "resolve")
