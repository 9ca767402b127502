"""Rules on the atoms' internal state: clock pulses (area, detuning), rapid adiabatic passage, the barrier's
modulation drive, and drives on states that hold no atoms. They read `seqgen.predict.states`."""

from __future__ import annotations

import math

import numpy as np

from ..codes import (
    MODULATION_OFF_RESONANCE, MODULATION_UNREACHABLE, PULSE_ANGLE, PULSE_DETUNED, SWEEP_NOT_ADIABATIC,
    TRANSITION_FORBIDDEN, TRANSITION_UNPOPULATED,
)
from ..findings import make
from ..predict.species import (REFERENCE_FORBIDDEN, allowed_instead, bias, coupling_factor, drive_coupling, line,
                               other_level, sample_state, species)
from ..predict.states import (LZ_MIN_TRANSFER, TWO_PI, barrier_drive_analysis, barrier_drive_on, barriers,
                              populated_states,
                              populations, pulse_analysis, pulse_fourier_width, pulse_nodes, pulses, rel_off,
                              state_fractions, sweep_analysis, sweeps)
from ..textfmt import fmt_angle_pi, fmt_freq, fmt_pct, fmt_state, fmt_time, fmt_vec, outward
from ..values import value_at
from .rules import rule
from .ticks import action_outputs, duration_text, fmt_tick, freq_text, grid, min_interval, on_grid, on_tick, overlap

TRANSFER_TOLERANCE = 0.10  # detuning may change the intended transfer by 10 % of it (brief of the check)
TRANSFER_FLOOR = 0.01  # ... but at least by 0.01 in population, so that near-zero intended transfers do not warn on noise



@rule(PULSE_ANGLE, stage="physics")
def pulse_angle(shot):
    tol = shot.limits.angle_tolerance
    for act in pulses(shot):
        rep = pulse_analysis(shot, act)
        if not rep or rep.angle is None or rep.angle <= 0 or rep.area <= 0:
            continue
        off = rel_off(rep.area, rep.angle)
        if off > tol:
            k = rep.angle / rep.area
            amp_hint = (f" or amplitude {act.args.get('amplitude', 1.0) * k:.4g}" if act.args.get("amplitude", 1.0) * k <= 1
                        else "")
            duration, plays = _tick_duration(shot, act, rep.duration * k, rep.angle / rep.area)
            yield make(PULSE_ANGLE, f"pulse area on '{rep.drive}' is {fmt_angle_pi(rep.area)} (peak Rabi frequency "
                       f"2 pi x {fmt_freq(rep.peak_rabi_hz)}, {rep.envelope} envelope, {fmt_time(rep.duration)}), "
                       f"but angle says {fmt_angle_pi(rep.angle)}: off by {fmt_pct(off)} (limit {tol * 100:g} %)",
                       act.pos, block=act.block, time_s=act.t0,
                       hint=f"use duration {duration}{plays}{amp_hint}, or fix the drive's rabi_per_amplitude",
                       data={"area_rad": rep.area, "angle_rad": rep.angle})



def _tick_duration(shot, act, want: float, scale: float) -> tuple[str, str]:
    """The duration nearest to `want` that the devices of the pulse's channels play (a whole number of their
    ticks, at least their minimum interval), as text, and the angle it plays when that is not the angle asked
    (the area scales with the duration at a given envelope and amplitude: theta = Omega t, Phys. Rev. 51, 652
    (1937)). `scale`: the angle asked over the area of the pulse as it plays now."""
    outs = action_outputs(shot, act)
    g = grid(shot, outs)
    if not g > 0:
        return fmt_time(want), ""
    now = overlap(act.t0, act.t1, g)  # the played pulse the area was integrated over (its edges on their ticks)
    d = on_grid(act.t0, now * scale if now > 0 else want, g, "nearest", at_least=min_interval(shot, outs))
    if not now > 0:
        return fmt_tick(d, g, lead=act.t0), ""
    played_d = on_tick(act.t0 + d, g) - on_tick(act.t0, g)
    angle = act.args["angle"]
    got = angle * played_d / (now * scale) if now * scale > 0 else angle
    near = (f" (it plays {fmt_angle_pi(got)}, the nearest a {fmt_time(g)} tick allows)"
            if abs(played_d - now * scale) > 1e-3 * g else "")
    return fmt_tick(d, g, lead=act.t0), near


def _freq_output(shot, drive_name):
    """The synth frequency output a drive's pulse writes, or None."""
    drive = shot.rig.drives.get(drive_name)
    name = f"{drive.channel}.freq" if drive is not None else None
    return name if name in shot.rig.outputs else None


def _mod_output(shot, act):
    """The synth frequency output a barrier's modulation writes (its mod_channel), or None."""
    name = act.args.get("mod_channel")
    return name if name in shot.rig.outputs else (f"{name}.freq" if f"{name}.freq" in shot.rig.outputs else None)


def _writer(shot, output, t):
    """The last write to `output` that starts at or before t (as `values.value_at` orders them), or None."""
    last = None
    for seg in sorted((x for x in shot.segments if x.output == output),
                      key=lambda x: (x.t0, 0 if x.action.endswith(":end") else 1)):
        if seg.t0 <= t:
            last = seg
    return last


def _line(seg) -> str:
    return f"line {seg.pos.line}" if seg.pos.line else f"block '{seg.block}'"


def _own_write(seg, act, settling) -> bool:
    """Whether `seg` is the pulse's own frequency write (lower_clock_pulse: a settling time ahead of it)."""
    return (seg.block == act.block and seg.action == "clock_pulse" and seg.kind == "set"
            and abs(seg.t0 - (act.t0 - settling)) <= 1e-12 * max(1.0, abs(act.t0)))


def _spoiler(shot, act, fname):
    """The first write to the pulse's synth frequency, other than the pulse's own, that starts after the pulse's
    own write (with `frequency:`; else at or after its start) and before its end: it overrides what the pulse
    wanted. A clock_pulse's write comes its synth's settling time ahead of its own pulse, so the next pulse's
    write may land inside (or even before the start of) this one. None without one."""
    settling = shot.rig.outputs[fname].settling_s
    own = act.t0 - settling if "frequency" in act.args else act.t0
    for seg in sorted((x for x in shot.segments if x.output == fname), key=lambda x: (x.t0, x.pos.line)):
        if _own_write(seg, act, settling):
            continue
        if (seg.t0 > own or (seg.t0 == own and "frequency" not in act.args)) and seg.t0 < act.t1:
            return seg
    return None


def _later_text(shot, act, seg) -> str:
    """The fix for a write `seg` that lands before the pulse `act` ends: start it (its block, when that is
    another block) late enough that the write comes at or after the pulse's end."""
    shift = outward(act.t1 - seg.t0)
    fname = seg.output
    settling = shot.rig.outputs[fname].settling_s
    lead = (f", {fmt_time(settling, unit='us')} (the synth's settling time) ahead of its own pulse,"
            if seg.action == "clock_pulse" and settling > 0 else "")
    whom = f"block '{seg.block}'" if seg.block != act.block else f"the {seg.action} at {_line(seg)}"
    return (f"the {seg.action} at {_line(seg)} (block '{seg.block}') writes '{fname}'{lead} at "
            f"t = {fmt_time(seg.t0, 6, unit='ms')}, before this pulse ends at t = {fmt_time(act.t1, 6, unit='ms')}: "
            f"start {whom} at least {fmt_time(shift, unit='us')} later")


def _played_text(shot, act, rep):
    """(what the synth plays during the pulse, joined to the detuning text by " is " or ", ", what follows the
    line's text, the other write's segment or None, the hint's first part)."""
    fname = f"{shot.rig.drives[rep.drive].channel}.freq"
    spoiler = _spoiler(shot, act, fname)
    if rep.freq_span_hz > 0:
        other = spoiler or (rep.other_writes[0] if rep.other_writes else _writer(shot, fname, act.t1))
        where = f" ({other.action} at {_line(other)})" if other is not None else ""
        fix = (_later_text(shot, act, spoiler) if spoiler is not None else
               f"move the write to '{fname}'{where} out of the pulse")
        return (f"drive '{rep.drive}' plays {fmt_freq(rep.frequency_hz, 10)} at the middle of the pulse, ",
                f", and its synth changes by {fmt_freq(rep.freq_span_hz)} during it{where}", other,
                f"{fix}; the pulse wants")
    if spoiler is not None:  # the pulse's own write (or the one before it) is overridden before it starts
        return (f"drive '{rep.drive}' plays {fmt_freq(rep.frequency_hz, 10)} during the pulse (written by the "
                f"{spoiler.action} at {_line(spoiler)}, block '{spoiler.block}') and is ", "", spoiler,
                f"{_later_text(shot, act, spoiler)}; the pulse wants")
    if "frequency" in act.args:
        return f"drive '{rep.drive}' at {fmt_freq(rep.frequency_hz, 10)} is ", "", None, "set"
    seg = _writer(shot, fname, act.t0)
    whence = f"set by the {seg.action} at {_line(seg)}" if seg is not None else "its synth's idle frequency"
    return (f"clock pulse without 'frequency:': drive '{rep.drive}' plays {fmt_freq(rep.frequency_hz, 10)} "
            f"({whence}) is ", "", seg, "add")


@rule(PULSE_DETUNED, stage="physics")
def pulse_detuned(shot):
    for act in pulses(shot):
        rep = pulse_analysis(shot, act)
        if not rep or rep.detuning_source not in ("frequency", "played") or rep.transfer is None:
            continue
        p, p0 = rep.transfer, rep.intended_transfer
        if abs(p - p0) > max(TRANSFER_TOLERANCE * p0, TRANSFER_FLOOR):
            fw = pulse_fourier_width(shot, act)
            initial, final = rep.pair
            target = rep.resonance_hz + rep.intended_detuning_hz
            data = {"detuning_hz": rep.detuning_hz, "transfer": p, "intended_transfer": p0}
            if rep.detuning_source == "frequency":
                what, tail, other, fix = f"drive '{rep.drive}' at {fmt_freq(act.args['frequency'], 10)} is ", "", None, "set"
            else:
                what, tail, other, fix = _played_text(shot, act, rep)
            if other is not None:
                data.update(other_line=other.pos.line, other_column=other.pos.column)
            yield make(PULSE_DETUNED, f"{what}{fmt_freq(rep.detuning_hz)} from the {fmt_state(*initial)} -> "
                       f"{fmt_state(*final)} line at {fmt_freq(rep.resonance_hz, 10)} ({bias(shot) * 1e4:.4g} G bias)"
                       f"{tail}; transfer {p:.3g} instead of {p0:.3g}" + (f"; Fourier width {fmt_freq(fw)}" if fw else ""),
                       act.pos, block=act.block, time_s=act.t0,
                       hint=f"{fix} frequency: {freq_text(shot, _freq_output(shot, rep.drive), target)}", data=data)


@rule(SWEEP_NOT_ADIABATIC, stage="physics")
def sweep_not_adiabatic(shot):
    for drive, seg in sweeps(shot):
        rep = sweep_analysis(shot, drive, seg)
        if rep is None:
            continue
        coupling = drive_coupling(shot, drive)
        if coupling is not None and coupling.forbidden:
            continue  # the polarisation cannot drive the pair at all: physics.transition-forbidden says so
        bloch = f"; integrated transfer {rep.bloch_transfer:.3g}" if rep.bloch_transfer is not None else ""
        if not rep.crosses:
            yield make(SWEEP_NOT_ADIABATIC, f"sweep of '{drive.name}' from {fmt_freq(rep.f0, 10)} to "
                       f"{fmt_freq(rep.f1, 10)} does not cross the {fmt_state(*rep.pair[0])} -> "
                       f"{fmt_state(*rep.pair[1])} line at {fmt_freq(rep.resonance_hz, 10)}{bloch}", seg.pos,
                       block=seg.block, time_s=seg.t0, hint="sweep across the line", data={"lz_transfer": 0.0})
        elif rep.lz_transfer < LZ_MIN_TRANSFER:
            # the crossing rate the check judged scales as 1 / duration for a linear sweep
            need = (seg.t1 - seg.t0) * abs(rep.rate_hz_s) / rep.max_rate_hz_s if rep.max_rate_hz_s > 0 else math.inf
            yield make(SWEEP_NOT_ADIABATIC, f"sweep of '{drive.name}' crosses the line at "
                       f"{fmt_freq(abs(rep.rate_hz_s))}/s with Rabi frequency 2 pi x {fmt_freq(rep.rabi_hz)}: "
                       f"Landau-Zener transfer {rep.lz_transfer:.3g} (below {LZ_MIN_TRANSFER:g}){bloch}", seg.pos,
                       block=seg.block, time_s=rep.t_cross,
                       hint=f"lengthen the sweep to at least {duration_text(shot, seg, outward(need, strict=True), 'up')} (linear), or raise "
                            "the amplitude",
                       data={"lz_transfer": rep.lz_transfer, "rate_hz_s": rep.rate_hz_s})



@rule(MODULATION_OFF_RESONANCE, stage="physics")
def modulation_off_resonance(shot):
    for act in barriers(shot):
        rep = barrier_drive_analysis(shot, act)
        if not rep or rep.offset_hz is None:
            continue
        if abs(rep.offset_hz) > rep.tolerance_hz:
            a, b = rep.pair
            if rep.rabi_hz is None:  # a pair the model does not couple: its bare line (physics.transition-forbidden)
                line_text = f"{fmt_freq(rep.resonance_hz, 10)} (Breit-Rabi; Delta mF = {_dm(a, b)}: no light shift or Rabi frequency in the model)"
                beyond = "more than"
            else:
                line_text = (f"{fmt_freq(rep.resonance_hz, 10)} (Breit-Rabi {fmt_freq(rep.bare_hz, 10)}, differential light shift "
                             f"{fmt_freq(rep.light_shift_hz)})")
                beyond = f"more than the drive's Rabi frequency 2 pi x {fmt_freq(rep.rabi_hz)} and"
            yield make(MODULATION_OFF_RESONANCE, f"modulation at {fmt_freq(rep.f_mod, 10)} is "
                       f"{fmt_freq(rep.offset_hz)} from the {fmt_state(*a)} -> {fmt_state(*b)} line at {line_text}, "
                       f"{beyond} the {fmt_time(act.args['duration'])} pulse's Fourier width {fmt_freq(rep.fourier_hz)}",
                       act.pos, block=act.block, time_s=act.t0,
                       hint=f"set modulation frequency: {freq_text(shot, _mod_output(shot, act), rep.resonance_hz)}",
                       data={"offset_hz": rep.offset_hz, "rabi_hz": rep.rabi_hz})


@rule(MODULATION_UNREACHABLE, stage="physics")
def modulation_unreachable(shot):
    for act in barriers(shot):
        name, f = act.args.get("mod_channel"), act.args.get("mod_frequency")
        out = shot.rig.outputs.get(name) if name else None
        if out is None or f is None or out.kind not in ("analog", "digital"):
            continue
        dev = shot.rig.devices.get(out.device)
        if dev is None:
            continue
        rate = dev.timebase_hz / max(1, dev.min_interval_ticks)
        if rate <= 2 * f:
            yield make(MODULATION_UNREACHABLE, f"modulation at {fmt_freq(f)} on {out.kind} channel "
                       f"'{out.channel}' needs more than {fmt_freq(2 * f)} of updates, but device '{dev.name}' updates at "
                       f"most {fmt_freq(rate)}", act.pos, block=act.block, time_s=act.t0,
                       hint="modulate through a synth channel of the rig (kind: synth)",
                       data={"frequency_hz": f, "update_rate_hz": rate})



@rule(TRANSITION_UNPOPULATED, stage="physics")
def transition_unpopulated(shot):
    if species(shot) is None or sample_state(shot) is None:
        return
    for act in pulses(shot):
        rep = pulse_analysis(shot, act)
        if not rep or not rep.pair:
            continue
        fr = state_fractions(shot, act.t0) or {}
        pop = populations(shot, act.t0)
        full = populated_states(shot, act.t0)
        if any(st in full or st in pop.possible for st in rep.pair):
            continue
        a, b = rep.pair
        where = ", ".join(f"{fmt_state(*st)} ({fmt_pct(fr[st])})" for st in full) or "no state above the detection floor"
        target = full[0] if full else None
        hint = (f"start the transition from a populated state, e.g. transition: [{{F: {target[0]}, mF: {target[1]}}}, "
                f"...], or fix the sample's state" if target else "fix the sample's state or the pulse's transition")
        yield make(TRANSITION_UNPOPULATED, f"the clock pulse on '{rep.drive}' drives {fmt_state(*a)} -> "
                   f"{fmt_state(*b)}, but neither state holds atoms: before it the atoms are in {where}", act.pos,
                   block=act.block, time_s=act.t0, hint=hint,
                   data={"fraction_initial": fr.get(a, 0.0), "fraction_final": fr.get(b, 0.0)})
    for act, rep in _modulated(shot):
        (a, b), where = rep.pair, _held_text(shot, act.t0, rep.pair)
        if where is None or a[1] != b[1] or a[0] == b[0]:
            continue  # a pair that changes mF: physics.transition-forbidden
        yield make(TRANSITION_UNPOPULATED, f"the modulation of barrier '{act.args['beam']}' drives {fmt_state(*a)} -> "
                   f"{fmt_state(*b)}, but neither state holds atoms: before it the atoms are in {where}; the "
                   f"modulation drives nothing", act.pos, block=act.block, time_s=act.t0, hint=_modulation_fix(shot, act),
                   data={"pair": [list(a), list(b)]})


def _modulated(shot):
    """(barrier, BarrierDrive) of every modulated barrier whose transition is two ground levels."""
    if species(shot) is None or sample_state(shot) is None:
        return
    for act in barriers(shot):
        rep = barrier_drive_analysis(shot, act)
        if rep is not None and rep.pair is not None:
            yield act, rep


def _held_text(shot, t, pair) -> str | None:
    """Where the atoms are just before t, in words, when neither state of `pair` holds any; else None."""
    full = populated_states(shot, t)
    if any(st in full or st in populations(shot, t).possible for st in pair):
        return None
    fr = state_fractions(shot, t) or {}
    return ", ".join(f"{fmt_state(*st)} ({fmt_pct(fr[st])})" for st in full) or "no state above the detection floor"


def _modulation_fix(shot, act) -> str:
    """A transition the modulated-sheet model drives from a populated state, with its light-shifted line."""
    sp = species(shot)
    for st in populated_states(shot, act.t0):
        other = other_level(sp, st)
        rep = barrier_drive_on(shot, act, (st, other)) if other is not None else None
        if rep is not None and rep.unsupported is None:
            return (f"couple a populated state to the other hyperfine level at equal mF: {_transition_text((st, other))}"
                    f", with modulation frequency: {rep.resonance_hz:.10g} Hz (its line with the sheet's light shift)")
    return "no populated state has a partner at equal mF that the modulated sheet can drive: drop the modulation"


def _dm(a, b) -> str:
    d = b[1] - a[1]
    return f"{d:+d}" if d else "0"


def _pol_text(pol) -> str:
    return pol if isinstance(pol, str) else f"a field along {fmt_vec(pol)} (z: the bias axis)"


def _transition_text(pair) -> str:
    (f1, m1), (f2, m2) = pair
    return f"transition: [{{F: {f1}, mF: {m1}}}, {{F: {f2}, mF: {m2}}}]"


def _forbidden_pulse_hint(shot, drive, act, rep, pair) -> str:
    """The allowed transition from the same state, with the duration that gives the pulse's angle there and its
    line (pulse area ~ duration for a given envelope)."""
    alt = allowed_instead(shot, drive, pair)
    if not alt:
        return (f"no transition from {fmt_state(*pair[0])} to F={pair[1][0]} is driven by {_pol_text(drive.polarisation)}:"
                f" use a drive whose field drives this transition, or state the field this drive has (polarisation: [x, y, z])")
    new = alt[0]
    parts = [_transition_text(new)]
    factor = coupling_factor(shot, drive, new)
    t, w = pulse_nodes(act.t0, act.t1)
    area = TWO_PI * drive.rabi_per_amplitude_hz * factor * float(np.sum(w * value_at(shot, rep.amp_output, t)))
    if rep.angle and area > 0:
        parts.append(f"duration: {duration_text(shot, act, rep.duration * rep.angle / area, digits=5)}")
    if "frequency" in act.args:
        nu, _ = line(species(shot), new[0], new[1], bias(shot))
        parts.append(f"frequency: {nu + drive.light_shift_hz + rep.intended_detuning_hz:.10g} Hz")
    return (f"drive a transition that {_pol_text(drive.polarisation)} drives: " + ", ".join(parts)
            + f" (Rabi frequency 2 pi x {fmt_freq(drive.rabi_per_amplitude_hz * factor)} at amplitude 1)")


@rule(TRANSITION_FORBIDDEN, stage="physics")
def transition_forbidden(shot):
    """Pulses and sweeps on a transition the drive's polarisation cannot drive; drives whose calibrated_on
    transition cannot carry the calibration over."""
    references = {}
    for act in pulses(shot):
        rep = pulse_analysis(shot, act)
        drive = shot.rig.drives.get(act.args["drive"])
        c = drive_coupling(shot, drive, act.args.get("transition")) if rep and rep.peak > 0 else None
        if c is None:
            continue
        references.setdefault(drive.name, (drive, c))
        if c.forbidden:
            a, b = c.pair
            yield make(TRANSITION_FORBIDDEN, f"the clock pulse on '{drive.name}' drives {fmt_state(*a)} -> "
                       f"{fmt_state(*b)}, which its polarisation ({_pol_text(drive.polarisation)}) cannot drive: the "
                       f"magnetic-dipole matrix element is zero (Delta mF = {_dm(a, b)}), so the pulse moves no atoms",
                       act.pos, block=act.block, time_s=act.t0, hint=_forbidden_pulse_hint(shot, drive, act, rep, c.pair),
                       data={"element_j_per_t": c.element})
    for drive, seg in sweeps(shot):
        c = drive_coupling(shot, drive)
        if c is None:
            continue
        references.setdefault(drive.name, (drive, c))
        if c.forbidden:
            a, b = c.pair
            yield make(TRANSITION_FORBIDDEN, f"the sweep of '{drive.name}' passes the {fmt_state(*a)} -> "
                       f"{fmt_state(*b)} line, which its polarisation ({_pol_text(drive.polarisation)}) cannot drive: "
                       f"the sweep moves no atoms", seg.pos, block=seg.block, time_s=seg.t0,
                       hint="a sweep drives the sample state to the other hyperfine level at equal mF (Delta mF = 0), "
                            "which needs a field component along the bias axis: sweep with a drive whose field has one",
                       data={"element_j_per_t": c.element})
    for act, rep in _modulated(shot):
        (a, b), where = rep.pair, _held_text(shot, act.t0, rep.pair)
        if a[1] == b[1] and a[0] != b[0]:
            continue
        empty = f"; neither state holds atoms either: before it the atoms are in {where}" if where else ""
        # a warning, not an error: the rig gives neither the sheet's polarisation nor its angle to the bias
        yield make(TRANSITION_FORBIDDEN, f"the modulation of barrier '{act.args['beam']}' names {fmt_state(*a)} -> "
                   f"{fmt_state(*b)} (Delta F = {b[0] - a[0]:+d}, Delta mF = {_dm(a, b)}), but seqgen's model of a modulated "
                   f"sheet (a co-propagating Raman pair through the vector light shift, circular light along the bias "
                   f"field) couples the two hyperfine levels at equal mF only: the modulation drives nothing{empty}", act.pos, severity="warning", block=act.block,
                   time_s=act.t0, hint=_modulation_fix(shot, act), data={"pair": [list(a), list(b)]})
    for drive, c in references.values():
        if c.problem is None:
            continue
        a, b = c.reference
        if c.problem == REFERENCE_FORBIDDEN:
            # a Rabi frequency measured on this transition shows the field drives it: one of the two keys is wrong,
            # and only the lab knows which, so the hint names no value
            why = "which its polarisation cannot drive"
            hint = (f"a Rabi frequency measured on {fmt_state(*a)} -> {fmt_state(*b)} shows that the field drives it "
                    f"(Delta mF = {_dm(a, b)}): state the field's direction with that component "
                    f"(polarisation: [x, y, z]), or name the transition the calibration was measured on (calibrated_on)")
        else:
            why = f"which is no transition of {shot.sample.species}"
            hint = f"name two ground levels of {shot.sample.species} in calibrated_on: the transition the calibration was measured on"
        yield make(TRANSITION_FORBIDDEN, f"drive '{drive.name}' is calibrated_on {fmt_state(*a)} -> {fmt_state(*b)}, "
                   f"{why} ({_pol_text(drive.polarisation)}): its rabi_per_amplitude is used unscaled for every "
                   f"transition", drive.pos, hint=hint)
