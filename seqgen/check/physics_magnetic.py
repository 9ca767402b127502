"""Rules on magnetic trap stages (the `magnetic_hold` action): a state the trap cannot hold (the states that
hold atoms at the hold, not only the sample's), a trap that
does not hold against gravity, Majorana spin flips. They read `seqgen.predict.magnetic` (the trap model and
its conventions are described there)."""

from __future__ import annotations

import math

from ..codes import MAGNETIC_TRAP_LOST, MAJORANA_LOSS, STATE_NOT_TRAPPABLE
from ..findings import make
from ..physics.magnetic_trap import trappable_states
from ..predict.magnetic import MIN_MOMENT, hold_analysis, holds
from ..predict.species import G_N, MU_B, sample_state, species
from ..predict.text import level_problem_text, unconfined_text, weakest_text
from ..textfmt import fmt_gauss, fmt_gauss_per_cm, fmt_gauss_per_cm2, fmt_length, fmt_state, fmt_time, outward
from .rules import rule

MIN_SPIN_ADIABATICITY = 10.0  # Larmor frequency over the trap and field-rotation rates (common practice, no source)


def _current_hint(rep, factor) -> str:
    # rounded up and strictly above: the trap holds only when the support exceeds 1
    parts = [f"'{n}' to {outward(abs(i) * factor, 4, strict=True):.4g} A" for n, i in rep.coils]
    return ("raise the coil currents by at least x" + f"{outward(factor, 3, strict=True):.3g}"
            + (f" ({', '.join(parts)})" if parts else ""))



@rule(STATE_NOT_TRAPPABLE, stage="physics")
def state_not_trappable(shot):
    for act in holds(shot):
        rep = hold_analysis(shot, act)
        if rep.bad_state:
            yield make(STATE_NOT_TRAPPABLE, f"the held state is not a ground level of {rep.species}: "
                       f"{level_problem_text(rep.bad_state)}", act.pos, block=act.block, time_s=act.t0,
                       hint="give the state's F and mF of the species' ground levels")
            continue
        lost = [(st, m, None) for st, m in ((rep.state, rep.moment),) if m is not None and not rep.trappable]
        lost += list(rep.lost_states)
        if not lost:
            continue
        ok = ", ".join(fmt_state(*s) for s in trappable_states(species(shot), 0.0, MIN_MOMENT))
        for state, mom, fraction in lost:
            why = ("has no magnetic moment" if abs(mom) < MIN_MOMENT else "is a high-field seeker")
            share = f" ({fraction:.0%} of the atoms)" if fraction is not None else ""
            declared = act.args.get("state") is not None or state == sample_state(shot)
            whence = "" if declared else " (where the earlier pulses or sweeps put the atoms)"
            yield make(STATE_NOT_TRAPPABLE, f"{fmt_state(*state)}{share} of {rep.species}{whence} {why} "
                       f"(moment -dE/dB = {mom / MU_B:+.3g} mu_B): the magnetic trap cannot hold it", act.pos,
                       block=act.block, time_s=act.t0,
                       hint=f"transfer the atoms to a low-field seeker first ({ok}), or hold them optically",
                       data={"moment_mu_b": mom / MU_B, "F": state[0], "mF": state[1]})



@rule(MAGNETIC_TRAP_LOST, stage="physics")
def magnetic_trap_lost(shot):
    for act in holds(shot):
        rep = hold_analysis(shot, act)
        if not rep.trappable or rep.optical:
            continue
        mom, sp = rep.moment, species(shot)
        weight = sp.mass_kg * G_N
        if rep.unconfined:
            yield make(MAGNETIC_TRAP_LOST, f"the Ioffe-Pritchard trap does not confine {fmt_state(*rep.state)} "
                       f"{unconfined_text(rep)} (B0 {fmt_gauss(rep.bias)}, B' {fmt_gauss_per_cm(rep.gradient)}, "
                       f"B'' {fmt_gauss_per_cm2(rep.curvature)})", act.pos, block=act.block, time_s=rep.t_hold,
                       hint="check the coil currents and the signs of the coils' per-amp fields in the rig file")
            continue
        support = rep.support
        if support > 1:
            continue
        need = weight / abs(mom)
        if rep.kind == "quadrupole":
            what = (f"the coils' gradient that gravity meets is {fmt_gauss_per_cm(rep.holding_gradient)}" if rep.coils
                    else "no coil carries current")
        else:
            what = f"the radial gradient B' is {fmt_gauss_per_cm(abs(rep.gradient))}"
        hint = _current_hint(rep, 1 / support) if support > 0 else "give the coils a gradient (gradient_per_amp) and a current"
        yield make(MAGNETIC_TRAP_LOST, f"the magnetic trap does not hold {fmt_state(*rep.state)} of "
                   f"{rep.species} against gravity: {what}, {support:.3g} of the levitation gradient "
                   f"{fmt_gauss_per_cm(need)} (m g_n / |moment|)", act.pos, block=act.block, time_s=rep.t_hold, hint=hint,
                   data={"support": support, "levitation_gradient_t_m": need})



@rule(MAJORANA_LOSS, stage="physics")
def majorana_loss(shot):
    for act in holds(shot):
        rep = hold_analysis(shot, act)
        if not rep.trappable:
            continue
        if rep.kind == "quadrupole":
            tau = rep.lifetime
            if tau is None or rep.duration <= tau:
                continue
            lost = 1 - math.exp(-rep.duration / tau)
            yield make(MAJORANA_LOSS, f"Majorana spin flips: at {shot.sample.temperature_k * 1e6:.4g} uK the "
                       f"cloud in the quadrupole is ~{fmt_length(rep.cloud_size, 3, unit='um')} (k_B T / |moment| b', "
                       f"b' = {weakest_text(rep, short=True)}), lifetime "
                       f"~ m l^2/hbar = {fmt_time(tau)}, shorter than the {fmt_time(rep.duration)} hold (~{lost:.0%} lost)",
                       act.pos, block=act.block, time_s=rep.t_hold,
                       hint="shorten the hold, or plug the field zero (optical plug, Ioffe-Pritchard trap, rotating bias)",
                       data={"lifetime_s": tau, "hold_s": rep.duration})
        elif rep.field_zero:
            yield make(MAJORANA_LOSS, f"the Ioffe-Pritchard trap's bias B0 = {fmt_gauss(rep.bias)} leaves a field "
                       f"zero in the trap: spins flip there and atoms are lost", act.pos, block=act.block,
                       time_s=rep.t_hold, hint="raise the bias (less anti-bias current) to well above zero")
        elif rep.adiabaticity is not None and rep.adiabaticity < MIN_SPIN_ADIABATICITY:
            yield make(MAJORANA_LOSS, f"Ioffe-Pritchard bias {fmt_gauss(rep.bias)} is low: Larmor frequency "
                       f"{rep.larmor / (2 * math.pi):.4g} Hz is only {rep.adiabaticity:.3g} x the faster of the radial "
                       f"trap frequency ({rep.omega_radial / (2 * math.pi):.4g} Hz) and the field rotation rate "
                       f"({rep.rotation / (2 * math.pi):.4g} Hz); want >= {MIN_SPIN_ADIABATICITY:g}", act.pos,
                       block=act.block, time_s=rep.t_hold, hint="raise the bias B0 (less anti-bias current)",
                       data={"adiabaticity": rep.adiabaticity, "bias_t": rep.bias})
