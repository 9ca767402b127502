"""Far-detuned optical dipole traps for alkali ground states.

All formulas from "Optical dipole traps for neutral atoms",
Adv. At. Mol. Opt. Phys. 42, 95 (2000) (below: ODT review). SI units
throughout: W, m, J, s, rad/s. Positions are (..., 3) arrays in metres;
``vertical`` is the unit vector pointing up (against gravity).
"""

from __future__ import annotations

import functools
from dataclasses import dataclass, field
from typing import Iterable, Sequence

import numpy as np
from scipy import constants as sc

from .atoms import Species

G_N = 9.80665  # standard gravity, m/s^2, exact (3rd CGPM 1901; SI Brochure)
_C = sc.c
_HBAR = sc.hbar
_AU_POLARIZABILITY = 4 * np.pi * sc.epsilon_0 * sc.physical_constants["Bohr radius"][0] ** 3

# D1 and D2 carry 1/3 and 2/3 of the ground-state oscillator strength when each
# line is written as a two-level term with its own Gamma (ODT review, multi-level alkali form).
_LINE_WEIGHTS = np.array([1.0 / 3.0, 2.0 / 3.0])


def _lines(species: Species) -> tuple[np.ndarray, np.ndarray]:
    omega0 = 2 * np.pi * _C / np.array([species.d1_wavelength_m, species.d2_wavelength_m])
    gamma = 2 * np.pi * np.array([species.d1_linewidth_hz, species.d2_linewidth_hz])
    return omega0, gamma


@functools.lru_cache(maxsize=256)
def _u_per_i_scalar(species: Species, wavelength_m: float) -> float:
    # the trap minimiser evaluates the potential thousands of times for a handful of wavelengths
    return float(dipole_potential_per_intensity(species, wavelength_m))


def dipole_potential_per_intensity(species: Species, wavelength_m) -> np.ndarray | float:
    """Ground-state light shift per intensity, J per (W/m^2), linear polarisation: U/I = -alpha(omega) / (2 eps0 c).

    alpha = D lines + higher P lines + core:
    * D1, D2 from their linewidths, U/I = -sum w_i (3 pi c^2 / (2 omega_i^3)) Gamma_i
      [1/(omega_i - omega) + 1/(omega_i + omega)], w_D1 = 1/3, w_D2 = 2/3 (ODT review,
      Adv. At. Mol. Opt. Phys. 42, 95 (2000): two-level potential with counter-rotating term);
    * the next nP_J lines (``species.p_lines``) from their reduced matrix elements,
      alpha_i = |<S1/2||d||P_J>|^2 / (6 hbar) [1/(omega_i - omega) + 1/(omega_i + omega)]
      (sum-over-states scalar polarisability of a J = 1/2 level, e.g. Phys. Rev. A 69, 022509 (2004));
    * the closed-shell core, static (its resonances lie in the far UV).
    Left out: the np tail beyond the listed lines, the continuum and the small valence-core
    correction (they partly cancel).  Expected accuracy away from the lines: about 1 % for
    the static value and in the near infrared (1064 nm: Rb within 0.5 % of the all-order
    value), a few per cent where the D lines cancel (tune-out region) or in the blue/near UV.
    Negative (attractive) for light red of the D lines.  Vectorised over ``wavelength_m``.
    """
    omega = 2 * np.pi * _C / np.asarray(wavelength_m, dtype=float)[..., None]
    omega0, gamma = _lines(species)
    terms = _LINE_WEIGHTS * 3 * np.pi * _C**2 / (2 * omega0**3) * gamma * (1 / (omega0 - omega) + 1 / (omega0 + omega))
    out = -terms.sum(axis=-1) - _higher_polarizability(species, omega[..., 0]) / (2 * sc.epsilon_0 * _C)
    return float(out) if out.ndim == 0 else out


def _higher_polarizability(species: Species, omega) -> np.ndarray:
    """Polarisability (C m^2/V) of the higher P lines plus the static core, at angular frequency omega."""
    out = np.full(np.shape(omega), species.core_polarizability_cm2_v)
    for line in species.p_lines:
        wi = 2 * np.pi * _C / line.wavelength_m
        out = out + line.reduced_dipole_cm**2 / (6 * _HBAR) * (1 / (wi - omega) + 1 / (wi + omega))
    return out


def scalar_polarizability_au(species: Species, wavelength_m) -> np.ndarray | float:
    """Dynamic scalar polarizability of the ground state in atomic units (4 pi eps0 a0^3).

    From U = -Re(alpha) I / (2 eps0 c) (ODT review), alpha = -2 eps0 c U/I; D lines, higher
    P lines and core as in ``dipole_potential_per_intensity`` (accuracy stated there).
    """
    alpha_si = -2 * sc.epsilon_0 * _C * np.asarray(dipole_potential_per_intensity(species, wavelength_m))
    out = alpha_si / _AU_POLARIZABILITY
    return float(out) if np.ndim(out) == 0 else out


def scattering_rate_per_intensity(species: Species, wavelength_m) -> np.ndarray | float:
    """Photon scattering rate per intensity, 1/s per (W/m^2).

    Gamma_sc/I = sum_i w_i (3 pi c^2 / (2 hbar omega_i^3)) (omega/omega_i)^3
                 Gamma_i^2 [1/(omega_i - omega) + 1/(omega_i + omega)]^2
    (ODT review, Adv. At. Mol. Opt. Phys. 42, 95 (2000), two-level rate with
    counter-rotating term, summed over the D lines as for the potential).
    """
    omega = 2 * np.pi * _C / np.asarray(wavelength_m, dtype=float)[..., None]
    omega0, gamma = _lines(species)
    terms = (_LINE_WEIGHTS * 3 * np.pi * _C**2 / (2 * _HBAR * omega0**3) * (omega / omega0) ** 3
             * gamma**2 * (1 / (omega0 - omega) + 1 / (omega0 + omega)) ** 2)
    out = terms.sum(axis=-1)
    return float(out) if out.ndim == 0 else out


def recoil_energy(species: Species, wavelength_m) -> float:
    """E_rec = hbar^2 k^2 / (2 m), k = 2 pi / lambda, in J."""
    k = 2 * np.pi / np.asarray(wavelength_m, dtype=float)
    return _HBAR**2 * k**2 / (2 * species.mass_kg)


# --- Gaussian beams --------------------------------------------------------

def peak_intensity(power_w, waist_m, waist2_m=None):
    """Peak intensity 2P/(pi w1 w2) of a Gaussian beam, W/m^2 (w = 1/e^2 intensity radius)."""
    w2 = waist_m if waist2_m is None else waist2_m
    return 2 * np.asarray(power_w, dtype=float) / (np.pi * np.asarray(waist_m) * np.asarray(w2))


def modulated_peak_intensity(mean_power_w, waist_m, waist2_m=None, modulation_depth=0.0):
    """Largest intensity (W/m^2) at the centre of an intensity-modulated Gaussian beam or light sheet.

    The power is P(t) = P_mean (1 + eps cos(omega_m t)) with 0 <= eps <= 1 and
    ``mean_power_w`` = P_mean the time-averaged power (what a power meter
    reads); the centre intensity of an elliptical Gaussian beam with 1/e^2
    intensity radii w1, w2 is 2P/(pi w1 w2) (ODT review; any optics text), so
        I_max = (1 + eps) 2 P_mean / (pi w1 w2),
    the peak intensity that ``drive.two_photon_rabi_from_modulated_beam``
    expects. eps = 0 (the default) is the unmodulated peak intensity
    (``peak_intensity``). Vectorised; raises ValueError for eps outside [0, 1].
    """
    eps = np.asarray(modulation_depth, dtype=float)
    if np.any(~((eps >= 0) & (eps <= 1))):
        raise ValueError("modulation depth must lie in [0, 1]")
    return peak_intensity(mean_power_w, waist_m, waist2_m) * (1 + eps)


def rayleigh_length(waist_m, wavelength_m):
    """z_R = pi w0^2 / lambda, in m."""
    return np.pi * np.asarray(waist_m, dtype=float) ** 2 / np.asarray(wavelength_m, dtype=float)


@functools.lru_cache(maxsize=1024)
def _beam_geometry(direction, waist_axis, focus, waist_m, waist2_m, wavelength_m):
    """(direction, waist axis, focus as tuples, frame (rows: direction, waist axis, third axis; read-only),
    Rayleigh lengths of both waists) of a GaussianBeam (see its doc)."""
    k = _unit(direction)
    if waist_axis is None:
        ref = np.array([0.0, 0.0, 1.0]) if abs(k[2]) < 0.9 else np.array([1.0, 0.0, 0.0])
    else:
        ref = _unit(waist_axis)
    e1 = ref - np.dot(ref, k) * k
    if np.linalg.norm(e1) < 1e-9:
        raise ValueError("waist_axis must not be parallel to the beam")
    axis = tuple(e1 / np.linalg.norm(e1))
    e1 = np.asarray(axis)
    frame = np.array([k, e1, np.cross(k, e1)])
    frame.setflags(write=False)
    w2 = waist_m if waist2_m is None else waist2_m
    return (tuple(k), axis, tuple(np.asarray(focus, dtype=float).reshape(3)), frame,
            (rayleigh_length(waist_m, wavelength_m), rayleigh_length(w2, wavelength_m)))


def _unit(v) -> np.ndarray:
    v = np.asarray(v, dtype=float)
    n = np.linalg.norm(v)
    if v.shape != (3,) or not np.isfinite(n) or n == 0:
        raise ValueError(f"need a non-zero 3-vector, got {v!r}")
    return v / n


@dataclass(frozen=True)
class GaussianBeam:
    """A focused TEM00 beam.

    ``waist_m`` is the 1/e^2 intensity radius at the focus along
    ``waist_axis`` (default: the direction perpendicular to the beam closest
    to vertical z, or x for a vertical beam); ``waist2_m`` (default equal)
    along the third axis. ``direction`` is normalised on construction.
    """

    power_w: float
    waist_m: float
    wavelength_m: float
    direction: tuple = (1.0, 0.0, 0.0)
    focus_m: tuple = (0.0, 0.0, 0.0)
    waist2_m: float | None = None
    waist_axis: tuple | None = None
    # derived on construction (rows: direction, waist axis, third axis; Rayleigh lengths of both waists)
    _frame: np.ndarray = field(init=False, repr=False, compare=False, hash=False, default=None)
    _rayleigh: tuple = field(init=False, repr=False, compare=False, hash=False, default=None)

    def __post_init__(self):
        if not (self.power_w >= 0 and self.waist_m > 0 and self.wavelength_m > 0):
            raise ValueError("GaussianBeam needs power >= 0, waist > 0, wavelength > 0")
        if self.waist2_m is not None and not self.waist2_m > 0:
            raise ValueError("waist2_m must be > 0")
        try:  # the geometry depends on everything but the power: shared by the beams of every time and shot
            key = (tuple(float(x) for x in self.direction),
                   None if self.waist_axis is None else tuple(float(x) for x in self.waist_axis),
                   tuple(float(x) for x in np.asarray(self.focus_m, dtype=float).reshape(3)),
                   float(self.waist_m), None if self.waist2_m is None else float(self.waist2_m),
                   float(self.wavelength_m))
        except (TypeError, ValueError):
            key = None
        direction, waist_axis, focus, frame, rayleigh = (_beam_geometry(*key) if key is not None else
                                                         _beam_geometry.__wrapped__(self.direction, self.waist_axis,
                                                                                    self.focus_m, *self.waists,
                                                                                    self.wavelength_m))
        object.__setattr__(self, "direction", direction)
        object.__setattr__(self, "waist_axis", waist_axis)
        object.__setattr__(self, "focus_m", focus)
        object.__setattr__(self, "_frame", frame)
        object.__setattr__(self, "_rayleigh", rayleigh)

    @property
    def waists(self) -> tuple[float, float]:
        return self.waist_m, self.waist_m if self.waist2_m is None else self.waist2_m

    @property
    def peak_intensity(self) -> float:
        return float(peak_intensity(self.power_w, *self.waists))

    def intensity(self, points_xyz) -> np.ndarray:
        """Intensity (W/m^2) at points of shape (..., 3): paraxial Gaussian,
        I = 2P / (pi w1(s) w2(s)) exp(-2 u^2/w1(s)^2 - 2 v^2/w2(s)^2),
        w_j(s) = w_j sqrt(1 + (s/z_Rj)^2) (any optics text; ODT review)."""
        d = np.asarray(points_xyz, dtype=float) - np.asarray(self.focus_m)
        s, u, v = np.moveaxis(d @ self._frame.T, -1, 0)
        w1, w2 = self.waists
        z1, z2 = self._rayleigh
        ws1 = w1 * np.sqrt(1 + (s / z1) ** 2)
        ws2 = w2 * np.sqrt(1 + (s / z2) ** 2)
        return 2 * self.power_w / (np.pi * ws1 * ws2) * np.exp(-2 * u**2 / ws1**2 - 2 * v**2 / ws2**2)


def _as_beams(beams) -> tuple[GaussianBeam, ...]:
    if isinstance(beams, GaussianBeam):
        return (beams,)
    beams = tuple(beams)
    if not beams or not all(isinstance(b, GaussianBeam) for b in beams):
        raise ValueError("need one GaussianBeam or a non-empty sequence of them")
    return beams


def beam_potential(species: Species, beam: GaussianBeam | Iterable[GaussianBeam], points_xyz) -> np.ndarray:
    """Light-shift potential (J) of one beam or the sum of several (incoherent) at points (..., 3)."""
    return sum(_u_per_i_scalar(species, float(b.wavelength_m)) * b.intensity(points_xyz)
               for b in _as_beams(beam))


def total_potential(species: Species, beams, points_xyz, gravity: bool = True, vertical=(0, 0, 1),
                    reference_m=(0.0, 0.0, 0.0)) -> np.ndarray:
    """Light shift of all beams plus m g_n ((r - reference) . vertical) if ``gravity``, J."""
    pts = np.asarray(points_xyz, dtype=float)
    u = beam_potential(species, beams, pts)
    if gravity:
        u = u + species.mass_kg * G_N * ((pts - np.asarray(reference_m, dtype=float)) @ _unit(vertical))
    return u


@dataclass(frozen=True)
class TrapMinimum:
    """Harmonic expansion of a trap at its minimum.

    ``omegas_rad_s`` ascending, ``axes`` columns are the matching principal
    axes, ``position_m`` the minimum, ``potential_j`` the total potential
    there (light + gravity, gravity counted from the height of the beams'
    crossing point).
    """

    position_m: np.ndarray
    omegas_rad_s: np.ndarray
    axes: np.ndarray
    potential_j: float

    @property
    def frequencies_hz(self) -> np.ndarray:
        return self.omegas_rad_s / (2 * np.pi)

    @property
    def mean_omega(self) -> float:
        return float(np.prod(self.omegas_rad_s) ** (1 / 3))


def _crossing_point(beams: Sequence[GaussianBeam]) -> np.ndarray:
    """Least-squares point closest to all beam axes (the focus for a single beam)."""
    foci = np.array([b.focus_m for b in beams])
    centre = foci.mean(axis=0)
    a = np.zeros((3, 3))
    rhs = np.zeros(3)
    for b, f in zip(beams, foci):
        p = np.eye(3) - np.outer(b.direction, b.direction)
        a += p
        rhs += p @ (f - centre)
    return centre + np.linalg.pinv(a, rcond=1e-9) @ rhs


def _length_scale(beams) -> float:
    return min(min(b.waists) for b in beams)


def _hessian(f, x0: np.ndarray, steps: np.ndarray, basis: np.ndarray) -> np.ndarray:
    """Central-difference Hessian of f along the columns of ``basis`` with per-direction steps (one call of f)."""
    n = len(steps)
    d = (basis[:, :n] * steps).T  # row i: the step along direction i
    pairs = [(i, j) for i in range(n) for j in range(i)]
    pts = [x0] + [x0 + sgn * d[i] for i in range(n) for sgn in (1, -1)]
    pts += [x0 + si * d[i] + sj * d[j] for i, j in pairs for si, sj in ((1, 1), (1, -1), (-1, 1), (-1, -1))]
    v = f(np.array(pts))
    h = np.empty((n, n))
    for i in range(n):
        h[i, i] = (v[1 + 2 * i] - 2 * v[0] + v[2 + 2 * i]) / steps[i] ** 2
    for k, (i, j) in enumerate(pairs):
        a = v[1 + 2 * n + 4 * k: 5 + 2 * n + 4 * k]
        h[i, j] = h[j, i] = (a[0] - a[1] - a[2] + a[3]) / (4 * steps[i] * steps[j])
    return h


def _vertical_scan_minimum(f, start: np.ndarray, up: np.ndarray, reach: float) -> float | None:
    """Offset along ``up`` of the local minimum of f nearest ``start`` on the vertical line, or None."""
    from scipy import optimize

    z = np.linspace(-reach, 0.5 * reach, 3001)
    vals = f(start + z[:, None] * up)
    inner = np.flatnonzero((vals[1:-1] < vals[:-2]) & (vals[1:-1] <= vals[2:])) + 1
    if inner.size == 0:
        return None
    k = inner[np.argmin(np.abs(z[inner]))]
    res = optimize.minimize_scalar(lambda t: float(f(start + t * up)), bracket=(z[k - 1], z[k], z[k + 1]))
    return float(res.x)


def find_trap_minimum(species: Species, beams, gravity: bool = True, vertical=(0, 0, 1)) -> TrapMinimum:
    """Locate the potential minimum (with gravity sag if asked) and expand it harmonically.

    The minimum is found by a 1-D scan along the vertical through the beams'
    crossing point, then refined in 3-D (BFGS). The Hessian is taken by central
    differences, first in lab axes, then again along its eigenvectors with steps
    matched to each curvature (so the weak axial curvature, (w/z_R)^2 smaller,
    is not swamped). omega_k = sqrt(lambda_k / m). Raises ValueError if there is
    no minimum (too weak to hold against gravity, or blue detuned).
    """
    from scipy import optimize

    beams = _as_beams(beams)
    up = _unit(vertical)
    length = _length_scale(beams)
    start = _crossing_point(beams)
    u_scale = abs(float(total_potential(species, beams, start, gravity=False)))
    if u_scale == 0:
        raise ValueError("no light at the beams' crossing point")

    ref = start.copy()  # gravity measured from the crossing height keeps f small (roundoff in the Hessian)

    def f(p):
        return total_potential(species, beams, p, gravity=gravity, vertical=up, reference_m=ref)

    if gravity:
        reach = 4 * max(max(b.waists) for b in beams)
        dz = _vertical_scan_minimum(f, start, up, reach)
        if dz is None:
            raise ValueError("no trapping minimum: the beams do not hold the atoms against gravity")
        start = start + dz * up

    def scaled(y):  # value and analytic gradient in units of u_scale and length
        p = start + y * length
        return float(f(p)) / u_scale, potential_gradient(species, beams, p, gravity, up) * (length / u_scale)

    res = optimize.minimize(scaled, np.zeros(3), jac=True, method="BFGS", options={"gtol": 1e-11, "xrtol": 1e-12})
    x = start + res.x * length
    if np.linalg.norm(res.x) > 10:
        raise ValueError("no trapping minimum near the beams' crossing point")

    h1 = _hessian(f, x, np.full(3, 1e-3 * length), np.eye(3))
    lam, vec = np.linalg.eigh(h1)
    if np.any(lam <= 0):
        raise ValueError("not a trap: the potential has no minimum here (check detuning, power, gravity)")
    # second pass along principal axes, step ~1e-3 of each curvature length
    steps = 1e-3 * np.sqrt(u_scale / lam)
    h2 = _hessian(f, x, steps, vec)
    lam2, vec2 = np.linalg.eigh(h2)
    if np.any(lam2 <= 0):
        raise ValueError("not a trap: the potential has no minimum here")
    axes = vec @ vec2
    order = np.argsort(lam2)
    return TrapMinimum(position_m=x, omegas_rad_s=np.sqrt(lam2[order] / species.mass_kg),
                       axes=axes[:, order], potential_j=float(f(x)))


def trap_frequencies(species: Species, beams, gravity: bool = True, vertical=(0, 0, 1)) -> np.ndarray:
    """Trap angular frequencies (rad/s, ascending) at the minimum, numerical Hessian.

    For one beam this reproduces omega_r = sqrt(4 U0/(m w0^2)),
    omega_z = sqrt(2 U0/(m z_R^2)) (ODT review); for crossed beams the
    curvatures add. Use find_trap_minimum for axes and position.
    """
    return find_trap_minimum(species, beams, gravity=gravity, vertical=vertical).omegas_rad_s


def trap_depth(species: Species, beams) -> float:
    """Depth (J, positive) of the light potential without gravity: the energy of its lowest escape route above
    the minimum (trap_escape). One beam: its peak potential U0; crossed beams: atoms leave along the arm whose
    crossing beam is weakest, at about that beam's own U0, not the sum at the crossing.
    """
    return trap_escape(species, _as_beams(beams), gravity=False).depth_j


def effective_depth_with_gravity(species: Species, beams, vertical=(0, 0, 1)) -> float:
    """Depth (J) along gravity including sag: barrier on the vertical line through the minimum.

    Scans U_light + m g z downward from the (sagged) minimum to the first local
    maximum; returns U(max) - U(min), or 0.0 if gravity leaves no minimum.
    Escape sideways (along a beam) is not considered here: an upper bound of
    the depth; trap_escape gives the lowest way out in 3-D.
    """
    beams = _as_beams(beams)
    up = _unit(vertical)
    try:
        m = find_trap_minimum(species, beams, gravity=True, vertical=up)
    except ValueError:
        return 0.0
    return _depth_below_minimum(species, beams, m, up)


def held_trap(species: Species, beams, vertical=(0, 0, 1)) -> tuple[float, np.ndarray | None]:
    """(depth with gravity in J, trap angular frequencies or None) from one minimisation.

    The depth is that of the lowest escape route in 3-D (trap_escape), the frequencies those of
    trap_frequencies; for callers that need both (the trap-stage checks follow a ramp at many times).
    """
    held = held_trap_escape(species, beams, vertical)
    return held.depth_j, held.omegas_rad_s


def held_trap_heating(species: Species, beams, vertical=(0, 0, 1)) -> tuple[float, np.ndarray | None, float]:
    """held_trap plus the recoil heating rate dT/dt (K/s) at the sagged minimum (0.0 when nothing is held),
    from the same minimisation (see recoil_heating_rate)."""
    held = held_trap_escape(species, beams, vertical)
    return held.depth_j, held.omegas_rad_s, held.heating_k_s


def _depth_below_minimum(species: Species, beams, m: TrapMinimum, up: np.ndarray) -> float:
    from scipy import optimize

    reach = 6 * max(max(b.waists) for b in beams)
    ref = m.position_m

    def g(t):
        return total_potential(species, beams, ref + np.multiply.outer(t, up), gravity=True, vertical=up,
                               reference_m=ref)

    z = np.linspace(0.0, -reach, 6001)
    vals = g(z)
    peaks = np.flatnonzero((vals[1:-1] >= vals[:-2]) & (vals[1:-1] > vals[2:])) + 1
    if peaks.size == 0:
        return 0.0
    k = peaks[0]
    res = optimize.minimize_scalar(lambda t: -float(g(t)), bracket=(z[k - 1], z[k], z[k + 1]))
    return max(0.0, -float(res.fun) - float(g(0.0)))


# --- depth as the lowest escape route in 3-D -------------------------------------------------------------

def _intensity_gradient(beam: GaussianBeam, points_xyz) -> np.ndarray:
    """Gradient (W/m^3, shape (..., 3)) of GaussianBeam.intensity, analytic: with W_j(s) = w_j^2 (1 + s^2/z_Rj^2),
    d ln I/ds = sum_j (2 u_j^2/W_j - 1/2) W_j'/W_j, d ln I/du_j = -4 u_j/W_j (derivatives of the paraxial form)."""
    d = np.asarray(points_xyz, dtype=float) - np.asarray(beam.focus_m)
    s, u, v = np.moveaxis(d @ beam._frame.T, -1, 0)
    (w1, w2), (z1, z2) = beam.waists, beam._rayleigh
    big1, big2 = w1**2 * (1 + (s / z1) ** 2), w2**2 * (1 + (s / z2) ** 2)
    i = 2 * beam.power_w / (np.pi * np.sqrt(big1 * big2)) * np.exp(-2 * u**2 / big1 - 2 * v**2 / big2)
    ds = ((2 * u**2 / big1 - 0.5) * 2 * w1**2 * s / (z1**2 * big1)
          + (2 * v**2 / big2 - 0.5) * 2 * w2**2 * s / (z2**2 * big2))
    local = np.stack([ds, -4 * u / big1, -4 * v / big2], axis=-1) * i[..., None]
    return local @ beam._frame


def potential_gradient(species: Species, beams, points_xyz, gravity: bool = True, vertical=(0, 0, 1)) -> np.ndarray:
    """Gradient (N, i.e. J/m; shape (..., 3)) of total_potential: the beams' light shifts plus m g_n vertical."""
    beams = _as_beams(beams)
    g = sum(_u_per_i_scalar(species, float(b.wavelength_m)) * _intensity_gradient(b, points_xyz) for b in beams)
    if gravity:
        g = g + species.mass_kg * G_N * _unit(vertical)
    return g


@dataclass(frozen=True)
class TrapEscape:
    """Depth of a trap as its lowest escape route: ``depth_j`` (J) = potential at the barrier minus that at
    the minimum; ``direction`` (unit vector from the minimum towards the barrier), ``barrier_m`` (its position;
    a ray's far end when the way out has no barrier but the far field), ``kind`` ('saddle', 'ridge', 'shoulder'
    or 'far', see seqgen.physics.saddle) and the minimum (TrapMinimum)."""

    depth_j: float
    direction: np.ndarray
    barrier_m: np.ndarray
    kind: str
    minimum: TrapMinimum


# rays from the minimum: log-spaced radii from a hundredth of the smallest waist to many Rayleigh lengths (the
# light potential along a beam's axis falls as 1/(1 + s^2/z_R^2): a 0.1 % remainder at 30 z_R)
_N_RADII = 160  # 9 % steps over 5.7 decades: maxima are refined, shoulders are flat
_TILTS = np.array([0.002, 0.005, 0.01, 0.03, 0.1])  # downward slopes along each beam (gravity)


@functools.lru_cache(maxsize=1)
def _sphere() -> np.ndarray:
    from .saddle import fibonacci_directions

    return fibonacci_directions(32)  # golden-spiral directions besides the beams' axes, principal axes, vertical


def _escape_directions(beams, m: TrapMinimum, up: np.ndarray | None) -> np.ndarray:
    """Beam axes, principal axes (both ways), the vertical, a golden-spiral set and, with gravity, each
    beam's axis tilted slightly downward: out along a beam, atoms fall where it has widened and weakened."""
    axes = [np.asarray(b.direction) for b in beams] + list(m.axes.T)
    dirs = [a * sgn for a in axes for sgn in (1.0, -1.0)] + list(_sphere())
    if up is not None:
        dirs += [up, -up]
        for b in beams:
            k = np.asarray(b.direction) - np.dot(b.direction, up) * up
            if np.linalg.norm(k) > 0.1:
                k = k / np.linalg.norm(k)
                dirs += [sgn * k - t * up for sgn in (1.0, -1.0) for t in _TILTS]
    d = np.array(dirs)
    return d / np.linalg.norm(d, axis=1, keepdims=True)


def trap_escape(species: Species, beams, gravity: bool = True, vertical=(0, 0, 1),
                minimum: TrapMinimum | None = None) -> TrapEscape:
    """The trap's depth as the energy of its lowest escape route in 3-D (all beams, gravity if asked).

    Rays from the minimum (seqgen.physics.saddle.lowest_escape) along the beams' axes, the principal axes,
    the vertical and a spread of directions; each ray's first maximum, refined to the saddle point (gradient
    zero, one negative Hessian eigenvalue), or its first shoulder where a weak beam crosses a strong one
    (atoms escape along the strong beam), or the far-field value. A single beam without gravity gives its peak
    potential U0 = -Re(alpha) I0/(2 eps0 c) (ODT review, Adv. At. Mol. Opt. Phys. 42, 95 (2000)); a strong
    guide crossed by a weak dimple gives about the dimple's own U0, the way out along the guide. Raises
    ValueError when there is no minimum (as find_trap_minimum).
    """
    from .saddle import lowest_escape

    beams = _as_beams(beams)
    up = _unit(vertical)
    m = minimum if minimum is not None else find_trap_minimum(species, beams, gravity=gravity, vertical=up)
    x0 = m.position_m
    length = _length_scale(beams)
    reach = 30 * max(max(b._rayleigh) for b in beams)
    radii = np.concatenate([[0.0], 1e-2 * length * np.exp(np.linspace(0.0, np.log(reach / (1e-2 * length)), _N_RADII))])

    def f(p):
        return total_potential(species, beams, p, gravity=gravity, vertical=up, reference_m=x0)

    def grad(p):
        return potential_gradient(species, beams, p, gravity=gravity, vertical=up)

    def far(p):  # the light gone: gravity alone
        return species.mass_kg * G_N * ((p - x0) @ up) if gravity else np.zeros(len(p))

    u_scale = abs(float(beam_potential(species, beams, x0)))
    esc = lowest_escape(f, grad, x0, _escape_directions(beams, m, up if gravity else None), radii, far,
                        length, u_scale / length)
    return TrapEscape(max(0.0, esc.energy - float(f(x0))), esc.direction, esc.point, esc.kind, m)


@dataclass(frozen=True)
class HeldTrapNumbers:
    """What held_trap_escape finds: depth (J, 0 when nothing is held), angular frequencies (rad/s, ascending)
    and principal axes (columns) or None, recoil heating rate (K/s) at the minimum, escape direction (unit
    vector) or None."""

    depth_j: float
    omegas_rad_s: np.ndarray | None = None
    axes: np.ndarray | None = None
    heating_k_s: float = 0.0
    escape: np.ndarray | None = None


def held_trap_escape(species: Species, beams, vertical=(0, 0, 1)) -> HeldTrapNumbers:
    """Depth with gravity as the lowest escape route (trap_escape), frequencies, axes, heating at the
    minimum and the way out, from one minimisation; depth 0 when gravity leaves no minimum."""
    beams = _as_beams(beams)
    up = _unit(vertical)
    try:
        m = find_trap_minimum(species, beams, gravity=True, vertical=up)
    except ValueError:
        return HeldTrapNumbers(0.0)
    esc = trap_escape(species, beams, gravity=True, vertical=up, minimum=m)
    if esc.depth_j <= 0:
        return HeldTrapNumbers(0.0)
    return HeldTrapNumbers(esc.depth_j, m.omegas_rad_s, m.axes, recoil_heating_rate_at(species, beams, m.position_m),
                           esc.direction)


def minimum_power_to_hold(species: Species, beam_waist_m: float, wavelength_m: float) -> float:
    """Power (W) below which one horizontal beam no longer holds atoms against gravity.

    On the vertical through the focus U = -U0 exp(-2 z^2/w^2); its largest
    gradient, 2 U0 e^{-1/2} / w at z = w/2, must exceed m g_n, so
    U0_min = m g_n w sqrt(e) / 2 and P_min = U0_min pi w^2 / (2 |U/I|).
    ``beam_waist_m`` is the vertical waist.
    """
    u_per_i = dipole_potential_per_intensity(species, wavelength_m)
    if not u_per_i < 0:
        raise ValueError("blue-detuned light repels ground-state atoms: no holding power")
    u0_min = species.mass_kg * G_N * beam_waist_m * np.sqrt(np.e) / 2
    return float(u0_min * np.pi * beam_waist_m**2 / (2 * -u_per_i))


def scattering_rate_at_minimum(species: Species, beams, gravity: bool = True, vertical=(0, 0, 1)) -> float:
    """Photon scattering rate (1/s) of an atom at the trap minimum, summed over beams."""
    beams = _as_beams(beams)
    x = find_trap_minimum(species, beams, gravity=gravity, vertical=vertical).position_m
    return float(sum(scattering_rate_per_intensity(species, b.wavelength_m) * b.intensity(x) for b in beams))


def recoil_heating_rate(species: Species, beams, gravity: bool = True, vertical=(0, 0, 1)) -> float:
    """Recoil heating dT/dt (K/s) at the trap bottom.

    Each scattered trap photon adds 2 E_rec of energy on average (absorption
    plus emission recoil), dE/dt = 2 E_rec Gamma_sc; in a 3-D harmonic trap
    E = 3 k_B T, so dT/dt = (2/3) E_rec Gamma_sc / k_B = T_rec Gamma_sc / 3 with
    k_B T_rec = hbar^2 k^2 / m (ODT review, Adv. At. Mol. Opt. Phys. 42, 95 (2000)).
    E_rec uses each beam's own wavelength.
    """
    beams = _as_beams(beams)
    x = find_trap_minimum(species, beams, gravity=gravity, vertical=vertical).position_m
    return recoil_heating_rate_at(species, beams, x)


def recoil_heating_rate_at(species: Species, beams, position_m) -> float:
    """Recoil heating dT/dt (K/s) of atoms at ``position_m``: (2/3) sum_beams E_rec Gamma_sc / k_B, as in
    recoil_heating_rate (ODT review, Adv. At. Mol. Opt. Phys. 42, 95 (2000))."""
    x = np.asarray(position_m, dtype=float)
    power = sum(2 * recoil_energy(species, b.wavelength_m)
                * scattering_rate_per_intensity(species, b.wavelength_m) * b.intensity(x) for b in _as_beams(beams))
    return float(power / (3 * sc.k))
