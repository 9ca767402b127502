"""Magnetic-dipole couplings between ground hyperfine levels (seqgen.physics.transitions), checked against
Clebsch-Gordan coefficients, the Paschen-Back limit and the Breit-Rabi formula.

References:
- Clebsch-Gordan coefficients: the table of the Review of Particle Physics, Phys. Rev. D 98, 030001 (2018),
  section "Clebsch-Gordan coefficients" (the values below are recalled: from memory); cross-checked with
  Racah's closed formula, Phys. Rev. 62, 438 (1942), written out here (`racah_cg`).
- Wigner-Eckart theorem (Condon-Shortley phase): <F' m'| T^1_q |F m> = <F m; 1 q | F' m'> <F'||T||F> / sqrt(2F'+1),
  so at zero field the ratios of the dipole elements of one pair of levels F -> F' are ratios of Clebsch-Gordan
  coefficients.
- Breit-Rabi formula, Phys. Rev. 38, 2082 (1931), written out in `breit_rabi_j`.
- Atomic data: Na-23 "Sodium D Line Data", Rb-87 "Rubidium 87 D Line Data", K-40 "Properties of Potassium"
  (2011), Cs-133 "Cesium D Line Data" (alkali data compilations; g factors from memory). Constants from
  scipy.constants (CODATA).
"""

import math
from fractions import Fraction

import numpy as np
import pytest
from scipy import constants as sc

from seqgen.physics import transitions as tr

MU_B = sc.physical_constants["Bohr magneton"][0]
NA23 = dict(nuclear_spin=1.5, hyperfine_splitting_hz=1_771_626_128.8, g_j=2.0022960, g_i=-0.00080461080)
RB87 = dict(nuclear_spin=1.5, hyperfine_splitting_hz=6_834_682_610.904, g_j=2.00233113, g_i=-0.0009951414)
K40 = dict(nuclear_spin=4.0, hyperfine_splitting_hz=-285.7308e6 * 4.5, g_j=2.00229421, g_i=0.000176490)
CS133 = dict(nuclear_spin=3.5, hyperfine_splitting_hz=9_192_631_770.0, g_j=2.00254032, g_i=-0.00039885395)
ATOMS = {"Na23": NA23, "Rb87": RB87, "K40": K40, "Cs133": CS133}
LOW_FIELD = 1e-10  # T: Zeeman energy / hyperfine splitting ~ 1e-9


def racah_cg(j1, m1, j2, m2, j, m):
    """<j1 m1; j2 m2 | j m>, Racah's formula (Phys. Rev. 62, 438 (1942)), Condon-Shortley phase."""
    if abs(m1 + m2 - m) > 1e-9 or not abs(j1 - j2) <= j <= j1 + j2 or abs(m1) > j1 or abs(m2) > j2 or abs(m) > j:
        return 0.0
    f = lambda x: math.factorial(int(round(x)))  # noqa: E731
    pre = math.sqrt((2 * j + 1) * f(j + j1 - j2) * f(j - j1 + j2) * f(j1 + j2 - j) / f(j1 + j2 + j + 1))
    pre *= math.sqrt(f(j + m) * f(j - m) * f(j1 - m1) * f(j1 + m1) * f(j2 - m2) * f(j2 + m2))
    total = 0.0
    for k in range(0, int(round(j1 + j2 - j)) + 1):
        args = (k, j1 + j2 - j - k, j1 - m1 - k, j2 + m2 - k, j - j2 + m1 + k, j - j1 - m2 + k)
        if min(args) < -1e-9:
            continue
        total += (-1) ** k / math.prod(f(a) for a in args)
    return pre * total


# PDG table, 1 x 1 -> 2 (from memory): <1 m1; 1 m2 | 2 M>, as signed squares
PDG_1X1_TO_2 = {(1, 1, 2): Fraction(1), (1, 0, 1): Fraction(1, 2), (0, 1, 1): Fraction(1, 2),
                (1, -1, 0): Fraction(1, 6), (0, 0, 0): Fraction(2, 3), (-1, 1, 0): Fraction(1, 6),
                (0, -1, -1): Fraction(1, 2), (-1, 0, -1): Fraction(1, 2), (-1, -1, -2): Fraction(1)}
# PDG table, 3/2 x 1/2 (from memory): <3/2 m1; 1/2 m2 | J M>, signed squares
PDG_3HALF_X_HALF = {(2, 1, 1.5, -0.5): Fraction(1, 4), (2, 1, 0.5, 0.5): Fraction(3, 4),
                    (1, 1, 1.5, -0.5): Fraction(3, 4), (1, 1, 0.5, 0.5): Fraction(-1, 4),
                    (2, 0, 0.5, -0.5): Fraction(1, 2), (2, 0, -0.5, 0.5): Fraction(1, 2),
                    (1, 0, 0.5, -0.5): Fraction(1, 2), (1, 0, -0.5, 0.5): Fraction(-1, 2),
                    (2, 2, 1.5, 0.5): Fraction(1)}


def signed_sqrt(fr):
    return math.copysign(math.sqrt(abs(float(fr))), float(fr))


def breit_rabi_j(F, m, B, p):
    """Breit-Rabi energy (J), Phys. Rev. 38, 2082 (1931): -dE/(2(2I+1)) + g_I mu_B m B
    +/- (dE/2) sqrt(1 + 4 m x/(2I+1) + x^2), x = (g_J - g_I) mu_B B / dE, dE = h nu_hfs; "+" for F = I + 1/2;
    the stretched states |m| = I + 1/2 take the root 1 + sign(m) x."""
    i, de = p["nuclear_spin"], sc.h * p["hyperfine_splitting_hz"]
    x = (p["g_j"] - p["g_i"]) * MU_B * B / de
    s = 1.0 if F > i else -1.0
    root = 1 + math.copysign(1, m) * x if abs(abs(m) - (i + 0.5)) < 1e-9 else math.sqrt(1 + 4 * m * x / (2 * i + 1) + x * x)
    return -de / (2 * (2 * i + 1)) + p["g_i"] * MU_B * m * B + s * de / 2 * root


# ----------------------------------------------------------------------------- the tables themselves

def test_racah_formula_reproduces_the_recalled_pdg_entries():
    for (m1, m2, M), sq in PDG_1X1_TO_2.items():
        assert racah_cg(1, m1, 1, m2, 2, M) == pytest.approx(signed_sqrt(sq), abs=1e-12)
    for (J, M, m1, m2), sq in PDG_3HALF_X_HALF.items():
        assert racah_cg(1.5, m1, 0.5, m2, J, M) == pytest.approx(signed_sqrt(sq), abs=1e-12)


# ----------------------------------------------------------------------------- zero-field limit

def test_low_field_eigenvectors_are_the_pdg_coupled_states():
    # |F M> = sum <I mI; J mJ | F M> |mJ, mI>: with I = 3/2 first and J = 1/2 second, the 3/2 x 1/2 table
    st = tr.breit_rabi_states(LOW_FIELD, **NA23)
    for (F, M, m_i, m_j), sq in PDG_3HALF_X_HALF.items():
        k = st.basis.index((m_j, m_i))
        assert st.vector(F, M)[k] == pytest.approx(signed_sqrt(sq), abs=1e-8)


@pytest.mark.parametrize("name", ["K40", "Cs133"])
def test_low_field_eigenvectors_match_racah_for_other_spins(name):
    p = ATOMS[name]
    i = p["nuclear_spin"]
    st = tr.breit_rabi_states(LOW_FIELD, **p)
    for F, M in st.labels:
        expected = [racah_cg(i, m_i, 0.5, m_j, F, M) for m_j, m_i in st.basis]
        assert np.allclose(st.vector(F, M), expected, atol=1e-7)


@pytest.mark.parametrize("name", ["Na23", "Rb87"])
def test_low_field_hyperfine_elements_follow_the_pdg_1x1_table(name):
    # |<2, m+q| mu_q |1, m>| / |<2, 0| mu_0 |1, 0>| = |<1 m; 1 q | 2 m+q>| / <1 0; 1 0 | 2 0>
    p = ATOMS[name]
    ref = abs(tr.magnetic_dipole_element((1, 0), (2, 0), 0, LOW_FIELD, **p))
    assert ref > 0
    for (m, q, M), sq in PDG_1X1_TO_2.items():
        got = abs(tr.magnetic_dipole_element((1, m), (2, M), q, LOW_FIELD, **p)) / ref
        assert got == pytest.approx(math.sqrt(float(sq) / (2 / 3)), rel=1e-7)


@pytest.mark.parametrize("name", ["K40", "Cs133"])
def test_low_field_hyperfine_elements_follow_racah(name):
    p = ATOMS[name]
    i = p["nuclear_spin"]
    lo, hi = i - 0.5, i + 0.5
    m0 = lo - math.floor(lo)  # 0 or 1/2
    ref = abs(tr.magnetic_dipole_element((lo, m0), (hi, m0), 0, LOW_FIELD, **p))
    cg_ref = abs(racah_cg(lo, m0, 1, 0, hi, m0))
    for k in range(int(2 * lo) + 1):
        m = -lo + k
        for q in (-1, 0, 1):
            got = abs(tr.magnetic_dipole_element((lo, m), (hi, m + q), q, LOW_FIELD, **p)) / ref
            assert got == pytest.approx(abs(racah_cg(lo, m, 1, q, hi, m + q)) / cg_ref, rel=1e-6, abs=1e-9)


def test_low_field_zeeman_elements_are_g_f_times_cg():
    # within F: <F m+q| mu_q |F m> = -g_F mu_B <F||F||F>/sqrt(2F+1) <F m; 1 q|F m+q>, <F||F||F> = sqrt(F(F+1)(2F+1))
    # (Wigner-Eckart; g_F of Rev. Mod. Phys. 49, 31 (1977))
    p = RB87
    i = p["nuclear_spin"]
    for F in (1, 2):
        ff, ii = F * (F + 1), i * (i + 1)
        g_f = p["g_j"] * (ff - ii + 0.75) / (2 * ff) + p["g_i"] * (ff + ii - 0.75) / (2 * ff)
        for m in range(-F, F):
            got = tr.magnetic_dipole_element((F, m), (F, m + 1), 1, LOW_FIELD, **p)
            want = -g_f * MU_B * math.sqrt(ff) * racah_cg(F, m, 1, 1, F, m + 1)
            assert got == pytest.approx(want, rel=1e-7)


def test_named_polarisation_picks_one_delta_m_and_a_direction_splits_its_weight():
    p = NA23
    pi = tr.coupling_element((1, 0), (2, 0), LOW_FIELD, "pi", **p)
    assert tr.coupling_element((1, 0), (2, 0), LOW_FIELD, "sigma+", **p) == 0.0
    assert tr.coupling_element((1, 0), (2, 1), LOW_FIELD, "pi", **p) == 0.0
    # F = 2 is the upper level (A > 0): |1,-1> -> |2,0> raises m on absorption: sigma+
    sp = tr.coupling_element((1, -1), (2, 0), LOW_FIELD, "sigma+", **p)
    assert sp / pi == pytest.approx(math.sqrt((1 / 6) / (2 / 3)), rel=1e-7)
    assert tr.coupling_element((2, 0), (1, -1), LOW_FIELD, "sigma+", **p) == pytest.approx(sp, rel=1e-12)
    assert tr.coupling_element((1, -1), (2, 0), LOW_FIELD, "sigma-", **p) == 0.0
    # a field at 60 degrees from the bias axis in the x-z plane: pi weight cos 60, sigma weights sin 60 / sqrt 2
    th = math.radians(60)
    d = [math.sin(th), 0.0, math.cos(th)]
    assert tr.coupling_element((1, 0), (2, 0), LOW_FIELD, d, **p) == pytest.approx(pi * math.cos(th), rel=1e-9)
    assert tr.coupling_element((1, -1), (2, 0), LOW_FIELD, d, **p) == pytest.approx(
        sp * math.sin(th) / math.sqrt(2), rel=1e-9)
    assert tr.relative_coupling(((1, -1), (2, -2)), ((1, 0), (2, 0)), LOW_FIELD, d, **p) == pytest.approx(
        (math.sin(th) / math.sqrt(2) * 1.0) / (math.cos(th) * math.sqrt(2 / 3)), rel=1e-7)


def test_a_reference_the_polarisation_cannot_drive_is_refused():
    with pytest.raises(ValueError):
        tr.relative_coupling(((1, -1), (2, 0)), ((1, 0), (2, 0)), 1e-4, "sigma+", **NA23)
    with pytest.raises(ValueError):
        tr.polarisation_weights("circular")
    with pytest.raises(ValueError):
        tr.polarisation_weights([0, 0, 0])


def test_inverted_k40_sigma_plus_follows_the_energy_order():
    # K-40's F = 9/2 lies below F = 7/2 (A < 0): |9/2, m> -> |7/2, m+1> raises m on absorption
    p = K40
    assert tr.coupling_element((4.5, -4.5), (3.5, -3.5), LOW_FIELD, "sigma+", **p) > 0
    assert tr.coupling_element((4.5, -4.5), (3.5, -3.5), LOW_FIELD, "sigma-", **p) == 0.0
    assert tr.coupling_element((4.5, -3.5), (3.5, -3.5), LOW_FIELD, "pi", **p) > 0


def test_allowed_partners_list_the_polarisations_transitions():
    got = tr.allowed_partners((1, -1), 2, 1e-4, "sigma-", **NA23)
    assert [lab for lab, _ in got] == [(2.0, -2.0)]
    got = tr.allowed_partners((1, 0), 2, 1e-4, [1, 0, 0], **NA23)
    assert sorted(lab for lab, _ in got) == [(2.0, -1.0), (2.0, 1.0)]


# ----------------------------------------------------------------------------- high-field (Paschen-Back) limit

@pytest.mark.parametrize("name", ["Na23", "Rb87"])
def test_high_field_eigenstates_are_product_states(name):
    p = ATOMS[name]
    i = p["nuclear_spin"]
    x = 1e4  # mu_B B / (h nu_hfs): the admixture of the other product state is ~ (2I+1)/(2x) at most
    B = x * sc.h * p["hyperfine_splitting_hz"] / ((p["g_j"] - p["g_i"]) * MU_B)
    st = tr.breit_rabi_states(B, **p)
    for F, m in st.labels:
        # A > 0, g_J > 0, B > 0: F = I + 1/2 goes to m_J = +1/2, F = I - 1/2 to m_J = -1/2, except the stretched
        # |I + 1/2, -(I + 1/2)>, which is |-1/2, -I> at every field
        mj = 0.5 if F > i and m > -F else -0.5
        k = st.basis.index((mj, m - mj))
        assert abs(st.vector(F, m)[k]) == pytest.approx(1.0, abs=(2 * i + 1) / x)


@pytest.mark.parametrize("name", ["Na23", "Rb87"])
def test_high_field_sigma_elements_tend_to_the_electron_spin_flip(name):
    # <+1/2, mI| mu_{+1} |-1/2, mI> = -mu_B g_J <+1/2| J_{+1} |-1/2> = g_J mu_B / sqrt(2) (J_{+1} = -J_+/sqrt 2)
    p = ATOMS[name]
    i = p["nuclear_spin"]
    for x in (1e2, 1e3, 1e4):
        B = x * sc.h * p["hyperfine_splitting_hz"] / ((p["g_j"] - p["g_i"]) * MU_B)
        for k in range(int(2 * i) + 1):
            m_i = -i + k
            lower, upper = (i - 0.5, m_i - 0.5), (i + 0.5, m_i + 0.5)  # |-1/2, mI> and |+1/2, mI>
            if abs(lower[1]) > i - 0.5:
                continue
            got = abs(tr.magnetic_dipole_element(lower, upper, 1, B, **p))
            assert got == pytest.approx(p["g_j"] * MU_B / math.sqrt(2), rel=(2 * i + 1) / x)
            # pi between two different product states vanishes: mu_0 is diagonal in |mJ, mI>
            if abs(m_i - 0.5) <= i - 0.5:
                assert abs(tr.magnetic_dipole_element((i - 0.5, m_i - 0.5), (i + 0.5, m_i - 0.5), 0, B, **p)) < (
                    p["g_j"] * MU_B * (2 * i + 1) / x)


# ----------------------------------------------------------------------------- energies

@pytest.mark.parametrize("name", list(ATOMS))
@pytest.mark.parametrize("B", [0.0, 1e-4, 3e-2, 1.0, -5e-3])
def test_eigen_energies_are_the_breit_rabi_formula(name, B):
    p = ATOMS[name]
    st = tr.breit_rabi_states(B, **p)
    scale = abs(sc.h * p["hyperfine_splitting_hz"]) + p["g_j"] * MU_B * abs(B)
    for (F, m), e in zip(st.labels, st.energies_j):
        assert e == pytest.approx(breit_rabi_j(F, m, B, p), abs=1e-12 * scale)


def test_eigenvectors_are_orthonormal_eigenvectors_of_the_hamiltonian():
    basis, h = tr.hyperfine_hamiltonian(2e-3, **RB87)
    st = tr.breit_rabi_states(2e-3, **RB87)
    v = st.vectors
    assert np.allclose(v.T @ v, np.eye(len(basis)), atol=1e-12)
    assert np.allclose(h @ v, v * st.energies_j, atol=1e-12 * np.max(np.abs(h)))
