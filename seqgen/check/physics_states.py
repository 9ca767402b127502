"""Physics checks of the atoms' internal state and of state-dependent motion.

Clock pulses (area, detuning, Ramsey and spin-echo pairs), rapid adiabatic
passage by a frequency sweep, the barrier's modulation drive, magnetic and
optical pushes, Stern-Gerlach separation and the absorption-imaging probe.
One cached analysis per action (shared with `report`, i.e. `seqgen show
--physics`); every check below reads it.

Conventions of this module:

* Magnetic moment = -dE/dB (J/T), the convention of the whole physics
  package (`seqgen.physics`): the force along a coil axis is
  moment * d|B|/dx, a negative moment is a low-field seeker. Moments and line
  frequencies come from the Breit-Rabi formula at the rig's bias field
  (`fields: bias`, 0 when absent); push velocities from
  `seqgen.physics.kinematics.magnetic_push`, sheet intensities from
  `seqgen.physics.optical.modulated_peak_intensity` (both shared with
  `physics_barrier`).
* A transition is ordered (initial, final): the sample state is the initial
  one when it belongs to the pair. Its line frequency is |E_final - E_initial|/h
  plus the drive's `light_shift`; detuning = drive frequency - line.
  Without a declared `transition` the pair is the sample state and the other
  hyperfine level at equal mF.
* Push velocities are compared by magnitude; the report says in words
  whether the state is pushed towards stronger or weaker field. Where
  the rig's coil declares `field_grows_along` (the direction in which |B|
  grows at the atoms), the push has a direction, and
  physics.push-away-from-barrier checks it against the next barrier.
* Which states hold atoms (`populations`): followed from the sample state
  through clock pulses and sweeps (their computed transfer, incoherently),
  barrier modulation drives (partner possibly populated) and magnetic holds
  with `state:`. Pushes act on the most populated state; separations, and
  `components_at` (where each component is at an image, for the imaging
  checks of physics_traps), follow every populated state.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import constants as sc
from scipy import optimize

from ..findings import make
from .rules import rule
from ..values import value_at
from .physics_traps import _gaussian_beams, _held, _species, cloud_at_image, per_shot_cache
from ..codes import (
    COMPONENTS_OVERLAP, COMPONENTS_SEPARATED, EQUAL_MOMENTS, EXPOSURE_TOO_SHORT, IMAGING_BLUR,
    MODULATION_OFF_RESONANCE, MODULATION_UNREACHABLE, PROBE_DOPPLER, PULSE_ANGLE, PULSE_DETUNED,
    PUSH_AWAY_FROM_BARRIER, PUSH_NO_FORCE, PUSH_TOO_LATE, PUSH_VELOCITY, SWEEP_NOT_ADIABATIC,
    TRANSITION_UNPOPULATED,
)

MU_B = sc.physical_constants["Bohr magneton"][0]
TWO_PI = 2 * math.pi
MG = 1e-7  # one milligauss in tesla

TRANSFER_TOLERANCE = 0.10  # detuning may change the intended transfer by 10 % of it (brief of the check)
TRANSFER_FLOOR = 0.01  # ... but at least by 0.01 in population, so that near-zero intended transfers do not warn on noise
LZ_MIN_TRANSFER = 0.9
PUSH_TOLERANCE = 0.10
NO_FORCE_MOMENT = 0.01 * MU_B  # below this a gradient pushes < 2 % as hard as on an |mF| = 1 state
EQUAL_MOMENT = 0.01 * MU_B
SEPARATION_WIDTHS = 3.0
RESONANT_WAVELENGTH_M = 0.01e-9  # a push beam within 0.01 nm of D2 is taken as resonant (wavelength figures are rounded)
SQUARE_FWHM_TIMES_T = 0.885893  # FWHM x duration of the sinc^2 power spectrum of a square pulse (from memory)
MAX_BLOCH_ROTATION = 5e5  # rad of |W| x duration above which a sweep is not integrated (LZ only)

_GL_X, _GL_W = np.polynomial.legendre.leggauss(16)


# --------------------------------------------------------------------------- helpers

def pulse_nodes(t0, t1, panels=32):
    """Composite Gauss-Legendre nodes and weights on [t0, t1] (16 points per panel)."""
    edges = np.linspace(t0, t1, panels + 1)
    a, b = edges[:-1, None], edges[1:, None]
    return (0.5 * (b - a) * _GL_X + 0.5 * (a + b)).ravel(), (0.5 * (b - a) * _GL_W).ravel()


def _bias(shot) -> float:
    return float(shot.rig.bias_field_t or 0.0)


def _sample_state(shot):
    s = shot.sample
    if s is None or s.F is None or s.mF is None:
        return None
    return (int(s.F), int(s.mF))


def other_level(sp, state):
    """The other ground hyperfine level at equal mF, or None where it has no such sublevel."""
    i = sp.nuclear_spin
    F, mF = state
    other = i + 0.5 if abs(F - (i - 0.5)) < 1e-9 else i - 0.5
    if abs(mF) > other + 1e-9:
        return None
    return (int(round(other)), int(mF))


def transition_pair(shot, sp, declared=None):
    """(initial, final) of a drive: the declared pair (sample state first when it is one of
    them), else the sample state and the other hyperfine level at equal mF; None if unknown."""
    state = _sample_state(shot)
    if declared:
        a, b = (tuple(int(x) for x in s) for s in declared)
        if sp is not None:
            i = sp.nuclear_spin
            for F, mF in (a, b):
                if min(abs(F - (i - 0.5)), abs(F - (i + 0.5))) > 1e-9 or abs(mF) > F:
                    raise ValueError(f"|F={F}, mF={mF}> is not a ground level of {sp.name}")
        if state == b:
            a, b = b, a
        return a, b
    if state is None or sp is None:
        return None
    other = other_level(sp, state)
    return None if other is None else (state, other)


def state_text(s) -> str:
    return f"|F={s[0]}, mF={s[1]:+d}>" if s[1] else f"|F={s[0]}, mF=0>"


def line(sp, initial, final, bias_t):
    """(|nu| in Hz, d|nu|/dB in Hz/T) of initial -> final at the bias field (Breit-Rabi).

    nu = (E_f - E_i)/h, so d nu/dB = (mu_i - mu_f)/h with mu = -dE/dB.
    """
    from ..physics.zeeman import magnetic_moment, transition_frequency

    nu = float(transition_frequency(initial[0], initial[1], final[0], final[1], bias_t, atom=sp))
    mu_i = float(magnetic_moment(initial[0], initial[1], bias_t, atom=sp))
    mu_f = float(magnetic_moment(final[0], final[1], bias_t, atom=sp))
    slope = (mu_i - mu_f) / sc.h
    return abs(nu), (slope if nu >= 0 else -slope)


def amplitude_output(shot, drive):
    """Name of the output that carries a drive's amplitude."""
    outs = shot.rig.outputs
    if f"{drive.channel}.amp" in outs:
        return f"{drive.channel}.amp"
    if drive.channel in outs:
        return drive.channel
    parts = shot.rig.channels.get(drive.channel) or ()
    return parts[0] if parts else None


def _fmt_hz(f, digits=4) -> str:
    """Frequency text; `digits` significant digits (line frequencies use 10, enough for a synth setting)."""
    a = abs(f)
    for scale, unit in ((1e9, "GHz"), (1e6, "MHz"), (1e3, "kHz")):
        if a >= scale:
            return f"{f / scale:.{digits}g} {unit}"
    return f"{f:.{digits}g} Hz"


def _line_hz(f) -> str:
    return _fmt_hz(f, 10)


def _fmt_t(t) -> str:
    a = abs(t)
    if a >= 1:
        return f"{t:.4g} s"
    if a >= 1e-3:
        return f"{t * 1e3:.4g} ms"
    return f"{t * 1e6:.4g} us"


def _pi(x) -> str:
    return f"{x:.4g} rad ({x / math.pi:.3g} pi)"


def _rel_off(a, b) -> float:
    return abs(a - b) / abs(b) if b else math.inf


# --------------------------------------------------------------------------- clock pulses

def _pulses(shot):
    return [a for a in shot.phys if a.kind == "clock_pulse"]


def _propagate(shot, amp_name, rabi_per_rad_s, t0, t1, detuning_hz, constant, peak):
    """Excited (final-state) population after the pulse, from the ground (initial) state."""
    from ..physics.drive import bloch_propagate

    if constant:
        return bloch_propagate(rabi_per_rad_s * peak, TWO_PI * detuning_hz, t0, t1).excited_population
    breaks = sorted({x for seg in shot.segments if seg.output == amp_name for x in (seg.t0, seg.t1) if t0 < x < t1})
    if breaks or abs(TWO_PI * detuning_hz) * (t1 - t0) > 1e5:
        # a jump inside the pulse (another write to the amplitude), which the smooth integrator cannot step
        # over, or far off resonance (over 1e5 rad of detuning phase: millions of steps): exact SU(2)
        # propagators on 4096 pieces of constant amplitude, with the writes on piece edges, instead
        edges = np.unique(np.concatenate([np.linspace(t0, t1, 4097), breaks]))
        rabi = rabi_per_rad_s * np.asarray(value_at(shot, amp_name, 0.5 * (edges[1:] + edges[:-1])), dtype=float)
        return bloch_propagate(rabi, TWO_PI * detuning_hz, t0, t1, edges=edges).excited_population
    return bloch_propagate(lambda t: rabi_per_rad_s * value_at(shot, amp_name, t), TWO_PI * detuning_hz, t0, t1,
                           tol=1e-9).excited_population


@per_shot_cache(lambda shot, act: ("state-pulse", act.index, act.t0))
def pulse_analysis(shot, act):
    """Cached physics of one clock pulse: area, line, detuning, transfers (dict), or None."""
    drive = shot.rig.drives.get(act.args["drive"])
    amp_name = amplitude_output(shot, drive) if drive else None
    if drive is None or amp_name is None or not act.t1 > act.t0:
        return None
    t, w = pulse_nodes(act.t0, act.t1)
    amp = value_at(shot, amp_name, t)
    peak = float(np.max(np.abs(amp)))
    rabi_per = TWO_PI * drive.rabi_per_amplitude_hz
    rep = dict(drive=drive.name, amp_output=amp_name, duration=act.t1 - act.t0, envelope=act.args.get("envelope", "square"),
               area=float(rabi_per * np.sum(w * amp)), peak=peak, peak_rabi_hz=drive.rabi_per_amplitude_hz * peak,
               constant=bool(np.ptp(amp) <= 1e-12 * max(peak, 1e-300)), angle=act.args.get("angle"),
               rabi_per=rabi_per, light_shift_hz=drive.light_shift_hz)
    sp = _species(shot)
    try:
        pair = transition_pair(shot, sp, act.args.get("transition")) if sp else None
        if pair:
            rep["line_hz"], rep["slope_hz_per_t"] = line(sp, pair[0], pair[1], _bias(shot))
    except ValueError as exc:  # a declared state that is not a ground level
        pair, rep["reason"] = None, str(exc)
    rep["pair"] = pair
    rep["intended_detuning_hz"] = float(act.args.get("detuning", 0.0))
    if pair and "frequency" in act.args:
        rep["resonance_hz"] = rep["line_hz"] + drive.light_shift_hz
        rep["detuning_hz"], rep["detuning_source"] = act.args["frequency"] - rep["resonance_hz"], "frequency"
    elif "detuning" in act.args:
        rep["detuning_hz"], rep["detuning_source"] = rep["intended_detuning_hz"], "declared detuning"
    elif "reason" in rep:
        rep["detuning_hz"], rep["detuning_source"] = 0.0, f"line unknown, {rep['reason']}: taken on resonance"
    else:
        rep["detuning_hz"], rep["detuning_source"] = 0.0, "no frequency given: taken on resonance"
    if peak > 0:
        args = (shot, amp_name, rabi_per, act.t0, act.t1)
        rep["transfer"] = _propagate(*args, rep["detuning_hz"], rep["constant"], peak)
        rep["intended_transfer"] = (rep["transfer"] if rep["detuning_hz"] == rep["intended_detuning_hz"]
                                    else _propagate(*args, rep["intended_detuning_hz"], rep["constant"], peak))
    return rep


def _fourier_width(shot, act, rep):
    from ..physics.drive import fourier_width_hz

    if "fourier_hz" not in rep:
        try:
            if rep["constant"]:
                rep["fourier_hz"] = fourier_width_hz("square", rep["duration"])
            else:
                name, t0, peak = rep["amp_output"], act.t0, rep["peak"]
                rep["fourier_hz"] = fourier_width_hz(lambda t: value_at(shot, name, t0 + t) / peak, rep["duration"])
        except ValueError:
            rep["fourier_hz"] = None
    return rep["fourier_hz"]


_SRC_AREA = ("pulse area theorem, Phys. Rev. 183, 457 (1969); the rig file's drive calibration (rabi_per_amplitude) "
             "and the amplitude envelope as compiled")


@rule(PULSE_ANGLE, stage="physics")
def pulse_angle(shot):
    tol = shot.limits.angle_tolerance
    for act in _pulses(shot):
        rep = pulse_analysis(shot, act)
        if not rep or rep["angle"] is None or rep["angle"] <= 0 or rep["area"] <= 0:
            continue
        off = _rel_off(rep["area"], rep["angle"])
        if off > tol:
            k = rep["angle"] / rep["area"]
            amp_hint = (f" or amplitude {act.args.get('amplitude', 1.0) * k:.4g}" if act.args.get("amplitude", 1.0) * k <= 1
                        else "")
            yield make(PULSE_ANGLE, f"pulse area on '{rep['drive']}' is {_pi(rep['area'])} (peak Rabi frequency "
                       f"2 pi x {_fmt_hz(rep['peak_rabi_hz'])}, {rep['envelope']} envelope, {_fmt_t(rep['duration'])}), "
                       f"but angle says {_pi(rep['angle'])}: off by {off * 100:.3g} % (limit {tol * 100:g} %)",
                       act.pos, block=act.block, time_s=act.t0,
                       hint=f"use duration {_fmt_t(rep['duration'] * k)}{amp_hint}, or fix the drive's rabi_per_amplitude",
                       data={"area_rad": rep["area"], "angle_rad": rep["angle"]})


_SRC_DETUNED = ("Breit-Rabi formula, Phys. Rev. 38, 2082 (1931); Rabi formula, Phys. Rev. 51, 652 (1937); Bloch "
                "propagation with a Magnus integrator, Phys. Rep. 470, 151 (2009)")


@rule(PULSE_DETUNED, stage="physics")
def pulse_detuned(shot):
    for act in _pulses(shot):
        rep = pulse_analysis(shot, act)
        if not rep or rep.get("detuning_source") != "frequency" or "transfer" not in rep:
            continue
        p, p0 = rep["transfer"], rep["intended_transfer"]
        if abs(p - p0) > max(TRANSFER_TOLERANCE * p0, TRANSFER_FLOOR):
            fw = _fourier_width(shot, act, rep)
            initial, final = rep["pair"]
            target = rep["resonance_hz"] + rep["intended_detuning_hz"]
            yield make(PULSE_DETUNED, f"drive '{rep['drive']}' at {_line_hz(act.args['frequency'])} is "
                       f"{_fmt_hz(rep['detuning_hz'])} from the {state_text(initial)} -> {state_text(final)} line at "
                       f"{_line_hz(rep['resonance_hz'])} ({_bias(shot) * 1e4:.4g} G bias); transfer {p:.3g} instead of "
                       f"{p0:.3g}" + (f"; Fourier width {_fmt_hz(fw)}" if fw else ""), act.pos, block=act.block,
                       time_s=act.t0, hint=f"set frequency: {target:.10g} Hz",
                       data={"detuning_hz": rep["detuning_hz"], "transfer": p, "intended_transfer": p0})


def _is_area(rep, target, tol):
    return rep is not None and _rel_off(rep["area"], target) <= tol


def interferometers(shot):
    """Ramsey pairs (pi/2, pi/2) and spin echoes (pi/2, pi, pi/2) on one drive: list of (kind, pulses)."""
    tol = shot.limits.angle_tolerance
    by_drive: dict = {}
    for act in sorted(_pulses(shot), key=lambda a: a.t0):
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


def interferometer_analysis(shot, kind, acts):
    """Free-evolution phase from the detuning, and its sensitivity to a field offset (rad per mG)."""
    from ..physics.drive import field_noise_phase_sensitivity, ramsey_phase

    rep = pulse_analysis(shot, acts[0])
    delta = rep["detuning_hz"]
    slope = rep.get("slope_hz_per_t")
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
    return out


# --------------------------------------------------------------------------- rapid adiabatic passage

def _sweeps(shot):
    """(drive, segment) for every `sweep` of a drive's frequency output while its amplitude is on."""
    out = []
    for drive in shot.rig.drives.values():
        fname = f"{drive.channel}.freq"
        amp = amplitude_output(shot, drive)
        if fname not in shot.rig.outputs or amp is None:
            continue
        for seg in shot.segments:
            if seg.output == fname and seg.kind == "ramp" and seg.action == "sweep" and seg.t1 > seg.t0:
                if value_at(shot, amp, 0.5 * (seg.t0 + seg.t1))[0] > 0:
                    out.append((drive, seg))
    return out


@per_shot_cache(lambda shot, drive, seg: ("state-sweep", seg.output, seg.t0))
def sweep_analysis(shot, drive, seg):
    """Crossing, Landau-Zener and Bloch transfer of one frequency sweep (dict), or None."""
    from ..physics.drive import bloch_propagate, landau_zener_probability

    sp = _species(shot)
    pair = transition_pair(shot, sp) if sp else None
    if pair is None:
        return None
    nu, _ = line(sp, pair[0], pair[1], _bias(shot))
    res = nu + drive.light_shift_hz
    amp = amplitude_output(shot, drive)
    rabi_per = TWO_PI * drive.rabi_per_amplitude_hz
    rep = dict(drive=drive.name, pair=pair, resonance_hz=res, f0=seg.v0, f1=seg.v1, duration=seg.t1 - seg.t0)
    lo, hi = sorted((seg.v0, seg.v1))
    rep["crosses"] = lo < res < hi
    if rep["crosses"]:
        tg = np.linspace(seg.t0, seg.t1, 2001)
        fg = value_at(shot, seg.output, tg) - res
        j = int(np.nonzero(np.sign(fg[1:]) != np.sign(fg[:-1]))[0][0])
        tc = optimize.brentq(lambda t: float(value_at(shot, seg.output, t)[0] - res), tg[j], tg[j + 1], xtol=1e-15)
        h = 1e-6 * rep["duration"]
        rate = float(np.diff(value_at(shot, seg.output, [tc - h, tc + h]))[0] / (2 * h))  # Hz/s
        rabi = rabi_per * float(value_at(shot, amp, tc)[0])
        rep.update(t_cross=tc, rate_hz_s=rate, rabi_hz=rabi / TWO_PI,
                   lz_transfer=1.0 - float(landau_zener_probability(rabi, TWO_PI * rate)))
        # the sweep that gives LZ_MIN_TRANSFER at this Rabi frequency: pi Omega^2 / (2 rate) = -ln(1 - P)
        rep["max_rate_hz_s"] = math.pi * rabi**2 / (2 * -math.log(1 - LZ_MIN_TRANSFER)) / TWO_PI
    else:
        rep["lz_transfer"] = 0.0
    w_max = TWO_PI * max(abs(seg.v0 - res), abs(seg.v1 - res)) + rabi_per * float(np.max(value_at(shot, amp, np.linspace(seg.t0, seg.t1, 65))))
    if w_max * rep["duration"] < MAX_BLOCH_ROTATION:
        try:
            rep["bloch_transfer"] = bloch_propagate(lambda t: rabi_per * value_at(shot, amp, t),
                                                    lambda t: TWO_PI * (value_at(shot, seg.output, t) - res),
                                                    seg.t0, seg.t1, tol=1e-7).excited_population
        except RuntimeError:
            pass
    return rep


@rule(SWEEP_NOT_ADIABATIC, stage="physics")
def sweep_not_adiabatic(shot):
    for drive, seg in _sweeps(shot):
        rep = sweep_analysis(shot, drive, seg)
        if rep is None:
            continue
        bloch = f"; integrated transfer {rep['bloch_transfer']:.3g}" if "bloch_transfer" in rep else ""
        if not rep["crosses"]:
            yield make(SWEEP_NOT_ADIABATIC, f"sweep of '{drive.name}' from {_line_hz(rep['f0'])} to "
                       f"{_line_hz(rep['f1'])} does not cross the {state_text(rep['pair'][0])} -> "
                       f"{state_text(rep['pair'][1])} line at {_line_hz(rep['resonance_hz'])}{bloch}", seg.pos,
                       block=seg.block, time_s=seg.t0, hint="sweep across the line", data={"lz_transfer": 0.0})
        elif rep["lz_transfer"] < LZ_MIN_TRANSFER:
            need = abs(rep["f1"] - rep["f0"]) / rep["max_rate_hz_s"] if rep["max_rate_hz_s"] > 0 else math.inf
            yield make(SWEEP_NOT_ADIABATIC, f"sweep of '{drive.name}' crosses the line at "
                       f"{_fmt_hz(abs(rep['rate_hz_s']))}/s with Rabi frequency 2 pi x {_fmt_hz(rep['rabi_hz'])}: "
                       f"Landau-Zener transfer {rep['lz_transfer']:.3g} (below {LZ_MIN_TRANSFER:g}){bloch}", seg.pos,
                       block=seg.block, time_s=rep["t_cross"],
                       hint=f"lengthen the sweep to at least {_fmt_t(need)} (linear), or raise the amplitude",
                       data={"lz_transfer": rep["lz_transfer"], "rate_hz_s": rep["rate_hz_s"]})


# --------------------------------------------------------------------------- barrier modulation drive

def _barriers(shot):
    return [a for a in shot.phys if a.kind == "barrier"]


@per_shot_cache(lambda shot, act: ("state-barrier", act.index, act.t0))
def barrier_drive_analysis(shot, act):
    """Two-photon drive of a modulated barrier: Rabi frequency, light shift, resonance, offset (dict) or None."""
    from ..physics.drive import two_photon_rabi_from_modulated_beam
    from ..physics.optical import modulated_peak_intensity

    f_mod = act.args.get("mod_frequency")
    sp = _species(shot)
    beam = shot.rig.beams.get(act.args["beam"])
    if f_mod is None or sp is None or beam is None or not beam.waist_m:
        return None
    rep = dict(f_mod=f_mod, depth=float(act.args.get("mod_depth", 1.0)))
    try:
        pair, why = transition_pair(shot, sp, act.args.get("transition")), None
    except ValueError as exc:
        pair, why = None, str(exc)
    rep["pair"] = pair
    i = sp.nuclear_spin
    if pair is None or pair[0][1] != pair[1][1] or pair[0][0] == pair[1][0]:
        rep["reason"] = why or "the modulated-beam drive model couples the two hyperfine levels at equal mF only"
        return rep
    m = pair[0][1]
    lower, upper = (int(round(i - 0.5)), m), (int(round(i + 0.5)), m)
    # `power` is the time-averaged power (what a power meter reads, as in physics_barrier.py); the
    # beam centre's intensity 2 P / (pi w w_y) then peaks at (1 + depth) times that during the modulation
    depth = min(max(rep["depth"], 0.0), 1.0)
    try:
        i_peak = float(modulated_peak_intensity(act.args["power"], beam.waist_m, beam.waist_y_m or beam.waist_m, depth))
        d = two_photon_rabi_from_modulated_beam(i_peak, depth, beam.wavelength_m, m_f=m,
                                                polarization=1.0, atom=sp)
    except ValueError as exc:
        rep["reason"] = str(exc)
        return rep
    from ..physics.zeeman import transition_frequency

    nu = float(transition_frequency(lower[0], lower[1], upper[0], upper[1], _bias(shot), atom=sp))
    res = abs(nu + d.differential_light_shift_hz)  # shift of the F = I + 1/2 level minus that of F = I - 1/2
    # a barrier pulse of duration T is itself ~0.89/T wide (sinc^2 FWHM): a smaller offset does not matter
    fourier = SQUARE_FWHM_TIMES_T / act.args["duration"]
    rep.update(i_peak=i_peak, rabi_hz=d.rabi_rad_s / TWO_PI, light_shift_hz=d.differential_light_shift_hz,
               bare_hz=abs(nu), resonance_hz=res, offset_hz=f_mod - res, fourier_hz=fourier,
               tolerance_hz=max(d.rabi_rad_s / TWO_PI, fourier))
    return rep


_SRC_MOD = ("modulated-beam Raman coupling through the vector light shift and differential light shift, "
            "Adv. At. Mol. Opt. Phys. 42, 95 (2000); Breit-Rabi formula, Phys. Rev. 38, 2082 (1931)")


@rule(MODULATION_OFF_RESONANCE, stage="physics")
def modulation_off_resonance(shot):
    for act in _barriers(shot):
        rep = barrier_drive_analysis(shot, act)
        if not rep or "offset_hz" not in rep:
            continue
        if abs(rep["offset_hz"]) > rep["tolerance_hz"]:
            a, b = rep["pair"]
            yield make(MODULATION_OFF_RESONANCE, f"modulation at {_line_hz(rep['f_mod'])} is "
                       f"{_fmt_hz(rep['offset_hz'])} from the {state_text(a)} -> {state_text(b)} line at "
                       f"{_line_hz(rep['resonance_hz'])} (Breit-Rabi {_line_hz(rep['bare_hz'])}, differential light shift "
                       f"{_fmt_hz(rep['light_shift_hz'])}), more than the drive's Rabi frequency 2 pi x {_fmt_hz(rep['rabi_hz'])} and "
                       f"the {_fmt_t(act.args['duration'])} pulse's Fourier width {_fmt_hz(rep['fourier_hz'])}",
                       act.pos, block=act.block, time_s=act.t0, hint=f"set modulation frequency: {rep['resonance_hz']:.10g} Hz",
                       data={"offset_hz": rep["offset_hz"], "rabi_hz": rep["rabi_hz"]})


@rule(MODULATION_UNREACHABLE, stage="physics")
def modulation_unreachable(shot):
    for act in _barriers(shot):
        name, f = act.args.get("mod_channel"), act.args.get("mod_frequency")
        out = shot.rig.outputs.get(name) if name else None
        if out is None or f is None or out.kind not in ("analog", "digital"):
            continue
        dev = shot.rig.devices.get(out.device)
        if dev is None:
            continue
        rate = dev.timebase_hz / max(1, dev.min_interval_ticks)
        if rate <= 2 * f:
            yield make(MODULATION_UNREACHABLE, f"modulation at {_fmt_hz(f)} on {out.kind} channel "
                       f"'{out.channel}' needs more than {_fmt_hz(2 * f)} of updates, but device '{dev.name}' updates at "
                       f"most {_fmt_hz(rate)}", act.pos, block=act.block, time_s=act.t0,
                       hint="modulate through a synth channel of the rig (kind: synth)",
                       data={"frequency_hz": f, "update_rate_hz": rate})


# --------------------------------------------------------------------------- which states the atoms are in

MIN_FRACTION = 0.01  # without an atom number, a state with under 1 % of the atoms counts as empty
DETECTION_FLOOR = 100  # atoms; the default detection floor of physics.barrier-no-signal (common practice, no source)
MAX_PATHS = 256  # state histories kept apart; beyond this, histories that end in one state are merged


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
    for act in _pulses(shot):
        rep = pulse_analysis(shot, act)
        if rep and rep.get("pair"):
            ev.append((act.t1, act.t0, "clock_pulse", rep["pair"], float(rep.get("transfer", 0.0)), act))
    for drive, seg in _sweeps(shot):
        rep = sweep_analysis(shot, drive, seg)
        if rep:
            ev.append((seg.t1, seg.t0, "sweep", rep["pair"], float(rep.get("bloch_transfer", rep["lz_transfer"])), seg))
    for act in _barriers(shot):
        rep = barrier_drive_analysis(shot, act)
        if rep and rep.get("pair"):
            ev.append((act.t1, act.t0, "barrier", rep["pair"], None, act))
    for act in shot.phys:
        if act.kind == "magnetic_hold" and act.args.get("state") is not None:
            st = tuple(int(x) for x in act.args["state"])
            ev.append((act.t0, act.t0, "magnetic_hold", (st,), 1.0, act))
    ev.sort(key=lambda e: (e[0], e[1]))
    return ev


@per_shot_cache(lambda shot, t: ("state-populations", t))
def populations(shot, t):
    """The atoms' internal states just before time t, followed from the sample state.

    dict(paths=[(fraction, changes)], possible=set of states, events=[...]): each path is one history of
    states ((t_change, state), ...) that a part of the atoms took, starting with the sample state. Clock
    pulses and sweeps whose end is at or before t split a path in a state of their transition into the part
    that stays and the part transferred (populations followed incoherently: a Ramsey pair's interference
    fringe is not followed, so both of its states count as populated afterwards); a barrier's modulation drive
    marks its partner state as possibly populated (fraction not followed here: see physics.barrier-rotation);
    a magnetic hold with `state:` puts every atom in that state. None without a sample state."""
    state = _sample_state(shot)
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
    return dict(paths=paths, possible=possible, events=used)


def state_fractions(shot, t):
    """{state: fraction of the atoms} just before t (histories merged), or None without a sample state."""
    pop = populations(shot, t)
    if pop is None:
        return None
    out: dict = {}
    for f, ch in pop["paths"]:
        st = state_at(ch, t)
        out[st] = out.get(st, 0.0) + f
    return out


def populated_states(shot, t):
    """States holding atoms just before t (above the detection floor), most populated first; [] without a state."""
    fr = state_fractions(shot, t) or {}
    return [st for st, f in sorted(fr.items(), key=lambda kv: -kv[1]) if is_populated(shot, f)]


def _pct(f) -> str:
    return f"{f * 100:.3g} %"


_SRC_UNPOP = ("populations followed from the sample state through clock pulses (Rabi formula, Phys. Rev. 51, 652 "
              "(1937), Bloch propagation as for physics.pulse-detuned) and sweeps (Landau-Zener formula, Proc. R. Soc. "
              "A 137, 696 (1932)); a two-level drive acts only on atoms in one of its two states (common practice, "
              "no source)")


@rule(TRANSITION_UNPOPULATED, stage="physics")
def transition_unpopulated(shot):
    if _species(shot) is None or _sample_state(shot) is None:
        return
    for act in _pulses(shot):
        rep = pulse_analysis(shot, act)
        if not rep or not rep.get("pair"):
            continue
        fr = state_fractions(shot, act.t0) or {}
        pop = populations(shot, act.t0)
        full = populated_states(shot, act.t0)
        if any(st in full or st in pop["possible"] for st in rep["pair"]):
            continue
        a, b = rep["pair"]
        where = ", ".join(f"{state_text(st)} ({_pct(fr[st])})" for st in full) or "no state above the detection floor"
        target = full[0] if full else None
        hint = (f"start the transition from a populated state, e.g. transition: [{{F: {target[0]}, mF: {target[1]}}}, "
                f"...], or fix the sample's state" if target else "fix the sample's state or the pulse's transition")
        yield make(TRANSITION_UNPOPULATED, f"the clock pulse on '{rep['drive']}' drives {state_text(a)} -> "
                   f"{state_text(b)}, but neither state holds atoms: before it the atoms are in {where}", act.pos,
                   block=act.block, time_s=act.t0, hint=hint,
                   data={"fraction_initial": fr.get(a, 0.0), "fraction_final": fr.get(b, 0.0)})


# --------------------------------------------------------------------------- pushes

def _pushes(shot):
    return [a for a in shot.phys if a.kind == "push"]


@per_shot_cache(lambda shot, act: ("state-push", act.index, act.t0))
def push_analysis(shot, act):
    """Kick velocity of a push (dict: velocity m/s signed, moment or photons, arrival at target), or None."""
    from ..physics.kinematics import magnetic_push, optical_kick, time_to_reach

    sp = _species(shot)
    if sp is None:
        return None
    dur = act.args["duration"]
    rep = dict(duration=dur)
    if "coil" in act.args:
        states = populated_states(shot, act.t0)  # the state the atoms are in at the push (most populated first)
        state = states[0] if states else _sample_state(shot)
        if state is None:
            return None
        try:
            kick = magnetic_push(state[0], state[1], act.args["gradient"], dur, _bias(shot), atom=sp)
        except ValueError:
            return None
        mu = float(kick.moment)
        rep.update(kind="magnetic", state=state, moment=mu, gradient=act.args["gradient"],
                   velocity=float(kick.velocity), no_force=state[1] == 0 or abs(mu) < NO_FORCE_MOMENT)
        grows = shot.rig.coils[act.args["coil"]].field_grows_along
        if grows is not None and mu != 0 and not rep["no_force"]:
            # |B| = |I| |b(r)| for the coil's own field: where it grows does not depend on the current's sign,
            # so the way the atoms go is the moment's sign alone (mu > 0: towards stronger field)
            rep["direction"] = tuple(math.copysign(1.0, mu) * x + 0.0 for x in grows)
    else:
        from ..physics.imaging import saturation_parameter

        beam = shot.rig.beams.get(act.args.get("beam"))
        if beam is None or not beam.waist_m:
            return None
        s0 = float(saturation_parameter(act.args["power"], beam.waist_m, sp.saturation_intensity_w_m2))
        off = beam.wavelength_m - sp.d2_wavelength_m
        det = 0.0 if abs(off) < RESONANT_WAVELENGTH_M else TWO_PI * sc.c * (1 / beam.wavelength_m - 1 / sp.d2_wavelength_m)
        k = optical_kick(TWO_PI * sp.d2_linewidth_hz, s0, det, dur, beam.wavelength_m, sp.mass_kg)
        rep.update(kind="optical", beam=beam.name, saturation=s0, detuning_rad_s=det, photons=k.photons,
                   recoil=k.recoil_velocity, velocity=k.velocity, rms_along=k.rms_velocity_along,
                   heating_j=k.heating_j, no_force=False)
        norm = math.sqrt(sum(x * x for x in beam.direction))
        if norm > 0 and math.isfinite(norm):  # scattered photons push along the beam
            rep["direction"] = tuple(x / norm for x in beam.direction)
    speed = abs(rep["velocity"])
    d = act.args.get("target_distance")
    if d is not None:
        if speed == 0:
            t = math.inf
        elif d <= 0.5 * speed * dur:  # reached during the push, uniform acceleration from rest
            t = float(time_to_reach(d, 0.0, speed / dur))
        else:
            t = dur + float(time_to_reach(d - 0.5 * speed * dur, speed))
        rep["arrival"] = act.t0 + t
        nxt = [b for b in _barriers(shot) if b.t0 >= act.t1 - 1e-12]
        if nxt:
            rep["barrier"] = min(nxt, key=lambda b: b.t0)
    return rep


_SRC_PUSH = ("Breit-Rabi formula, Phys. Rev. 38, 2082 (1931); force = moment x field gradient and dv = F t / m "
             "(textbook); photon recoil and steady-state scattering, Adv. At. Mol. Opt. Phys. 42, 95 (2000)")


@rule(PUSH_VELOCITY, stage="physics")
def push_velocity(shot):
    for act in _pushes(shot):
        want = act.args.get("expect_velocity")
        rep = push_analysis(shot, act)
        if want is None or not rep or rep["no_force"]:
            continue
        tol = act.args.get("tolerance", PUSH_TOLERANCE)
        got = abs(rep["velocity"])
        if _rel_off(got, abs(want)) > tol:
            how = (f"moment {rep['moment'] / MU_B:+.4g} mu_B of {state_text(rep['state'])}, gradient "
                   f"{rep['gradient'] * 100:.4g} G/cm" if rep["kind"] == "magnetic" else
                   f"{rep['photons']:.3g} photons of {rep['recoil'] * 1e3:.4g} mm/s recoil")
            hint = (f"use duration {_fmt_t(rep['duration'] * abs(want) / got)} for {abs(want) * 1e3:.4g} mm/s"
                    if got > 0 else "the push gives no velocity")
            yield make(PUSH_VELOCITY, f"the push gives {got * 1e3:.4g} mm/s ({how}, {_fmt_t(rep['duration'])}), "
                       f"but expect_velocity is {abs(want) * 1e3:.4g} mm/s (tolerance {tol * 100:g} %)", act.pos,
                       block=act.block, time_s=act.t0, hint=hint, data={"velocity_m_s": got, "expected_m_s": abs(want)})


@rule(PUSH_AWAY_FROM_BARRIER, stage="physics")
def push_away_from_barrier(shot):
    for act in _pushes(shot):
        rep = push_analysis(shot, act)
        if not rep or rep.get("no_force") or "direction" not in rep:
            continue
        nxt = [b for b in _barriers(shot) if b.t0 >= act.t1 - 1e-12]
        if not nxt:
            continue
        bar = min(nxt, key=lambda b: b.t0)
        beam = shot.rig.beams.get(bar.args.get("beam"))
        where = np.asarray(beam.position_m if beam is not None else (0, 0, 0), dtype=float)
        dist = float(np.linalg.norm(where))
        if not (dist > 0 and math.isfinite(dist)):
            continue
        along = float(np.dot(rep["direction"], where)) / dist
        if along < 0:
            why = (f"{state_text(rep['state'])} has moment {rep['moment'] / MU_B:+.3g} mu_B and goes towards "
                   f"{'stronger' if rep['moment'] > 0 else 'weaker'} field, i.e. along "
                   f"{_vec_text(rep['direction'])}" if rep["kind"] == "magnetic"
                   else f"light pushes along the beam '{rep['beam']}', {_vec_text(rep['direction'])}")
            yield make(PUSH_AWAY_FROM_BARRIER, f"the push moves the atoms away from barrier '{beam.name}' "
                       f"(block '{bar.block}', {dist * 1e3:.4g} mm away along {_vec_text(where / dist)}): {why}",
                       act.pos, block=act.block, time_s=act.t0,
                       hint="prepare a state that this push sends towards the barrier (the other sign of moment), "
                            "or check field_grows_along and the barrier position in the rig file",
                       data={"cos_angle": along, "barrier_distance_m": dist})


def _vec_text(v) -> str:
    return "[" + ", ".join(f"{x + 0.0:.3g}" for x in v) + "]"  # + 0.0: no '-0'"


@rule(PUSH_NO_FORCE, stage="physics")
def push_no_force(shot):
    for act in _pushes(shot):
        rep = push_analysis(shot, act)
        if rep and rep.get("kind") == "magnetic" and rep["no_force"]:
            yield make(PUSH_NO_FORCE, f"{state_text(rep['state'])} has moment {rep['moment'] / MU_B:.3g} mu_B at "
                       f"{_bias(shot) * 1e4:.4g} G: the {rep['gradient'] * 100:.4g} G/cm gradient does not push it "
                       f"({abs(rep['velocity']) * 1e6:.3g} um/s)", act.pos, block=act.block, time_s=act.t0,
                       hint="transfer the atoms to a state with mF != 0 before the push, or use an optical push")


@rule(PUSH_TOO_LATE, stage="physics")
def push_too_late(shot):
    for act in _pushes(shot):
        rep = push_analysis(shot, act)
        if not rep or "barrier" not in rep:
            continue
        b = rep["barrier"]
        if rep["arrival"] > b.t1:
            when = "never" if math.isinf(rep["arrival"]) else f"at t = {_fmt_t(rep['arrival'])}"
            yield make(PUSH_TOO_LATE, f"the atoms reach {act.args['target_distance'] * 1e3:.4g} mm {when} "
                       f"({abs(rep['velocity']) * 1e3:.4g} mm/s), but the barrier in block '{b.block}' ends at "
                       f"t = {_fmt_t(b.t1)}", b.pos, block=b.block, time_s=b.t1,
                       hint=(f"keep the barrier on until at least {_fmt_t(rep['arrival'] - b.t0)} after its start"
                             if not math.isinf(rep["arrival"]) else "the push gives no velocity"),
                       data={"arrival_s": rep["arrival"], "barrier_end_s": b.t1})


# --------------------------------------------------------------------------- Stern-Gerlach separation

@per_shot_cache(lambda shot, act: ("state-separate", act.index, act.t0))
def separation_analysis(shot, act):
    """Separation of the populated components at the next image, against their widths (dict) or None.

    The components are the states that hold atoms when the gradient pulse starts (`populated_states`); of
    several, the two closest in moment (the hardest to separate) are compared. `pair` is None when only one
    state holds atoms."""
    from itertools import combinations

    from ..physics.kinematics import components_resolved, stern_gerlach_separation
    from ..physics.zeeman import magnetic_moment

    sp = _species(shot)
    if sp is None or _sample_state(shot) is None:
        return None
    images = [a for a in shot.phys if a.kind == "image" and a.t0 >= act.t1]
    if not images:
        return None
    img = min(images, key=lambda a: a.t0)
    states = populated_states(shot, act.t0)
    fractions = state_fractions(shot, act.t0) or {}
    b = _bias(shot)
    try:
        mus = {st: float(magnetic_moment(st[0], st[1], b, atom=sp)) for st in states}
    except ValueError:
        return None
    rep = dict(image=img, states=states, fractions=[fractions[st] for st in states], pair=None, equal=False)
    if len(states) < 2:
        return rep
    pair = min(combinations(states, 2), key=lambda ab: abs(mus[ab[0]] - mus[ab[1]]))
    mu = [mus[pair[0]], mus[pair[1]]]
    rep.update(pair=pair, moments=mu, equal=abs(mu[0] - mu[1]) < EQUAL_MOMENT)
    tof_after = img.t0 - act.t1
    rep["separation"] = float(stern_gerlach_separation(mu[0], mu[1], act.args["gradient"], act.args["duration"],
                                                       tof_after, sp.mass_kg))
    cloud = cloud_at_image(shot, img)
    if cloud:
        # rms of a Thomas-Fermi profile along an axis is R / sqrt(7)
        # (Bose-Einstein Condensation in Dilute Gases, Cambridge University Press, 2nd ed. 2008)
        sigma = cloud["size"] / math.sqrt(7) if cloud["size_kind"].startswith("Thomas") else cloud["size"]
        rep.update(sigma=sigma, combined=math.sqrt(2) * sigma,
                   resolved=bool(components_resolved(rep["separation"], sigma, sigma, SEPARATION_WIDTHS)))
    return rep


def _separations(shot):
    for act in (a for a in shot.phys if a.kind == "separate"):
        rep = separation_analysis(shot, act)
        if rep:
            yield act, rep


# --------------------------------------------------------------------------- where each component is at an image

MAX_UNKNOWN_SIGNS = 10  # force directions of unknown sign enumerated one by one (2^10 cases); beyond: a bounding box


def _unit(v):
    v = np.asarray(v, dtype=float)
    n = float(np.linalg.norm(v)) if v.shape == (3,) and np.all(np.isfinite(v)) else 0.0
    return v / n if n > 0 and math.isfinite(n) else None


def _force_parts(shot, t, paths):
    """Per push / separation before t: (label, known_sign, displacements (n_paths, 3)) of each path at time t."""
    from ..physics.kinematics import pulse_displacement
    from ..physics.zeeman import magnetic_moment

    sp = _species(shot)
    b = _bias(shot)
    parts = []
    for act in sorted((a for a in shot.phys if a.kind in ("push", "separate") and a.t0 < t), key=lambda a: a.t0):
        label = f"{act.kind} '{act.block}'"
        if "coil" in act.args:
            coil = shot.rig.coils.get(act.args["coil"])
            if coil is None:
                continue
            grows = _unit(coil.field_grows_along) if coil.field_grows_along is not None else None
            way = grows if grows is not None else _unit(coil.axis)
            if way is None:
                continue
            grad = abs(float(act.args["gradient"]))
            disp = []
            for _, ch in paths:
                st = state_at(ch, act.t0)
                try:
                    mu = float(magnetic_moment(st[0], st[1], b, atom=sp)) if st is not None else 0.0
                except ValueError:
                    mu = 0.0
                # force = moment x grad|B|, with grad|B| = |b'| x (where |B| grows): mu > 0 goes that way
                acc = mu * grad / sp.mass_kg
                disp.append(_confined(shot, sp, act, t, pulse_displacement(acc * way, act.t0, act.t1, t),
                                      abs(acc) * (act.t1 - act.t0)))
            if any(np.any(d != 0) for d in disp):
                parts.append((label + f" ({coil.name})", grows is not None, np.array(disp, dtype=float).reshape(-1, 3)))
        else:
            rep = push_analysis(shot, act)
            if not rep or "direction" not in rep or not rep["velocity"]:
                continue
            acc = rep["velocity"] / max(act.t1 - act.t0, 1e-300) * np.asarray(rep["direction"], dtype=float)
            d = _confined(shot, sp, act, t, pulse_displacement(acc, act.t0, act.t1, t), abs(rep["velocity"]))
            parts.append((label + f" (beam {rep['beam']})", True, np.tile(np.asarray(d, dtype=float), (len(paths), 1))))
    return parts


def _confined(shot, sp, act, t, disp, speed):
    """The free-flight displacement `disp` at t of a force that ends while an optical trap still holds the atoms
    (a release follows before t), bounded by what the trap allows: an oscillation of amplitude at most v / omega
    along the trap's weakest axis (harmonic motion, textbook), then free flight from the release at no more
    than the kick's speed v. Unchanged when the kick's energy exceeds the trap's depth (the atoms leave it)."""
    releases = [a.t0 for a in shot.phys if a.kind == "release" and act.t1 <= a.t0 < t]
    d = np.asarray(disp, dtype=float)
    if not releases or speed <= 0:
        return d
    beams = _gaussian_beams(shot, [act.t1])[0]
    if not beams:
        return d
    depth, omegas = _held(sp, tuple(beams))
    if omegas is None or not depth > 0.5 * sp.mass_kg * speed ** 2:
        return d
    bound = speed / float(np.min(omegas)) + speed * (t - min(releases))
    n = float(np.linalg.norm(d))
    return d * (bound / n) if n > bound else d


@per_shot_cache(lambda shot, img: ("state-components", img.index, img.t0))
def components_at(shot, img):
    """Where the atoms of each populated state are at an image, from the pushes and separations before it.

    dict(components=[dict(state, fraction, displacements (n_cases, 3) m, parts=[(label, known_sign, vector for
    the + sign, column in `signs` or None)])], unknown=[labels of forces whose sign is unknown], signs=(n_cases,
    n_unknown) array of the signs of each case (None when the cases are the corners of a bounding box),
    empty=[(state, fraction) of states below the floor]).
    Displacements are from the atoms' place before the first force (the trap centre, the rig's origin), for
    every combination of the unknown signs (a coil without `field_grows_along` pushes along its `axis`, either
    way); gravity is not included. Each force: uniform acceleration moment x |b'| / m (moment -dE/dB of the
    state the path is in when the force starts, Breit-Rabi at the rig's bias) or the optical push's velocity
    over its duration, then free flight until the image; when an optical trap still holds the atoms after
    the force (and the kick's energy is below its depth), the displacement is bounded by an oscillation of
    amplitude v / omega_min and free flight at v after the release (`_confined`). Either way an upper bound. Paths that end in the same state with the
    same displacement are merged. None without a species."""
    from itertools import product

    if _species(shot) is None:
        return None
    pop = populations(shot, img.t0)
    paths = pop["paths"] if pop is not None else [(1.0, ((-math.inf, None),))]
    parts = _force_parts(shot, img.t0, paths)
    base = np.zeros((len(paths), 3))
    unknown = []
    for label, known, disp in parts:
        if known:
            base += disp
        else:
            unknown.append((label, disp))
    n_unk = len(unknown)
    signs = None
    if n_unk <= MAX_UNKNOWN_SIGNS:
        signs = np.array(list(product((1.0, -1.0), repeat=n_unk)), dtype=float).reshape(2 ** n_unk, n_unk)
        stack = np.array([d for _, d in unknown], dtype=float).reshape(n_unk, len(paths), 3)
        cases = base[None] + np.einsum("cu,upk->cpk", signs, stack)  # (n_cases, n_paths, 3)
    else:  # the corners of the box that holds every combination
        reach = np.sum(np.abs([d for _, d in unknown]), axis=0)  # (n_paths, 3)
        corners = np.array(list(product((1.0, -1.0), repeat=3)))
        cases = base[None] + corners[:, None, :] * reach[None]
    comps: list = []
    empty: dict = {}
    for k, (f, ch) in enumerate(paths):
        st = state_at(ch, img.t0)
        d = cases[:, k, :]
        for c in comps:
            if c["state"] == st and np.allclose(c["displacements"], d, rtol=0, atol=1e-12):
                c["fraction"] += f
                break
        else:
            slots, j = [], 0
            for label, known, disp in parts:  # which column of `signs` an unknown sign is
                slots.append((label, known, disp[k], None if known else j))
                j += 0 if known else 1
            comps.append(dict(state=st, fraction=f, displacements=d, parts=slots))
    kept = []
    for c in sorted(comps, key=lambda c: -c["fraction"]):
        if pop is None or is_populated(shot, c["fraction"]):
            kept.append(c)
        else:
            empty[c["state"]] = empty.get(c["state"], 0.0) + c["fraction"]
    return dict(components=kept, unknown=[label for label, _ in unknown], empty=sorted(empty.items()), signs=signs)


_SRC_SG = ("Stern-Gerlach separation: relative acceleration (mu_1 - mu_2) b'/m with moments from the Breit-Rabi "
           "formula, Phys. Rev. 38, 2082 (1931)")


@rule(EQUAL_MOMENTS, stage="physics")
def equal_moments(shot):
    for act, rep in _separations(shot):
        if rep["equal"]:
            a, b = rep["pair"]
            yield make(EQUAL_MOMENTS, f"{state_text(a)} and {state_text(b)} have moments "
                       f"{rep['moments'][0] / MU_B:+.4g} and {rep['moments'][1] / MU_B:+.4g} mu_B: the gradient cannot "
                       f"separate them", act.pos, block=act.block, time_s=act.t0,
                       hint="drive a transition to a state with a different moment (another mF)")


@rule(COMPONENTS_OVERLAP, stage="physics")
def components_overlap(shot):
    for act, rep in _separations(shot):
        if rep["equal"] or "resolved" not in rep or rep["resolved"]:
            continue
        need = SEPARATION_WIDTHS * rep["combined"]
        k = need / abs(rep["separation"]) if rep["separation"] else math.inf
        yield make(COMPONENTS_OVERLAP, f"the components are {abs(rep['separation']) * 1e6:.4g} um apart at the "
                   f"image, {abs(rep['separation']) / rep['combined']:.3g} combined rms widths (each {rep['sigma'] * 1e6:.4g} "
                   f"um); at least {SEPARATION_WIDTHS:g} are needed", act.pos, block=act.block, time_s=act.t0,
                   hint=f"raise the gradient to {act.args['gradient'] * 100 * k:.3g} G/cm, or lengthen the pulse",
                   data={"separation_m": rep["separation"], "combined_rms_m": rep["combined"]})


@rule(COMPONENTS_SEPARATED, stage="physics")
def components_separated(shot):
    for act, rep in _separations(shot):
        if rep["equal"] or not rep.get("resolved"):
            continue
        yield make(COMPONENTS_SEPARATED, f"{state_text(rep['pair'][0])} and {state_text(rep['pair'][1])} are "
                   f"{abs(rep['separation']) * 1e3:.3g} mm apart at the image, {abs(rep['separation']) / rep['combined']:.3g} "
                   f"combined rms widths (margin {abs(rep['separation']) / (SEPARATION_WIDTHS * rep['combined']):.3g} x the "
                   f"{SEPARATION_WIDTHS:g} needed)", act.pos, block=act.block, time_s=act.t0,
                   data={"separation_m": rep["separation"], "combined_rms_m": rep["combined"]})


# --------------------------------------------------------------------------- imaging probe

def _images(shot):
    return [a for a in shot.phys if a.kind == "image"]


@per_shot_cache(lambda shot, act: ("state-probe", act.index, act.t0))
def probe_analysis(shot, act):
    """Saturation, photons per atom, Doppler shift and recoil blur of an image (dict) or None."""
    from ..physics import imaging as im
    from ..physics.kinematics import recoil_velocity

    sp = _species(shot)
    setup = shot.rig.imaging.get(act.args["setup"])
    beam = shot.rig.beams.get(setup.probe_beam) if setup and setup.probe_beam else None
    power = act.args.get("probe_power")
    if sp is None or beam is None or not beam.waist_m or power is None:
        return None
    out = shot.rig.outputs.get(beam.power_channel)
    if out is not None and out.kind == "digital":
        return None  # on/off probe: its power is not known
    dur = act.args["duration"]
    gamma = TWO_PI * sp.d2_linewidth_hz
    s0 = float(im.saturation_parameter(power, beam.waist_m, sp.saturation_intensity_w_m2))
    rate = float(im.scattering_rate(gamma, s0, TWO_PI * act.args.get("detuning", 0.0)))
    n = float(im.photons_per_atom(rate, dur))
    v_rec = float(recoil_velocity(beam.wavelength_m, sp.mass_kg))
    rep = dict(saturation=s0, rate=rate, photons=n, recoil=v_rec,
               doppler_linewidths=float(im.doppler_shift_linewidths(n, v_rec, beam.wavelength_m, sp.d2_linewidth_hz)),
               doppler_hz=float(im.doppler_shift_after(n, v_rec, beam.wavelength_m)),
               blur=float(im.recoil_blur(n, v_rec, dur)))
    if setup.pixel_size_m and setup.magnification:
        rep["pixel"] = float(im.pixel_size_object_plane(setup.pixel_size_m, setup.magnification))
    return rep


_SRC_PROBE = ("steady-state scattering rate and saturation intensity, Sodium D Line Data and the other alkali D-line "
              "data compilations; first-order Doppler shift; photon recoil (textbook)")


@rule(PROBE_DOPPLER, stage="physics")
def probe_doppler(shot):
    for act in _images(shot):
        rep = probe_analysis(shot, act)
        if rep and rep["doppler_linewidths"] > 1.0:
            yield make(PROBE_DOPPLER, f"{rep['photons']:.3g} photons per atom (saturation {rep['saturation']:.3g}) "
                       f"Doppler-shift the atoms by {_fmt_hz(rep['doppler_hz'])}, {rep['doppler_linewidths']:.3g} natural "
                       f"linewidths, during the probe", act.pos, block=act.block, time_s=act.t0,
                       hint=f"shorten the probe to {_fmt_t(act.args['duration'] / rep['doppler_linewidths'] * 0.5)} or lower its power",
                       data={"photons": rep["photons"], "doppler_linewidths": rep["doppler_linewidths"]})


@rule(IMAGING_BLUR, stage="physics")
def imaging_blur(shot):
    for act in _images(shot):
        rep = probe_analysis(shot, act)
        if rep and rep.get("pixel") and rep["blur"] > rep["pixel"]:
            # blur grows as tau^(3/2) at fixed power
            t_ok = act.args["duration"] * (rep["pixel"] / rep["blur"]) ** (2 / 3) * 0.9
            yield make(IMAGING_BLUR, f"recoil blur {rep['blur'] * 1e6:.3g} um ({rep['photons']:.3g} photons per "
                       f"atom) exceeds one pixel, {rep['pixel'] * 1e6:.3g} um in the atom plane", act.pos, block=act.block,
                       time_s=act.t0, hint=f"shorten the probe to about {_fmt_t(t_ok)}",
                       data={"blur_m": rep["blur"], "pixel_m": rep["pixel"]})


@rule(EXPOSURE_TOO_SHORT, stage="physics")
def exposure_too_short(shot):
    for act in _images(shot):
        exp_s, dur = act.args.get("exposure"), act.args["duration"]
        if exp_s is not None and exp_s < dur * (1 - 1e-9):
            yield make(EXPOSURE_TOO_SHORT, f"camera exposure {_fmt_t(exp_s)} is shorter than the probe pulse "
                       f"{_fmt_t(dur)}", act.pos, block=act.block, time_s=act.t0,
                       hint=f"set exposure: {_fmt_t(dur)} or longer")


# --------------------------------------------------------------------------- `seqgen show --physics`

def _pulse_items(shot, act, rep):
    items = [f"angle {_pi(rep['area'])}" + (f" (declared {rep['angle'] / math.pi:.3g} pi)" if rep["angle"] is not None else ""),
             f"peak Rabi frequency 2 pi x {_fmt_hz(rep['peak_rabi_hz'])}, {rep['envelope']} {_fmt_t(rep['duration'])}"]
    if rep["pair"]:
        a, b = rep["pair"]
        items.append(f"{state_text(a)} -> {state_text(b)} line {_line_hz(rep['line_hz'] + rep['light_shift_hz'])} at "
                     f"{_bias(shot) * 1e4:.4g} G")
    items.append(f"detuning {_fmt_hz(rep['detuning_hz'])}" + ("" if rep["detuning_source"] == "frequency"
                                                               else f" ({rep['detuning_source']})"))
    if "transfer" in rep:
        items.append(f"transfer {rep['transfer']:.4g}" + (f" (intended {rep['intended_transfer']:.4g})"
                                                          if rep["intended_transfer"] != rep["transfer"] else ""))
    fw = _fourier_width(shot, act, rep)
    if fw:
        items.append(f"Fourier width {_fmt_hz(fw)}")
    if rep.get("slope_hz_per_t") is not None:
        items.append(f"field sensitivity {rep['slope_hz_per_t'] * MG:.4g} Hz/mG")
    return items


def report(shot) -> list[dict]:
    rows = []
    if _species(shot) is None:
        return rows
    for act in _pulses(shot):
        rep = pulse_analysis(shot, act)
        if rep:
            rows.append({"block": act.block, "kind": "clock_pulse", "time_s": act.t0, "items": _pulse_items(shot, act, rep)})
    for kind, acts in interferometers(shot):
        r = interferometer_analysis(shot, kind, acts)
        items = [f"free evolution {_fmt_t(r['free_time'])} between blocks " + ", ".join(a.block for a in acts),
                 f"detuning {_fmt_hz(r['detuning_hz'])} -> free-evolution phase {r['phase_rad']:.4g} rad"]
        if kind == "spin_echo":
            items[-1] += f" (static part cancelled; net time {_fmt_t(r['net_time'])})"
        if "phase_per_mg" in r:
            items.append(f"phase per mG of static field offset {r['phase_per_mg']:.4g} rad")
        if "step_phase_per_mg" in r:
            items.append(f"phase per mG of a field step between the halves {r['step_phase_per_mg']:.4g} rad")
        rows.append({"block": acts[0].block, "kind": kind, "time_s": acts[0].t0, "items": items})
    for drive, seg in _sweeps(shot):
        rep = sweep_analysis(shot, drive, seg)
        if not rep:
            continue
        items = [f"sweep {_line_hz(rep['f0'])} -> {_line_hz(rep['f1'])} in {_fmt_t(rep['duration'])}",
                 f"{state_text(rep['pair'][0])} -> {state_text(rep['pair'][1])} line {_line_hz(rep['resonance_hz'])}"]
        if rep["crosses"]:
            items.append(f"crossing at {_fmt_hz(abs(rep['rate_hz_s']))}/s, Rabi frequency 2 pi x {_fmt_hz(rep['rabi_hz'])}")
            items.append(f"Landau-Zener transfer {rep['lz_transfer']:.4g}")
        else:
            items.append("does not cross the line")
        if "bloch_transfer" in rep:
            items.append(f"integrated transfer {rep['bloch_transfer']:.4g}")
        rows.append({"block": seg.block, "kind": "sweep", "time_s": seg.t0, "items": items})
    for act in _barriers(shot):
        rep = barrier_drive_analysis(shot, act)
        if not rep:
            continue
        if "reason" in rep:
            items = [rep["reason"]]
        else:
            a, b = rep["pair"]
            items = [f"modulation {_line_hz(rep['f_mod'])} depth {rep['depth']:.3g} on {state_text(a)} -> {state_text(b)}",
                     f"effective two-photon Rabi frequency 2 pi x {_fmt_hz(rep['rabi_hz'])} (circular polarisation assumed; "
                     f"peak intensity {rep['i_peak'] * 1e-4:.4g} W/cm^2)",
                     f"differential light shift {_fmt_hz(rep['light_shift_hz'])}",
                     f"line {_line_hz(rep['resonance_hz'])} (Breit-Rabi {_line_hz(rep['bare_hz'])}), "
                     f"modulation offset {_fmt_hz(rep['offset_hz'])} (tolerated {_fmt_hz(rep['tolerance_hz'])})"]
        rows.append({"block": act.block, "kind": "barrier_drive", "time_s": act.t0, "items": items})
    for act in _pushes(shot):
        rep = push_analysis(shot, act)
        if not rep:
            continue
        if rep["kind"] == "magnetic":
            if rep["no_force"]:
                way = "no kick (no first-order magnetic moment)"
            else:
                way = (f"kick {abs(rep['velocity']) * 1e3:.4g} mm/s towards "
                       f"{'stronger' if rep['moment'] > 0 else 'weaker'} field"
                       + (f", along {_vec_text(rep['direction'])}" if "direction" in rep else
                          " (direction unknown: the coil has no field_grows_along)"))
            items = [f"{state_text(rep['state'])} moment {rep['moment'] / MU_B:+.5g} mu_B (-dE/dB) at {_bias(shot) * 1e4:.4g} G",
                     way]
        else:
            items = [f"optical: saturation {rep['saturation']:.3g}, {rep['photons']:.3g} photons of "
                     f"{rep['recoil'] * 1e3:.4g} mm/s recoil", f"kick {rep['velocity'] * 1e3:.4g} mm/s along the beam, "
                     f"rms spread {rep['rms_along'] * 1e3:.3g} mm/s"]
        if act.args.get("expect_velocity") is not None:
            items.append(f"expected {abs(act.args['expect_velocity']) * 1e3:.4g} mm/s")
        if "arrival" in rep:
            items.append(f"reaches {act.args['target_distance'] * 1e3:.4g} mm at t = {_fmt_t(rep['arrival'])}")
            if "barrier" in rep:
                b = rep["barrier"]
                items.append(f"barrier '{b.block}' on {_fmt_t(b.t0)} to {_fmt_t(b.t1)}")
        rows.append({"block": act.block, "kind": "push", "time_s": act.t0, "items": items})
    for act, rep in _separations(shot):
        if rep["pair"] is None:
            held = ", ".join(state_text(st) for st in rep["states"]) or "no state above the detection floor"
            rows.append({"block": act.block, "kind": "separate", "time_s": act.t0,
                         "items": [f"only {held} holds atoms: nothing to separate"]})
            continue
        a, b = rep["pair"]
        items = [f"{state_text(a)} {rep['moments'][0] / MU_B:+.4g} mu_B, {state_text(b)} {rep['moments'][1] / MU_B:+.4g} mu_B",
                 f"separation at the image {abs(rep['separation']) * 1e3:.4g} mm"]
        if "combined" in rep:
            items.append(f"rms width {rep['sigma'] * 1e6:.4g} um each: {abs(rep['separation']) / rep['combined']:.3g} "
                         f"combined rms widths (need {SEPARATION_WIDTHS:g})")
        rows.append({"block": act.block, "kind": "separate", "time_s": act.t0, "items": items})
    for act in _images(shot):
        rep = probe_analysis(shot, act)
        if not rep:
            continue
        items = [f"saturation {rep['saturation']:.3g}", f"{rep['photons']:.3g} photons per atom",
                 f"Doppler shift {rep['doppler_linewidths']:.3g} linewidths", f"recoil blur {rep['blur'] * 1e6:.3g} um"
                 + (f" (pixel {rep['pixel'] * 1e6:.3g} um in the atom plane)" if rep.get("pixel") else "")]
        rows.append({"block": act.block, "kind": "probe", "time_s": act.t0, "items": items})
    return rows
