"""Words for the predictions: why a number is missing, where a value comes from, as the rules' messages and
`show --physics` write them. One place, so that a finding and the physics notes say the same thing the same
way; the numbers themselves are written by seqgen.textfmt."""

from __future__ import annotations

import math

import numpy as np

from ..textfmt import fmt_energy, fmt_freq, fmt_gauss_per_cm, fmt_length, fmt_pct, fmt_state, fmt_time, fmt_vec
from . import cloud as cl
from . import species as spc
from .species import G_N


# --------------------------------------------------------------------------- levels and pulses

def level_problem_text(p) -> str:
    """Why a level has no numbers (species.LevelProblem), in the words seqgen.physics uses for the same refusal."""
    if p.kind == spc.NOT_GROUND_LEVEL:
        return f"|F={p.F}, mF={p.mF}> is not a ground level of {p.species}"
    i = p.nuclear_spin
    if p.kind == spc.BAD_F:
        return f"ground-state F must be {i - 0.5:g} or {i + 0.5:g}, got {np.asarray(p.F, dtype=float)}"
    if p.kind == spc.BAD_MF:
        return f"mF = {np.asarray(p.mF, dtype=float)} is not a sublevel of F = {np.asarray(p.F, dtype=float)}"
    if p.kind == spc.NO_PARTNER:
        return f"m_f = {float(p.mF):g} exists only in F = I + 1/2: no hyperfine partner at equal m"
    if p.kind == spc.BAD_DEPTH:
        return "modulation depth must lie in [0, 1]"
    return f"the level numbers of |F={p.F}, mF={p.mF}> of {p.species} could not be evaluated ({p.error})"


def detuning_source_text(rep) -> str:
    """How a pulse's detuning was found (PulsePrediction.detuning_source) in words."""
    if rep.detuning_source == "unknown_line":
        return f"line unknown, {level_problem_text(rep.bad_level)}: taken on resonance"
    return {"frequency": "frequency", "played": "the frequency its synth plays", "declared": "declared detuning",
            "assumed": "no frequency given: taken on resonance"}[rep.detuning_source]


def barrier_drive_reason(rep) -> str:
    """Why a modulated barrier has no drive model (BarrierDrive.unsupported)."""
    if rep.unsupported == "not_hyperfine":
        return "the modulated-beam drive model couples the two hyperfine levels at equal mF only"
    return level_problem_text(rep.bad_level)


# --------------------------------------------------------------------------- the cloud at an image

def split_text(split) -> str:
    """'reflected by barrier 'scatter'' for a part a barrier sheet split off (seqgen.predict.split), or ''."""
    words = {"transmitted": "transmitted through", "reflected": "reflected by"}
    return ", then ".join(f"{words.get(side, side)} barrier '{block}'" for side, block in split)


def who(comp) -> str:
    st = comp.state
    part = split_text(getattr(comp, "split", ()))
    if st is None:
        return f"the part of the cloud {part} ({fmt_pct(comp.fraction)} of the atoms)" if part else "the cloud"
    return f"{fmt_state(*st)}{' ' + part if part else ''} ({fmt_pct(comp.fraction)} of the atoms)"


def why_there(pred, comp, case) -> str:
    """How a component got where it is in one case: its fall and each force's displacement (mm)."""
    bits = [f"fall {fmt_length(0.5 * G_N * pred.tof ** 2, 3, unit='mm')}"]
    signs = pred.signs
    for label, known, vec, slot in comp.parts:
        length = float(np.linalg.norm(vec))
        if length == 0:
            continue
        if known:
            bits.append(f"{label} {fmt_length(length, 3, unit='mm')} along {fmt_vec(vec / length)}")
        elif signs is not None:
            bits.append(f"{label} {fmt_length(length, 3, unit='mm')} along {fmt_vec(signs[case, slot] * vec / length)} (the coil has no "
                        f"field_grows_along: both ways checked)")
        else:
            bits.append(f"{label} {fmt_length(length, 3, unit='mm')} either way along {fmt_vec(vec / length)}")
    return ", ".join(bits)


_TRAP_WORDS = {cl.TRAP_SAMPLE: "the sample's trap_frequencies", cl.TRAP_OPTICAL: "the optical trap"}
_MAGNETIC_WORDS = {cl.TRAP_IOFFE_PRITCHARD: "Ioffe-Pritchard", cl.TRAP_QUADRUPOLE: "linear quadrupole"}
THERMAL_STAND_IN = "condensate in a linear trap: sized as a thermal cloud at the sample's temperature"


def trap_text(cloud) -> str:
    """Which trap the release opened (CloudAtImage.trap)."""
    if cloud.trap in _TRAP_WORDS:
        return _TRAP_WORDS[cloud.trap]
    return f"the magnetic trap of block '{cloud.trap_block}' ({_MAGNETIC_WORDS[cloud.trap]})"


def hold_no_size_text(rep) -> str:
    """Why a magnetic hold (HoldPrediction) gives no trap."""
    if rep.bad_state is not None:
        return level_problem_text(rep.bad_state)
    if rep.unconfined in ("axial", "radial"):
        return unconfined_text(rep)
    return "the held state is not trappable" if rep.trappable is not None else "the trap could not be evaluated"


def size_unknown_text(why) -> str:
    """Why an image has no cloud size (SizeUnknown)."""
    where = f"the magnetic trap of block '{why.block}'"
    return {
        cl.IN_SITU: lambda: "no release before the image (an in-situ image): no time-of-flight prediction",
        cl.TRAP_EMPTY: lambda: "the trap beams on before the release hold no atoms (no trap frequencies)",
        cl.NO_TRAP: lambda: ("no trap is known before the release: no trap beams on, no magnetic_hold, and the "
                             "sample gives no trap_frequencies"),
        cl.QUADRUPOLE_NEEDS_TEMPERATURE: lambda: f"{where} is a linear quadrupole: its cloud size needs the sample's "
                                                 "temperature",
        cl.QUADRUPOLE_FLAT: lambda: f"{where} has a direction without gradient: the cloud is not confined",
        cl.HOLD_NO_SIZE: lambda: f"{where} gives no cloud size: {hold_no_size_text(why.hold)}",
        cl.NO_SCATTERING_LENGTH: lambda: f"no positive scattering length of {why.species} for a Thomas-Fermi condensate",
        cl.NO_TEMPERATURE: lambda: "the sample has no temperature",
        cl.NO_TEMPERATURE_NOR_ATOMS: lambda: "the sample gives neither a temperature nor, for a condensate, an atom number",
    }[why.reason]()


_PLURAL = {"Thomas-Fermi radius": "Thomas-Fermi radii", "rms width": "rms widths"}


def axis_sizes_text(sizes, axes, kind: str) -> str:
    """Sizes per principal axis (columns of `axes`): 'Thomas-Fermi radii 270 x 13 x 13 um (x, y, z)' when the
    ellipsoid's axes are the rig's (its shape matrix sum_j R_j^2 e_j e_j^T is diagonal: equal sizes may share
    any axes), else the sizes along its principal axes, named."""
    sizes = np.asarray(sizes, dtype=float).reshape(3)
    axes = np.eye(3) if axes is None else np.asarray(axes, dtype=float)
    shape = (axes * sizes ** 2) @ axes.T
    off = shape - np.diag(np.diag(shape))
    unit, scale = ("um", 1e6) if float(np.max(sizes)) < 1e-3 else ("mm", 1e3)
    if float(np.max(np.abs(off))) <= 1e-6 * float(np.max(np.diag(shape))):
        by_axis, where = np.sqrt(np.diag(shape)), "(x, y, z)"
    else:
        by_axis, where = sizes, "along " + ", ".join(fmt_vec(axes[:, j]) for j in range(3))
    return f"{_PLURAL.get(kind, kind)} " + " x ".join(f"{x * scale:.3g}" for x in by_axis) + f" {unit} {where}"


def sizes_text(cloud) -> str:
    """The cloud's size per axis at the image (CloudAtImage)."""
    sizes = np.full(3, cloud.size) if cloud.sizes is None else cloud.sizes
    return axis_sizes_text(sizes, cloud.axes, cloud.size_kind)


def not_at_rest_text(cloud) -> str:
    """A condensate the trap's changes left out of rest at the release (CloudAtImage.at_release)."""
    text = (f"not at rest when released (the trap changed before): {axis_sizes_text(cloud.at_release, cloud.axes, cloud.size_kind)} "
            f"at the release, {axis_sizes_text(cloud.at_rest, cloud.axes, cloud.size_kind)} at rest in that trap")
    return text + "; a breathing oscillation taken as damped" if cloud.damped else text


def size_text(pred) -> str:
    c = pred.cloud
    if c is None:
        return f"cloud size unknown ({size_unknown_text(pred.why)}): its centre alone is checked"
    if c.thermal_stand_in:  # say why a declared condensate has rms widths
        return f"{sizes_text(c)} (the sample says condensed, but it is in a linear trap: sized as thermal)"
    return sizes_text(c)


# --------------------------------------------------------------------------- barriers

def spread_text(cloud) -> str:
    """The velocity spread's origin (CloudAlongPath) in words."""
    if cloud.profile == "thomas-fermi":
        return f"condensate, Thomas-Fermi radius {fmt_length(cloud.size, unit='um')} along the path"
    if cloud.temperature_k:
        text = f"thermal, T = {cloud.temperature_k * 1e9:.4g} nK"
        if cloud.profile == "gaussian":
            return f"{text}, rms width {fmt_length(cloud.size, unit='um')} along the path{stand_in_text(cloud)}"
        return f"{text}, size along the path unknown (no trap){stand_in_text(cloud)}"
    return "no spread known (sample without temperature or trap)" + stand_in_text(cloud)


_STAND_IN = {
    "no_scattering_length": lambda st: f"{st} has no positive scattering length in seqgen's data",
    "no_atom_number": lambda st: "it gives no atom number",
    "no_trap": lambda st: "no trap holds it along the path at the push",
}


def stand_in_text(cloud) -> str:
    """Why a sample declared condensed is not treated as one along the path (CloudAlongPath.stand_in), or ""."""
    if not getattr(cloud, "stand_in", None):
        return ""
    return (f"; the sample says condensed, but {_STAND_IN[cloud.stand_in](cloud.state)}: "
            + ("sized as thermal" if cloud.temperature_k else "no Thomas-Fermi size"))


def release_text(rel) -> str:
    """The mean-field release of a condensate (MeanFieldRelease) in words."""
    trap = (f"in the trap of {', '.join(rel.held)} left on (scaling solution: an upper bound, the radial zero-point "
            f"energy is not kept)" if rel.held else "free expansion")
    return (f"mean-field release: mu = {fmt_energy(rel.mu)}, 2/7 mu = {fmt_energy(rel.released)} per atom; along the path "
            f"{fmt_energy(rel.path_energy)} when the centre reaches the sheet ({fmt_time(rel.read_at, unit='ms')} after the "
            f"push starts, {trap}): velocity profile (1 - v^2/V^2)^2 of half-width V = {rel.half_width * 1e3:.3g} mm/s, "
            f"rms = half-width/sqrt 7 = {rel.sigma_v * 1e3:.3g} mm/s, in quadrature with the in-trap spread")


def larmor_clock_text(rep) -> str:
    """Precession and alignment of the transmitted spin and their Larmor-clock times (BarrierPrediction)."""
    return (f"precession about the coupling axis {rep.precession:.3g} rad (Larmor time {fmt_time(rep.precession_time)}), "
            f"alignment towards it {rep.alignment:.3g} rad (Larmor time {fmt_time(rep.alignment_time)}); "
            f"times = angle / peak Rabi frequency (Phys. Rev. B 27, 6178 (1983))")


def incident_text(inc) -> str:
    """Where the incident velocity comes from (Incident) in words."""
    if inc.source != "push":
        return "expect_velocity of the push"
    way = "towards stronger field" if inc.moment > 0 else "towards weaker field"
    if inc.push_direction is not None:
        way += f", along {fmt_vec(inc.push_direction)}"
    return f"push by '{inc.coil}' on |F={inc.state[0]}, mF={inc.state[1]}>, {way}"


def in_barrier_drive_reason(d) -> str:
    """Why a barrier's in-barrier drive gives no rotation (InBarrierDrive.unsupported)."""
    initial, partner = d.initial, d.partner
    if d.unsupported == "not_in_transition":
        return (f"the sample state |F={initial[0]}, mF={initial[1]}> is not in the modulation's transition: "
                "the drive does not act on it; rotation not computed")
    if d.unsupported == "changes_mf":
        return (f"transition {initial} -> {partner} changes mF: a modulated beam along the quantisation "
                "axis couples equal mF only; rotation not computed")
    return f"no coupling in the drive model: {level_problem_text(d.problem)}"


def rotation_text(rep) -> str:
    d = rep.drive
    txt = (f"rotation of the transmitted spin {rep.rotation:.3g} rad (spread {rep.rotation_spread:.2g}) on "
           f"|F={d.initial[0]}, mF={d.initial[1]}> -> |F={d.partner[0]}, mF={d.partner[1]}>; peak Rabi frequency "
           f"2 pi x {d.rabi_peak / (2 * math.pi):.4g} Hz (circular polarisation assumed), "
           f"detuning {fmt_freq(d.detuning_hz, {'MHz': 6, 'kHz': 5, 'Hz': 4}, top='MHz')} from the bare line")
    if d.far_off:
        txt += " (far off resonance for the transit time: no transfer)"
    return txt + (" (no modulation frequency: taken on resonance)" if d.assumed_resonant else "")


# --------------------------------------------------------------------------- magnetic holds

def unconfined_text(rep) -> str:
    return {"axial": "axially: the curvature B'' is not positive", "radial": "radially: B'^2/B0 < B''/2"}[rep.unconfined]


def weakest_text(rep, short: bool = False) -> str:
    """Which gradient the quadrupole's cloud size and Majorana numbers use: the weakest one, named."""
    one = len(rep.axial or ()) == 1  # one coil: the radial gradient is half the axial one (div B = 0)
    text = f"{fmt_gauss_per_cm(rep.weakest_gradient)}, the trap's weakest{' (radial)' if one and short else ''} gradient"
    if one and not short:
        name, g = rep.axial[0]
        text += f": the radial one, half of {name}'s {fmt_gauss_per_cm(abs(g))} along its axis"
    return text
