"""Breit-Rabi ground-state Zeeman structure, checked against published values and
an exact diagonalisation of the ground-state Hamiltonian built here."""

from types import SimpleNamespace

import numpy as np
import pytest
from scipy import constants as sc

from seqgen.physics import zeeman as z

MU_B = sc.physical_constants["Bohr magneton"][0]

# Rb-87: hyperfine splitting Europhys. Lett. 45, 558 (1999) (from memory); g factors from the
# "Rubidium 87 D Line Data" compilation (g_J = 2.00233113, g_I = -0.0009951414).
RB87 = dict(nuclear_spin=1.5, hyperfine_splitting_hz=6_834_682_610.904, g_j=2.00233113, g_i=-0.0009951414)
# Na-23: "Sodium D Line Data" compilation (g factors from memory)
NA23 = dict(nuclear_spin=1.5, hyperfine_splitting_hz=1_771_626_128.8, g_j=2.0022960, g_i=-0.00080461)
# Cs-133: splitting exact (SI Brochure, 9th ed., 2019); g factors "Cesium D Line Data" compilation (from memory)
CS133 = dict(nuclear_spin=3.5, hyperfine_splitting_hz=9_192_631_770.0, g_j=2.00254032, g_i=-0.00039885395)
# K-40: inverted ground state, A = -285.7308 MHz, I = 4 -> splitting A (I + 1/2) = -1285.7886 MHz;
# g_J = 2.00229421, g_I = +0.000176490 ("Properties of Potassium", 2011) (from memory)
K40 = dict(nuclear_spin=4.0, hyperfine_splitting_hz=-285.7308e6 * 4.5, g_j=2.00229421, g_i=0.000176490)
ATOMS = {"Rb87": RB87, "Na23": NA23, "Cs133": CS133, "K40": K40}


def exact_levels(p, B):
    """Eigenvalues of H = A I.J + mu_B (g_J J_z + g_I I_z) B in the |m_J, m_I> basis
    (Rev. Mod. Phys. 49, 31 (1977)), labelled (F, mF) per mF block: in a block of
    two, F = I + 1/2 is the upper eigenvalue for A > 0 and the lower one for A < 0
    (levels of equal mF never cross)."""
    i = p["nuclear_spin"]
    a = sc.h * p["hyperfine_splitting_hz"] / (i + 0.5)
    out = {}
    for mf in np.arange(-(i + 0.5), i + 1.5):
        basis = [(mj, mf - mj) for mj in (0.5, -0.5) if abs(mf - mj) <= i + 1e-9]
        n = len(basis)
        h = np.zeros((n, n))
        for r, (mj, m_i) in enumerate(basis):
            h[r, r] = a * mj * m_i + MU_B * B * (p["g_j"] * mj + p["g_i"] * m_i)
        if n == 2:  # A/2 (J+ I- + J- I+) couples (1/2, mF-1/2) and (-1/2, mF+1/2)
            m_i = mf - 0.5
            h[0, 1] = h[1, 0] = 0.5 * a * np.sqrt(i * (i + 1) - m_i * (m_i + 1))
        ev = np.linalg.eigvalsh(h)
        if n == 1:
            out[(i + 0.5, mf)] = ev[0]
        else:
            hi, lo = (ev[1], ev[0]) if a > 0 else (ev[0], ev[1])
            out[(i + 0.5, mf)], out[(i - 0.5, mf)] = hi, lo
    return out


@pytest.mark.parametrize("name", list(ATOMS))
def test_energies_match_exact_diagonalisation(name):
    # the field grid crosses x = 1, where the stretched state |I+1/2, -(I+1/2)>
    # must follow 1 - x and not |1 - x| (Rb-87: about 0.24 T)
    p = ATOMS[name]
    scale = sc.h * abs(p["hyperfine_splitting_hz"])
    for B in (0.0, 1e-5, 3e-3, 0.05, 0.243, 0.5, 1.0):
        exact = exact_levels(p, B)
        for (F, mF), e in exact.items():
            assert z.breit_rabi_energy(F, mF, B, **p) == pytest.approx(e, abs=1e-11 * scale)


@pytest.mark.parametrize("name", list(ATOMS))
def test_moment_matches_numerical_derivative_of_exact_levels(name):
    p = ATOMS[name]
    dB = 1e-7
    for B in (2e-4, 0.02, 0.3):
        up, down = exact_levels(p, B + dB), exact_levels(p, B - dB)
        for state in up:
            numeric = -(up[state] - down[state]) / (2 * dB)
            assert z.magnetic_moment(*state, B, **p) == pytest.approx(numeric, abs=1e-6 * MU_B)


def test_rb87_clock_quadratic_coefficient():
    # 575.15 Hz/G^2 ("Rubidium 87 D Line Data" compilation); 1 G = 1e-4 T
    k = z.quadratic_zeeman_coefficient(**RB87)
    assert k * 1e-8 == pytest.approx(575.15, abs=0.01)
    # and the full Breit-Rabi line at 1 G shifts by that much (quartic term ~ x^2/4 ~ 4e-8 relative)
    shift = z.transition_frequency(1, 0, 2, 0, 1e-4, **RB87) - RB87["hyperfine_splitting_hz"]
    assert shift == pytest.approx(575.15, abs=0.01)


def test_cs133_zero_field_clock_is_the_si_second():
    # 9 192 631 770 Hz exactly (SI Brochure, 9th ed., 2019)
    assert z.transition_frequency(3, 0, 4, 0, 0.0, **CS133) == 9_192_631_770.0
    # Cs clock line quadratic Zeeman coefficient 427.45 Hz/G^2 ("Cesium D Line Data" compilation) (from memory)
    assert z.quadratic_zeeman_coefficient(**CS133) * 1e-8 == pytest.approx(427.45, abs=0.05)


def test_k40_inverted_structure():
    # F = 9/2 lies 1285.79 MHz BELOW F = 7/2 ("Properties of Potassium", 2011) (from memory)
    assert z.transition_frequency(3.5, 0.5, 4.5, 0.5, 0.0, **K40) == pytest.approx(-1285.7886e6, rel=1e-9)
    # |9/2, -9/2> is the absolute ground state at any field
    states, E = z.zeeman_levels(np.array([0.0, 1e-3, 0.1]), **K40)
    assert all(states[j] == (4.5, -4.5) for j in np.argmin(E, axis=0))


def lande(p, F):
    # g_F for J = 1/2 (Rev. Mod. Phys. 49, 31 (1977)); written out here, not imported
    i, ff = p["nuclear_spin"], F * (F + 1)
    return (p["g_j"] * (ff - i * (i + 1) + 0.75) + p["g_i"] * (ff + i * (i + 1) - 0.75)) / (2 * ff)


@pytest.mark.parametrize("name", list(ATOMS))
def test_low_field_moment_is_minus_gF_mF_muB(name):
    p = ATOMS[name]
    for F, mF in z.ground_states(p["nuclear_spin"]):
        expected = -lande(p, F) * mF * MU_B
        assert z.magnetic_moment(F, mF, 1e-9, **p) == pytest.approx(expected, abs=1e-6 * MU_B)
        assert z.lande_g_f(F, **{k: p[k] for k in ("nuclear_spin", "g_j", "g_i")}) == pytest.approx(lande(p, F), rel=1e-12)
    # Rb-87 F = 2: g_F close to +1/2, F = 1: close to -1/2 ("Rubidium 87 D Line Data" compilation)
    assert z.lande_g_f(2, **{k: RB87[k] for k in ("nuclear_spin", "g_j", "g_i")}) == pytest.approx(0.5, abs=2e-3)


@pytest.mark.parametrize("name", list(ATOMS))
def test_high_field_moment_is_decoupled_electron_and_nucleus(name):
    # Paschen-Back regime, the high-field limit of the Breit-Rabi formula (Phys. Rev. 38, 2082 (1931)):
    # E -> (g_J m_J + g_I m_I) mu_B B. The state connected to
    # F = I + 1/2 has m_J = +1/2 for A > 0 (m_J = -1/2 for A < 0) unless stretched.
    p = ATOMS[name]
    i = p["nuclear_spin"]
    sign_a = np.sign(p["hyperfine_splitting_hz"])
    B = 200.0  # T, x ~ 10^3: residual (1 - a^2/4)/(2 x^2) of g_J mu_B / 2
    for F, mF in z.ground_states(i):
        if abs(abs(mF) - (i + 0.5)) < 1e-9:
            mj = 0.5 * np.sign(mF)
        else:
            mj = 0.5 * sign_a * (1 if F > i else -1)
        mi = mF - mj
        assert z.magnetic_moment(F, mF, B, **p) == pytest.approx(-(p["g_j"] * mj + p["g_i"] * mi) * MU_B,
                                                              abs=1e-5 * MU_B)


def test_clock_states_first_order_insensitive():
    # m_F = 0 states have no first-order moment (common practice, no source)
    for F, mF in z.ground_states(1.5):
        assert z.is_first_order_insensitive(F, mF) == (mF == 0)
        if mF == 0:
            assert z.magnetic_moment(F, mF, 0.0, **RB87) == 0.0
        else:
            assert abs(z.magnetic_moment(F, mF, 0.0, **RB87)) > 0.4 * MU_B


def test_rb87_two_photon_magic_field():
    # |1,-1> -> |2,+1> is first-order field insensitive near 3.229 G
    # (Phys. Rev. A 66, 053616 (2002)) (from memory, value and source)
    b = z.field_insensitive_point(1, -1, 2, 1, **RB87)
    assert b * 1e4 == pytest.approx(3.229, abs=0.002)
    assert z.field_insensitive_point(1, 0, 2, 0, **RB87) == 0.0


def test_levels_sum_to_trace_of_hamiltonian():
    # Tr(A I.J) = 0 and Tr(J_z) = Tr(I_z) = 0, so the energies sum to zero at any B
    states, E = z.zeeman_levels(np.linspace(0, 2.0, 9), **CS133)
    assert len(states) == 16
    assert np.max(np.abs(E.sum(axis=0))) < 1e-12 * sc.h * CS133["hyperfine_splitting_hz"]


def test_vectorised_and_duck_typed():
    B = np.linspace(0, 1e-3, 7).reshape(7, 1)
    mF = np.array([-1.0, 0.0, 1.0])
    e = z.breit_rabi_energy(1, mF, B, **RB87)
    assert e.shape == (7, 3)
    for r in range(7):
        for c in range(3):
            assert e[r, c] == z.breit_rabi_energy(1, mF[c], float(B[r, 0]), **RB87)
    atom = SimpleNamespace(**RB87, name="Rb87")
    assert z.magnetic_moment(2, 2, 1e-4, atom=atom) == z.magnetic_moment(2, 2, 1e-4, **RB87)
    # explicit keyword overrides the object
    assert z.transition_frequency(1, 0, 2, 0, 0.0, atom=atom, hyperfine_splitting_hz=1e9) == 1e9


def test_rejects_impossible_states_and_missing_data():
    with pytest.raises(ValueError):
        z.breit_rabi_energy(3, 0, 0.0, **RB87)  # F = 3 not in Rb-87 ground state
    with pytest.raises(ValueError):
        z.breit_rabi_energy(1, 2, 0.0, **RB87)  # |mF| > F
    with pytest.raises(ValueError):
        z.breit_rabi_energy(2, 0.5, 0.0, **RB87)  # F - mF not integer
    with pytest.raises(TypeError):
        z.breit_rabi_energy(1, 0, 0.0, nuclear_spin=1.5, g_j=2.0, g_i=0.0)
