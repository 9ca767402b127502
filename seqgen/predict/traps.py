"""Optical trap stages: the sign of each trap beam's light shift, the trap that the trap beams on at a time
make (depth with gravity, frequencies) at the powers the hardware plays (`predict.played`), and per write
to trap beams (a `trap_ramp`, plain ramps and sets: `trap_writes`) its frequencies, depth, eta and the
excitation it leaves."""

from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np
from scipy import constants as sc

from .cache import per_shot_cache
from .played import off_floor, played, played_source
from .species import gaussian_beams, species, trap_beams

N_SAMPLES = 24  # trap evaluations per ramp: frequencies vary smoothly with power


@dataclass(frozen=True)
class TrapBeamShift:
    """One trap beam's ground-state light shift per intensity U/I (J per W/m^2; > 0 repels) and scalar
    polarisability (atomic units, < 0 repels) at its wavelength (m) for the sample's species."""

    beam: str
    wavelength: float
    potential_per_intensity: float
    polarizability_au: float

    @property
    def repulsive(self) -> bool:
        return self.potential_per_intensity > 0


@per_shot_cache(lambda shot: ("trap-beam-shifts",))
def trap_beam_shifts(shot) -> tuple:
    """TrapBeamShift of every trap beam of the rig (rig order), () without a known species."""
    from ..physics.optical import dipole_potential_per_intensity, scalar_polarizability_au

    sp = species(shot)
    if sp is None:
        return ()
    return tuple(TrapBeamShift(b.name, b.wavelength_m, float(dipole_potential_per_intensity(sp, b.wavelength_m)),
                               float(scalar_polarizability_au(sp, b.wavelength_m)))
                 for b in trap_beams(shot))


@dataclass(frozen=True, eq=False)
class HeldTrap:
    """Depth with gravity (J, 0 when nothing is held: the lowest escape route in 3-D, see
    seqgen.physics.optical.trap_escape), trap frequencies (rad/s, read-only, or None), recoil heating rate at the
    minimum (K/s, 0 when nothing is held) and the way out: unit vector from the minimum towards the lowest
    barrier (read-only, or None); the principal axes of the frequencies (columns, read-only, or None)."""

    depth: float
    omegas: np.ndarray | None
    heating: float = 0.0
    escape: np.ndarray | None = None
    axes: np.ndarray | None = None


@functools.lru_cache(maxsize=4096)
def held(sp, beams: tuple) -> HeldTrap:
    """The trap of one set of beams, keyed on content (species and the beams' powers and geometry), not on
    the shot: the shots of a scan, and the flat parts of a ramp, reuse each other's minimisations."""
    from ..physics import stored

    inputs = stored.exact((sp, beams))
    key = None if inputs is None else f"held|{stored.code_stamp()}|{inputs}"
    kept = None if key is None else stored.read("held-traps", key)  # an earlier run's (same code and inputs)
    if not (isinstance(kept, list) and len(kept) == 5):
        kept = _minimise(sp, beams)
        if key is not None:
            stored.write("held-traps", key, kept)
    depth, omegas, heating, escape, axes = kept
    if omegas is None:
        return HeldTrap(depth, None)
    omegas, escape, axes = (np.array(a, dtype=float) for a in (omegas, escape, axes))
    for a in (omegas, escape, axes):
        a.setflags(write=False)  # shared by every shot that meets these beams
    return HeldTrap(depth, omegas, heating, escape, axes)


def _minimise(sp, beams: tuple) -> list:
    """[depth, omegas or None, heating, escape or None, axes or None] of one set of beams, as plain floats
    (JSON)."""
    from ..physics.optical import held_trap_escape

    try:
        h = held_trap_escape(sp, beams)
    except (ValueError, RuntimeError, np.linalg.LinAlgError):
        return [0.0, None, 0.0, None, None]
    if h.omegas_rad_s is None:
        return [float(h.depth_j), None, 0.0, None, None]
    return [float(h.depth_j), [float(w) for w in np.asarray(h.omegas_rad_s, dtype=float)], float(h.heating_k_s),
            [float(e) for e in np.asarray(h.escape, dtype=float)],
            [[float(x) for x in row] for row in np.asarray(h.axes, dtype=float)]]


def trap_stage(shot, t0, t1, n=N_SAMPLES, heating=False, extra=()):
    """(times, frequencies (rad/s, shape (n, 3)), effective depths with gravity (J)) at n times in [t0, t1]
    (and at the `extra` times inside it); with `heating`, the recoil heating rates (K/s) at those times as a
    fourth item."""
    sp = species(shot)
    # just before t1: a release at the ramp's end time must not count as part of the ramp
    times = np.linspace(t0, t1 - 1e-9 * max(1.0, t1 - t0), n)
    if len(extra):
        times = np.unique(np.concatenate([times, [x for x in extra if t0 < x < times[-1]]]))
        n = len(times)
    omegas = np.full((n, 3), np.nan)
    depth_g = np.zeros(n)
    rates = np.zeros(n)
    for i, beams in enumerate(gaussian_beams(shot, times)):
        if not beams:
            continue
        h = held(sp, tuple(beams))
        depth_g[i] = h.depth
        rates[i] = h.heating
        if h.omegas is not None:
            omegas[i] = h.omegas
    return (times, omegas, depth_g, rates) if heating else (times, omegas, depth_g)


def trap_ramps(shot):
    return shot.actions("trap_ramp")


@dataclass(frozen=True, eq=False)
class TrapStage:
    """One trap ramp: times (s), omegas (rad/s, (n, 3)), depth_g (J), eta = final depth / k_B T (None without
    a temperature), adiabaticity = max |d omega/dt| / omega^2 and excitation E/E_ad - 1 per axis (None when the
    trap is lost somewhere); excitation_is_bound: the excitation is the bound adiabaticity^2, not integrated;
    heating: recoil heating over the ramp (K, trapezoid integral of dT/dt at the minimum) and the largest
    rate heating_rate (K/s); source: whether the powers were read from the compiled tables."""

    times: np.ndarray
    omegas: np.ndarray
    depth_g: np.ndarray
    eta: float | None = None
    adiabaticity: float | None = None
    excitation: tuple | None = None
    excitation_is_bound: bool = False
    heating: float = 0.0
    heating_rate: float = 0.0
    source: str = "played"  # "intended" when a trap beam's output could not be compiled (predict.played)
    omegas_before: np.ndarray | None = None  # a sudden step (set): the frequencies just before it (rad/s, (3,))
    min_ramp_s: float | None = None  # a sudden step: the shortest linear ramp of the same powers within the limit


@per_shot_cache(lambda shot, act: ("trap", act.index))
def trap_stage_prediction(shot, act) -> TrapStage:
    """Frequencies, depth, eta and excitation of one trap ramp (Ermakov invariant, adiabaticity parameter:
    seqgen.physics.adiabatic), as played: a later write to the beam's channel inside the ramp counts."""
    return span_prediction(shot, act.t0, act.t1)


@dataclass(frozen=True)
class TrapWrite:
    """A stretch where trap beams' power channels change: a `trap_ramp` (action set), or plain ramps and sets
    on trap beams' channels (segments: ramps that overlap in time form one stretch, evaluated together with
    every trap beam on; sets at one instant form a stretch of t0 == t1, looked at just after). beams: the
    beams written; others: segments of other actions that write those channels inside the stretch (a later
    set overriding a ramp)."""

    t0: float
    t1: float
    beams: tuple
    segments: tuple
    pos: object
    block: str
    action: object = None
    others: tuple = ()


PLAIN_WRITES = ("ramp", "set")  # plain writes on a trap beam's channel that the trap rules look at


@per_shot_cache(lambda shot: ("trap-writes",))
def trap_writes(shot) -> tuple:
    """Every TrapWrite of the shot, in time order: each `trap_ramp`, then the plain ramps and sets on trap
    beams' channels (a set inside a `trap_ramp` of its channel belongs to that ramp, as an override; plain writes
    that leave no trap beam on are releases and are not looked at)."""
    beams = {b.power_channel: b.name for b in trap_beams(shot)}
    segs = [x for x in shot.segments if x.output in beams]
    out = []
    ramps = trap_ramps(shot)
    for act in ramps:
        ch = act.args.get("output")
        others = tuple(x for x in segs if x.output == ch and x.action != "trap_ramp" and act.t0 < x.t0 < act.t1)
        out.append(TrapWrite(act.t0, act.t1, (act.args["beam"],), (), act.pos, act.block, act, others))
    plain = [x for x in segs if x.action in PLAIN_WRITES and not any(
        a.args.get("output") == x.output and a.t0 < x.t0 < a.t1 for a in ramps)]
    groups: list = []
    for x in sorted(plain, key=lambda x: (x.t0, x.t1, x.pos.line)):
        last = groups[-1] if groups else None
        if last and ((x.kind == "ramp" and last[1] > last[0] and last[0] <= x.t0 < last[1])
                     or (x.kind == "set" and last[0] == last[1] == x.t0)):
            last[2].append(x)
            last[1] = max(last[1], x.t1)
        else:
            groups.append([x.t0, x.t1, [x]])
    for t0, t1, members in groups:
        chans = {x.output for x in members}
        after = t1 + (_settle(shot, chans) if t1 == t0 else 0.0)
        on = gaussian_beams(shot, [after])[0]
        if not on:  # every trap beam off: a release by plain writes
            continue
        others = tuple(x for x in segs if x.output in chans and x not in members and t0 < x.t0 < t1)
        first = members[0]
        out.append(TrapWrite(t0, t1, tuple(dict.fromkeys(beams[x.output] for x in members)), tuple(members),
                             first.pos, first.block, None, others))
    return tuple(sorted(out, key=lambda w: (w.t0, w.t1)))


def _settle(shot, channels) -> float:
    """How long after a set its value is surely played: two ticks of the slowest device involved."""
    ticks = [shot.rig.devices[shot.rig.outputs[c].device].tick_s for c in channels
             if shot.rig.outputs[c].device in shot.rig.devices]
    return 2 * max(ticks, default=1e-6)


def write_prediction(shot, w: TrapWrite) -> TrapStage:
    """The TrapStage of a trap write: over [t0, t1] for a ramp, just after the set for a set."""
    if w.action is not None and not w.others:
        return trap_stage_prediction(shot, w.action)
    if w.others:  # look just after each overriding write too: a set inside a ramp may be a short glitch
        settle = _settle(shot, {x.output for x in w.others})
        return span_prediction(shot, w.t0, w.t1, N_SAMPLES, tuple(sorted(x.t0 + settle for x in w.others)))
    if w.t1 > w.t0:  # plain ramps are not reported row by row: the bound decides whenever it clears the limit
        return span_prediction(shot, w.t0, w.t1, N_SAMPLES, (), 1.0)
    chans = {x.output for x in w.segments}
    return step_prediction(shot, w.t0 - _lead(shot, chans), w.t0 + _settle(shot, chans))


def _lead(shot, channels) -> float:
    """How long before a set the old value is surely still played: two minimum intervals of the slowest device
    involved (a linearly interpolating device starts a step one minimum interval early)."""
    steps = [d.tick_s * max(1, d.min_interval_ticks) for d in
             (shot.rig.devices.get(shot.rig.outputs[c].device) for c in channels) if d is not None]
    return 2 * max(steps, default=1e-6)


RELEASE_RATIO = 0.1  # an axis whose frequency drops below this fraction is let go along it (a release), not excited


@per_shot_cache(lambda shot, before, after: ("trap-step", before, after))
def step_prediction(shot, before, after) -> TrapStage:
    """The TrapStage of a sudden step of the trap (sets): the trap just after it and, when a trap holds the
    atoms before and after and no axis is let go (frequency below RELEASE_RATIO of its value), the excitation
    per axis of a sudden change (seqgen.physics.adiabatic.sudden_energy_ratio) with the frequencies just before;
    when that passes the limit max_excitation, the shortest linear ramp of the same powers the check accepts."""
    from ..physics.adiabatic import sudden_energy_ratio

    base = span_prediction(shot, after, after, 1)
    _, w0, d0 = trap_stage(shot, before, before + 1e-12, n=1)
    w0, w1 = w0[0], base.omegas[0]
    if not (np.all(np.isfinite(w0)) and np.all(np.isfinite(w1)) and d0[0] > 0 and base.depth_g[0] > 0
            and np.all(w0 > 0) and np.all(w1 > 0)) or np.any(w1 < RELEASE_RATIO * w0):
        return base  # switched on from nothing, lost (physics.trap-lost), or a release along some axis
    exc = tuple(float(x) for x in sudden_energy_ratio(w0, w1) - 1.0)
    need = linear_ramp_time(shot, before, after) if max(exc) > shot.limits.max_excitation else None
    w0 = np.array(w0)
    w0.setflags(write=False)
    return TrapStage(base.times, base.omegas, base.depth_g, base.eta, None, exc, False, base.heating,
                     base.heating_rate, base.source, w0, need)


def linear_ramp_time(shot, before, after, n=N_SAMPLES) -> float | None:
    """The shortest linear ramp (s) of every trap beam's power from its value played at `before` to that at
    `after` whose adiabaticity parameter max |d omega/dt| / omega^2 stays below sqrt(max_excitation): the
    bound under which span_prediction takes a plain ramp's excitation as (adiabaticity)^2, within the limit.
    For a ramp of duration T the parameter is max |d omega/ds| / omega^2 / T (s = the ramp's fraction, 0..1).
    None when some power on the way holds no trap."""
    from ..physics.adiabatic import adiabaticity_parameter
    from ..physics.optical import GaussianBeam

    sp = species(shot)
    beams = trap_beams(shot)
    p0 = np.array([float(played(shot, b.power_channel, [before])[0]) for b in beams])
    p1 = np.array([float(played(shot, b.power_channel, [after])[0]) for b in beams])
    floors = np.array([off_floor(shot, b.power_channel) for b in beams])
    s = np.linspace(0.0, 1.0, n)
    omegas = np.full((n, 3), np.nan)
    for i, x in enumerate(s):
        p = p0 + x * (p1 - p0)
        on = tuple(GaussianBeam(float(q), b.waist_m, b.wavelength_m, b.direction, b.position_m, b.waist_y_m)
                   for b, q, f in zip(beams, p, floors) if q > f)  # as gaussian_beams builds them
        h = held(sp, on) if on else None
        if h is None or h.omegas is None or h.depth <= 0:
            return None
        omegas[i] = h.omegas
    rate = float(np.max(adiabaticity_parameter(s, omegas.T, axis=-1)))
    return rate / np.sqrt(shot.limits.max_excitation)


@per_shot_cache(lambda shot, t0, t1, n=N_SAMPLES, extra=(), bound=1e-2: ("trap-span", t0, t1, n, extra, bound))
def span_prediction(shot, t0, t1, n=N_SAMPLES, extra=(), bound=1e-2) -> TrapStage:
    """Frequencies, depth, eta and excitation of the trap over [t0, t1] (n = 1: the trap at t1 alone; extra:
    more times inside to look at). The excitation is the bound (adiabaticity parameter)^2 when that is under
    `bound` x the limit max_excitation, else integrated."""
    from ..physics.adiabatic import adiabaticity_parameter, ermakov_final_energy_ratio

    source = played_source(shot, *(b.power_channel for b in trap_beams(shot)))
    if n == 1:
        _, omegas, depth_g, rates = trap_stage(shot, t1, t1 + 1e-12, n=1, heating=True)
        eta = None
        if shot.sample is not None and shot.sample.temperature_k:
            eta = float(depth_g[-1] / (sc.k * shot.sample.temperature_k))
        return TrapStage(np.array([t1]), omegas, depth_g, eta, source=source)
    times, omegas, depth_g, rates = trap_stage(shot, t0, t1, n=n, heating=True, extra=extra)
    heat = (float(np.trapezoid(rates, times)), float(np.max(rates)))
    eta = adiabaticity = excitation = None
    if shot.sample is not None and shot.sample.temperature_k:
        eta = float(depth_g[-1] / (sc.k * shot.sample.temperature_k))
    if np.all(np.isfinite(omegas)) and np.all(depth_g > 0):
        adiabaticity = float(np.max(adiabaticity_parameter(times, omegas.T, axis=-1)))
        if adiabaticity ** 2 < shot.limits.max_excitation * bound:
            # the excess energy of a slow ramp stays below (adiabaticity parameter)^2 (checked in
            # tests/physics/test_adiabatic.py); integrating thousands of trap periods would add nothing
            return TrapStage(times, omegas, depth_g, eta, adiabaticity, (adiabaticity ** 2,) * 3, True, *heat,
                             source=source)
        exc = []
        for axis in range(3):
            w = omegas[:, axis]

            def omega_of_t(t, w=w):
                return np.interp(t, times, w)

            try:
                exc.append(ermakov_final_energy_ratio(omega_of_t, t0, t1, rtol=1e-8).energy_ratio - 1.0)
            except (ValueError, RuntimeError):
                exc.append(float("nan"))
        excitation = tuple(exc)
    return TrapStage(times, omegas, depth_g, eta, adiabaticity, excitation, False, *heat, source=source)


def trap_history(shot, sp, t_rel, samples: int):
    """The optical trap's stretches before t_rel, in time order: (times, omegas (n, 3) rad/s ascending per
    time, ramp) with the trap changing only where a trap beam's power channel is written: a set is a sudden
    change between stretches, a ramp is sampled `samples` times by `trap_stage`, a constant stretch has its two
    ends; omegas are NaN where no trap holds the atoms."""
    chans = {beam.power_channel for beam in trap_beams(shot)}
    segs = [g for g in shot.segments if g.output in chans and g.t0 < t_rel]
    ramps = [(g.t0, min(g.t1, t_rel)) for g in segs if g.t1 > g.t0]
    edges = sorted({g.t0 for g in segs} | {r1 for _, r1 in ramps} | {t_rel})
    for a, z in zip(edges[:-1], edges[1:]):
        if z - a < 1e-8:  # shorter than any trap period: a step
            continue
        ramp = any(r0 < z and r1 > a for r0, r1 in ramps)
        if ramp:
            times, omegas, _ = trap_stage(shot, a, z, n=samples)
        else:
            beams = gaussian_beams(shot, [0.5 * (a + z)])[0]
            w = held(sp, tuple(beams)).omegas if beams else None
            times = np.array([a, z])
            omegas = np.tile(w if w is not None else np.nan, (2, 1))
        yield times, omegas, ramp
