"""The atoms' internal states: clock pulses (area, line, detuning, transfer), Ramsey and spin-echo pairs,
rapid adiabatic passage by a frequency sweep, the two-photon drive of a modulated barrier, and which states
hold atoms at a time (`populations`).

* Magnetic moment = -dE/dB (J/T), the convention of `seqgen.physics`. Line frequencies come from the
  Breit-Rabi formula (Phys. Rev. 38, 2082 (1931)) at the rig's bias field (`fields: bias`, 0 when absent).
* A transition is ordered (initial, final): the sample state is the initial one when it belongs to the
  pair. Its line frequency is |E_final - E_initial|/h plus the drive's `light_shift`; detuning = drive
  frequency - line. Without a declared `transition` the pair is the sample state and the other hyperfine
  level at equal mF.
* Which states hold atoms: followed from the sample state through clock pulses and sweeps (their computed
  transfer, incoherently), barrier modulation drives (partner possibly populated) and magnetic holds with
  `state:`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .cache import per_shot_cache
from .played import played, played_source, track
from .species import (NO_PARTNER, LevelError, LevelProblem, amplitude_output, bias, coupling_factor, level_problem,
                      line, sample_state, species, transition_pair, unevaluable)

TWO_PI = 2 * math.pi
MG = 1e-7  # one milligauss in tesla
LZ_MIN_TRANSFER = 0.9  # a sweep should transfer at least this (the brief of physics.sweep-not-adiabatic)
SQUARE_FWHM_TIMES_T = 0.885893  # FWHM x duration of the sinc^2 power spectrum of a square pulse (from memory)
MAX_BLOCH_ROTATION = 5e5  # rad of |W| x duration above which a sweep is not integrated (LZ only)
MIN_FRACTION = 0.01  # without an atom number, a state with under 1 % of the atoms counts as empty
DETECTION_FLOOR = 100  # atoms; the default detection floor of physics.barrier-no-signal (common practice, no source)
MAX_PATHS = 256  # state histories kept apart; beyond this, histories that end in one state are merged

_GL_X, _GL_W = np.polynomial.legendre.leggauss(16)


def pulse_nodes(t0, t1, panels=32):
    """Composite Gauss-Legendre nodes and weights on [t0, t1] (16 points per panel)."""
    edges = np.linspace(t0, t1, panels + 1)
    a, b = edges[:-1, None], edges[1:, None]
    return (0.5 * (b - a) * _GL_X + 0.5 * (a + b)).ravel(), (0.5 * (b - a) * _GL_W).ravel()


# --------------------------------------------------------------------------- clock pulses

def pulses(shot):
    return shot.actions("clock_pulse")


@dataclass(frozen=True)
class PulsePrediction:
    """One clock pulse. area (rad) = integral of the Rabi frequency; pair (initial, final) or None (bad_level:
    the declared state that is not a ground level); line_hz, slope_hz_per_t: Breit-Rabi line and its field
    sensitivity; detuning_source: "played" (the frequency the drive's synth plays during the pulse, whether
    or not the pulse writes `frequency:`, against resonance_hz), "frequency" (the pulse's frequency, for a
    drive without a frequency output), "declared" (the pulse's detuning), "unknown_line" or "assumed" (on
    resonance); transfer: final-state population (None at zero amplitude), intended_transfer at the intended
    detuning. frequency_hz: the frequency played at the pulse's middle (freq_span_hz: its range over the
    pulse, 0 when it holds); other_writes: the segments of other actions that write the synth's frequency
    during the pulse; source: "played" (amplitude and frequency read from the compiled tables) or "intended"."""

    drive: str
    amp_output: str
    duration: float
    envelope: str
    area: float
    peak: float
    peak_rabi_hz: float
    constant: bool
    angle: float | None
    rabi_per: float
    light_shift_hz: float
    pair: tuple | None
    intended_detuning_hz: float
    detuning_hz: float
    detuning_source: str
    line_hz: float | None = None
    slope_hz_per_t: float | None = None
    bad_level: LevelProblem | None = None
    resonance_hz: float | None = None
    transfer: float | None = None
    intended_transfer: float | None = None
    frequency_hz: float | None = None
    freq_span_hz: float = 0.0
    other_writes: tuple = ()
    source: str = "played"


def _propagate(shot, amp_name, rabi_per_rad_s, t0, t1, detuning_hz, constant, peak):
    """Excited (final-state) population after the pulse, from the ground (initial) state."""
    from ..physics.drive import bloch_propagate

    if constant:
        return bloch_propagate(rabi_per_rad_s * peak, TWO_PI * detuning_hz, t0, t1).excited_population
    breaks = _breaks(shot, (amp_name,), t0, t1)
    if breaks or abs(TWO_PI * detuning_hz) * (t1 - t0) > 1e5:
        # a jump inside the pulse (another write to the amplitude, a played step), which the smooth integrator
        # cannot step over, or far off resonance (over 1e5 rad of detuning phase: millions of steps): exact
        # SU(2) propagators on 4096 pieces of constant amplitude, with the steps on piece edges, instead
        edges = np.unique(np.concatenate([np.linspace(t0, t1, 4097), breaks]))
        rabi = rabi_per_rad_s * np.asarray(played(shot, amp_name, 0.5 * (edges[1:] + edges[:-1])), dtype=float)
        return bloch_propagate(rabi, TWO_PI * detuning_hz, t0, t1, edges=edges).excited_population
    return bloch_propagate(lambda t: rabi_per_rad_s * played(shot, amp_name, t), TWO_PI * detuning_hz, t0, t1,
                           tol=1e-9).excited_population


def _breaks(shot, outputs, t0, t1) -> list:
    """Times inside (t0, t1) where an output's intended or played value jumps or kinks."""
    out = {x for seg in shot.segments if seg.output in outputs for x in (seg.t0, seg.t1) if t0 < x < t1}
    for name in outputs:
        out.update(float(x) for x in track(shot, name).changes(t0, t1))
    return sorted(out)


def _propagate_played(shot, amp_name, freq_name, rabi_per_rad_s, t0, t1, resonance_hz):
    """Final-state population after a pulse whose played frequency changes during it: exact SU(2) propagators
    on pieces of constant amplitude and frequency, with every played step on a piece edge."""
    from ..physics.drive import bloch_propagate

    edges = np.unique(np.concatenate([np.linspace(t0, t1, 4097), _breaks(shot, (amp_name, freq_name), t0, t1)]))
    mid = 0.5 * (edges[1:] + edges[:-1])
    rabi = rabi_per_rad_s * np.asarray(played(shot, amp_name, mid), dtype=float)
    det = TWO_PI * (np.asarray(played(shot, freq_name, mid), dtype=float) - resonance_hz)
    return bloch_propagate(rabi, det, t0, t1, edges=edges).excited_population


def frequency_output(shot, drive):
    """Name of the output that carries a drive's frequency (its synth's `.freq`), or None."""
    name = f"{drive.channel}.freq"
    return name if name in shot.rig.outputs else None


def other_writes(shot, output, act):
    """Writes to `output` that change it during the action [t0, t1) other than the action's own: segments."""
    found = []
    for seg in shot.segments:
        if seg.output != output or (seg.block == act.block and seg.action.split(":")[0] == act.kind
                                    and seg.t0 == act.t0):
            continue
        if (seg.kind == "set" and act.t0 <= seg.t0 < act.t1) or (seg.kind != "set" and seg.t0 < act.t1
                                                                   and seg.t1 > act.t0):
            found.append(seg)
    return tuple(found)


@per_shot_cache(lambda shot, act: ("state-pulse", act.index, act.t0))
def pulse_analysis(shot, act) -> PulsePrediction | None:
    """Area, line, detuning and transfers of one clock pulse (Rabi formula, Phys. Rev. 51, 652 (1937); Bloch
    propagation, seqgen.physics.drive), or None without its drive's amplitude."""
    drive = shot.rig.drives.get(act.args["drive"])
    amp_name = amplitude_output(shot, drive) if drive else None
    if drive is None or amp_name is None or not act.t1 > act.t0:
        return None
    t, w = pulse_nodes(act.t0, act.t1)
    amp = played(shot, amp_name, t)
    peak = float(np.max(np.abs(amp)))
    factor = coupling_factor(shot, drive, act.args.get("transition"))  # 1.0 unless the rig states polarisation
    rabi_per = TWO_PI * drive.rabi_per_amplitude_hz * factor
    rep = dict(drive=drive.name, amp_output=amp_name, duration=act.t1 - act.t0, envelope=act.args.get("envelope", "square"),
               area=float(rabi_per * np.sum(w * amp)), peak=peak, peak_rabi_hz=drive.rabi_per_amplitude_hz * factor * peak,
               constant=bool(np.ptp(amp) <= 1e-12 * max(peak, 1e-300)), angle=act.args.get("angle"),
               rabi_per=rabi_per, light_shift_hz=drive.light_shift_hz)
    sp = species(shot)
    pair = None
    try:
        pair = transition_pair(shot, sp, act.args.get("transition")) if sp else None
        if pair:
            problem = level_problem(sp, *pair[0]) or level_problem(sp, *pair[1])
            if problem:  # the sample state is not a ground level
                raise LevelError(problem)
            rep["line_hz"], rep["slope_hz_per_t"] = line(sp, pair[0], pair[1], bias(shot))
    except LevelError as exc:  # a declared state that is not a ground level
        pair, rep["bad_level"] = None, exc.problem
    except ValueError as exc:
        pair, rep["bad_level"] = None, unevaluable(sp, pair[0] if pair else None, exc)
    rep["pair"] = pair
    rep["intended_detuning_hz"] = float(act.args.get("detuning", 0.0))
    fname = frequency_output(shot, drive)
    rep["source"] = played_source(shot, amp_name, *((fname,) if fname else ()))
    freqs = None
    if fname:
        freqs = played(shot, fname, np.concatenate(([act.t0], t, [act.t1 - 1e-9 * (act.t1 - act.t0)])))
        rep["frequency_hz"] = float(played(shot, fname, 0.5 * (act.t0 + act.t1))[0])
        rep["freq_span_hz"] = float(np.ptp(freqs))
        rep["other_writes"] = other_writes(shot, fname, act)
    if pair and fname:
        rep["resonance_hz"] = rep["line_hz"] + drive.light_shift_hz
        rep["detuning_hz"], rep["detuning_source"] = rep["frequency_hz"] - rep["resonance_hz"], "played"
    elif pair and "frequency" in act.args:
        rep["resonance_hz"] = rep["line_hz"] + drive.light_shift_hz
        rep["detuning_hz"], rep["detuning_source"] = act.args["frequency"] - rep["resonance_hz"], "frequency"
    elif "detuning" in act.args:
        rep["detuning_hz"], rep["detuning_source"] = rep["intended_detuning_hz"], "declared"
    elif "bad_level" in rep:
        rep["detuning_hz"], rep["detuning_source"] = 0.0, "unknown_line"
    else:
        rep["detuning_hz"], rep["detuning_source"] = 0.0, "assumed"
    if peak > 0:
        args = (shot, amp_name, rabi_per, act.t0, act.t1)
        if rep["detuning_source"] == "played" and rep["freq_span_hz"] > 0:  # the synth changes during the pulse
            rep["transfer"] = _propagate_played(shot, amp_name, fname, rabi_per, act.t0, act.t1, rep["resonance_hz"])
        else:
            rep["transfer"] = _propagate(*args, rep["detuning_hz"], rep["constant"], peak)
        rep["intended_transfer"] = (rep["transfer"] if rep["detuning_hz"] == rep["intended_detuning_hz"]
                                    else _propagate(*args, rep["intended_detuning_hz"], rep["constant"], peak))
    return PulsePrediction(**rep)


@per_shot_cache(lambda shot, act: ("state-pulse-fourier", act.index, act.t0))
def pulse_fourier_width(shot, act) -> float | None:
    """FWHM (Hz) of the pulse's power spectrum (seqgen.physics.drive.fourier_width_hz), or None."""
    from ..physics.drive import fourier_width_hz

    rep = pulse_analysis(shot, act)
    if rep is None:
        return None
    try:
        if rep.constant:
            return fourier_width_hz("square", rep.duration)
        name, t0, peak = rep.amp_output, act.t0, rep.peak
        return fourier_width_hz(lambda t: played(shot, name, t0 + t) / peak, rep.duration)
    except ValueError:
        return None


def rel_off(a, b) -> float:
    """|a - b| / |b|; inf when b is 0."""
    return abs(a - b) / abs(b) if b else math.inf


def _is_area(rep, target, tol):
    return rep is not None and rel_off(rep.area, target) <= tol


def interferometers(shot):
    """Ramsey pairs (pi/2, pi/2) and spin echoes (pi/2, pi, pi/2) on one drive: list of (kind, pulses)."""
    tol = shot.limits.angle_tolerance
    by_drive: dict = {}
    for act in sorted(pulses(shot), key=lambda a: a.t0):
        by_drive.setdefault(act.args["drive"], []).append(act)
    out = []
    for acts in by_drive.values():
        reps = [pulse_analysis(shot, a) for a in acts]
        i = 0
        while i + 1 < len(acts):
            if _is_area(reps[i], math.pi / 2, tol):
                if _is_area(reps[i + 1], math.pi / 2, tol):
                    out.append(("ramsey", (acts[i], acts[i + 1])))
                    i += 2
                    continue
                if i + 2 < len(acts) and _is_area(reps[i + 1], math.pi, tol) and _is_area(reps[i + 2], math.pi / 2, tol):
                    out.append(("spin_echo", (acts[i], acts[i + 1], acts[i + 2])))
                    i += 3
                    continue
            i += 1
    return out


@dataclass(frozen=True)
class Interferometer:
    """Free-evolution time and phase of a Ramsey pair or spin echo, and its field sensitivity (rad per mG)."""

    kind: str
    free_time: float
    net_time: float
    detuning_hz: float
    phase_rad: float
    phase_per_mg: float | None = None
    step_phase_per_mg: float | None = None


def interferometer_analysis(shot, kind, acts) -> Interferometer:
    """Free-evolution phase from the detuning, and its sensitivity to a field offset (rad per mG)."""
    from ..physics.drive import field_noise_phase_sensitivity, ramsey_phase

    rep = pulse_analysis(shot, acts[0])
    delta = rep.detuning_hz
    slope = rep.slope_hz_per_t
    if kind == "ramsey":
        t_free = acts[1].t0 - acts[0].t1
        t_net = t_free
    else:
        t1, t2 = acts[1].t0 - acts[0].t1, acts[2].t0 - acts[1].t1
        t_free, t_net = t1 + t2, t1 - t2  # a static detuning's phase cancels between the two halves
    out = dict(kind=kind, free_time=t_free, net_time=t_net, detuning_hz=delta,
               phase_rad=float(ramsey_phase(delta, t_net)))
    if slope is not None:
        out["phase_per_mg"] = float(field_noise_phase_sensitivity(slope, t_net)) * MG
        if kind == "spin_echo":  # a field step of 1 mG between the halves is not cancelled
            out["step_phase_per_mg"] = float(field_noise_phase_sensitivity(slope, acts[2].t0 - acts[1].t1)) * MG
    return Interferometer(**out)


# --------------------------------------------------------------------------- rapid adiabatic passage

def sweeps(shot):
    """(drive, segment) for every `sweep` of a drive's frequency output while its amplitude is on."""
    out = []
    for drive in shot.rig.drives.values():
        fname = f"{drive.channel}.freq"
        amp = amplitude_output(shot, drive)
        if fname not in shot.rig.outputs or amp is None:
            continue
        for seg in shot.segments:
            if seg.output == fname and seg.kind == "ramp" and seg.action == "sweep" and seg.t1 > seg.t0:
                if played(shot, amp, 0.5 * (seg.t0 + seg.t1))[0] > 0:
                    out.append((drive, seg))
    return out


@dataclass(frozen=True)
class SweepPrediction:
    """One frequency sweep: whether it crosses the line, and where (t_cross, rate_hz_s, rabi_hz); Landau-Zener
    transfer (Proc. R. Soc. A 137, 696 (1932)); max_rate_hz_s: the crossing rate that still gives
    LZ_MIN_TRANSFER; bloch_transfer: the integrated transfer (None when too many rotations to integrate)."""

    drive: str
    pair: tuple
    resonance_hz: float
    f0: float
    f1: float
    duration: float
    crosses: bool
    lz_transfer: float
    t_cross: float | None = None
    rate_hz_s: float | None = None
    rabi_hz: float | None = None
    max_rate_hz_s: float | None = None
    bloch_transfer: float | None = None
    source: str = "played"


def _rate_at(shot, output, tc, t0, t1) -> float:
    """d f/dt (Hz/s) of the played frequency at tc: the least-squares slope of the played rows within 5 % of
    the sweep (at least three rows) about tc; a held output steps, so its rows stand for the curve (each row
    holds the middle of what the curve does while it holds, so a straight sweep's rows lie on a line)."""
    tr = track(shot, output)
    if tr.source == "played":
        inside = (tr.times >= t0) & (tr.times <= t1)
        tt, ff = tr.times[inside], tr.phys[inside]
        if len(tt) >= 3:
            half = 0.05 * (t1 - t0)
            while True:
                near = np.abs(tt - tc) <= half
                if np.count_nonzero(near) >= 3 or half > t1 - t0:
                    break
                half *= 2
            if np.count_nonzero(near) >= 2 and np.ptp(tt[near]) > 0:
                return float(np.polyfit(tt[near], ff[near], 1)[0])
    h = 1e-6 * (t1 - t0)
    return float(np.diff(played(shot, output, [tc - h, tc + h]))[0] / (2 * h))


@per_shot_cache(lambda shot, drive, seg: ("state-sweep", seg.output, seg.t0))
def sweep_analysis(shot, drive, seg) -> SweepPrediction | None:
    """Crossing, Landau-Zener and Bloch transfer of one frequency sweep, or None without a transition."""
    from scipy import optimize
    from ..physics.drive import bloch_propagate, landau_zener_probability

    sp = species(shot)
    pair = transition_pair(shot, sp) if sp else None
    if pair is None:
        return None
    nu, _ = line(sp, pair[0], pair[1], bias(shot))
    res = nu + drive.light_shift_hz
    amp = amplitude_output(shot, drive)
    rabi_per = TWO_PI * drive.rabi_per_amplitude_hz * coupling_factor(shot, drive)
    t0, t1 = seg.t0, seg.t1
    f0, f1 = (float(x) for x in played(shot, seg.output, [t0, t1]))
    rep = dict(drive=drive.name, pair=pair, resonance_hz=res, f0=f0, f1=f1, duration=t1 - t0,
               source=played_source(shot, seg.output, amp))
    breaks = _breaks(shot, (seg.output, amp), t0, t1)
    tg = np.unique(np.concatenate([np.linspace(t0, t1, 2001), breaks]))
    fg = played(shot, seg.output, tg) - res
    rep["crosses"] = bool(np.min(fg) < 0 < np.max(fg))
    if rep["crosses"]:
        j = int(np.nonzero(np.sign(fg[1:]) != np.sign(fg[:-1]))[0][0])
        tc = optimize.brentq(lambda t: float(played(shot, seg.output, t)[0] - res), tg[j], tg[j + 1], xtol=1e-15)
        rate = _rate_at(shot, seg.output, tc, t0, t1)  # Hz/s
        rabi = rabi_per * float(played(shot, amp, tc)[0])
        rep.update(t_cross=tc, rate_hz_s=rate, rabi_hz=rabi / TWO_PI,
                   lz_transfer=1.0 - float(landau_zener_probability(rabi, TWO_PI * rate)))
        # the sweep that gives LZ_MIN_TRANSFER at this Rabi frequency: pi Omega^2 / (2 rate) = -ln(1 - P)
        rep["max_rate_hz_s"] = math.pi * rabi**2 / (2 * -math.log(1 - LZ_MIN_TRANSFER)) / TWO_PI
    else:
        rep["lz_transfer"] = 0.0
    w_max = TWO_PI * float(np.max(np.abs(fg))) + rabi_per * float(np.max(np.abs(played(shot, amp, tg))))
    if w_max * rep["duration"] < MAX_BLOCH_ROTATION:
        # exact SU(2) propagators on pieces of constant played amplitude and frequency (each rotating by
        # under about 0.3 rad), with the played steps on piece edges
        n = int(min(max(4096, math.ceil(w_max * rep["duration"] / 0.3)), 1 << 19))
        edges = np.unique(np.concatenate([np.linspace(t0, t1, n + 1), breaks]))
        mid = 0.5 * (edges[1:] + edges[:-1])
        rep["bloch_transfer"] = bloch_propagate(rabi_per * played(shot, amp, mid),
                                                TWO_PI * (played(shot, seg.output, mid) - res),
                                                t0, t1, edges=edges).excited_population
    return SweepPrediction(**rep)


# --------------------------------------------------------------------------- barrier modulation drive

def barriers(shot):
    return shot.actions("barrier")


@dataclass(frozen=True)
class BarrierDrive:
    """The two-photon drive of a modulated barrier (modulated-beam Raman coupling through the vector light
    shift, Adv. At. Mol. Opt. Phys. 42, 95 (2000)). unsupported: why there is no drive model, one of
    "bad_level" (bad_level: the species.LevelProblem), "not_hyperfine" (the pair is not two hyperfine levels at
    equal mF) or "no_coupling" (the LevelProblem in bad_level); else the Rabi frequency, differential light shift,
    line with and without it, the modulation's offset from it and the offset tolerated."""

    f_mod: float
    depth: float
    pair: tuple | None
    unsupported: str | None = None
    bad_level: LevelProblem | None = None
    i_peak: float | None = None
    rabi_hz: float | None = None
    light_shift_hz: float | None = None
    bare_hz: float | None = None
    resonance_hz: float | None = None
    offset_hz: float | None = None
    fourier_hz: float | None = None
    tolerance_hz: float | None = None
    source: str = "played"


def barrier_played(shot, act):
    """(modulation frequency Hz or None, modulation depth, beam power W, source) that the hardware plays at
    the middle of a barrier: the modulation channel's frequency (its synth's idle frequency when the barrier
    writes none), its amplitude as the depth, and the beam's power; the barrier's own numbers where it has no
    such output."""
    mid = 0.5 * (act.t0 + act.t1)
    f_mod, depth, power = act.args.get("mod_frequency"), float(act.args.get("mod_depth", 1.0)), act.args["power"]
    outs = shot.rig.outputs
    used = []
    fname = act.args.get("mod_channel")
    if fname in outs and outs[fname].phys_unit == "Hz":
        f_mod = float(played(shot, fname, mid)[0])
        used.append(fname)
        amp = f"{outs[fname].channel}.amp"
        if amp in outs:
            depth = float(played(shot, amp, mid)[0])
            used.append(amp)
    beam = shot.rig.beams.get(act.args["beam"])
    if beam is not None and beam.power_channel in outs:
        on = float(played(shot, beam.power_channel, mid)[0])
        # an on/off (digital) line plays 0 or 1: the written power while it is on
        power = power * on if outs[beam.power_channel].kind == "digital" else on
        used.append(beam.power_channel)
    return f_mod, depth, power, played_source(shot, *used)


@per_shot_cache(lambda shot, act: ("state-barrier", act.index, act.t0))
def barrier_drive_analysis(shot, act) -> BarrierDrive | None:
    """Two-photon drive of a modulated barrier, or None without a modulation frequency, species or beam."""
    return barrier_drive_on(shot, act, act.args.get("transition"))


@per_shot_cache(lambda shot, act, declared: ("state-barrier-on", act.index, act.t0, declared))
def barrier_drive_on(shot, act, declared) -> BarrierDrive | None:
    """`barrier_drive_analysis` with the modulation's transition `declared` ((F, mF), (F, mF)), None for the
    default. A pair of two hyperfine levels that the model does not couple (Delta mF != 0) keeps its bare
    Breit-Rabi line and the pulse's Fourier width as the tolerance (no Rabi frequency, no light shift)."""
    from ..physics.drive import two_photon_rabi_from_modulated_beam
    from ..physics.optical import modulated_peak_intensity
    from ..physics.zeeman import transition_frequency

    f_mod, depth, power, source = barrier_played(shot, act)
    sp = species(shot)
    beam = shot.rig.beams.get(act.args["beam"])
    if f_mod is None or sp is None or beam is None or not beam.waist_m:
        return None
    rep = dict(f_mod=f_mod, depth=depth, source=source)
    try:
        pair, why = transition_pair(shot, sp, declared), None
    except LevelError as exc:
        pair, why = None, exc.problem
    except ValueError as exc:
        pair, why = None, unevaluable(sp, None, exc)
    rep["pair"] = pair
    i = sp.nuclear_spin
    fourier = SQUARE_FWHM_TIMES_T / act.args["duration"]
    if pair is None or pair[0][1] != pair[1][1] or pair[0][0] == pair[1][0]:
        rep.update(unsupported="bad_level", bad_level=why) if why else rep.update(unsupported="not_hyperfine")
        if pair is not None and pair[0][0] != pair[1][0]:
            nu = abs(float(transition_frequency(*pair[0], *pair[1], bias(shot), atom=sp)))
            rep.update(bare_hz=nu, resonance_hz=nu, offset_hz=f_mod - nu, fourier_hz=fourier, tolerance_hz=fourier)
        return BarrierDrive(**rep)
    m = pair[0][1]
    lower, upper = (int(round(i - 0.5)), m), (int(round(i + 0.5)), m)
    # `power` is the time-averaged power (what a power meter reads, as for the barrier); the beam centre's
    # intensity 2 P / (pi w w_y) then peaks at (1 + depth) times that during the modulation
    depth = min(max(rep["depth"], 0.0), 1.0)
    if abs(float(m)) > i - 0.5 + 1e-9:  # as seqgen.physics.drive refuses it
        return BarrierDrive(**rep, unsupported="no_coupling", bad_level=LevelProblem(NO_PARTNER, None, m, sp.name, i))
    try:
        i_peak = float(modulated_peak_intensity(power, beam.waist_m, beam.waist_y_m or beam.waist_m, depth))
        d = two_photon_rabi_from_modulated_beam(i_peak, depth, beam.wavelength_m, m_f=m,
                                                polarization=1.0, atom=sp)
    except ValueError as exc:
        return BarrierDrive(**rep, unsupported="no_coupling", bad_level=unevaluable(sp, pair[0], exc))
    nu = float(transition_frequency(lower[0], lower[1], upper[0], upper[1], bias(shot), atom=sp))
    res = abs(nu + d.differential_light_shift_hz)  # shift of the F = I + 1/2 level minus that of F = I - 1/2
    # a barrier pulse of duration T is itself ~0.89/T wide (sinc^2 FWHM): a smaller offset does not matter
    rep.update(i_peak=i_peak, rabi_hz=d.rabi_rad_s / TWO_PI, light_shift_hz=d.differential_light_shift_hz,
               bare_hz=abs(nu), resonance_hz=res, offset_hz=f_mod - res, fourier_hz=fourier,
               tolerance_hz=max(d.rabi_rad_s / TWO_PI, fourier))
    return BarrierDrive(**rep)


# --------------------------------------------------------------------------- which states the atoms are in

@dataclass(frozen=True)
class Populations:
    """paths: ((fraction, changes), ...), each one history of states ((t_change, state), ...) that a part of
    the atoms took; possible: states a modulation drive may have populated; events: the state-changing
    actions that acted, (kind, action, pair, transfer)."""

    paths: tuple
    possible: frozenset
    events: tuple


def min_fraction(shot) -> float:
    """Fraction of the atoms below which a state counts as empty: the sample's detection floor (default
    100 atoms) over its atom number, at most MIN_FRACTION (1 %)."""
    s = shot.sample
    if s is not None and s.atoms:
        floor = s.detection_floor if s.detection_floor is not None else DETECTION_FLOOR
        return min(MIN_FRACTION, max(float(floor), 0.0) / float(s.atoms))
    return MIN_FRACTION


def is_populated(shot, fraction) -> bool:
    return fraction > 1e-12 and fraction >= min_fraction(shot)


def state_at(changes, t):
    """The state of a history ((t_change, state), ...) at time t (a change at t counts)."""
    state = changes[0][1]
    for tc, st in changes[1:]:
        if tc <= t:
            state = st
    return state


def _state_events(shot):
    """Actions that move atoms between internal states, in time order: (t_end, t_start, kind, pair, transfer, act).

    A clock pulse moves `transfer` (its Bloch-integrated transfer) between the two states of its transition;
    a frequency sweep its Bloch (else Landau-Zener) transfer; a barrier's modulation drive an unknown part
    (transfer None: the partner state becomes possibly populated); a magnetic hold with `state:` declares
    the state the atoms are held in (pair of one state)."""
    ev = []
    for act in pulses(shot):
        rep = pulse_analysis(shot, act)
        if rep and rep.pair:
            ev.append((act.t1, act.t0, "clock_pulse", rep.pair, float(rep.transfer if rep.transfer is not None else 0.0), act))
    for drive, seg in sweeps(shot):
        rep = sweep_analysis(shot, drive, seg)
        if rep:
            moved = rep.bloch_transfer if rep.bloch_transfer is not None else rep.lz_transfer
            ev.append((seg.t1, seg.t0, "sweep", rep.pair, float(moved), seg))
    for act in barriers(shot):
        rep = barrier_drive_analysis(shot, act)
        if rep and rep.pair:
            ev.append((act.t1, act.t0, "barrier", rep.pair, None, act))
    for act in shot.phys:
        if act.kind == "magnetic_hold" and act.args.get("state") is not None:
            st = tuple(int(x) for x in act.args["state"])
            ev.append((act.t0, act.t0, "magnetic_hold", (st,), 1.0, act))
    ev.sort(key=lambda e: (e[0], e[1]))
    return ev


@per_shot_cache(lambda shot, t: ("state-populations", t))
def populations(shot, t) -> Populations | None:
    """The atoms' internal states just before time t, followed from the sample state.

    dict(paths=[(fraction, changes)], possible=set of states, events=[...]): each path is one history of
    states ((t_change, state), ...) that a part of the atoms took, starting with the sample state. Clock
    pulses and sweeps whose end is at or before t split a path in a state of their transition into the part
    that stays and the part transferred (populations followed incoherently: a Ramsey pair's interference
    fringe is not followed, so both of its states count as populated afterwards); a barrier's modulation drive
    marks its partner state as possibly populated (fraction not followed here: see physics.barrier-rotation);
    a magnetic hold with `state:` puts every atom in that state. None without a sample state."""
    state = sample_state(shot)
    if state is None:
        return None
    paths = [(1.0, ((-math.inf, state),))]
    possible: set = set()
    used = []
    for t_end, t_start, kind, pair, p, act in _state_events(shot):
        if t_end > t + 1e-12:
            continue
        if kind == "magnetic_hold":
            best = max(paths, key=lambda fp: fp[0])
            paths = [(1.0, best[1] + ((t_start, pair[0]),))]
            possible.clear()
            used.append((kind, act, pair, p))
            continue
        a, b = pair
        if p is None:
            if any(state_at(ch, t_end) in pair for _, ch in paths):
                possible.update(pair)
                used.append((kind, act, pair, p))
            continue
        new = []
        for f, ch in paths:
            now = state_at(ch, t_end)
            if now not in pair or a == b:
                new.append((f, ch))
                continue
            other = b if now == a else a
            for part, changes in ((f * (1.0 - p), ch), (f * p, ch + ((t_end, other),))):
                if part > 1e-12:
                    new.append((part, changes))
        if len(new) != len(paths) or any(n is not o for n, o in zip(new, paths)):
            used.append((kind, act, pair, p))
        paths = new
        if len(paths) > MAX_PATHS:
            merged: dict = {}
            for f, ch in sorted(paths, key=lambda fp: -fp[0]):
                key = state_at(ch, t_end)
                merged[key] = (merged[key][0] + f, merged[key][1]) if key in merged else (f, ch)
            paths = list(merged.values())
    return Populations(tuple(paths), frozenset(possible), tuple(used))


def state_fractions(shot, t):
    """{state: fraction of the atoms} just before t (histories merged), or None without a sample state."""
    pop = populations(shot, t)
    if pop is None:
        return None
    out: dict = {}
    for f, ch in pop.paths:
        st = state_at(ch, t)
        out[st] = out.get(st, 0.0) + f
    return out


def populated_states(shot, t):
    """States holding atoms just before t (above the detection floor), most populated first; [] without a state."""
    fr = state_fractions(shot, t) or {}
    return [st for st, f in sorted(fr.items(), key=lambda kv: -kv[1]) if is_populated(shot, f)]
