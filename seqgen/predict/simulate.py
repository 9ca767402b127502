"""The push-and-barrier stage of a shot simulated in time (`seqgen simulate`): the 1D two-component
Gross-Pitaevskii crossing of `seqgen.physics.crossing`, set up from what the hardware plays, beside the
stationary prediction of the `physics.barrier-*` checks (`predict.barrier.analyse`).

From the shot:
* the barrier: the first `barrier` action with a push before it that sends the atoms towards it (as the
  checks see it: `barrier.incident_velocity`); the path is that push's direction, the sheet at
  `barrier.sheet_distance` along it;
* the force along the path while the push plays: the moment -dE/dB of the state (`pushes.push_analysis`)
  times the coil's gradient per ampere times the played coil current; an optical push or a push without a
  usable moment: the speed the checks use, reached uniformly over the push;
* the sheet: its played power (height from `physics.barrier.barrier_height`) and, for a modulated sheet, the
  played modulation depth and frequency: Rabi frequency and differential light shift from the same
  calibration as the checks (`physics.drive.two_photon_rabi_from_modulated_beam`, circular light), the
  detuning from the Breit-Rabi line at the rig's bias;
* the trap: the trap beams on just before the push (their trap's frequency along the path; or
  `sample.trap_frequencies`) for the initial ground state; the trap beams played after the push starts
  (piecewise constant between their writes) along the path during the flight; the transverse frequency of
  the guide (geometric mean of the two frequencies across the path) gives g1D = 2 hbar omega_perp a
  (Phys. Rev. Lett. 81, 938 (1998)), a the sample state's scattering length.
The simulation runs from the push's start until the sheet is off and the atoms in it have left it. It is
run once more at half dx and half dt (the change is the convergence estimate).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import constants as sc

from ..physics.barrier import GRID_HALF_WIDTH, barrier_height, gaussian_profile, sheet_grid, spin_rotation
from ..physics.crossing import CrossingInput, Piece, angles_of, choose_numerics, simulate_crossing
from ..physics.gpe import g1d
from ..physics.passage import path_frequency
from .barrier import analyse, incident_velocity, sheet_distance
from .played import played, track
from .pushes import push_analysis
from .species import gaussian_beams, sample_state, scattering_length, species, trap_beams, trap_before

TOLERANCE_T = 0.05  # |T simulated - T stationary| beyond which the stationary model does not hold for the shot
TOLERANCE_ROTATION = 0.25  # relative change of the rotation angle, and ...
TOLERANCE_ROTATION_ABS = 1e-3  # ... at least this much (rad)
REASON_SHARE = 0.5  # a cause is named when it alone accounts for half the tolerance
LATE_FRACTION = 0.02  # atoms that never met the sheet, named as a cause beyond this fraction
ONE_D_LIMIT = 1.0  # mu_1D / hbar omega_perp above this: the atoms fill more than the guide's ground state
MAX_POINTS = 2**18  # grids beyond this, or ...
MAX_WORK = 1e9  # ... points x steps beyond this (the demo: 8e7), are refused: past it a run takes minutes (with the
#                  convergence run at half dx and dt, four times as long again), silently
V_TOP_SIGMAS = 4.0  # the fastest velocity expected: push + 4 spreads, or + 1.5 times the 1D release's edge


@dataclass(frozen=True)
class NoSimulation:
    """Why the shot has nothing to simulate (message text in `seqgen.simulation`): reason, barrier (the
    action, or None), size ((points, steps) of a grid refused as too large)."""

    reason: str
    barrier: object = None
    size: tuple = ()


@dataclass(frozen=True, eq=False)
class Setup:
    """The simulation input from the shot: the barrier and push actions, the state and its partner, atoms,
    direction of the path, omega_perp (rad/s, None: no guide), scattering length (m), g1D (J m), interactions,
    the crossing input, the peak Rabi frequency met (rad/s; 0: no drive), the drive's offset (J), shift (J)
    and the sheet's time-averaged height V0 (J), held (trap beams on after the push), requested (interactions
    asked for: without a guide across the path or a scattering length they stay off)."""

    barrier: object
    push: object
    state: tuple
    partner: tuple | None
    atoms: float
    direction: tuple
    omega_perp: float | None
    scattering_length: float | None
    g1d: float
    interactions: bool
    crossing: CrossingInput
    rabi: float
    offset: float
    shift: float
    v0: float
    held: tuple
    requested: bool = True


@dataclass(frozen=True, eq=False)
class Stationary:
    """The stationary model over a velocity distribution: T, and the transmitted spin's rotation, precession
    and alignment (rad, None without a drive)."""

    T: float
    rotation: float | None = None
    precession: float | None = None
    alignment: float | None = None


@dataclass(frozen=True, eq=False)
class Simulation:
    """`seqgen simulate` of one shot: the setup, the crossing (`physics.crossing.Crossing`), the convergence run
    (half dx and dt; None when not asked), the checks' stationary prediction (`BarrierPrediction`), the
    stationary model averaged over the simulated packet's own momenta (`Stationary`), disagrees (beyond the
    tolerances), reasons ((name, number) pairs: "velocity_spread", "finite_barrier_time",
    "mean_field", "time_dependence"), one_d (mu_1D / hbar omega_perp)."""

    setup: Setup
    crossing: object
    fine: object
    stationary: object
    packet: Stationary
    disagrees: bool
    reasons: tuple
    one_d: float | None


def find_barrier(shot):
    """(barrier action, Incident) of the first barrier that pushed atoms meet, or a NoSimulation."""
    if species(shot) is None or shot.sample is None:
        return NoSimulation("no_sample")
    acts = shot.actions("barrier")
    if not acts:
        return NoSimulation("no_barrier")
    for act in acts:
        inc = incident_velocity(shot, act)
        if inc is not None and inc.speed > 0:
            return act, inc
    return NoSimulation("no_push", acts[0])


def _trap(sp, beams: tuple):
    """(omegas, axes) of the trap of these beams, or (None, None)."""
    from ..physics.optical import find_trap_minimum

    if not beams:
        return None, None
    try:
        t = find_trap_minimum(sp, list(beams))
    except (ValueError, RuntimeError, np.linalg.LinAlgError):
        return None, None
    w = np.asarray(t.omegas_rad_s, dtype=float)
    return (w, np.asarray(t.axes, dtype=float)) if np.all(np.isfinite(w)) and np.all(w > 0) else (None, None)


def _trap_at(shot, t, direction, flight: bool = False, memo=None):
    """(omega along the path, omega_perp or None, names of the beams on) at time t; (0, None, ()) without.
    `sample.trap_frequencies` is the trap before the push; in `flight` it holds across the path only (the
    checks' free release along it). `memo`: a dict reused by one caller for the same beams at other times."""
    s = shot.sample
    if s.trap_frequencies_hz:
        w = 2 * np.pi * np.asarray(s.trap_frequencies_hz, dtype=float)
        axes = np.eye(3)
    else:
        beams = tuple(gaussian_beams(shot, [t])[0])
        memo = {} if memo is None else memo
        if beams not in memo:
            memo[beams] = _trap(species(shot), beams)
        w, axes = memo[beams]
        if w is None:
            return 0.0, None, ()
    along = 0.0 if flight and s.trap_frequencies_hz else path_frequency(w, axes, direction)
    cos = np.abs(axes.T @ np.asarray(direction, dtype=float))
    across = np.argsort(cos)[:2]  # the two axes most nearly across the path
    names = tuple(b.name for b in trap_beams(shot) if played(shot, b.power_channel, [t])[0] > 0)
    return along, float(np.sqrt(np.prod(w[across]))), names


def _changes(shot, output, t0, t1):
    if output is None or output not in shot.rig.outputs:
        return []
    tr = track(shot, output)
    if tr.source == "played":
        return list(tr.changes(t0, t1))
    return [x for seg in shot.segments if seg.output == output for x in (seg.t0, seg.t1) if t0 < x < t1]


def _drive_at(shot, sp, beam, waist_y, power, depth, f_mod, initial, partner):
    """(rabi rad/s, shift J, offset J) of the modulated sheet at these played values (as the checks)."""
    from ..physics.drive import two_photon_rabi_from_modulated_beam
    from ..physics.optical import modulated_peak_intensity
    from ..physics.zeeman import transition_frequency

    if partner is None or not depth or power <= 0 or partner[1] != initial[1]:
        return 0.0, 0.0, 0.0
    try:
        i_peak = float(modulated_peak_intensity(power, beam.waist_m, waist_y, depth))
        d = two_photon_rabi_from_modulated_beam(i_peak, depth, beam.wavelength_m, m_f=initial[1],
                                                polarization=1.0, atom=sp)
        f = float(transition_frequency(initial[0], initial[1], partner[0], partner[1],
                                       shot.rig.bias_field_t or 0.0, atom=sp))
    except (ValueError, TypeError):
        return 0.0, 0.0, 0.0
    sign = 1.0 if f > 0 else -1.0
    detuning_hz = (f_mod - abs(f)) if f_mod else 0.0
    offset = -sign * sc.h * detuning_hz  # the partner's energy in the frame turning with the modulation
    return float(d.rabi_rad_s), sign * float(d.differential_light_shift_j), offset


def build_setup(shot, interactions: bool = True):
    """The simulation input of the shot (module notes), or a NoSimulation saying why there is none."""
    found = find_barrier(shot)
    if isinstance(found, NoSimulation):
        return found
    act, inc = found
    sp, s = species(shot), shot.sample
    pred = analyse(shot, act)
    beam = shot.rig.beams.get(act.args["beam"])
    if pred is None or beam is None:
        return NoSimulation("no_prediction", act)
    if not (s.condensed and s.atoms):
        return NoSimulation("not_condensed", act)
    direction = tuple(np.asarray(inc.direction, dtype=float) / np.linalg.norm(inc.direction))
    push = inc.push
    t0 = push.t0
    w_before, _, _ = _trap_at(shot, trap_before(shot, t0), direction)
    if not w_before:
        return NoSimulation("no_trap", act)
    m = sp.mass_kg
    waist_y = beam.waist_y_m or beam.waist_m
    on, off = act.t0 - t0, act.t1 - t0
    t_end = off + 2 * GRID_HALF_WIDTH * waist_y / inc.speed
    # pieces: every change of what is played between the push's start and the end
    coil = shot.rig.coils.get(push.args.get("coil")) if "coil" in push.args else None
    mod_freq_out = act.args.get("mod_channel")
    mod_amp_out = mod_freq_out.rsplit(".", 1)[0] + ".amp" if mod_freq_out else None
    outs = [beam.power_channel, mod_freq_out, mod_amp_out, coil.current_channel if coil else None]
    outs += [b.power_channel for b in trap_beams(shot)]
    cuts = {0.0, t_end, push.t1 - t0, on, off}
    for o in outs:
        cuts.update(c - t0 for c in _changes(shot, o, t0, t0 + t_end))
    cuts = sorted(c for c in cuts if 0.0 <= c <= t_end)
    rep = push_analysis(shot, push)
    moment = rep.moment if rep and rep.kind == "magnetic" and not rep.no_force else None
    initial = (s.F, s.mF)
    partner = pred.drive.partner if pred.drive is not None and pred.drive.unsupported is None else None
    pieces, held, omega_perp, rabi_max, traps = [], set(), None, 0.0, {}
    drive_cache, v0s = {}, []
    for a, b in zip(cuts, cuts[1:]):
        if b <= a:
            continue
        tm = t0 + 0.5 * (a + b)
        force = 0.0
        if push.t0 <= tm <= push.t1:
            if moment is not None and coil is not None and coil.gradient_per_amp:
                force = abs(moment * coil.gradient_per_amp * float(played(shot, coil.current_channel, [tm])[0]))
            else:
                force = m * inc.speed / float(push.args["duration"])
        w_path, w_perp, names = _trap_at(shot, tm, direction, flight=True, memo=traps)
        held.update(names)
        if w_perp and omega_perp is None and tm >= push.t0:
            omega_perp = w_perp
        power = float(played(shot, beam.power_channel, [tm])[0])
        v0 = barrier_height(sp, beam.wavelength_m, power, beam.waist_m, waist_y) if power > 0 else 0.0
        depth = float(played(shot, mod_amp_out, [tm])[0]) if mod_amp_out in shot.rig.outputs else (
            float(act.args.get("mod_depth") or 0.0) if on <= 0.5 * (a + b) <= off else 0.0)
        f_mod = float(played(shot, mod_freq_out, [tm])[0]) if mod_freq_out in shot.rig.outputs else (
            act.args.get("mod_frequency"))
        key = (power, depth, f_mod)
        if key not in drive_cache:
            drive_cache[key] = _drive_at(shot, sp, beam, waist_y, power, depth, f_mod, initial, partner)
        rabi, shift, offset = drive_cache[key]
        rabi_max = max(rabi_max, rabi)
        if v0 > 0:
            v0s.append(v0)
        pieces.append(Piece(a, b, force, w_path, v0, rabi, shift, offset))
    if omega_perp is None:
        _, omega_perp, _ = _trap_at(shot, trap_before(shot, t0), direction)
    a_s = scattering_length(sp, sample_state(shot))
    use = bool(interactions and omega_perp and a_s and a_s > 0)
    g = g1d(omega_perp, a_s) * s.atoms if use else 0.0
    spread = max(pred.sigma_v, math.sqrt(sc.hbar * w_before / (2 * m)))
    v_top = inc.speed + V_TOP_SIGMAS * spread
    if g > 0:
        mu = (0.75 * g * math.sqrt(m) * w_before / math.sqrt(2)) ** (2 / 3)
        v_top = max(v_top, inc.speed + 3.0 * math.sqrt(mu / m))  # the 1D release reaches 2 sqrt(mu/m)
    d = sheet_distance(shot, act, inc)
    cross = CrossingInput(m, d, waist_y, w_before, tuple(pieces), t_end, g, v_top, on, off)
    num = choose_numerics(cross)
    if not (num.n <= MAX_POINTS and num.n * num.steps <= MAX_WORK):
        return NoSimulation("too_large", act, (num.n, num.steps))
    drive = pred.drive
    return Setup(act, push, initial, partner, float(s.atoms), direction, omega_perp, a_s, g1d(omega_perp, a_s)
                 if omega_perp and a_s else 0.0, use, cross, rabi_max,
                 float(drive.offset_j) if drive is not None and drive.offset_j is not None else 0.0,
                 float(drive.shift_j) if drive is not None and drive.shift_j is not None else 0.0,
                 float(np.mean(v0s)) if v0s else 0.0, tuple(sorted(held)), bool(interactions))


def stationary_over_packet(setup: Setup, crossing) -> Stationary:
    """The stationary single-atom model of the checks (same sheet grid and solvers) averaged over the
    simulated packet's momentum distribution before the sheet (`Crossing.packet_k`, `packet_weight`), each
    energy lowered by the guide's potential m omega^2 (d^2 - x_c^2) / 2 between the packet's centre x_c and
    the sheet (omega the trap along the path then): the energies the atoms meet the sheet with."""
    from ..physics.scattering import transmission

    inp = setup.crossing
    m = inp.mass
    k, w = np.asarray(crossing.packet_k), np.asarray(crossing.packet_weight)
    keep = (k > 0) & (w > 1e-12 * max(w.max(), 1e-300))
    if not np.any(keep) or setup.v0 <= 0:
        return Stationary(1.0 if setup.v0 <= 0 else 0.0)
    k, w = k[keep], w[keep]
    # bins of the momentum grid, at most 160 energies
    edges = np.linspace(k.min(), k.max() * (1 + 1e-12), min(160, k.size) + 1)
    idx = np.clip(np.digitize(k, edges) - 1, 0, edges.size - 2)
    wb = np.bincount(idx, weights=w, minlength=edges.size - 1)
    kb = np.bincount(idx, weights=w * k, minlength=edges.size - 1) / np.where(wb > 0, wb, 1.0)
    kb, wb = kb[wb > 0], wb[wb > 0]
    piece = next((p for p in inp.pieces if p.t0 <= crossing.packet_time < p.t1), inp.pieces[-1])
    climb = 0.5 * m * piece.omega_path**2 * (inp.distance**2 - crossing.packet_x**2)
    energies = 0.5 * (sc.hbar * kb) ** 2 / m - climb
    total = float(np.sum(wb))
    kb, wb, energies = kb[energies > 0], wb[energies > 0], energies[energies > 0]  # the rest turns back
    if not wb.size:
        return Stationary(0.0)
    e_top = max(float(energies.max()), setup.v0) + abs(setup.offset) + abs(setup.shift)
    x = sheet_grid(inp.waist_y, math.sqrt(2 * m * e_top) / sc.hbar)
    profile = gaussian_profile(inp.waist_y)
    v0 = setup.v0
    try:
        t = np.clip(transmission(x, lambda xx: v0 * profile(xx), energies, m).T, 0.0, 1.0)
    except ValueError:
        return Stationary(0.0)
    T = float(np.sum(wb * t) / total)
    if not setup.rabi or T <= 0:
        return Stationary(T)
    try:
        r = spin_rotation(x, profile, v0, setup.rabi, energies, m, partner_shift_j=setup.shift,
                          partner_offset_j=setup.offset)
    except ValueError:
        return Stationary(T)
    wp = wb * np.asarray(r.probability)
    if not np.sum(wp) > 0:
        return Stationary(T)
    # the transmitted ensemble's mean Bloch vector, read as the simulation reads its own
    s = np.sum(wp[:, None] * np.asarray(r.clock.bloch), axis=0) / np.sum(wp)
    rot, prec, align = angles_of(s)
    return Stationary(T, rot, prec, align)


def _differs(a, b) -> bool:
    if a is None or b is None:
        return False
    return abs(a - b) > max(TOLERANCE_ROTATION * abs(b), TOLERANCE_ROTATION_ABS)


def missed_sheet(setup: Setup, crossing) -> float:
    """The fraction that never met the sheet while it was on: crossed after it went off, or still on its way."""
    t_off = float(np.interp(setup.crossing.off, crossing.times, crossing.transmitted_t))
    return max(crossing.transmitted - t_off, 0.0) + crossing.late


def compare(setup: Setup, crossing, stationary, packet: Stationary):
    """(disagrees, reasons) of the simulation against the checks' stationary prediction (module constants).
    Reasons: the stationary model over the simulated packet differs from the checks' ("velocity_spread":
    the change of T); atoms that never met the sheet ("finite_barrier_time": their fraction); what is left
    once those are counted as meeting it ("mean_field" with interactions, else "time_dependence")."""
    t_sim, t_stat = crossing.transmitted, float(stationary.T)
    disagrees = abs(t_sim - t_stat) > TOLERANCE_T or _differs(crossing.rotation, stationary.rotation)
    reasons = []
    if abs(packet.T - t_stat) > REASON_SHARE * TOLERANCE_T or _differs(packet.rotation, stationary.rotation):
        reasons.append(("velocity_spread", packet.T - t_stat))
    missed = missed_sheet(setup, crossing)
    if missed > LATE_FRACTION:
        reasons.append(("finite_barrier_time", missed))
    t_off = float(np.interp(setup.crossing.off, crossing.times, crossing.transmitted_t))
    dyn = t_off + missed * packet.T - packet.T  # the missed atoms counted as meeting the sheet
    if abs(dyn) > REASON_SHARE * TOLERANCE_T or _differs(crossing.rotation, packet.rotation):
        reasons.append(("mean_field" if setup.interactions else "time_dependence", dyn))
    return disagrees, tuple(reasons)


def simulate(shot, *, interactions: bool = True, convergence: bool = True):
    """`seqgen simulate` of one shot: a Simulation, or a NoSimulation saying why there is none."""
    setup = build_setup(shot, interactions)
    if isinstance(setup, NoSimulation):
        return setup
    crossing = simulate_crossing(setup.crossing)
    fine = simulate_crossing(setup.crossing, refine=2) if convergence else None
    stationary = analyse(shot, setup.barrier)
    packet = stationary_over_packet(setup, crossing)
    disagrees, reasons = compare(setup, crossing, stationary, packet)
    one_d = None
    if setup.omega_perp and setup.g1d:
        one_d = crossing.mu_1d_peak / (sc.hbar * setup.omega_perp) if setup.interactions else None
    return Simulation(setup, crossing, fine, stationary, packet, disagrees, reasons, one_d)
