"""What a shot says about its atoms and beams: the species, the trap beams on at given times, the bias field,
the sample state and the two levels a drive couples (Breit-Rabi line and its field sensitivity)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import constants as sc

from .played import off_floor, played

G_N = 9.80665  # standard gravity, m/s^2 (exact, SI Brochure)
MU_B = sc.physical_constants["Bohr magneton"][0]


def species(shot):
    """The sample's species (seqgen.physics.atoms.Species) or None (no sample, unknown species)."""
    from ..physics.atoms import get_species

    if shot.sample is None:
        return None
    try:
        return get_species(shot.sample.species)
    except KeyError:
        return None


def trap_beams(shot):
    return [b for b in shot.rig.beams.values() if b.role == "trap" and b.waist_m]


def release_before(shot, t):
    """The last release action that has begun by t, or None."""
    rels = [a for a in shot.actions("release") if a.t0 <= t]
    return max(rels, key=lambda a: a.t0) if rels else None


def trap_before(shot, t: float) -> float:
    """A moment just before `t` at which the trap is read, as played: a write at `t` (a release, a trap beam
    switched off as a push starts) lands on its device's tick, half a tick either way (250 ns early for 31.25 us
    on a 1 us card), so the trap is read one tick of the slowest trap-beam device earlier, where the beams that
    `t` switches still shine."""
    outs, devices = shot.rig.outputs, shot.rig.devices
    ticks = [devices[outs[b.power_channel].device].tick_s for b in trap_beams(shot)
             if b.power_channel in outs and outs[b.power_channel].device in devices]
    return t - max(ticks, default=0.0) - 1e-9 * max(1.0, abs(t))


def gaussian_beams(shot, times):
    """For each time, the list of GaussianBeam of the trap beams that are on, at the powers the hardware plays
    (`predict.played`)."""
    from ..physics.optical import GaussianBeam

    beams = trap_beams(shot)
    powers = {b.name: played(shot, b.power_channel, times) for b in beams}
    floors = {b.name: off_floor(shot, b.power_channel) for b in beams}  # within one DAC step of zero: off
    out = []
    for i in range(len(times)):
        on = [GaussianBeam(float(powers[b.name][i]), b.waist_m, b.wavelength_m, b.direction, b.position_m,
                           b.waist_y_m) for b in beams if powers[b.name][i] > floors[b.name]]
        out.append(on)
    return out


def scattering_length(sp, state) -> float | None:
    """s-wave scattering length (m) of two atoms both in `state` (F, mF): the species table's value for that
    state, else the triplet for a stretched state (|mF| = F = I + 1/2: electron and nuclear spins aligned, a pure
    triplet pair; Phys. Rev. A 78, 012503 (2008)), else None: the singlet and triplet lengths alone do not give
    another state's."""
    if sp is None or state is None:
        return None
    lengths = sp.scattering_lengths_m
    F, mF = state
    if f"F={F},mF={mF}" in lengths:
        return lengths[f"F={F},mF={mF}"]
    if abs(mF) == F and abs(F - (sp.nuclear_spin + 0.5)) < 1e-9:
        return lengths.get("triplet")
    return None


def bias(shot) -> float:
    """The rig's bias field (T), 0 when absent."""
    return float(shot.rig.bias_field_t or 0.0)


def sample_state(shot):
    """(F, mF) of the sample, or None."""
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


# why a level's numbers could not be had (LevelProblem.kind)
NOT_GROUND_LEVEL = "not_ground_level"  # a declared drive state that is not a ground level
BAD_F = "bad_F"  # F is neither I - 1/2 nor I + 1/2
BAD_MF = "bad_mF"  # mF is not a sublevel of F
NO_PARTNER = "no_partner"  # mF exists only in F = I + 1/2: no hyperfine partner at equal mF
BAD_DEPTH = "bad_depth"  # a modulation depth outside [0, 1]
UNEVALUABLE = "unevaluable"  # the species' data or the numbers could not be evaluated (error: exception type)


@dataclass(frozen=True)
class LevelProblem:
    """Why a level (F, mF) of the species has no numbers: kind (one of the codes above), F and mF as given,
    the species' name and nuclear spin, depth (BAD_DEPTH), error (UNEVALUABLE: the exception's type)."""

    kind: str
    F: object = None
    mF: object = None
    species: str | None = None
    nuclear_spin: float | None = None
    depth: float | None = None
    error: str | None = None


class LevelError(ValueError):
    """A drive's declared state is not a ground level (`problem` says which)."""

    def __init__(self, problem: LevelProblem):
        super().__init__(problem.kind)
        self.problem = problem


def level_problem(sp, F, mF) -> LevelProblem | None:
    """The problem of |F, mF> as a ground level of `sp`, in the order seqgen.physics.zeeman checks it, or None."""
    i = sp.nuclear_spin
    f, m = float(F), float(mF)
    if not (abs(f - (i + 0.5)) < 1e-9 or abs(f - (i - 0.5)) < 1e-9):
        return LevelProblem(BAD_F, F, mF, sp.name, i)
    if abs(m) > f + 1e-9 or abs((f - m) - round(f - m)) > 1e-9:
        return LevelProblem(BAD_MF, F, mF, sp.name, i)
    return None


def unevaluable(sp, state, exc) -> LevelProblem:
    return LevelProblem(UNEVALUABLE, state[0] if state else None, state[1] if state else None,
                        getattr(sp, "name", None), getattr(sp, "nuclear_spin", None), error=type(exc).__name__)


def transition_pair(shot, sp, declared=None):
    """(initial, final) of a drive: the declared pair (sample state first when it is one of
    them), else the sample state and the other hyperfine level at equal mF; None if unknown.
    LevelError when a declared state is not a ground level."""
    state = sample_state(shot)
    if declared:
        a, b = (tuple(int(x) for x in s) for s in declared)
        if sp is not None:
            i = sp.nuclear_spin
            for F, mF in (a, b):
                if min(abs(F - (i - 0.5)), abs(F - (i + 0.5))) > 1e-9 or abs(mF) > F:
                    raise LevelError(LevelProblem(NOT_GROUND_LEVEL, F, mF, sp.name, i))
        if state == b:
            a, b = b, a
        return a, b
    if state is None or sp is None:
        return None
    other = other_level(sp, state)
    return None if other is None else (state, other)


def line(sp, initial, final, bias_t):
    """(|nu| in Hz, d|nu|/dB in Hz/T) of initial -> final at the bias field (Breit-Rabi, Phys. Rev. 38, 2082
    (1931)). nu = (E_f - E_i)/h, so d nu/dB = (mu_i - mu_f)/h with mu = -dE/dB."""
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


def unit(v):
    """v / |v| as an array, or None for a zero, infinite or malformed vector."""
    v = np.asarray(v, dtype=float)
    n = float(np.linalg.norm(v)) if v.shape == (3,) and np.all(np.isfinite(v)) else 0.0
    return v / n if n > 0 and np.isfinite(n) else None


# why a drive's declared calibration reference cannot scale its Rabi frequency (Coupling.problem)
REFERENCE_FORBIDDEN = "reference_forbidden"  # the polarisation does not drive the calibrated_on transition
REFERENCE_NOT_LEVEL = "reference_not_level"  # a calibrated_on state is not a ground level of the species


@dataclass(frozen=True)
class Coupling:
    """A drive's magnetic-dipole coupling of a pair (initial, final) at the bias field, from the rig's
    `polarisation` (seqgen.physics.transitions): element |<upper| mu.e |lower>| (J/T), forbidden (zero element),
    factor: the scale of rabi_per_amplitude for this pair (element / reference_element with `calibrated_on`,
    else 1.0); problem: why a declared reference was not used (REFERENCE_*; factor then 1.0)."""

    pair: tuple
    polarisation: object
    element: float
    forbidden: bool
    factor: float = 1.0
    reference: tuple | None = None
    reference_element: float | None = None
    problem: str | None = None


def drive_coupling(shot, drive, declared=None) -> Coupling | None:
    """The coupling of the pair a drive addresses (`declared` transition, else the sample state and its partner,
    as transition_pair), or None: no polarisation in the rig, a two-photon drive (kind raman: its calibration
    holds for every transition), no species or pair, or a state that is not a ground level."""
    from ..physics import transitions as tr

    sp = species(shot)
    if drive is None or drive.polarisation is None or drive.kind == "raman" or sp is None:
        return None
    try:
        pair = transition_pair(shot, sp, declared)
        if pair is None or level_problem(sp, *pair[0]) or level_problem(sp, *pair[1]):
            return None
        b = bias(shot)
        element = tr.coupling_element(pair[0], pair[1], b, drive.polarisation, atom=sp)
        out = dict(pair=pair, polarisation=drive.polarisation, element=element,
                   forbidden=tr.is_forbidden(element, atom=sp))
        ref = drive.calibrated_on
        if ref is not None:
            out["reference"] = ref
            if ref[0] == ref[1] or level_problem(sp, *ref[0]) or level_problem(sp, *ref[1]):  # no transition
                return Coupling(**out, problem=REFERENCE_NOT_LEVEL)
            out["reference_element"] = r = tr.coupling_element(ref[0], ref[1], b, drive.polarisation, atom=sp)
            if tr.is_forbidden(r, atom=sp):
                return Coupling(**out, problem=REFERENCE_FORBIDDEN)
            out["factor"] = element / r
        return Coupling(**out)
    except (LevelError, ValueError):
        return None


def coupling_factor(shot, drive, declared=None) -> float:
    """The factor on a drive's rabi_per_amplitude for the pair it addresses: |<f| mu.e |i>| / |<f_ref| mu.e |i_ref>|
    at the bias field when the rig states the drive's polarisation and calibrated_on, else exactly 1.0."""
    c = drive_coupling(shot, drive, declared)
    return 1.0 if c is None else c.factor


def allowed_instead(shot, drive, pair) -> tuple:
    """Pairs (initial, final') the drive's polarisation does drive, final' in the final state's F, strongest first."""
    from ..physics.transitions import allowed_partners

    sp = species(shot)
    if sp is None or drive is None or drive.polarisation is None:
        return ()
    try:
        found = allowed_partners(pair[0], pair[1][0], bias(shot), drive.polarisation, atom=sp)
    except ValueError:
        return ()
    return tuple((pair[0], (int(round(f[0])), int(round(f[1])))) for f, _ in found)
