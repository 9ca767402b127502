"""Every fix that proposes a number passes when applied, for each code that proposes one on the fault corpus.

Each test copies the sequences into a temporary folder, runs `seqgen check FILE --json` on a fault file, reads
the first number the finding's fix proposes (a value with its unit, or a factor such as 'x1.34' or '13.1 times
longer'), writes it where the fix says (the finding's line, or the rig entry the fix names), checks again, and
asserts that the finding is gone and that no error or warning appeared that was not there before. The number
comes from the finding at run time; where the fix offers alternatives, the first numeric one is applied. Only the
key the fix speaks of ('set exposure:', 'the ramp ... longer' -> over:, 'the beam's position') is written here.
"""

from __future__ import annotations

import math
import re
from pathlib import Path

import pytest

from .demo_copy import (
    block_line, check, edit, proposal, quantity_text, read_key, rig_line, rig_of, scale_key, shift_block, si, write_key,
)

FAULTS = "sequences/faults"


def _write_value(key):
    """The fix's value (or factor) written for `key` at the finding's line."""
    def apply(f, path):
        p = proposal(f.hint)
        if p.factor:
            return scale_key(path, f.line, key, p.number)
        write_key(path, f.line, key, p.quantity)
        return p.quantity
    return apply


def _beam_named(text):
    m = re.search(r"(?:barrier|of) '(\w+)'", text)
    assert m, text
    return m.group(1)


def _sheet_farther(f, path):
    """'put the sheet farther than D from the atoms (rig file: the beam's position)': the beam's position
    vector scaled to a length just beyond D, its direction kept."""
    p = proposal(f.hint)
    rig = rig_of(path)
    line = rig_line(rig, _beam_named(f.message))
    lines = Path(rig).read_text(encoding="utf-8").split("\n")
    m = re.search(r"position: \[([^\]]*)\]", lines[line - 1])
    assert m, lines[line - 1]
    pos = [float(x) for x in m.group(1).split(",")]
    norm = math.sqrt(sum(x * x for x in pos))
    want = si(p.quantity) * (1 + 1e-6)  # "farther than": just beyond the distance named
    new = "[" + ", ".join(f"{x * want / norm:.10g}" for x in pos) + "]"
    lines[line - 1] = lines[line - 1][:m.start()] + f"position: {new}" + lines[line - 1][m.end():]
    Path(rig).write_text("\n".join(lines), encoding="utf-8")
    return new


def _beam_wavelength(f, path):
    """'set the wavelength of 'probe' to ... nm', 'a wavelength ... for 'trap' (e.g. 1064 nm)': the rig's entry
    of the beam the fix (or else the message) names."""
    p = proposal(f.hint)  # digits inside a name ('Rb87 D2 line') are not numbers
    rig = rig_of(path)
    m = re.search(r"(?:of|for) '(\w+)'", f.hint) or re.search(r"(?:beam|of) '(\w+)'", f.message)
    assert m, (f.hint, f.message)
    write_key(rig, rig_line(rig, m.group(1)), "wavelength", p.quantity)
    return p.quantity


def _coil_currents(f, path):
    """'raise the coil currents by at least xK': every current of the action's `currents:` times K."""
    p = proposal(f.hint)
    assert p.factor
    names = re.findall(r"'(\w+)' to", f.hint)
    assert names, f.hint
    return [scale_key(path, f.line, name, p.number) for name in names]


def _barrier_earlier(f, path):
    """'start the barrier no later than T after the push starts': its block moved earlier by (on - T), `on`
    being when it comes on now (the finding's data)."""
    t = si(proposal(f.hint).quantity)
    return shift_block(path, f.line, t - f.data["barrier_on_s"])


def _scan_bound(f, path):
    """'keep every scan value of P at or above B': the scan's bound beyond B set to B."""
    p = proposal(f.hint)
    line = f.line
    for key in ("from", "to"):
        old = read_key(path, line, key)
        if old is not None and (si(old) < si(p.quantity) if "above" in f.hint else si(old) > si(p.quantity)):
            write_key(path, line, key, p.quantity)
    return p.quantity


def _unit_text(f, path):
    """'write '0.43 mW'': the text the message quotes, replaced by the one the fix names."""
    old = re.search(r"in '([^']+)'", f.message).group(1)
    new = re.search(r"write '([^']+)'", f.hint).group(1)
    assert proposal(f.hint).quantity == new
    edit(path, old, new)
    return new


def _pulse_after_write(f, path):
    """'write the frequency at least S before the pulse': the pulse placed S after the write in its block
    (`at:` may not be negative, so the write cannot move before its block's start)."""
    s = si(proposal(f.hint).quantity)
    write_file, write_at = f.data["frequency_write"].rsplit(":", 1)
    assert Path(write_file) == Path(path) and block_line(path, int(write_at)) == block_line(path, f.line)
    at = read_key(path, int(write_at), "at")
    start = si(at) if at else 0.0
    new = quantity_text(start + s, "us")
    write_key(path, f.line, "at", new)
    return new


# code, fault file, how the fix is written
CASES = [
    ("hardware.exposure-too-short", "exposure_too_short.yaml", _write_value("exposure")),
    ("hardware.pulse-too-short", "pulse_too_short.yaml", _write_value("width")),
    ("hardware.ramp-undersampled", "ramp_undersampled.yaml", _write_value("over")),
    ("hardware.ramp-undersampled", "nonadiabatic_ramp.yaml", _write_value("over")),
    ("hardware.ramp-undersampled", "slew.yaml", _write_value("over")),
    ("hardware.resolution", "resolution.yaml", _write_value("tolerance")),
    ("hardware.slew", "slew.yaml", _write_value("over")),
    ("hardware.synth-settling", "synth_settling.yaml", _pulse_after_write),
    ("hardware.wiring-before-start", "wiring_before_start.yaml", _write_value("at")),
    ("hardware.wiring-edges-too-close", "wiring_edges_too_close.yaml", _write_value("at")),
    ("hardware.wiring-trigger-period", "wiring_trigger_period.yaml", _write_value("at")),
    ("hardware.wiring-trigger-pulse", "wiring_trigger_pulse.yaml", _write_value("at")),
    ("physics.barrier-too-late", "barrier_too_late.yaml", _barrier_earlier),
    ("physics.barrier-too-short", "barrier_too_short.yaml", _write_value("duration")),
    ("physics.barrier-too-short", "push_too_late.yaml", _write_value("duration")),
    ("physics.cloud-overlaps-barrier", "barrier_cloud_overlaps.yaml", _sheet_farther),
    ("physics.components-overlap", "components_overlap.yaml", _write_value("gradient")),
    ("physics.drive-too-strong", "barrier_drive_too_strong.yaml", _write_value("depth")),
    ("physics.imaging-blur", "imaging_blur.yaml", _write_value("duration")),
    ("physics.imaging-blur", "probe_doppler.yaml", _write_value("duration")),
    ("physics.magnetic-trap-lost", "magnetic_trap_lost.yaml", _coil_currents),
    ("physics.modulation-off-resonance", "modulation_off_resonance.yaml", _write_value("frequency")),
    ("physics.modulation-off-resonance", "barrier_rotation_unresolvable.yaml", _write_value("frequency")),
    ("physics.barrier-no-signal", "barrier_no_signal.yaml", _write_value("power")),
    ("physics.not-tunnelling", "barrier_not_tunnelling.yaml", _write_value("power")),
    ("physics.probe-doppler", "probe_doppler.yaml", _write_value("duration")),
    ("physics.probe-off-resonance", "probe_off_resonance.yaml", _beam_wavelength),
    ("physics.pulse-angle", "pulse_angle.yaml", _write_value("duration")),
    ("physics.rotation-unresolvable", "barrier_rotation_unresolvable.yaml", _write_value("frequency")),
    ("physics.pulse-detuned", "pulse_detuned.yaml", _write_value("frequency")),
    ("physics.push-too-late", "push_too_late.yaml", _write_value("duration")),
    ("physics.push-velocity", "push_velocity.yaml", _write_value("duration")),
    ("physics.sweep-not-adiabatic", "sweep_not_adiabatic.yaml", _write_value("over")),
    ("safety.coil-current", "coil_current.yaml", _write_value("value")),
    ("schema.param-out-of-range", "param_bounds.yaml", _write_value("value")),
    ("schema.param-out-of-range", "param_bounds_scan.yaml", _scan_bound),
    ("schema.bad-scan", "scan_one_step_range.yaml", _write_value("steps")),
    ("schema.unknown-unit", "unit_lowercase_power.yaml", _unit_text),
]


def _where(f):
    return (f.code, f.file, f.line)


def _flagged(findings):
    return [f for f in findings if f.severity in ("error", "warning")]


@pytest.mark.parametrize("code, fault, apply", CASES, ids=[f"{c}-{f[:-5]}" for c, f, _ in CASES])
def test_the_number_a_fix_proposes_passes_when_applied(project, code, fault, apply):
    path = f"{FAULTS}/{fault}"
    before = check(path)
    hits = [f for f in before if f.code == code]
    assert hits, [(g.code, g.line) for g in before]
    f = hits[0]
    written = apply(f, path)
    after = check(path)
    left = [g for g in after if g.code == code and g.file == f.file and g.line == f.line]
    assert not left, (written, [(g.message, g.hint) for g in left])
    # nothing new in its place: no error, and no warning either (a note, such as the predicted transmission,
    # may change with the numbers)
    new = {_where(g) for g in _flagged(after)} - {_where(g) for g in _flagged(before)}
    assert not new, (written, [(g.code, g.line, g.message) for g in _flagged(after) if _where(g) in new])



def test_the_line_rotation_unresolvable_names_is_the_one_modulation_off_resonance_accepts(project):
    # both fire on the same barrier; the frequency either fix names, applied, silences both
    path = f"{FAULTS}/barrier_rotation_unresolvable.yaml"
    before = check(path)
    f = next(g for g in before if g.code == "physics.rotation-unresolvable")
    assert any(g.code == "physics.modulation-off-resonance" and g.line == f.line for g in before)
    _write_value("frequency")(f, path)
    assert not [g for g in _flagged(check(path)) if g.line == f.line]

# ----------------------------------------------------------------------------- other numbers in the same faults
# Each fault again with one of its numbers changed (chosen here, not taken from seqgen), so that the proposed
# number falls elsewhere on its rounding grid: a bound printed to a few digits must be rounded the way that
# passes, whatever the digits it drops. ("rig", old, new) edits the fault's rig file.

VARIANTS = {
    ("hardware.exposure-too-short", "exposure_too_short.yaml"): [("duration: 30 us", "duration: 30.0004 us"),
                                                                 ("duration: 30 us", "duration: 27.77777 us")],
    ("hardware.pulse-too-short", "pulse_too_short.yaml"): [("at: 0 s", "at: 0.7 s"), ("at: 0 s", "at: 1.2345678 s"),
                                                           ("rig", "min_pulse: 10 us", "min_pulse: 10.00044 us")],
    ("hardware.ramp-undersampled", "ramp_undersampled.yaml"): [("over: 100 us", "over: 130 us"),
                                                               ("to: 1 W, over", "to: 0.77 W, over")],
    ("hardware.ramp-undersampled", "slew.yaml"): [("to: 60 A, over: 100 us", "to: 47 A, over: 100 us"),
                                                  ("over: 100 us", "over: 70 us")],
    ("hardware.resolution", "resolution.yaml"): [("rig", "range: [0 V, 10 V], bits: 16}\n    calibration: {quantity: W, "
                                                  "linear: {slope: 5 V/W}}", "range: [0 V, 10 V], bits: 13}\n    "
                                                  "calibration: {quantity: W, linear: {slope: 5 V/W}}")],
    ("hardware.slew", "slew.yaml"): [("to: 60 A, over: 100 us", "to: 47 A, over: 100 us"),
                                     ("over: 100 us", "over: 70 us"), ("rig", "max_slew: 200000 A/s\n    safe: 0 A\n  sg",
                                                                       "max_slew: 170001 A/s\n    safe: 0 A\n  sg")],
    ("hardware.synth-settling", "synth_settling.yaml"): [("rig", "settling: 200 us", "settling: 173.3337 us")],
    ("physics.barrier-too-late", "barrier_too_late.yaml"): [("guide + 14 ms", "guide + 14.7 ms"),
                                                            ("guide + 14 ms", "guide + 14.3 ms")],
    ("physics.barrier-too-short", "barrier_too_short.yaml"): [("duration: 12 ms", "duration: 11 ms"),
                                                              ("duration: 12 ms", "duration: 9.5 ms")],
    ("physics.cloud-overlaps-barrier", "barrier_cloud_overlaps.yaml"): [("value: 0.65 W", "value: 0.5 W")],
    ("physics.components-overlap", "components_overlap.yaml"): [("gradient: 1 G/cm", "gradient: 1.3 G/cm"),
                                                                ("gradient: 1 G/cm", "gradient: 0.7 G/cm")],
    ("physics.drive-too-strong", "barrier_drive_too_strong.yaml"): [("depth: 1}", "depth: 0.8}")],
    ("physics.imaging-blur", "imaging_blur.yaml"): [("duration: 60 us", "duration: 47 us")],
    ("physics.magnetic-trap-lost", "magnetic_trap_lost.yaml"): [("sg_coil: 15 A", "sg_coil: 14.3 A"),
                                                                ("sg_coil: 15 A", "sg_coil: 12.7 A")],
    ("physics.modulation-off-resonance", "modulation_off_resonance.yaml"): [("1.7716 GHz", "1.7733 GHz")],
    ("physics.not-tunnelling", "barrier_not_tunnelling.yaml"): [("power: 0.36 mW", "power: 0.33 mW"),
                                                                ("power: 0.36 mW", "power: 0.301 mW"),
                                                                # the other side: expected over the top, but below it
                                                                ("power: 0.36 mW, duration: 20 ms, expect: tunnelling",
                                                                 "power: 0.47 mW, duration: 20 ms, expect: over_barrier")],
    ("physics.probe-doppler", "probe_doppler.yaml"): [("duration: 200 us", "duration: 170 us")],
    ("physics.probe-off-resonance", "probe_off_resonance.yaml"): [("rig", "wavelength: 589.158 nm",
                                                                   "wavelength: 670.8 nm")],
    ("physics.pulse-angle", "pulse_angle.yaml"): [("duration: 50 us", "duration: 37 us")],
    ("physics.pulse-detuned", "pulse_detuned.yaml"): [("1.77248 GHz", "1.7751 GHz")],
    ("physics.push-too-late", "push_too_late.yaml"): [("target_distance: 0.3 mm", "target_distance: 0.37 mm"),
                                                      ("target_distance: 0.3 mm", "target_distance: 0.41 mm")],
    ("physics.push-velocity", "push_velocity.yaml"): [("expect_velocity: 38 mm/s", "expect_velocity: 31 mm/s")],
    ("physics.sweep-not-adiabatic", "sweep_not_adiabatic.yaml"): [("over: 100 us", "over: 230 us"),
                                                                  ("to: 1770.9 MHz", "to: 1771.3 MHz")],
    ("safety.coil-current", "coil_current.yaml"): [("value: 70 A", "value: 63.3 A"),
                                                   ("rig", "max_current: 60 A", "max_current: 58.00666 A")],
    ("schema.param-out-of-range", "param_bounds.yaml"): [("min: 1 ms", "min: 1.000377 ms")],
}

_APPLY = {(c, f): a for c, f, a in CASES}
VARIANT_CASES = [(c, f, edit_) for (c, f), edits in VARIANTS.items() for edit_ in edits]


@pytest.mark.parametrize("code, fault, change", VARIANT_CASES,
                         ids=[f"{c}-{f[:-5]}-{i}" for i, (c, f, _) in enumerate(VARIANT_CASES)])
def test_the_number_passes_for_other_numbers_in_the_fault(project, code, fault, change):
    path = f"{FAULTS}/{fault}"
    target, old, new = change if len(change) == 3 else (path, *change)
    edit(rig_of(path) if target == "rig" else target, old, new)
    test_the_number_a_fix_proposes_passes_when_applied(project, code, fault, _APPLY[(code, fault)])


# ----------------------------------------------------------------------------- the rounding the fixes use


def _decimal_round(x: float, digits: int, up: bool) -> float:
    """x to `digits` significant digits toward +inf (up) or -inf, by Python's decimal module."""
    from decimal import ROUND_CEILING, ROUND_FLOOR, Decimal

    d = Decimal(repr(x))
    exp = d.adjusted() - (digits - 1)
    return float(d.quantize(Decimal(1).scaleb(exp), rounding=ROUND_CEILING if up else ROUND_FLOOR))


@pytest.mark.parametrize("x", [1 / 0.7455116476863756, 17.7299, 0.015234314918518066, 6.7127, 7.62951e-05,
                               2e-06 * 196.6, 60.006, -2.345678, 9.99951, 123456.7])
@pytest.mark.parametrize("digits", [3, 4])
@pytest.mark.parametrize("up", [True, False])
def test_outward_rounds_to_the_next_value_of_the_grid_in_the_direction_asked(x, digits, up):
    from seqgen.textfmt import outward

    # float noise beyond 12 significant digits is dropped first (2e-06 * 196.6 is 0.00039319999999999996)
    want = _decimal_round(float(f"{x:.12g}"), digits, up)
    got = outward(x, digits, up=up)
    assert got == pytest.approx(want, rel=1e-12)
    assert (got >= x * (1 - 1e-12 * math.copysign(1, x))) if up else (got <= x * (1 + 1e-12 * math.copysign(1, x)))
    assert float(f"{got:.{digits}g}") == got  # printed to `digits` digits, it reads back as itself


@pytest.mark.parametrize("x, digits", [(100e-6, 4), (0.3e-3, 4), (60.0, 4), (1.0, 3)])
def test_outward_keeps_a_value_on_the_grid_and_strict_moves_it_one_step(x, digits):
    from seqgen.textfmt import outward

    step = 10.0 ** (math.floor(math.log10(x)) - (digits - 1))
    assert outward(x, digits) == x and outward(x, digits, up=False) == x
    assert outward(x, digits, strict=True) == pytest.approx(x + step)
    assert outward(x, digits, up=False, strict=True) == pytest.approx(x - step)
    assert outward(2 * 50e-6, 4) == 100e-6  # float noise of 2 x 50 us dropped: 100 us, not 100.1 us
