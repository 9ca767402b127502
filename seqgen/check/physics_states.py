"""Rules on the atoms' internal state: clock pulses (area, detuning), rapid adiabatic passage, the barrier's
modulation drive, and drives on states that hold no atoms. They read `seqgen.predict.states`."""

from __future__ import annotations

import math

from ..codes import (
    MODULATION_OFF_RESONANCE, MODULATION_UNREACHABLE, PULSE_ANGLE, PULSE_DETUNED, SWEEP_NOT_ADIABATIC,
    TRANSITION_UNPOPULATED,
)
from ..findings import make
from ..predict.species import bias, sample_state, species
from ..predict.states import (LZ_MIN_TRANSFER, barrier_drive_analysis, barriers, populated_states, populations,
                              pulse_analysis, pulse_fourier_width, pulses, rel_off, state_fractions, sweep_analysis,
                              sweeps)
from ..textfmt import fmt_angle_pi, fmt_freq, fmt_pct, fmt_state, fmt_time, outward
from .rules import rule

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
            yield make(PULSE_ANGLE, f"pulse area on '{rep.drive}' is {fmt_angle_pi(rep.area)} (peak Rabi frequency "
                       f"2 pi x {fmt_freq(rep.peak_rabi_hz)}, {rep.envelope} envelope, {fmt_time(rep.duration)}), "
                       f"but angle says {fmt_angle_pi(rep.angle)}: off by {fmt_pct(off)} (limit {tol * 100:g} %)",
                       act.pos, block=act.block, time_s=act.t0,
                       hint=f"use duration {fmt_time(rep.duration * k)}{amp_hint}, or fix the drive's rabi_per_amplitude",
                       data={"area_rad": rep.area, "angle_rad": rep.angle})



@rule(PULSE_DETUNED, stage="physics")
def pulse_detuned(shot):
    for act in pulses(shot):
        rep = pulse_analysis(shot, act)
        if not rep or rep.detuning_source != "frequency" or rep.transfer is None:
            continue
        p, p0 = rep.transfer, rep.intended_transfer
        if abs(p - p0) > max(TRANSFER_TOLERANCE * p0, TRANSFER_FLOOR):
            fw = pulse_fourier_width(shot, act)
            initial, final = rep.pair
            target = rep.resonance_hz + rep.intended_detuning_hz
            yield make(PULSE_DETUNED, f"drive '{rep.drive}' at {fmt_freq(act.args['frequency'], 10)} is "
                       f"{fmt_freq(rep.detuning_hz)} from the {fmt_state(*initial)} -> {fmt_state(*final)} line at "
                       f"{fmt_freq(rep.resonance_hz, 10)} ({bias(shot) * 1e4:.4g} G bias); transfer {p:.3g} instead of "
                       f"{p0:.3g}" + (f"; Fourier width {fmt_freq(fw)}" if fw else ""), act.pos, block=act.block,
                       time_s=act.t0, hint=f"set frequency: {target:.10g} Hz",
                       data={"detuning_hz": rep.detuning_hz, "transfer": p, "intended_transfer": p0})


@rule(SWEEP_NOT_ADIABATIC, stage="physics")
def sweep_not_adiabatic(shot):
    for drive, seg in sweeps(shot):
        rep = sweep_analysis(shot, drive, seg)
        if rep is None:
            continue
        bloch = f"; integrated transfer {rep.bloch_transfer:.3g}" if rep.bloch_transfer is not None else ""
        if not rep.crosses:
            yield make(SWEEP_NOT_ADIABATIC, f"sweep of '{drive.name}' from {fmt_freq(rep.f0, 10)} to "
                       f"{fmt_freq(rep.f1, 10)} does not cross the {fmt_state(*rep.pair[0])} -> "
                       f"{fmt_state(*rep.pair[1])} line at {fmt_freq(rep.resonance_hz, 10)}{bloch}", seg.pos,
                       block=seg.block, time_s=seg.t0, hint="sweep across the line", data={"lz_transfer": 0.0})
        elif rep.lz_transfer < LZ_MIN_TRANSFER:
            need = abs(rep.f1 - rep.f0) / rep.max_rate_hz_s if rep.max_rate_hz_s > 0 else math.inf
            yield make(SWEEP_NOT_ADIABATIC, f"sweep of '{drive.name}' crosses the line at "
                       f"{fmt_freq(abs(rep.rate_hz_s))}/s with Rabi frequency 2 pi x {fmt_freq(rep.rabi_hz)}: "
                       f"Landau-Zener transfer {rep.lz_transfer:.3g} (below {LZ_MIN_TRANSFER:g}){bloch}", seg.pos,
                       block=seg.block, time_s=rep.t_cross,
                       hint=f"lengthen the sweep to at least {fmt_time(outward(need, strict=True))} (linear), or raise "
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
            yield make(MODULATION_OFF_RESONANCE, f"modulation at {fmt_freq(rep.f_mod, 10)} is "
                       f"{fmt_freq(rep.offset_hz)} from the {fmt_state(*a)} -> {fmt_state(*b)} line at "
                       f"{fmt_freq(rep.resonance_hz, 10)} (Breit-Rabi {fmt_freq(rep.bare_hz, 10)}, differential light shift "
                       f"{fmt_freq(rep.light_shift_hz)}), more than the drive's Rabi frequency 2 pi x {fmt_freq(rep.rabi_hz)} and "
                       f"the {fmt_time(act.args['duration'])} pulse's Fourier width {fmt_freq(rep.fourier_hz)}",
                       act.pos, block=act.block, time_s=act.t0, hint=f"set modulation frequency: {rep.resonance_hz:.10g} Hz",
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
