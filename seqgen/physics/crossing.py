"""A condensate pushed along a guide onto a thin light sheet that also drives its spin: the time-dependent
1D two-component simulation of `gpe`, set up from plain numbers (SI; no YAML, no seqgen types).

Coordinates along the push path: x = 0 the trap centre before the push, the sheet centred at `distance`.
Component a = the atoms' state, b = the partner level the modulated sheet couples it to, in the frame turning
with the modulation. Potentials:

    v(x, t)  = m omega_path(t)^2 x^2 / 2 - F(t) x + V0(t) exp(-2 (x - d)^2 / w_y^2)     (both components)
    v_b - v_a = shift(t) exp(-2 (x - d)^2 / w_y^2) + offset(t),  coupling hbar Omega(t) exp(-2 (x - d)^2 / w_y^2) / 2

the last two only within the sheet's window |x - d| < 3.5 w_y, as in the checks' stationary model
(`physics.barrier.spin_rotation`): the partner's internal offset in the turning frame (h times minus the
modulation's detuning) acts inside the window only, so the spin does not evolve outside the sheet and the
transmitted spin is read as it leaves it (the offset, tens of hertz, is far below the kinetic energy).

The initial state is the ground state of m omega_before^2 x^2 / 2 with the mean field (imaginary time).
Transmitted: beyond the sheet's centre (and what the right absorber took); reflected: the rest. The spin is
post-selected on transmission: the spin density matrix of the atoms beyond the sheet's far edge
(d + 3.5 w_y) plus the right absorber's, its Bloch vector in the (partner, initial) basis of
`seqgen.physics.spinor` and the angles of `spinor.spin_rotation_angles` about the coupling axis x from the
incident pole (0, 0, -1) (Phys. Rev. B 27, 6178 (1983)).
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import numpy as np
import scipy.fft as sfft
from scipy.constants import hbar

from . import gpe
from .barrier import GRID_HALF_WIDTH
from .spinor import spin_rotation_angles

N_RECORDS = 400  # time-course samples
N_PICTURE_X = 900  # at most this many position bins in the space-time picture
LEFT_MARGIN = 3.0  # the grid starts this many initial half-lengths before the trap centre
TRANSMITTED_ROOM = 40e-6  # m of free path beyond the sheet before the right absorber (common practice, no source)
ABSORBER_WAVELENGTHS = 20  # absorber width in de Broglie wavelengths at the push's speed (at least 30 um)
ABSORBER_MIN = 30e-6
STEPS_PER_WAIST = 40  # dt at most w_y / (40 v_top): the splitting error of the crossing stays ~1e-3 in T
SPIN_FLOOR = 1e-4  # the transmitted spin is read once this fraction of the atoms is across


@dataclass(frozen=True)
class Piece:
    """What acts from t0 to t1 (s from the push's start): force along the path (N), the trap's frequency along
    it (rad/s), the sheet's height (J), peak Rabi frequency (rad/s), the partner's extra light shift at the
    peak (J) and its internal offset in the frame turning with the modulation (J)."""

    t0: float
    t1: float
    force: float = 0.0
    omega_path: float = 0.0
    v0: float = 0.0
    rabi: float = 0.0
    shift: float = 0.0
    offset: float = 0.0


@dataclass(frozen=True)
class CrossingInput:
    """mass (kg), distance of the sheet (m), waist_y (m), omega_before (rad/s, the trap before the push along the
    path), pieces (tuple of Piece, in time order, covering [0, t_end]), t_end (s), g (1D coupling times the atom
    number, J m; 0: no interactions), v_top (m/s: the fastest velocity expected), on / off (s: the sheet)."""

    mass: float
    distance: float
    waist_y: float
    omega_before: float
    pieces: tuple
    t_end: float
    g: float
    v_top: float
    on: float
    off: float


@dataclass(frozen=True)
class Numerics:
    """The grid and step chosen (refine: 1, or 2 for the convergence run at half dx and dt)."""

    n: int
    dx: float
    x_min: float
    x_max: float
    dt: float
    steps: int
    absorber_width: float
    absorber_strength: float
    refine: int


@dataclass(frozen=True, eq=False)
class Crossing:
    """The simulated crossing (module notes). Fractions of the atoms; angles in rad (None: nothing transmitted);
    late: the fraction still before the sheet and moving towards it at the end (it never met the sheet);
    absorbed_left / absorbed_right: taken by the absorbers; norm_error: |1 - everything| at the end.
    Time courses (times s from the push's start): transmitted_t, reflected_t, bloch_t (nt, 3; nan before any
    transmission), precession_t, alignment_t. Picture: density (2, nt, nx) 1/m per component on x_picture.
    packet_k / packet_weight: the incident momentum distribution (rad/m) at packet_time (the sheet on, or the
    push's end if later), of the atoms before the sheet, centred at packet_x (m). mu (J) and energy (J per
    atom) of the initial state; mu_1d_peak: g n(0), the peak mean-field energy."""

    numerics: Numerics
    transmitted: float
    reflected: float
    late: float
    absorbed_left: float
    absorbed_right: float
    norm_error: float
    bloch: tuple | None
    rotation: float | None
    precession: float | None
    alignment: float | None
    times: np.ndarray
    transmitted_t: np.ndarray
    reflected_t: np.ndarray
    bloch_t: np.ndarray
    precession_t: np.ndarray
    alignment_t: np.ndarray
    x_picture: np.ndarray
    density: np.ndarray
    packet_k: np.ndarray
    packet_weight: np.ndarray
    packet_time: float
    packet_x: float
    mu: float
    energy: float
    mu_1d_peak: float
    seconds: float = 0.0


def sheet_profile(x, distance, waist_y):
    """exp(-2 (x - d)^2 / w_y^2)."""
    return np.exp(-2.0 * (np.asarray(x, dtype=float) - distance) ** 2 / waist_y**2)


def initial_half_length(inp: CrossingInput) -> float:
    """Half-length (m) of the initial cloud: the 1D Thomas-Fermi radius (g > 0) or 4 oscillator lengths."""
    m, w = inp.mass, inp.omega_before
    a_ho = math.sqrt(hbar / (m * w))
    if inp.g > 0:
        mu = (0.75 * inp.g * math.sqrt(m) * w / math.sqrt(2)) ** (2 / 3)
        return max(math.sqrt(2 * mu / (m * w**2)), 4 * a_ho)
    return 4 * a_ho


def choose_numerics(inp: CrossingInput, refine: int = 1) -> Numerics:
    """Grid and step from the physics (see `gpe.grid_spacing`, `gpe.time_step`): dx resolves the sheet and
    the fastest momentum m v_top / hbar (and the healing length at the initial peak density); the grid runs
    from LEFT_MARGIN initial half-lengths before the trap to TRANSMITTED_ROOM beyond the sheet's far edge,
    with absorbers outside both ends (ABSORBER_WAVELENGTHS de Broglie wavelengths at the push's speed); dt
    also resolves the crossing of the sheet (STEPS_PER_WAIST steps per w_y / v_top)."""
    m = inp.mass
    k_max = m * inp.v_top / hbar
    half = initial_half_length(inp)
    healing = None
    e_mf = 0.0
    if inp.g > 0:
        e_mf = (0.75 * inp.g * math.sqrt(m) * inp.omega_before / math.sqrt(2)) ** (2 / 3)
        healing = hbar / math.sqrt(2 * m * e_mf)
    dx = gpe.grid_spacing(k_max, inp.waist_y, healing) / refine
    v_push = max(abs(inp.v_top) / 3, 1e-6)
    width = max(ABSORBER_MIN, ABSORBER_WAVELENGTHS * 2 * math.pi * hbar / (m * v_push))
    x_min = -LEFT_MARGIN * half - width
    x_max = inp.distance + GRID_HALF_WIDTH * inp.waist_y + TRANSMITTED_ROOM + width
    grid = gpe.make_grid(x_min, x_max, dx)
    e_pot = max([abs(p.v0) + abs(p.shift) for p in inp.pieces] + [0.0])
    e_drive = max([math.hypot(hbar * p.rabi, p.offset) for p in inp.pieces] + [0.0])
    e_max = max(0.5 * m * inp.v_top**2, e_pot, e_mf, e_drive, 1e-40)
    dt = min(gpe.time_step(e_max, grid if inp.g else None, m), inp.waist_y / (STEPS_PER_WAIST * inp.v_top)) / refine
    steps = int(math.ceil(inp.t_end / dt))
    strength = gpe.absorber_strength(width, inp.v_top)
    return Numerics(grid.n, grid.dx, x_min, x_max, inp.t_end / steps, steps, width, strength, refine)


class _Drive:
    """The gpe.Local of each piece, built when asked for."""

    def __init__(self, inp: CrossingInput, grid: gpe.Grid):
        self.inp, self.grid = inp, grid
        lo, hi = (grid.index(inp.distance + s * GRID_HALF_WIDTH * inp.waist_y) for s in (-1, 1))
        self.window = slice(lo, hi + 1)
        self.profile = sheet_profile(grid.x, inp.distance, inp.waist_y)

    def local(self, i: int) -> gpe.Local:
        p = self.inp.pieces[i]
        x = self.grid.x
        v = 0.5 * self.inp.mass * p.omega_path**2 * x**2 - p.force * x + p.v0 * self.profile
        if not p.rabi:
            return gpe.Local(v)
        w = self.window
        prof = self.profile[w]
        return gpe.Local(v, w, np.zeros(prof.size), p.shift * prof + p.offset, p.rabi * prof)


def bloch_of(rho) -> np.ndarray:
    """Bloch vector in the (partner, initial) basis of `spinor.bloch_vector` from rho_ij = sum psi_i conj(psi_j)
    over (initial a, partner b): s = (2 Re rho_ab, 2 Im rho_ab, rho_bb - rho_aa) / trace."""
    tr = float(np.real(rho[0, 0] + rho[1, 1]))
    if not tr > 0:
        return np.full(3, np.nan)
    return np.array([2 * rho[0, 1].real, 2 * rho[0, 1].imag, (rho[1, 1] - rho[0, 0]).real]) / tr


def angles_of(bloch):
    """(rotation from the incident pole, precession about x, alignment towards -x) of a Bloch vector."""
    s = np.asarray(bloch, dtype=float)
    rotation = float(np.arctan2(np.hypot(s[0], s[1]), -s[2]))
    prec, align = spin_rotation_angles(np.array([0.0, 0.0, -1.0]), s, (1.0, 0.0, 0.0))
    return rotation, float(prec), float(align)


def simulate_crossing(inp: CrossingInput, refine: int = 1) -> Crossing:
    """Run the crossing (module notes) on the numerics of `choose_numerics(inp, refine)`."""
    import time

    start = time.perf_counter()
    num = choose_numerics(inp, refine)
    grid = gpe.make_grid(num.x_min, num.x_max, num.dx)
    m = inp.mass
    # the initial state on a small grid of the same spacing around the trap, then placed on the big one
    half = initial_half_length(inp)
    i0, i1 = grid.index(-2.5 * half), grid.index(2.5 * half)
    small = gpe.Grid(grid.x[i0:i1 + 1], grid.dx, 2 * np.pi * sfft.fftfreq(i1 + 1 - i0, grid.dx))
    gs = gpe.ground_state(small, m, 0.5 * m * inp.omega_before**2 * small.x**2, inp.g, tol=1e-10)
    psi = np.zeros((2, grid.n), dtype=complex)
    psi[0, i0:i1 + 1] = gs.psi
    psi /= math.sqrt(np.sum(np.abs(psi) ** 2) * grid.dx)
    mu_peak = inp.g * float(np.max(gs.psi**2))

    x, dx = grid.x, grid.dx
    i_mid = grid.index(inp.distance)
    i_far = grid.index(inp.distance + GRID_HALF_WIDTH * inp.waist_y) + 1
    i_near = grid.index(inp.distance - GRID_HALF_WIDTH * inp.waist_y)
    bins = max(1, int(math.ceil(grid.n / N_PICTURE_X)))
    nb = grid.n // bins
    packet_time = max(inp.on, next((p.t1 for p in inp.pieces if p.force), 0.0))
    rec = dict(t=[], T=[], R=[], bloch=[], dens=[])
    packet = {}

    def read(t, p, ev):
        n = gpe.density(p)
        tr = float(np.sum(n[i_mid:]) * dx) + float(np.real(np.trace(ev.absorbed_right)))
        rf = float(np.sum(n[:i_mid]) * dx) + float(np.real(np.trace(ev.absorbed_left)))
        rho = np.einsum("ix,jx->ij", p[:, i_far:], np.conj(p[:, i_far:])) * dx + ev.absorbed_right
        if not np.real(np.trace(rho)) > SPIN_FLOOR:  # too few across to read a spin
            rho = np.zeros((2, 2))
        rec["t"].append(t)
        rec["T"].append(tr)
        rec["R"].append(rf)
        rec["bloch"].append(bloch_of(rho))
        rec["dens"].append((np.abs(p[:, :nb * bins]) ** 2).reshape(2, nb, bins).mean(axis=2))
        if "k" not in packet and t >= packet_time - 0.5 * num.dt:
            f = np.abs(sfft.fft(p[0, :i_near])) ** 2
            packet["k"], packet["w"], packet["t"] = 2 * np.pi * sfft.fftfreq(i_near, dx), f / max(f.sum(), 1e-300), t
            packet["x"] = float(np.sum(x[:i_near] * n[:i_near]) / max(np.sum(n[:i_near]), 1e-300))

    ab = gpe.Absorber(int(round(num.absorber_width / dx)), num.absorber_strength)
    drive = _Drive(inp, grid)
    record_dt = inp.t_end / N_RECORDS

    def observe(k, t, p, ev):
        if not rec["t"] or t > rec["t"][-1] + 1e-3 * record_dt:
            read(t, p, ev)

    # piece by piece, each in whole steps of at most dt: the drive changes only between steps
    ev = gpe.Evolution(psi, 0.0, np.zeros((2, 2), complex), np.zeros((2, 2), complex), 0)
    steps = 0
    for i, p in enumerate(inp.pieces):
        n = max(1, int(math.ceil((p.t1 - p.t0) / num.dt - 1e-9)))
        step = (p.t1 - p.t0) / n
        every = max(1, int(round(record_dt / step)))
        loc = drive.local(i)
        ev = gpe.evolve(ev.psi, grid, m, step, n, lambda t, loc=loc: loc, t0=p.t0, g=inp.g, absorber=ab,
                        observe=observe, observe_every=every, absorbed=(ev.absorbed_left, ev.absorbed_right))
        steps += n
    observe(steps, ev.t, ev.psi, ev)
    psi = ev.psi
    n = gpe.density(psi)
    # late: before the sheet and moving towards it (current j = hbar/m Im(conj(psi) dpsi/dx) > 0)
    dpsi = sfft.ifft(1j * grid.k * sfft.fft(psi, axis=-1), axis=-1)
    current = hbar / m * np.sum(np.imag(np.conj(psi) * dpsi), axis=0)
    late = float(np.sum(n[:i_near][current[:i_near] > 0]) * dx)
    bl = rec["bloch"][-1]
    ok = bool(np.all(np.isfinite(bl)))
    angles = angles_of(bl) if ok else (None, None, None)
    bt = np.array(rec["bloch"])
    prec_t = np.full(len(bt), np.nan)
    align_t = np.full(len(bt), np.nan)
    for i, b in enumerate(bt):
        if np.all(np.isfinite(b)):
            _, prec_t[i], align_t[i] = angles_of(b)
    left = float(np.real(np.trace(ev.absorbed_left)))
    right = float(np.real(np.trace(ev.absorbed_right)))
    total = float(np.sum(n) * dx) + left + right
    if "k" not in packet:
        packet.update(k=np.zeros(1), w=np.ones(1), t=packet_time, x=0.0)
    return Crossing(dataclasses.replace(num, steps=steps), rec["T"][-1], rec["R"][-1], late, left, right,
                    abs(1.0 - total),
                    tuple(float(v) for v in bl) if ok else None, *angles,
                    np.array(rec["t"]), np.array(rec["T"]), np.array(rec["R"]), bt, prec_t, align_t,
                    x[:nb * bins].reshape(nb, bins).mean(axis=1), np.array(rec["dens"]).transpose(1, 0, 2),
                    packet["k"], packet["w"], packet["t"], packet["x"], gs.mu, gs.energy, mu_peak,
                    time.perf_counter() - start)
