"""Finding codes of the `schema.*` family: files, syntax, schema, units, params and the timing graph.

Each code is a value: rules report it by reference, so a misspelt name fails at import.
"""

from ._code import Code

ABSOLUTE_PATH = Code(
    "schema.absolute-path", "warning", stage="load",
    source="seqgen's own rule",
    doc="""
    A `rig:` or `use:` path is absolute (it starts at the root of this
    machine's file system). It works here, but not in a colleague's clone of
    the project or on the control computer, where the project lives
    elsewhere. Write the path relative to the file that names it; the hint
    gives the relative form.""")

BAD_EXPRESSION = Code(
    "schema.bad-expression", "error", stage="resolve",
    source="seqgen's own rule",
    doc="""
    An expression that cannot be read or uses something not allowed. Allowed:
    numbers with units, param names, + - * / **, parentheses, pi, e and the
    functions sqrt exp log log10 sin cos tan abs min max. Nothing else is
    evaluated: no attributes, no imports, no other calls.""")

BAD_RIG = Code(
    "schema.bad-rig", "error", stage="resolve",
    source="seqgen's own rule",
    doc="""
    A rig entry is inconsistent (a range whose low end is above its high end,
    a channel on an unknown device, a zero timebase).""")

BAD_SAMPLE = Code(
    "schema.bad-sample", "error", stage="resolve",
    source="seqgen's own rule",
    doc="""
    The sample names an unknown species or an impossible state (|mF| > F).""")

BAD_SCAN = Code(
    "schema.bad-scan", "error", stage="resolve",
    source="seqgen's own rule",
    doc="""
    A scan that cannot be expanded: a range without `steps` (or `random` with
    `seed`), a range of `steps: 1` whose `to:` differs from its `from:` (one
    step gives `from:` alone, so `to:` would be ignored), a log range whose ends are zero or of opposite signs, an empty
    list, or a top-level `scan: {nest: ...}` naming a param or group that has
    no scan. Forms: a list `[10 ms, 12 ms]`, `{values: [...]}`, `{from, to,
    steps, spacing: linear|log}`, `{from, to, random: COUNT, seed: N}`.""")

BAD_VALUE = Code(
    "schema.bad-value", "error", stage="schema",
    source="JSON Schema draft 2020-12",
    doc="""
    A value outside the allowed set or range (an unknown ramp shape, a
    negative bit depth, two anchors on one block).""")

CALIBRATION_NOT_MONOTONIC = Code(
    "schema.calibration-not-monotonic", "error", stage="resolve",
    source="monotone interpolation: SIAM J. Numer. Anal. 17, 238 (1980)",
    doc="""
    A calibration table whose physical or output column is not strictly
    monotonic cannot be inverted: one output value would map to two physical
    values. Re-measure or drop the offending points.""")

CHECK_CRASHED = Code(
    "schema.check-crashed", "error", stage="check",
    source="seqgen's own rule",
    doc="""
    A preflight check raised an unexpected error. This is a bug in seqgen, not
    in your file; the other checks still ran. Please report it with the file.""")

DIVISION_BY_ZERO = Code(
    "schema.division-by-zero", "error", stage="resolve",
    source="seqgen's own rule",
    doc="""
    An expression divides by zero.""")

DUPLICATE_BLOCK = Code(
    "schema.duplicate-block", "error", stage="resolve",
    source="seqgen's own rule",
    doc="""
    Two blocks share one name (possibly one brought in by `use:`). Block names
    are how anchors and acceptances refer to blocks, so they must be unique.""")

DUPLICATE_KEY = Code(
    "schema.duplicate-key", "error", stage="load",
    source="YAML 1.2 specification, section 3.2.1.1 (keys are unique)",
    doc="""
    The same key appears twice in one mapping. YAML loaders usually keep the
    last one silently; seqgen refuses so that an edit is never lost.""")

EMPTY_SEQUENCE = Code(
    "schema.empty-sequence", "error", stage="resolve",
    source="seqgen's own rule",
    doc="""
    The sequence has no blocks with actions, so there is nothing to run.""")

FILE_MISSING = Code(
    "schema.file-missing", "error", stage="load",
    source="seqgen's own rule",
    doc="""
    A file named by the command line, by `rig:` or by `use:` cannot be read.
    Paths in a sequence file are relative to that file's folder.""")

FILE_TOO_LARGE = Code(
    "schema.file-too-large", "error", stage="load",
    source="seqgen's own rule",
    doc="""
    The file is larger than 8 MiB. Sequence and rig files are
    small; a file this large is almost certainly not one.""")

FRAGMENT = Code(
    "schema.fragment", "note", stage="resolve",
    source="seqgen's own rule",
    doc="""
    The file says `fragment: true`: it holds blocks and params for other
    sequences to `use` and names no rig, so it is only checked for syntax
    and schema on its own. Check the sequences that use it for the rest.""")

MISSING_KEY = Code(
    "schema.missing-key", "error", stage="schema",
    source="JSON Schema draft 2020-12, required",
    doc="""
    A required key is missing, for example `to:` or `over:` of a ramp.""")

MISSING_UNIT = Code(
    "schema.missing-unit", "error", stage="resolve",
    source="seqgen's own rule",
    doc="""
    A physical quantity was given as a bare number. seqgen never guesses units:
    write '5 ms', not 5.""")

NEGATIVE_DURATION = Code(
    "schema.negative-duration", "error", stage="resolve",
    source="seqgen's own rule",
    doc="""
    A duration (over:, duration:, hold) is zero or negative where a positive
    time is required.""")

NON_FINITE = Code(
    "schema.non-finite", "error", stage="resolve",
    source="seqgen's own rule",
    doc="""
    A value is NaN or infinite (.nan / .inf in YAML).""")

OVERFLOW = Code(
    "schema.overflow", "error", stage="resolve",
    source="seqgen's own rule",
    doc="""
    An expression overflows or gives a non-finite or absurd value (a huge
    exponent, a 1e30 s hold).""")

PARAM_CYCLE = Code(
    "schema.param-cycle", "error", stage="resolve",
    source="seqgen's own rule",
    doc="""
    Params that depend on each other in a circle, so none can be computed.
    The message names every member of the cycle.""")

PARAM_OUT_OF_RANGE = Code(
    "schema.param-out-of-range", "error", stage="resolve",
    source="seqgen's own rule",
    doc="""
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
    the value, or change the bound if the value is meant.""")

RIG_FILE = Code(
    "schema.rig-file", "note", stage="resolve",
    source="seqgen's own rule",
    doc="""
    `seqgen check` was given a rig file (`seqgen_rig: 1`) rather than a
    sequence file. It is checked as a rig on its own: against
    schemas/rig.schema.json, then built as the resolve stage builds a rig
    (devices, channels, ranges, calibrations, limits, beams, coils, drives,
    imaging), and those findings are reported. What the rig means for a run
    (ranges reached, timing, safety, physics) is checked with a sequence that
    names it: `seqgen check SEQUENCE` for a sequence with `rig: PATH`.""")

RIG_OUTSIDE_ROOT = Code(
    "schema.rig-outside-root", "error", stage="load",
    source="seqgen's own rule",
    doc="""
    The `rig:` path names a file outside the project root: the nearest folder
    above the top-level sequence that holds a pyproject.toml, .git or
    seqgen.toml (else the sequence's own folder). The same rule as for `use:`
    entries (schema.use-outside-root): a sequence may not read files from
    elsewhere on the machine by `../`, an absolute path or a symbolic link
    that leads out. Keep the rig file in the project (e.g. `rigs/`), or allow
    it explicitly with `--allow-outside-root` or SEQGEN_ALLOW_OUTSIDE=1.""")

SCAN_LENGTH_MISMATCH = Code(
    "schema.scan-length-mismatch", "error", stage="resolve",
    source="seqgen's own rule",
    doc="""
    Params scanned in lockstep (the same `group:`, or `scan: {combine: lockstep}`)
    have different numbers of values, so they cannot advance together. Give
    every member the same number of values, or put them in separate groups to
    scan them as a grid.""")

SCAN_TOO_LARGE = Code(
    "schema.scan-too-large", "error", stage="resolve",
    source="seqgen's own rule",
    doc="""
    The scan expands to more shots than `scan: {max_shots: ...}` allows
    (default 100000). A grid multiplies the lengths of its axes;
    usually a typo in `steps`. Raise `max_shots` if you mean it.""")

SHOT_FAILED = Code(
    "schema.shot-failed", "error", stage="check",
    source="seqgen's own rule",
    doc="""
    One shot of a scan could not be completed: a stage raised an unexpected
    error, or the worker process running it died. This is a bug in seqgen or a
    problem of the machine (memory, disk), not a mistake in the file; the other
    shots still ran. The message names the shot's param values; run
    `seqgen check` on a copy of the file with those values to reproduce it.""")

UNDEFINED_PARAM = Code(
    "schema.undefined-param", "error", stage="resolve",
    source="seqgen's own rule",
    doc="""
    An expression names something that is neither a param nor a unit.""")

UNKNOWN_CHANNEL = Code(
    "schema.unknown-channel", "error", stage="resolve",
    source="seqgen's own rule",
    doc="""
    An action names a channel the rig does not have. The hint names the closest
    channel of the rig.""")

UNKNOWN_KEY = Code(
    "schema.unknown-key", "error", stage="schema",
    source="JSON Schema draft 2020-12 (json-schema.org), additionalProperties",
    doc="""
    A key the format does not know. Usually a typo: the message suggests the
    closest known key. `seqgen explain` and schemas/*.schema.json list them all.""")

UNKNOWN_NAME = Code(
    "schema.unknown-name", "error", stage="resolve",
    source="seqgen's own rule",
    doc="""
    An action names a beam, coil, drive or imaging setup the rig does not have,
    or a rig entry names a channel it does not define.""")

UNKNOWN_UNIT = Code(
    "schema.unknown-unit", "error", stage="resolve",
    source="SI Brochure, 9th ed. (2019)",
    doc="""
    A unit name that is not known. Units follow the SI and common lab usage
    (ms, us, mW, G/cm, MHz); 'u' stands for micro.""")

USE_CYCLE = Code(
    "schema.use-cycle", "error", stage="resolve",
    source="seqgen's own rule",
    doc="""
    Files that `use` each other in a circle. The message lists the chain.""")

USE_OUTSIDE_ROOT = Code(
    "schema.use-outside-root", "error", stage="load",
    source="seqgen's own rule",
    doc="""
    A `use:` entry names a file outside the project root: the nearest folder
    above the top-level sequence that holds a pyproject.toml, .git or
    seqgen.toml (else the sequence's own folder). Refused so that a sequence
    cannot pull in files from elsewhere on the machine by `../` or an absolute
    path. Move the file into the project, or allow it explicitly with
    `--allow-outside-root` or the environment variable SEQGEN_ALLOW_OUTSIDE=1.""")

VERSION = Code(
    "schema.version", "error", stage="schema",
    source="seqgen's own rule",
    doc="""
    The `seqgen:` (or `seqgen_rig:`) version key is missing or names a format
    version this seqgen does not read. This release reads version 1.""")

WRONG_DIMENSION = Code(
    "schema.wrong-dimension", "error", stage="resolve",
    source="SI Brochure, 9th ed. (2019)",
    doc="""
    A quantity has the wrong dimension for its place: a time where a power is
    expected, volts on a channel calibrated in watts.""")

WRONG_TYPE = Code(
    "schema.wrong-type", "error", stage="schema",
    source="JSON Schema draft 2020-12, type",
    doc="""
    A value of the wrong kind: a list where a mapping is expected, text where
    a whole number is expected, and so on.""")

YAML_SYNTAX = Code(
    "schema.yaml-syntax", "error", stage="load",
    source="YAML 1.1 specification (yaml.org, 2005)",
    doc="""
    The file is not valid YAML. The position is where the parser gave up; the
    mistake is often on the line before (a missing colon, a tab used for
    indentation, an unclosed bracket or quote).""")

YAML_TOO_COMPLEX = Code(
    "schema.yaml-too-complex", "error", stage="load",
    source="seqgen's own rule",
    doc="""
    The document expands to more than 2000000 nodes (through aliases) or
    nests deeper than 64 levels. This is refused to bound time and memory:
    an alias-expansion bomb looks exactly like this.""")

YAML_UNSUPPORTED = Code(
    "schema.yaml-unsupported", "error", stage="load",
    source="seqgen's own rule",
    doc="""
    The document uses a YAML feature seqgen does not accept (custom tags,
    non-string mapping keys, several documents in one file).""")
