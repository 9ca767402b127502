"""Magnetic-dipole couplings between ground hyperfine levels (J = 1/2) at a bias field.

The eigenstates of the ground-state Hamiltonian (alkali D-line data compilations; Rev. Mod. Phys. 49, 31 (1977))
    H = A I.J + mu_B (g_J J_z + g_I I_z) B,        A = h nu_hfs / (I + 1/2),
are found by diagonalising H in each block of total m = m_J + m_I (H conserves m) of the product basis
|m_J, m_I>; their energies are the Breit-Rabi formula (Phys. Rev. 38, 2082 (1931)). Each eigenstate keeps the
low-field label |F, mF> it connects to at B = 0: in a block of two, F = I + 1/2 is the upper eigenvalue when
A > 0 and the lower one when A < 0 (K-40), since two levels of equal m never cross; the stretched states
|m| = I + 1/2 are single product states. Phase: the m_J = -1/2 component of every eigenvector is >= 0 (else its
m_J = +1/2 component > 0), which is the Condon-Shortley phase of the I x J coupling at B = 0.

Magnetic dipole operator: mu = -mu_B (g_J J + g_I I) (g_I in the sign convention of ``seqgen.physics.zeeman``),
spherical components V_{+1} = -(V_x + i V_y)/sqrt(2), V_0 = V_z, V_{-1} = (V_x - i V_y)/sqrt(2); mu_q raises m
by q. An oscillating field B(t) = Re(B_1 e e^{-i w t}) (e a unit polarisation vector, z along the bias field)
couples a lower level |l> to an upper level |u> (by energy) through <u| mu.e |l> (rotating-wave
approximation), with mu.e = sum_q (-1)^q e_{-q} mu_q, e_q the spherical components of e. Named polarisations:
"sigma+" (e = e_{+1}: drives m_u = m_l + 1), "sigma-" (e = e_{-1}: m_u = m_l - 1) and "pi" (e = z: m_u = m_l).
A real direction vector [x, y, z] is a linearly polarised field: its transverse part drives sigma+ and sigma-
equally (weight |e_perp|/sqrt(2) each) and its z part pi.

SI units: fields in T, energies in J, matrix elements in J/T. Atomic numbers as keywords or an ``atom`` object
(e.g. ``seqgen.physics.atoms.Species``), as in ``seqgen.physics.zeeman``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from scipy import constants as sc

from .zeeman import _zeeman_params

MU_B = sc.physical_constants["Bohr magneton"][0]  # J/T
H = sc.h  # J s
FORBIDDEN_RELATIVE = 1e-9  # a coupling below this fraction of g_J mu_B counts as zero (numerical noise is ~1e-16)
NAMED = ("sigma+", "sigma-", "pi")

__all__ = ["FORBIDDEN_RELATIVE", "NAMED", "HyperfineStates", "product_basis", "hyperfine_hamiltonian",
           "breit_rabi_states", "dipole_operator", "magnetic_dipole_element", "polarisation_weights",
           "coupling_element", "relative_coupling", "is_forbidden", "allowed_partners"]


def _half(x) -> float:
    return round(2 * float(x)) / 2


@lru_cache(maxsize=None)
def _basis(i: float) -> tuple:
    return tuple((mj, -i + k) for mj in (0.5, -0.5) for k in range(int(round(2 * i)) + 1))


def product_basis(nuclear_spin) -> tuple:
    """The product basis ((m_J, m_I), ...): m_J = +1/2 first, then -1/2; m_I ascending in each."""
    return _basis(_half(nuclear_spin))


def _ladder(j: float):
    """(J_z, J_+, J_-) of one angular momentum j in the basis m = -j .. j (ascending)."""
    m = np.arange(-j, j + 0.5)
    up = np.diag(np.sqrt(j * (j + 1) - m[:-1] * (m[:-1] + 1)), -1)  # <m+1|J_+|m>
    return np.diag(m), up, up.T


@lru_cache(maxsize=None)
def _operators(i: float):
    """Spin matrices on the product space, ordered as `product_basis`: J = 1/2 first factor (m_J = +1/2 first)."""
    jz, jp, jm = (np.flipud(np.fliplr(x)) for x in _ladder(0.5))  # reorder to m_J = +1/2, -1/2
    iz, ip, im = _ladder(i)
    one_j, one_i = np.eye(2), np.eye(int(round(2 * i)) + 1)
    ops = {"Jz": np.kron(jz, one_i), "Jp": np.kron(jp, one_i), "Jm": np.kron(jm, one_i),
           "Iz": np.kron(one_j, iz), "Ip": np.kron(one_j, ip), "Im": np.kron(one_j, im)}
    for v in ops.values():
        v.setflags(write=False)
    return ops


def hyperfine_hamiltonian(B, *, nuclear_spin=None, hyperfine_splitting_hz=None, g_j=None, g_i=None, atom=None):
    """(basis, H): the ground-state Hamiltonian (J) at field B (T) in `product_basis` order."""
    i, nu, gj, gi = _zeeman_params(atom, nuclear_spin, hyperfine_splitting_hz, g_j, g_i)
    i = _half(i)
    o = _operators(i)
    a = H * nu / (i + 0.5)
    i_dot_j = o["Iz"] @ o["Jz"] + 0.5 * (o["Ip"] @ o["Jm"] + o["Im"] @ o["Jp"])
    return _basis(i), a * i_dot_j + MU_B * float(B) * (gj * o["Jz"] + gi * o["Iz"])


@dataclass(frozen=True, eq=False)
class HyperfineStates:
    """The ground-state eigenstates at one field: labels ((F, mF), ...) in `zeeman.ground_states` order
    (F = I - 1/2 first, mF ascending), energies_j (J) and vectors (column k: state k in `basis`)."""

    nuclear_spin: float
    field_t: float
    basis: tuple
    labels: tuple
    energies_j: np.ndarray
    vectors: np.ndarray

    def index(self, F, mF) -> int:
        key = (_half(F), _half(mF))
        try:
            return self.labels.index(key)
        except ValueError:
            raise ValueError(f"|F={F:g}, mF={mF:g}> is not a ground level of a nuclear spin "
                             f"{self.nuclear_spin:g} atom") from None

    def vector(self, F, mF) -> np.ndarray:
        return self.vectors[:, self.index(F, mF)]

    def energy(self, F, mF) -> float:
        return float(self.energies_j[self.index(F, mF)])


def breit_rabi_states(B, *, nuclear_spin=None, hyperfine_splitting_hz=None, g_j=None, g_i=None, atom=None):
    """The labelled eigenstates of the ground-state Hamiltonian at field B (T), a `HyperfineStates`."""
    i, nu, gj, gi = _zeeman_params(atom, nuclear_spin, hyperfine_splitting_hz, g_j, g_i)
    i = _half(i)
    basis, h = hyperfine_hamiltonian(B, nuclear_spin=i, hyperfine_splitting_hz=nu, g_j=gj, g_i=gi)
    m_tot = np.array([mj + mi for mj, mi in basis])
    labels, energies, columns = [], [], []
    for F in (i - 0.5, i + 0.5):
        for k in range(int(round(2 * F)) + 1):
            m = -F + k
            idx = np.nonzero(np.abs(m_tot - m) < 1e-9)[0]
            w, v = np.linalg.eigh(h[np.ix_(idx, idx)])
            if len(idx) == 1:
                col = 0
            else:  # two levels of equal m never cross: F = I + 1/2 is the upper one when A > 0
                col = 1 if (F > i) == (nu > 0) else 0
            vec = np.zeros(len(basis))
            vec[idx] = v[:, col]
            down = [j for j in idx if basis[j][0] < 0]
            ref = vec[down[0]] if down and abs(vec[down[0]]) > 1e-300 else vec[idx[0]]
            labels.append((F, m))
            energies.append(w[col])
            columns.append(vec if ref >= 0 else -vec)
    vectors = np.column_stack(columns)
    energies = np.array(energies)
    vectors.setflags(write=False)
    energies.setflags(write=False)
    return HyperfineStates(i, float(B), basis, tuple(labels), energies, vectors)


def dipole_operator(q, *, nuclear_spin=None, g_j=None, g_i=None, atom=None):
    """The spherical component mu_q (q = -1, 0, +1) of mu = -mu_B (g_J J + g_I I) as a matrix (J/T) in
    `product_basis` order."""
    given = dict(nuclear_spin=nuclear_spin, g_j=g_j, g_i=g_i)
    i, gj, gi = (float(given[k] if given[k] is not None else getattr(atom, k)) for k in ("nuclear_spin", "g_j", "g_i"))
    o = _operators(_half(i))
    if q == 1:
        j, n = -o["Jp"] / math.sqrt(2), -o["Ip"] / math.sqrt(2)
    elif q == 0:
        j, n = o["Jz"], o["Iz"]
    elif q == -1:
        j, n = o["Jm"] / math.sqrt(2), o["Im"] / math.sqrt(2)
    else:
        raise ValueError(f"q must be -1, 0 or +1, got {q!r}")
    return -MU_B * (gj * j + gi * n)


def magnetic_dipole_element(initial, final, q, B, *, nuclear_spin=None, hyperfine_splitting_hz=None, g_j=None,
                            g_i=None, atom=None) -> float:
    """<final| mu_q |initial> (J/T) between the labelled eigenstates (F, mF) at field B (T); real in the phase
    convention of this module; zero unless mF_final = mF_initial + q."""
    i, nu, gj, gi = _zeeman_params(atom, nuclear_spin, hyperfine_splitting_hz, g_j, g_i)
    states = breit_rabi_states(B, nuclear_spin=i, hyperfine_splitting_hz=nu, g_j=gj, g_i=gi)
    op = dipole_operator(q, nuclear_spin=i, g_j=gj, g_i=gi)
    return float(states.vector(*final) @ op @ states.vector(*initial))


def polarisation_weights(polarisation) -> dict:
    """{q: w_q} with mu.e = sum_q w_q mu_q: "sigma+" -> {+1: 1}, "sigma-" -> {-1: 1}, "pi" -> {0: 1}; a direction
    [x, y, z] (z along the bias field; normalised here) -> w_q = (-1)^q e_{-q}. ValueError otherwise."""
    if isinstance(polarisation, str):
        if polarisation not in NAMED:
            raise ValueError(f"polarisation must be one of {', '.join(NAMED)} or a direction [x, y, z], "
                             f"got {polarisation!r}")
        return {{"sigma+": 1, "sigma-": -1, "pi": 0}[polarisation]: 1.0 + 0j}
    e = np.asarray(polarisation, dtype=complex)
    n = float(np.linalg.norm(e)) if e.shape == (3,) and np.all(np.isfinite(e)) else 0.0
    if not n > 0:
        raise ValueError(f"a polarisation direction must be three finite numbers, not all zero, got {polarisation!r}")
    x, y, z = e / n
    sph = {1: -(x + 1j * y) / math.sqrt(2), 0: z, -1: (x - 1j * y) / math.sqrt(2)}  # e_q
    return {q: (-1) ** q * sph[-q] for q in (-1, 0, 1)}


def _ordered(states, initial, final):
    """(lower, upper) by energy; the initial state first when the two are degenerate."""
    ei, ef = states.energy(*initial), states.energy(*final)
    return (final, initial) if ei > ef else (initial, final)


def coupling_element(initial, final, B, polarisation, *, nuclear_spin=None, hyperfine_splitting_hz=None,
                     g_j=None, g_i=None, atom=None) -> float:
    """|<upper| mu.e |lower>| (J/T) of the transition initial <-> final at field B (T) for a polarisation
    ("sigma+", "sigma-", "pi" or a direction [x, y, z] relative to the bias axis); upper and lower by energy."""
    i, nu, gj, gi = _zeeman_params(atom, nuclear_spin, hyperfine_splitting_hz, g_j, g_i)
    states = breit_rabi_states(B, nuclear_spin=i, hyperfine_splitting_hz=nu, g_j=gj, g_i=gi)
    return _coupling(states, initial, final, polarisation_weights(polarisation), gj, gi)


def _coupling(states, initial, final, weights, gj, gi) -> float:
    lower, upper = _ordered(states, initial, final)
    q = int(round(_half(upper[1]) - _half(lower[1])))
    if q not in weights:
        return 0.0
    op = dipole_operator(q, nuclear_spin=states.nuclear_spin, g_j=gj, g_i=gi)
    return float(abs(weights[q] * (states.vector(*upper) @ op @ states.vector(*lower))))


def is_forbidden(element, *, g_j=None, atom=None) -> bool:
    """True when a coupling element (J/T) is zero: below FORBIDDEN_RELATIVE of g_J mu_B."""
    gj = float(g_j if g_j is not None else getattr(atom, "g_j"))
    return abs(float(element)) <= FORBIDDEN_RELATIVE * abs(gj) * MU_B


def relative_coupling(pair, reference, B, polarisation, *, nuclear_spin=None, hyperfine_splitting_hz=None,
                      g_j=None, g_i=None, atom=None) -> float:
    """|<f| mu.e |i>| / |<f_ref| mu.e |i_ref>| for pair = (i, f) and reference = (i_ref, f_ref), each state
    (F, mF), at field B (T): the factor by which a drive calibrated on the reference transition drives the pair.
    ValueError when the polarisation does not drive the reference transition."""
    i, nu, gj, gi = _zeeman_params(atom, nuclear_spin, hyperfine_splitting_hz, g_j, g_i)
    states = breit_rabi_states(B, nuclear_spin=i, hyperfine_splitting_hz=nu, g_j=gj, g_i=gi)
    weights = polarisation_weights(polarisation)
    ref = _coupling(states, reference[0], reference[1], weights, gj, gi)
    if is_forbidden(ref, g_j=gj):
        raise ValueError(f"the polarisation {polarisation!r} does not drive the reference transition {reference}")
    return _coupling(states, pair[0], pair[1], weights, gj, gi) / ref


def allowed_partners(initial, F, B, polarisation, *, nuclear_spin=None, hyperfine_splitting_hz=None, g_j=None,
                     g_i=None, atom=None) -> tuple:
    """((final, coupling J/T), ...) for every |F, mF> (mF != initial's when F is the initial's F) that the
    polarisation couples to `initial` at field B, strongest first."""
    i, nu, gj, gi = _zeeman_params(atom, nuclear_spin, hyperfine_splitting_hz, g_j, g_i)
    states = breit_rabi_states(B, nuclear_spin=i, hyperfine_splitting_hz=nu, g_j=gj, g_i=gi)
    weights = polarisation_weights(polarisation)
    start = (_half(initial[0]), _half(initial[1]))
    states.index(*start)
    out = []
    for label in states.labels:
        if label[0] != _half(F) or label == start:
            continue
        c = _coupling(states, start, label, weights, gj, gi)
        if not is_forbidden(c, g_j=gj):
            out.append((label, c))
    return tuple(sorted(out, key=lambda lc: -lc[1]))
