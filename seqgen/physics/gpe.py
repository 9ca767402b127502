"""Time-dependent 1D Gross-Pitaevskii equation for two coupled components (SI units, numpy, no YAML).

    i hbar d/dt (a, b) = [-hbar^2/(2m) d^2/dx^2 + v(x, t) + g |psi|^2 + H_ab(x, t)] (a, b)

with |psi|^2 = |a|^2 + |b|^2 (psi normalised to 1, `g` the 1D coupling times the atom number; one coupling for
every pair of components), v the potential both components see and H_ab a 2x2 Hermitian matrix that is non-zero
only in a window of the grid:

    H_ab = [[v_a, hbar Omega/2 exp(-i delta t)], [hbar Omega/2 exp(+i delta t), v_b]]

(the two hyperfine components coupled by a modulated light sheet, in the frame of the bare atom: a detuning
delta of the drive from the line rotates the coupling's phase). Solved by second-order Strang splitting
(J. Comput. Phys. 187, 318 (2003) for split-step Fourier with a nonlinearity): half a local step, a kinetic
step exact in momentum space, half a local step; the half local steps of consecutive steps are taken as one.
The local step is exact: g |psi|^2 is the same for both components and does not change under the local 2x2
unitary, so exp(-i (v + g n + H_ab) dt / hbar) is applied as it stands, the 2x2 exponential in closed form
per point. Ground states by the same splitting in imaginary time with renormalisation.

Effective 1D coupling of atoms held in the transverse ground state of a harmonic guide of frequency omega_perp:
g1D = 2 hbar omega_perp a (Phys. Rev. Lett. 81, 938 (1998), the limit a << transverse oscillator length).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.fft as sfft
from scipy.constants import hbar

CELLS_PER_FEATURE = 12  # grid cells across the narrowest potential feature (barrier 1/e^2 half-width)
HEALING_CELLS = 1.5  # grid cells per healing length hbar / sqrt(2 m mu)
K_MARGIN = 1.25  # Nyquist momentum over the fastest momentum expected
DT_FRACTION = 0.5  # dt = DT_FRACTION hbar / (largest energy): transmissions to a few 1e-4 (halving dt: error / 4)
ABSORB_EVERY = 8  # steps between two applications of the absorbing mask (its strength scales with it)
SUPPORT_FLOOR = 1e-13  # the mean-field phase is computed where the density is above this fraction of its peak
PADE_LIMIT = 0.1  # largest mean-field phase per step taken by the Pade form of exp(i angle) (else cos, sin)
SUPPORT_PAD = 32  # cells added on each side of that region (it is found again every ABSORB_EVERY steps)


def g1d(omega_perp_rad_s: float, scattering_length_m: float) -> float:
    """Effective 1D coupling (J m) in a harmonic guide's transverse ground state: 2 hbar omega_perp a
    (Phys. Rev. Lett. 81, 938 (1998))."""
    return 2.0 * hbar * float(omega_perp_rad_s) * float(scattering_length_m)


@dataclass(frozen=True, eq=False)
class Grid:
    """Uniform periodic grid: x (m, n points), dx (m), k (rad/m, FFT order)."""

    x: np.ndarray
    dx: float
    k: np.ndarray

    @property
    def n(self) -> int:
        return int(self.x.size)

    def index(self, x_m: float) -> int:
        """Index of the grid point nearest to x_m (clipped to the grid)."""
        return int(min(max(round((float(x_m) - float(self.x[0])) / self.dx), 0), self.n - 1))


def smooth_size(n: int) -> int:
    """The smallest 2^a 3^b 5^c >= n (the fastest FFT lengths)."""
    best = 1 << max(int(n) - 1, 0).bit_length()
    p5 = 1
    while p5 < best:
        p35 = p5
        while p35 < best:
            m = p35
            while m < n:
                m *= 2
            best = min(best, m)
            p35 *= 3
        p5 *= 5
    return best


def make_grid(x_min: float, x_max: float, dx: float) -> Grid:
    """Grid over [x_min, x_max) with spacing at most dx and a number of points fast for the FFT."""
    n = smooth_size(max(int(math.ceil((x_max - x_min) / dx)), 16))
    step = (x_max - x_min) / n
    x = x_min + step * np.arange(n)
    return Grid(x, step, 2.0 * np.pi * sfft.fftfreq(n, step))


def grid_spacing(k_max: float, feature_m: float, healing_m: float | None = None) -> float:
    """dx resolving the fastest momentum (Nyquist K_MARGIN times above k_max), the narrowest feature
    (CELLS_PER_FEATURE cells) and the healing length (HEALING_CELLS cells)."""
    dx = min(math.pi / (K_MARGIN * k_max), feature_m / CELLS_PER_FEATURE)
    if healing_m:
        dx = min(dx, healing_m / HEALING_CELLS)
    return dx


def time_step(e_max_j: float, grid: Grid | None = None, mass: float | None = None) -> float:
    """dt = DT_FRACTION hbar / E_max (E_max the largest kinetic, potential or interaction energy met), and
    with a grid below pi hbar over its largest kinetic energy: beyond that split-step Fourier for the
    nonlinear equation can be unstable (SIAM J. Numer. Anal. 23, 485 (1986))."""
    dt = DT_FRACTION * hbar / float(e_max_j)
    if grid is not None and mass:
        dt = min(dt, 0.9 * math.pi * hbar / (0.5 * hbar**2 * float(np.max(grid.k**2)) / mass))
    return dt


@dataclass(frozen=True, eq=False)
class Local:
    """The local part of the Hamiltonian at one time: v (J, n points) seen by both components; in `window`
    (a slice of the grid, or None) also va, vb (J, relative to v) and omega (rad/s: off-diagonal
    hbar omega / 2), its phase turning at delta (rad/s)."""

    v: np.ndarray
    window: slice | None = None
    va: np.ndarray | None = None
    vb: np.ndarray | None = None
    omega: np.ndarray | None = None
    delta: float = 0.0


def pair_exponential(va, vb, omega, dt: float):
    """exp(-i H dt / hbar) for H = [[va, hbar omega/2], [hbar omega/2, vb]] per point: (u00, u01, u11),
    u10 = u01. With h = (hbar omega/2, 0, (va - vb)/2) and theta = |h| dt / hbar:
    exp(-i (va + vb) dt / (2 hbar)) [cos theta - i sin theta (h . sigma) / |h|]."""
    va, vb, omega = (np.asarray(a, dtype=float) for a in (va, vb, omega))
    hx = 0.5 * hbar * omega
    hz = 0.5 * (va - vb)
    h = np.hypot(hx, hz)
    theta = h * dt / hbar
    c = np.cos(theta)
    s_over_h = np.where(h > 0, np.sin(theta) / np.where(h > 0, h, 1.0), dt / hbar)
    common = np.exp(-0.5j * (va + vb) * dt / hbar)
    return common * (c - 1j * s_over_h * hz), common * (-1j * s_over_h * hx), common * (c + 1j * s_over_h * hz)


@dataclass(frozen=True, eq=False)
class Absorber:
    """Smooth absorbing edges: `width` points at each end where the wave is multiplied by
    exp(-strength s^2 ABSORB_EVERY dt / hbar) every ABSORB_EVERY steps (s from 0 at the inner edge to 1 at the
    grid's end); `strength` in J."""

    width: int
    strength: float


def absorber_strength(width_m: float, v_max: float, attenuation: float = 30.0) -> float:
    """Strength W0 (J) of W = W0 s^2 over a zone of width L that damps an atom crossing it at v_max by
    exp(-attenuation) in density: 2 W0 L / (3 hbar v) = attenuation (common practice, no source)."""
    return 1.5 * attenuation * hbar * v_max / width_m


@dataclass(frozen=True)
class Evolution:
    """The state after `evolve`: psi (2, n) at time t, and the spin density matrices
    rho_ij = sum psi_i conj(psi_j) dx (2x2) of what the left and right absorbers took out."""

    psi: np.ndarray
    t: float
    absorbed_left: np.ndarray
    absorbed_right: np.ndarray
    steps: int


def unit_phase(angle, out, work):
    """exp(i angle) into `out` (complex, angle's shape), `work` (3, n) scratch. Where every |angle| <= PADE_LIMIT
    the (2,2) Pade form R = (1 + z/2 + z^2/12) / (1 - z/2 + z^2/12), z = i angle: of modulus 1 exactly, its
    phase off by at most angle^5 / 720 (< 1.4e-8 rad); else cos and sin."""
    a, b, d = work
    if angle.size and float(np.max(np.abs(angle))) > PADE_LIMIT:
        np.cos(angle, out=out.real)
        np.sin(angle, out=out.imag)
        return out
    np.multiply(angle, angle, out=a)
    np.multiply(a, -1.0 / 12.0, out=a)
    a += 1.0  # a = 1 - angle^2 / 12
    np.multiply(angle, 0.5, out=b)  # b = angle / 2
    np.multiply(a, b, out=out.imag)
    np.multiply(a, a, out=a)
    np.multiply(b, b, out=b)
    np.subtract(a, b, out=out.real)
    np.add(a, b, out=d)
    np.reciprocal(d, out=d)
    out.real *= d
    d *= 2.0
    out.imag *= d
    return out


class _Stepper:
    """Preallocated buffers and the cached local exponentials of one run."""

    def __init__(self, grid: Grid, mass: float, dt: float, g: float, absorber: Absorber | None):
        self.grid, self.dt, self.g = grid, dt, g
        self.kin = np.exp(-0.5j * hbar * grid.k**2 * dt / mass)
        self.dens = np.empty(grid.n)
        self.angle = np.empty(grid.n)
        self.phase = np.empty(grid.n, dtype=complex)
        self.work = np.empty((3, grid.n))
        self.support = slice(0, grid.n)
        self.cache = {}
        self.absorber = absorber
        if absorber and absorber.width > 0:
            s = (np.arange(absorber.width, dtype=float) + 1.0) / absorber.width
            mask = np.exp(-absorber.strength * s**2 * ABSORB_EVERY * dt / hbar)
            self.mask_right, self.mask_left = mask, mask[::-1].copy()
        self.rho_left = np.zeros((2, 2), dtype=complex)
        self.rho_right = np.zeros((2, 2), dtype=complex)

    def _terms(self, loc: Local, frac: float):
        key = (id(loc), frac)
        hit = self.cache.get(key)
        if hit is None or hit[0] is not loc:
            tau = frac * self.dt
            base = np.exp(-1j * np.asarray(loc.v, dtype=float) * tau / hbar)
            pair = None
            if loc.window is not None:
                pair = pair_exponential(loc.va, loc.vb, loc.omega, tau)
            if len(self.cache) > 64:
                self.cache.clear()
            hit = (loc, base, pair)
            self.cache[key] = hit
        return hit[1], hit[2]

    def local(self, psi, loc: Local, t: float, frac: float):
        """psi <- exp(-i (v + g n + H_ab) frac dt / hbar) psi, in place."""
        base, pair = self._terms(loc, frac)
        if self.g:
            # g |psi|^2 only where the atoms are: below SUPPORT_FLOOR of the peak its phase is < 1e-13 rad
            i0, i1 = self.support.start, self.support.stop
            if i0 > 0:
                psi[:, :i0] *= base[:i0]
            if i1 < psi.shape[1]:
                psi[:, i1:] *= base[i1:]
            part = psi[:, i0:i1]
            angle = np.add(np.abs(part[0]) ** 2, np.abs(part[1]) ** 2, out=self.angle[i0:i1])
            angle *= -self.g * frac * self.dt / hbar
            phase = unit_phase(angle, self.phase[i0:i1], self.work[:, i0:i1])
            phase *= base[i0:i1]
            part *= phase
        else:
            psi *= base
        if pair is not None:
            w = loc.window
            u00, u01, u11 = pair
            a, b = psi[0, w].copy(), psi[1, w]
            if loc.delta:
                rot = np.exp(-1j * loc.delta * t)
                psi[0, w] = u00 * a + (u01 * rot) * b
                psi[1, w] = (u01 * np.conj(rot)) * a + u11 * b
            else:
                psi[0, w] = u00 * a + u01 * b
                psi[1, w] = u01 * a + u11 * b

    def kinetic(self, psi):
        """The kinetic step; returns psi advanced (both FFTs overwrite their input: psi's buffer is reused)."""
        f = sfft.fft(psi, axis=-1, overwrite_x=True)
        f *= self.kin
        return sfft.ifft(f, axis=-1, overwrite_x=True)

    def find_support(self, psi):
        """The region where the density is above SUPPORT_FLOOR of its peak, SUPPORT_PAD cells wider."""
        if not self.g:
            return
        n = density(psi, out=self.dens)
        above = np.flatnonzero(n > SUPPORT_FLOOR * n.max())
        if above.size:
            self.support = slice(max(int(above[0]) - SUPPORT_PAD, 0), min(int(above[-1]) + SUPPORT_PAD + 1, n.size))

    def absorb(self, psi):
        if not (self.absorber and self.absorber.width > 0):
            return
        w = self.absorber.width
        dx = self.grid.dx
        for sl, mask, rho in ((slice(0, w), self.mask_left, self.rho_left),
                              (slice(psi.shape[1] - w, psi.shape[1]), self.mask_right, self.rho_right)):
            part = psi[:, sl]
            lost = 1.0 - mask**2
            rho += np.einsum("ix,jx,x->ij", part, np.conj(part), lost) * dx
            psi[:, sl] = part * mask


def density(psi, out=None):
    """|a|^2 + |b|^2 (1/m) of psi (2, n) (or |psi|^2 of one component)."""
    psi = np.asarray(psi)
    if psi.ndim == 1:
        psi = psi[None, :]
    v = np.ascontiguousarray(psi, dtype=complex).view(float).reshape(psi.shape[0], psi.shape[1], 2)
    return np.einsum("ijk,ijk->j", v, v, out=out)


def evolve(psi0, grid: Grid, mass: float, dt: float, n_steps: int, local_at, *, t0: float = 0.0, g: float = 0.0,
           absorber: Absorber | None = None, observe=None, observe_every: int = 0, absorbed=None) -> Evolution:
    """Strang split-step evolution of psi0 (2, n) over n_steps steps of dt from t0.

    local_at(t) returns the `Local` at time t (return the same object while it does not change: its
    exponentials are cached on identity). g: 1D coupling times the atom number (J m; psi normalised to 1;
    < 0 attractive). observe(step, t, psi, evolution_so_far) is called at t0 and every observe_every steps
    with psi synchronised (a full Strang step), not to be modified. The absorber (if any) is applied every
    ABSORB_EVERY steps, what it takes is kept per side as a spin density matrix (added to `absorbed`, the
    (left, right) matrices of an earlier run, when given). A potential that changes only at step boundaries
    keeps the scheme second order: evolve piece by piece for piecewise-constant drives."""
    psi = np.array(psi0, dtype=complex, order="C").reshape(2, grid.n)
    st = _Stepper(grid, float(mass), float(dt), float(g), absorber)
    if absorbed is not None:
        st.rho_left += absorbed[0]
        st.rho_right += absorbed[1]

    def snapshot(k, t):
        return Evolution(psi, t, st.rho_left.copy(), st.rho_right.copy(), k)

    t = float(t0)
    if observe is not None and observe_every:
        observe(0, t, psi, snapshot(0, t))
    st.find_support(psi)
    st.local(psi, local_at(t), t, 0.5)
    for k in range(1, int(n_steps) + 1):
        psi = st.kinetic(psi)
        t = t0 + k * dt
        loc = local_at(t)
        sync = k == n_steps or (observe is not None and observe_every and k % observe_every == 0)
        if sync:
            st.local(psi, loc, t, 0.5)
            if k % ABSORB_EVERY == 0:
                st.absorb(psi)
                st.find_support(psi)
            if observe is not None and observe_every and k % observe_every == 0:
                observe(k, t, psi, snapshot(k, t))
            if k < n_steps:
                st.local(psi, loc, t, 0.5)
        else:
            st.local(psi, loc, t, 1.0)
            if k % ABSORB_EVERY == 0:
                st.absorb(psi)
                st.find_support(psi)
    return Evolution(psi, t, st.rho_left.copy(), st.rho_right.copy(), int(n_steps))


@dataclass(frozen=True)
class GroundState:
    """Ground state of one component: psi (n,, real, normalised to 1), mu (J), energy per atom (J),
    residual |H psi - mu psi| / |mu| at the end, steps taken."""

    psi: np.ndarray
    mu: float
    energy: float
    residual: float
    steps: int


def energies(psi, grid: Grid, mass: float, v, g: float = 0.0):
    """(energy per atom, chemical potential) (J) of one component psi (n,) normalised to 1:
    E = <T + V> + g/2 int |psi|^4, mu = <T + V> + g int |psi|^4 (kinetic term spectrally)."""
    psi = np.asarray(psi, dtype=complex)
    dx = grid.dx
    norm = float(np.sum(np.abs(psi) ** 2) * dx)
    f = sfft.fft(psi)
    kin = float(np.sum(0.5 * hbar**2 * grid.k**2 / mass * np.abs(f) ** 2) * dx / grid.n) / norm
    n = np.abs(psi) ** 2 / norm
    pot = float(np.sum(np.asarray(v) * n) * dx)
    inter = float(g * np.sum(n**2) * dx)
    return kin + pot + 0.5 * inter, kin + pot + inter


def ground_state(grid: Grid, mass: float, v, g: float = 0.0, *, psi0=None, dtau: float | None = None,
                 tol: float = 1e-9, max_steps: int = 200000) -> GroundState:
    """Ground state in the potential v (J, n points) with coupling g (J m, times the atom number) by
    imaginary-time Strang splitting with renormalisation after every step, the step shrinking by 4 twice
    (its O(dtau^2) bias then below tol); at each step size it stops when the energy changes by at most tol
    (relative) over 50 steps; the residual |H psi - mu psi| / |mu| is reported, not used to stop. Start: psi0,
    else the Thomas-Fermi profile
    (g > 0) or a Gaussian at the potential's minimum."""
    v = np.asarray(v, dtype=float)
    x, dx = grid.x, grid.dx
    vmin = float(v.min())
    i0 = int(np.argmin(v))
    curv = float(np.gradient(np.gradient(v, dx), dx)[i0])
    omega = math.sqrt(curv / mass) if curv > 0 else 0.0
    # the energy scale of the state: hbar omega, the Thomas-Fermi mu - v_min, the kinetic energy of a tenth
    # of the grid
    e_scale = max(hbar * omega, 0.5 * hbar**2 / mass * (20 * math.pi / (x[-1] - x[0])) ** 2)
    mu_tf = vmin
    if g > 0 and omega > 0:
        mu_tf = vmin + (0.75 * g * math.sqrt(mass) * omega / math.sqrt(2)) ** (2 / 3)
        e_scale = max(e_scale, mu_tf - vmin)
    if psi0 is None:
        sigma = math.sqrt(hbar / (2 * mass * omega)) if omega > 0 else 0.05 * (x[-1] - x[0])
        psi = np.exp(-((x - x[i0]) ** 2) / (4 * sigma**2))
        if g > 0:
            psi = psi + np.sqrt(np.maximum(mu_tf - v, 0.0) / g)
    else:
        psi = np.abs(np.asarray(psi0, dtype=complex))
    psi = psi.astype(complex)
    psi /= math.sqrt(np.sum(np.abs(psi) ** 2) * dx)
    if dtau is None:
        dtau = 0.4 * hbar / e_scale
    steps = 0
    e_prev = math.inf
    for stage in range(3):
        tau = dtau / 4**stage
        kin = np.exp(-0.5 * hbar * grid.k**2 * tau / mass)
        for k in range(max_steps):
            n = np.abs(psi) ** 2
            psi *= np.exp(-(v - vmin + g * n) * 0.5 * tau / hbar)
            psi = sfft.ifft(sfft.fft(psi) * kin)
            n = np.abs(psi) ** 2
            psi *= np.exp(-(v - vmin + g * n) * 0.5 * tau / hbar)
            psi /= math.sqrt(np.sum(np.abs(psi) ** 2) * dx)
            steps += 1
            if k % 50 == 49:
                e, _ = energies(psi, grid, mass, v, g)
                if abs(e - e_prev) <= tol * max(abs(e - vmin), 1e-300):
                    break
                e_prev = e
    e, mu = energies(psi, grid, mass, v, g)
    f = sfft.fft(psi)
    hpsi = sfft.ifft(0.5 * hbar**2 * grid.k**2 / mass * f) + (v + g * np.abs(psi) ** 2) * psi
    res = float(np.sqrt(np.sum(np.abs(hpsi - mu * psi) ** 2) * dx) / max(abs(mu), 1e-300))
    psi = np.abs(psi) * np.sign(np.real(psi[int(np.argmax(np.abs(psi)))]))
    return GroundState(np.abs(psi), float(mu), float(e), res, steps)
