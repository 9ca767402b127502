"""Ground-state Zeeman structure of alkali atoms (J = 1/2): Breit-Rabi formula.

Hamiltonian (alkali D-line data compilations; Rev. Mod. Phys. 49, 31 (1977)):
    H = A I.J + mu_B (g_J J_z + g_I I_z) B
with g_I in the sign convention where the nuclear term is +g_I mu_B I_z B
(Rb-87: g_I = -0.0009951414). Its exact eigenvalues for J = 1/2 are the
Breit-Rabi formula (Phys. Rev. 38, 2082 (1931)):
    E(F = I +/- 1/2, m) = -dE_hfs / (2(2I+1)) + g_I mu_B m B
                          +/- (dE_hfs/2) sqrt(1 + 4 m x / (2I+1) + x^2),
    x = (g_J - g_I) mu_B B / dE_hfs,   dE_hfs = A (I + 1/2) = h nu_hfs.

Sign conventions used throughout:
- ``hyperfine_splitting_hz`` is [E(F=I+1/2) - E(F=I-1/2)]/h at B = 0: negative
  for an inverted ground state (K-40). The formula above is then still exact:
  the "+" branch is always the one that connects to F = I + 1/2 at B = 0.
- B is the field component along the quantisation axis in tesla (may be
  negative; |F, mF> labels are continued from B = 0).
- magnetic moment = -dE/dB (J/T), the convention of the whole physics package
  (``seqgen.physics``). A positive moment lowers its energy in a stronger
  field (high-field seeker); a negative one is a low-field seeker
  (magnetically trappable). The force along z is F_z = -dE/dz = moment * dB/dz.
  ``seqgen.physics.atoms.magnetic_moment_first_order`` is the B -> 0 limit,
  -g_F m_F mu_B.

All functions take the atomic numbers as keywords, or an ``atom`` object with
attributes of the same names (duck typing, e.g. atoms.Species); explicit
keywords win over the object.
"""

from __future__ import annotations

import numpy as np
from scipy import constants as sc

MU_B = sc.physical_constants["Bohr magneton"][0]  # J/T
H = sc.h  # J s

__all__ = [
    "breit_rabi_energy",
    "magnetic_moment",
    "transition_frequency",
    "quadratic_zeeman_coefficient",
    "lande_g_f",
    "is_first_order_insensitive",
    "ground_states",
    "zeeman_levels",
    "field_insensitive_point",
]


def _params(atom, names, given):
    """Pick each named value from ``given`` (explicit keyword) or from ``atom``."""
    out = []
    for name in names:
        value = given.get(name)
        if value is None and atom is not None:
            value = getattr(atom, name, None)
        if value is None:
            raise TypeError(f"missing atomic parameter {name!r} (pass it as a keyword or via atom=)")
        out.append(float(value))
    return out


_ZEEMAN_NAMES = ("nuclear_spin", "hyperfine_splitting_hz", "g_j", "g_i")


def _zeeman_params(atom, nuclear_spin, hyperfine_splitting_hz, g_j, g_i):
    i, nu, gj, gi = _params(atom, _ZEEMAN_NAMES, dict(
        nuclear_spin=nuclear_spin, hyperfine_splitting_hz=hyperfine_splitting_hz, g_j=g_j, g_i=g_i))
    if i <= 0 or abs(2 * i - round(2 * i)) > 1e-9:
        raise ValueError(f"nuclear spin must be a positive half-integer or integer, got {i}")
    if nu == 0:
        raise ValueError("hyperfine splitting must be non-zero")
    return i, nu, gj, gi


def _branch(F, mF, i):
    """+1 for F = I + 1/2, -1 for F = I - 1/2; also checks that mF is a sublevel."""
    F = np.asarray(F, dtype=float)
    mF = np.asarray(mF, dtype=float)
    upper = np.abs(F - (i + 0.5)) < 1e-9
    lower = np.abs(F - (i - 0.5)) < 1e-9
    if not np.all(upper | lower):
        raise ValueError(f"ground-state F must be {i - 0.5:g} or {i + 0.5:g}, got {F}")
    if np.any(np.abs(mF) > F + 1e-9) or np.any(np.abs((F - mF) - np.round(F - mF)) > 1e-9):
        raise ValueError(f"mF = {mF} is not a sublevel of F = {F}")
    return np.where(upper, 1.0, -1.0), mF


def _root_and_slope(s, mF, x, i):
    """sqrt(1 + 4 m x/(2I+1) + x^2) and its x-derivative.

    For the stretched states |m| = I + 1/2 the square root is |1 + sign(m) x|;
    the physical (pure |m_J, m_I>) state follows 1 + sign(m) x without the
    absolute value, i.e. its energy stays linear in B through x = -/+1.
    """
    stretched = np.abs(np.abs(mF) - (i + 0.5)) < 1e-9
    arg = 1.0 + 4.0 * mF * x / (2 * i + 1) + x * x
    root = np.sqrt(np.maximum(arg, 0.0))
    with np.errstate(divide="ignore", invalid="ignore"):
        slope = (2.0 * mF / (2 * i + 1) + x) / root
    sign_m = np.sign(mF)
    root = np.where(stretched, 1.0 + sign_m * x, root)
    slope = np.where(stretched, sign_m, slope)
    return root, slope


def _energy_hz(F, mF, B, i, nu, gj, gi):
    s, mF = _branch(F, mF, i)
    B = np.asarray(B, dtype=float)
    x = (gj - gi) * MU_B * B / (H * nu)
    root, _ = _root_and_slope(s, mF, x, i)
    return -nu / (2 * (2 * i + 1)) + gi * MU_B * mF * B / H + s * 0.5 * nu * root


def _out(a):
    a = np.asarray(a, dtype=float)
    return float(a) if a.ndim == 0 else a


def breit_rabi_energy(F, mF, B, *, nuclear_spin=None, hyperfine_splitting_hz=None,
                      g_j=None, g_i=None, atom=None):
    """Energy (J) of the ground level |F, mF> in a field B (T), Breit-Rabi formula.

    E = -h nu_hfs / (2(2I+1)) + g_I mu_B mF B +/- (h nu_hfs / 2) sqrt(1 + 4 mF x/(2I+1) + x^2),
    x = (g_J - g_I) mu_B B / (h nu_hfs), "+" for F = I + 1/2
    (Phys. Rev. 38, 2082 (1931); form and sign convention of the alkali D-line
    data compilations). Zero of energy: the hyperfine centroid. Stretched
    states mF = +/-(I + 1/2) use the linear branch 1 +/- x (see module notes).
    F, mF and B broadcast against each other.
    """
    i, nu, gj, gi = _zeeman_params(atom, nuclear_spin, hyperfine_splitting_hz, g_j, g_i)
    return _out(H * _energy_hz(F, mF, B, i, nu, gj, gi))


def magnetic_moment(F, mF, B, *, nuclear_spin=None, hyperfine_splitting_hz=None,
                    g_j=None, g_i=None, atom=None):
    """Magnetic moment -dE/dB (J/T) of |F, mF> at field B (T), analytic derivative.

    -dE/dB = -g_I mu_B mF -/+ ((g_J - g_I) mu_B / 2) (2 mF/(2I+1) + x) / sqrt(1 + 4 mF x/(2I+1) + x^2)
    (derivative of the Breit-Rabi formula, Phys. Rev. 38, 2082 (1931)).
    Low field: -g_F mF mu_B; high field: -(g_J m_J + g_I m_I) mu_B.
    Positive = high-field seeker; force F_z = moment * dB/dz.
    """
    i, nu, gj, gi = _zeeman_params(atom, nuclear_spin, hyperfine_splitting_hz, g_j, g_i)
    s, mF_arr = _branch(F, mF, i)
    B = np.asarray(B, dtype=float)
    x = (gj - gi) * MU_B * B / (H * nu)
    _, slope = _root_and_slope(s, mF_arr, x, i)
    # d/dB [s nu/2 root(x)] = s nu/2 slope dx/dB, dx/dB = (gj - gi) mu_B / (h nu): nu cancels
    dEdB = gi * MU_B * mF_arr + s * 0.5 * (gj - gi) * MU_B * slope
    return _out(-dEdB)


def transition_frequency(F1, m1, F2, m2, B, *, nuclear_spin=None, hyperfine_splitting_hz=None,
                         g_j=None, g_i=None, atom=None):
    """Frequency (Hz) of |F1, m1> -> |F2, m2>: [E(F2, m2) - E(F1, m1)] / h at field B (T).

    Computed from the Breit-Rabi formula with the common offset cancelled
    analytically, so the zero-field clock line is exactly nu_hfs (Cs-133:
    9 192 631 770 Hz, SI Brochure). Negative if state 2 lies below state 1.
    """
    i, nu, gj, gi = _zeeman_params(atom, nuclear_spin, hyperfine_splitting_hz, g_j, g_i)
    s1, m1a = _branch(F1, m1, i)
    s2, m2a = _branch(F2, m2, i)
    B = np.asarray(B, dtype=float)
    x = (gj - gi) * MU_B * B / (H * nu)
    r1, _ = _root_and_slope(s1, m1a, x, i)
    r2, _ = _root_and_slope(s2, m2a, x, i)
    return _out(gi * MU_B * (m2a - m1a) * B / H + 0.5 * nu * (s2 * r2 - s1 * r1))


def _second_order_hz_per_t2(F, mF, i, nu, gj, gi):
    # sqrt(1 + a x + x^2) = 1 + a x/2 + (1/2 - a^2/8) x^2 + ..., a = 4 mF/(2I+1)
    s, mF = _branch(F, mF, i)
    a = 4.0 * mF / (2 * i + 1)
    k = (gj - gi) * MU_B / (H * nu)  # x per tesla
    stretched = np.abs(np.abs(mF) - (i + 0.5)) < 1e-9
    return np.where(stretched, 0.0, s * 0.5 * nu * (0.5 - a * a / 8.0) * k * k)


def quadratic_zeeman_coefficient(F1=None, m1=0, F2=None, m2=0, *, nuclear_spin=None,
                                 hyperfine_splitting_hz=None, g_j=None, g_i=None, atom=None):
    """Second-order Zeeman coefficient K (Hz/T^2) of a transition: nu(B) = nu(0) + nu_1 B + K B^2 + ...

    Defaults to the clock line |I-1/2, 0> -> |I+1/2, 0>, where the Breit-Rabi
    formula gives nu = nu_hfs sqrt(1 + x^2), so
        K = (g_J - g_I)^2 mu_B^2 / (2 h^2 nu_hfs)
    (Phys. Rev. 38, 2082 (1931); Rb-87: 575.15 Hz/G^2 = 5.7515e10 Hz/T^2 in
    the Rb-87 D-line data compilation). For other pairs, the B^2 term of the
    Taylor series of each level: s (nu/2) (1/2 - a^2/8) x^2 with a = 4m/(2I+1).
    """
    i, nu, gj, gi = _zeeman_params(atom, nuclear_spin, hyperfine_splitting_hz, g_j, g_i)
    F1 = i - 0.5 if F1 is None else F1
    F2 = i + 0.5 if F2 is None else F2
    return _out(_second_order_hz_per_t2(F2, m2, i, nu, gj, gi) - _second_order_hz_per_t2(F1, m1, i, nu, gj, gi))


def lande_g_f(F, *, nuclear_spin=None, g_j=None, g_i=None, atom=None):
    """Hyperfine Lande factor g_F for J = 1/2:
    g_F = g_J [F(F+1) - I(I+1) + 3/4] / [2F(F+1)] + g_I [F(F+1) + I(I+1) - 3/4] / [2F(F+1)]
    (Rev. Mod. Phys. 49, 31 (1977)). In this module's sign, E = g_F mF mu_B B at low field.
    """
    i, gj, gi = _params(atom, ("nuclear_spin", "g_j", "g_i"), dict(nuclear_spin=nuclear_spin, g_j=g_j, g_i=g_i))
    F = np.asarray(F, dtype=float)
    ff, ii = F * (F + 1), i * (i + 1)
    with np.errstate(divide="ignore", invalid="ignore"):
        g = gj * (ff - ii + 0.75) / (2 * ff) + gi * (ff + ii - 0.75) / (2 * ff)
    return _out(np.where(F == 0, 0.0, g))


def is_first_order_insensitive(F, mF) -> bool:
    """True for mF = 0: no linear Zeeman shift at B = 0 (clock states).

    At finite field these states keep a small moment, linear in B
    (see magnetic_moment), so "insensitive" holds to first order only.
    """
    del F  # any F; the statement depends on mF only
    return bool(abs(float(mF)) < 1e-12)


def ground_states(nuclear_spin) -> tuple[tuple[float, float], ...]:
    """All ground |F, mF> of a J = 1/2 atom: F = I - 1/2 first, mF ascending."""
    i = float(nuclear_spin)
    states = []
    for F in (i - 0.5, i + 0.5):
        if F < 0:
            continue
        n = int(round(2 * F)) + 1
        states.extend((F, -F + k) for k in range(n))
    return tuple(states)


def zeeman_levels(B, *, nuclear_spin=None, hyperfine_splitting_hz=None, g_j=None, g_i=None, atom=None):
    """Energies (J) of every ground level: returns (states, E) with E.shape = (len(states),) + B.shape."""
    i, nu, gj, gi = _zeeman_params(atom, nuclear_spin, hyperfine_splitting_hz, g_j, g_i)
    states = ground_states(i)
    B = np.asarray(B, dtype=float)
    E = np.stack([H * _energy_hz(F, m, B, i, nu, gj, gi) for F, m in states])
    return states, E


def field_insensitive_point(F1, m1, F2, m2, *, b_max_t=1.0, nuclear_spin=None, hyperfine_splitting_hz=None,
                            g_j=None, g_i=None, atom=None):
    """Smallest field B in [0, b_max_t] (T) where d nu / dB = 0 for |F1,m1> -> |F2,m2>, or None.

    The clock line gives 0. For Rb-87 |1,-1> -> |2,+1> the linear terms of the
    two levels nearly cancel and the quadratic term turns the slope over at a
    few gauss (two-photon "magic" field).
    """
    from scipy import optimize

    i, nu, gj, gi = _zeeman_params(atom, nuclear_spin, hyperfine_splitting_hz, g_j, g_i)
    s1, m1a = _branch(F1, m1, i)
    s2, m2a = _branch(F2, m2, i)
    k = (gj - gi) * MU_B / (H * nu)

    def slope(B):
        x = k * np.asarray(B, dtype=float)
        _, d1 = _root_and_slope(s1, m1a, x, i)
        _, d2 = _root_and_slope(s2, m2a, x, i)
        return gi * MU_B * (m2a - m1a) / H + 0.5 * nu * k * (s2 * d2 - s1 * d1)

    if abs(float(slope(0.0))) <= 1e-9 * abs(nu * k):
        return 0.0
    grid = np.linspace(0.0, b_max_t, 4001)
    values = slope(grid)
    change = np.nonzero(np.sign(values[1:]) != np.sign(values[:-1]))[0]
    if change.size == 0:
        return None
    j = change[0]
    return float(optimize.brentq(lambda b: float(slope(b)), grid[j], grid[j + 1], xtol=1e-15, rtol=1e-14))
