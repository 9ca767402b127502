"""Atom data, g-factors, magnetic moments and magnetic traps.

Reference values: the sources named beside each check. "(from memory)" marks recalled values.
Line data: the alkali D-line data compilations ("Rubidium 87 D Line Data", "Sodium D Line Data",
"Cesium D Line Data", "Properties of Potassium" (2011), "Properties of 6Li" (2003)).
"""

import math
from pathlib import Path

import numpy as np
import pytest
from scipy import constants as sc
from scipy import optimize

from seqgen.physics import atoms, magnetic_trap as mt
from seqgen.physics.atoms import get_species, g_f, known_species, magnetic_moment_first_order

ROOT = Path(__file__).resolve().parents[2]
U = sc.physical_constants["atomic mass constant"][0]
MU_B = sc.physical_constants["Bohr magneton"][0]
ALL = ("Li6", "Na23", "K39", "K40", "K41", "Rb85", "Rb87", "Cs133")


def test_schema_copy_is_identical():
    assert (ROOT / "schemas" / "atoms.schema.json").read_bytes() == atoms.SCHEMA_FILE.read_bytes()


def test_data_file_validates_and_lists_all_species():
    import jsonschema
    import yaml
    data = yaml.safe_load(atoms.DATA_FILE.read_text())
    jsonschema.Draft202012Validator(atoms.load_schema()).validate(data)
    assert set(known_species()) == set(ALL)


def test_schema_rejects_a_number_written_as_text():
    # YAML 1.1 reads 1e6 (no dot, unsigned exponent) as a string: the schema must catch it
    import jsonschema
    import yaml
    data = yaml.safe_load(atoms.DATA_FILE.read_text())
    data["species"]["Rb87"]["d2_linewidth_mhz"]["value"] = yaml.safe_load("6e6")
    assert isinstance(data["species"]["Rb87"]["d2_linewidth_mhz"]["value"], str)
    assert list(jsonschema.Draft202012Validator(atoms.load_schema()).iter_errors(data))


@pytest.mark.parametrize("name", ["Rb87", "Rb-87", "87Rb", "rb87", "RB-87", "rb 87", "87rb"])
def test_name_forms(name):
    assert get_species(name).name == "Rb87"


def test_unknown_species_lists_known():
    with pytest.raises(KeyError) as err:
        get_species("Rb88")
    assert "Rb87" in str(err.value) and "Cs133" in str(err.value)
    with pytest.raises(KeyError):
        get_species("sodium")


@pytest.mark.parametrize("name", ALL)
def test_every_value_has_a_source_and_is_finite(name):
    s = get_species(name)
    for field in ("mass_kg", "nuclear_spin", "hyperfine_a_hz", "hyperfine_splitting_hz", "g_j", "g_i",
                  "d1_wavelength_m", "d2_wavelength_m", "d1_linewidth_hz", "d2_linewidth_hz",
                  "saturation_intensity_w_m2"):
        assert math.isfinite(getattr(s, field))
        assert s.sources[field].strip()
    assert s.scattering_lengths_m
    assert hash(s) == hash(get_species(name))  # usable as a cache key
    for state in s.scattering_lengths_m:
        assert s.sources[f"scattering_length:{state}"].strip()
    # D2 (P3/2) lies above D1 (P1/2) in energy for all alkalis
    assert s.d2_wavelength_m < s.d1_wavelength_m


@pytest.mark.parametrize("name", ALL)
def test_higher_p_lines_and_core_have_sources(name):
    s = get_species(name)
    a_u = 4 * math.pi * sc.epsilon_0 * sc.physical_constants["Bohr radius"][0] ** 3
    # closed-shell core polarisabilities are 0.19 (Li+) to 15.6 (Cs+) a.u. (Phys. Rev. A 49, 982 (1994)) (from memory)
    assert 0.1 < s.core_polarizability_cm2_v / a_u < 20
    assert s.sources["core_polarizability_cm2_v"].strip()
    assert s.p_lines
    for line in s.p_lines:
        # above the D lines in energy, below the ionisation limit (at most about 5.4 eV, Li: 230 nm)
        assert 220e-9 < line.wavelength_m < s.d2_wavelength_m
        # far weaker than the resonance lines (reduced matrix elements of a few e a0)
        assert 0 < line.reduced_dipole_cm < sc.e * sc.physical_constants["Bohr radius"][0]
        assert s.sources[f"p_line:{line.state}:wavelength"].strip()
        assert s.sources[f"p_line:{line.state}:reduced_dipole"].strip()


# masses in u: AME2020, Chinese Physics C 45, 030003 (2021) (from memory)
@pytest.mark.parametrize("name,mass_u", [
    ("Rb87", 86.909180531), ("Na23", 22.989769282), ("Cs133", 132.905451961), ("K39", 38.963706486),
    ("K41", 40.961825257), ("Rb85", 84.911789738), ("Li6", 6.015122887)])
def test_masses(name, mass_u):
    assert get_species(name).mass_kg == pytest.approx(mass_u * U, rel=1e-10)


# ground hyperfine splittings: Rb-87 Europhys. Lett. 45, 558 (1999) (from memory); Na-23, Rb-85, K and Li
# A (I + 1/2) with the A constants of Rev. Mod. Phys. 49, 31 (1977) (from memory); Cs exact by the SI
# definition of the second (SI Brochure, 9th ed., 2019)
@pytest.mark.parametrize("name,split_hz", [
    ("Rb87", 6_834_682_610.904), ("Na23", 1_771_626_128.8), ("Cs133", 9_192_631_770.0),
    ("K39", 461.7197202e6), ("K41", 254.0138720e6), ("Rb85", 3_035_732_440.0), ("Li6", 228.2052590e6)])
def test_hyperfine_splittings(name, split_hz):
    assert get_species(name).hyperfine_splitting_hz == pytest.approx(split_hz, rel=1e-11)


@pytest.mark.parametrize("name", ALL)
def test_splitting_is_a_times_i_plus_half(name):
    # J = 1/2 has no electric-quadrupole term: Delta E = A (I + 1/2) (Rev. Mod. Phys. 49, 31 (1977));
    # the A values are recalled separately (from memory), so 1e-7 covers their rounding
    s = get_species(name)
    assert s.hyperfine_splitting_hz == pytest.approx(s.hyperfine_a_hz * (s.nuclear_spin + 0.5), rel=1e-7)


def test_k40_is_inverted():
    # K40 has a negative nuclear moment: inverted ground hyperfine structure, g_I > 0
    # (Properties of Potassium, 2011) (from memory)
    k40 = get_species("K40")
    assert k40.hyperfine_a_hz < 0 and k40.hyperfine_splitting_hz < 0 and k40.g_i > 0
    assert k40.nuclear_spin == 4
    assert abs(k40.hyperfine_splitting_hz) == pytest.approx(1285.79e6, rel=1e-5)  # (from memory)


# vacuum wavelengths in nm: the alkali D-line data compilations (Rb-87 as quoted there; Na, Cs, K-39 and
# Rb-85 from memory, hence their looser tolerances)
@pytest.mark.parametrize("name,d2,d1,tol_nm", [
    ("Rb87", 780.241209686, 794.978851156, 1e-9),
    ("Na23", 589.158326, 589.755815, 1e-6),
    ("Cs133", 852.34727582, 894.59295986, 1e-8),
    ("K39", 766.700921822, 770.108385049, 1e-9),
    ("Rb85", 780.241368, 794.979014, 1e-6),
])
def test_d_line_wavelengths(name, d2, d1, tol_nm):
    s = get_species(name)
    assert s.d2_wavelength_m * 1e9 == pytest.approx(d2, abs=tol_nm)
    assert s.d1_wavelength_m * 1e9 == pytest.approx(d1, abs=tol_nm)


def test_potassium_41_lines():
    # D2 = 766.70045 nm (Properties of Potassium (2011)) (from memory); the K41 lines lie about
    # 235 MHz blue of K39 (isotope shift, same compilation) (from memory). A recalled
    # D1 = 770.10767 nm would mean a 361 MHz D1 isotope shift: not used.
    k39, k41 = get_species("K39"), get_species("K41")
    assert k41.d2_wavelength_m * 1e9 == pytest.approx(766.70045, abs=2e-5)
    for attr in ("d1_wavelength_m", "d2_wavelength_m"):
        shift = sc.c / getattr(k41, attr) - sc.c / getattr(k39, attr)
        assert shift == pytest.approx(235.3e6, abs=1e6)


def test_lithium_d1_from_fine_structure():
    # Li D1 lies 10 052.95 MHz (the 2P fine-structure interval) below D2 in frequency ("Properties of 6Li" (2003),
    # from memory); D1 stored to 1e-6 nm (~0.7 MHz)
    li = get_species("Li6")
    assert li.d2_wavelength_m * 1e9 == pytest.approx(670.977338, abs=1e-6)
    assert sc.c / li.d2_wavelength_m - sc.c / li.d1_wavelength_m == pytest.approx(10052.95e6, abs=1e6)


@pytest.mark.parametrize("name,g2,g1", [
    ("Rb87", 6.0666, 5.7500), ("Na23", 9.795, 9.765), ("Cs133", 5.2347, 4.5612), ("K39", 6.035, 5.956),
    ("K41", 6.035, 5.956), ("Rb85", 6.0666, 5.7500), ("Li6", 5.8724, 5.8724)])
def test_linewidths(name, g2, g1):
    # Gamma/2pi in MHz, alkali D-line data compilations (Rb-87 as quoted there; the others from memory)
    s = get_species(name)
    assert s.d2_linewidth_hz == pytest.approx(g2 * 1e6, abs=1e3)
    assert s.d1_linewidth_hz == pytest.approx(g1 * 1e6, abs=1e3)


@pytest.mark.parametrize("name", ALL)
def test_saturation_intensity_matches_two_level_formula(name):
    # cycling transition: I_sat = pi h c Gamma / (3 lambda^3) (alkali D-line data compilations);
    # stored values are given to 3-5 digits
    s = get_species(name)
    gamma = 2 * np.pi * s.d2_linewidth_hz
    isat = np.pi * sc.h * sc.c * gamma / (3 * s.d2_wavelength_m**3)
    assert s.saturation_intensity_w_m2 == pytest.approx(isat, rel=5e-3)


def test_rb87_saturation_intensity_and_recoil_velocity():
    rb = get_species("Rb87")
    # 1.669 mW/cm^2 = 16.69 W/m^2 ("Rubidium 87 D Line Data" compilation) (from memory)
    assert rb.saturation_intensity_w_m2 == pytest.approx(16.69, abs=0.01)
    # recoil velocity h / (m lambda_D2) = 5.8845 mm/s ("Rubidium 87 D Line Data" compilation)
    assert sc.h / (rb.mass_kg * rb.d2_wavelength_m) == pytest.approx(5.8845e-3, abs=1e-7)


def test_rb87_clock_quadratic_zeeman_from_data():
    # Breit-Rabi (Phys. Rev. 38, 2082 (1931)) to second order for the 0-0 line:
    # delta nu = (g_J - g_I)^2 mu_B^2 B^2 / (2 h^2 Delta nu_hfs) = 575.15 Hz/G^2 (Rubidium 87 D Line Data)
    rb = get_species("Rb87")
    coeff = (rb.g_j - rb.g_i) ** 2 * (MU_B * 1e-4) ** 2 / (2 * sc.h**2 * rb.hyperfine_splitting_hz)
    assert coeff == pytest.approx(575.15, abs=0.01)


@pytest.mark.parametrize("name", ALL)
def test_g_f_closed_forms(name):
    # for J = 1/2: g_F(I+1/2) = (g_J + 2 I g_I)/(2I+1), g_F(I-1/2) = (-g_J + (2I+2) g_I)/(2I+1)
    # (Rev. Mod. Phys. 49, 31 (1977)); the upper form makes the stretched-state energy
    # g_F F mu_B B = (g_J/2 + I g_I) mu_B B, exact at all fields (Phys. Rev. 38, 2082 (1931)),
    # so its moment -dE/dB is -(g_J/2 + I g_I) mu_B
    s = get_species(name)
    i = s.nuclear_spin
    assert g_f(s, i + 0.5) == pytest.approx((s.g_j + 2 * i * s.g_i) / (2 * i + 1), rel=1e-12)
    assert g_f(s, i - 0.5) == pytest.approx((-s.g_j + (2 * i + 2) * s.g_i) / (2 * i + 1), rel=1e-12)
    assert magnetic_moment_first_order(s, i + 0.5, i + 0.5) == pytest.approx(-(s.g_j / 2 + i * s.g_i) * MU_B, rel=1e-12)


def test_rb87_g_factors_and_signs():
    rb = get_species("Rb87")
    # g_F = +1/2 (F=2) and -1/2 (F=1), approximately (Rubidium 87 D Line Data)
    assert g_f(rb, 2) == pytest.approx(0.5, abs=1e-3)
    assert g_f(rb, 1) == pytest.approx(-0.5, abs=2e-3)
    # low-field seekers |2,2>, |2,1>, |1,-1>; high-field seeker |1,1> (common practice, no source):
    # moment = -dE/dB (the package convention) is negative for a low-field seeker
    assert magnetic_moment_first_order(rb, 2, 2) < 0
    assert magnetic_moment_first_order(rb, 2, 1) < 0
    assert magnetic_moment_first_order(rb, 1, -1) < 0
    assert magnetic_moment_first_order(rb, 1, 1) > 0
    # |1,-1>: g_F m_F = +1/2, moment about -mu_B / 2
    assert magnetic_moment_first_order(rb, 1, -1) == pytest.approx(-0.5 * MU_B, rel=5e-3)
    # m_F = 0 clock states have no first-order moment (common practice, no source)
    assert magnetic_moment_first_order(rb, 1, 0) == 0.0
    assert magnetic_moment_first_order(rb, 2, 0) == 0.0


def _rb87_breit_rabi_hz(F, m, B):
    """E/h of an Rb-87 ground level, Breit-Rabi formula written out here (Phys. Rev. 38, 2082 (1931)):
    E = -h nu/(2(2I+1)) + g_I mu_B m B +/- (h nu/2) sqrt(1 + 4 m x/(2I+1) + x^2), x = (g_J - g_I) mu_B B/(h nu),
    "+" for F = 2; stretched states |m| = 2 use the root 1 + sign(m) x. Data from "Rubidium 87 D Line Data"
    compilation: I = 3/2, nu = 6 834 682 610.904 Hz, g_J = 2.00233113, g_I = -0.0009951414."""
    nu, gj, gi, i = 6834682610.904, 2.00233113, -0.0009951414, 1.5
    x = (gj - gi) * MU_B * B / (sc.h * nu)
    root = 1 + math.copysign(1.0, m) * x if abs(m) == 2 else math.sqrt(1 + 4 * m * x / (2 * i + 1) + x * x)
    return -nu / (2 * (2 * i + 1)) + gi * MU_B * m * B / sc.h + (1 if F == 2 else -1) * 0.5 * nu * root


def test_first_order_moment_is_minus_dE_dB_of_breit_rabi():
    # The package convention moment = -dE/dB, checked against the hand-written Breit-Rabi levels at low field
    # (central difference over +/- 1 mG: the quadratic term cancels, the cubic one is ~1e-9 of the slope)
    from seqgen.physics.zeeman import magnetic_moment

    rb = get_species("Rb87")
    h = 1e-7  # T
    for F, m in [(1, -1), (1, 0), (1, 1), (2, -2), (2, -1), (2, 0), (2, 1), (2, 2)]:
        slope = sc.h * (_rb87_breit_rabi_hz(F, m, h) - _rb87_breit_rabi_hz(F, m, -h)) / (2 * h)
        assert magnetic_moment_first_order(rb, F, m) == pytest.approx(-slope, abs=1e-6 * MU_B)
        # the exact moment of the Zeeman module has the same sign and, at B = 0, the same value
        assert magnetic_moment(F, m, 0.0, atom=rb) == pytest.approx(magnetic_moment_first_order(rb, F, m),
                                                                    rel=1e-12, abs=1e-40)
    # |F=1, mF=-1>: g_F = -1/2 ("Rubidium 87 D Line Data"), its energy rises with the field (a low-field
    # seeker) and its moment is negative; the force moment x grad|B| then points towards weaker field
    assert _rb87_breit_rabi_hz(1, -1, 1e-4) > _rb87_breit_rabi_hz(1, -1, 0.0)
    assert g_f(rb, 1) == pytest.approx(-0.5, abs=2e-3)
    assert magnetic_moment_first_order(rb, 1, -1) < 0


def test_k40_inverted_g_factors():
    # inverted K40: F = 9/2 (lower level) has g_F ~ +2/9, F = 7/2 ~ -2/9
    # (g_J/(2I+1), Properties of Potassium (2011)) (from memory)
    k = get_species("K40")
    assert g_f(k, 4.5) == pytest.approx(2 / 9, abs=1e-3)
    assert g_f(k, 3.5) == pytest.approx(-2 / 9, abs=1e-3)


def test_invalid_levels():
    rb = get_species("Rb87")
    with pytest.raises(ValueError):
        g_f(rb, 3)
    with pytest.raises(ValueError):
        magnetic_moment_first_order(rb, 1, 2)
    with pytest.raises(ValueError):
        magnetic_moment_first_order(rb, 2, 0.5)


# --- magnetic traps -------------------------------------------------------

def test_levitation_gradient_rb87_and_na23():
    rb, na = get_species("Rb87"), get_species("Na23")
    b_rb = mt.levitation_gradient(rb.mass_kg, magnetic_moment_first_order(rb, 2, 2))
    # about 15.3 G/cm for Rb87 |2,2> (from memory)
    assert b_rb / mt.GAUSS_PER_CM == pytest.approx(15.3, abs=0.05)
    # hand formula b' = m g / mu with mu = mu_B (g_F m_F = 1/2 * 2), scipy.constants, g = 9.80665
    assert b_rb == pytest.approx(86.909180531 * U * 9.80665 / MU_B, rel=1e-3)
    b_na = mt.levitation_gradient(na.mass_kg, magnetic_moment_first_order(na, 1, -1))
    # Na23 |1,-1>: g_F m_F ~ 1/2, b' = m g / (mu_B / 2) ~ 8.07 G/cm; g_I shifts g_F by ~0.3 %
    assert b_na == pytest.approx(22.989769282 * U * 9.80665 / (MU_B / 2), rel=5e-3)
    with pytest.raises(ValueError):
        mt.levitation_gradient(rb.mass_kg, magnetic_moment_first_order(rb, 1, 1))


def test_quadrupole_levitation_flattens_vertical_potential():
    # at the levitation gradient the vertical force m g is balanced below the zero: dU/dz = 0 for z < 0
    rb = get_species("Rb87")
    mu = magnetic_moment_first_order(rb, 2, 2)
    radial = mt.levitation_gradient(rb.mass_kg, mu) / 2  # axial gradient is 2 b' (div B = 0)
    z = np.linspace(-1e-3, -1e-4, 50)
    pts = np.stack([np.zeros_like(z), np.zeros_like(z), z], axis=-1)
    u = mt.quadrupole_potential(mu, radial, pts, mass_kg=rb.mass_kg)
    assert np.ptp(u) < 1e-9 * abs(mu) * radial * 1e-3
    # without gravity the low-field seeker (moment < 0) sits at the field zero: U = |moment| |B| >= 0
    assert mt.quadrupole_potential(mu, radial, [0.0, 0.0, 0.0]) == 0.0
    assert mt.quadrupole_potential(mu, radial, [[1e-4, 0, 0], [0, 0, -1e-4]]) == pytest.approx(
        [abs(mu) * radial * 1e-4, abs(mu) * 2 * radial * 1e-4], rel=1e-12)
    # radially the field magnitude grows at b', axially at 2 b'
    assert mt.quadrupole_field_magnitude(0.1, [1e-3, 0, 0]) == pytest.approx(1e-4)
    assert mt.quadrupole_field_magnitude(0.1, [0, 0, 1e-3]) == pytest.approx(2e-4)


def test_ioffe_pritchard_against_field_expansion():
    # Ioffe-Pritchard field (Phys. Rev. Lett. 51, 1336 (1983)) expanded to second order so that div B = curl B = 0:
    # B = B0 z^ + B'(x, -y, 0) + (B''/2)(-x z, -y z, z^2 - (x^2 + y^2)/2);
    # curvature of |B| by finite differences vs the closed-form frequencies
    rb = get_species("Rb87")
    mu = magnetic_moment_first_order(rb, 1, -1)
    b0, b1, b2 = 1.0 * mt.GAUSS, 1.5, 150.0  # 1 G, 150 G/cm, 150 G/cm^2

    def bmag(x, y, z):
        bx = b1 * x - b2 * x * z / 2
        by = -b1 * y - b2 * y * z / 2
        bz = b0 + b2 / 2 * (z**2 - (x**2 + y**2) / 2)
        return np.sqrt(bx**2 + by**2 + bz**2)

    h = 1e-7
    curv_x = (bmag(h, 0, 0) - 2 * bmag(0, 0, 0) + bmag(-h, 0, 0)) / h**2
    curv_z = (bmag(0, 0, 10 * h) - 2 * bmag(0, 0, 0) + bmag(0, 0, -10 * h)) / (10 * h) ** 2
    w_rho, w_z = mt.ioffe_pritchard_frequencies(mu, b1, b2, b0, rb.mass_kg)
    # U = -moment |B| = |moment| |B| for the low-field seeker |1,-1> (moment = -dE/dB < 0)
    assert mu < 0
    assert w_rho == pytest.approx(np.sqrt(-mu * curv_x / rb.mass_kg), rel=1e-4)
    assert w_z == pytest.approx(np.sqrt(-mu * curv_z / rb.mass_kg), rel=1e-4)
    # omega_z = sqrt(|mu| B'' / m) (Phys. Rev. Lett. 51, 1336 (1983))
    assert mt.harmonic_trap_frequency(mu, b2, rb.mass_kg) == pytest.approx(np.sqrt(-mu * b2 / rb.mass_kg), rel=1e-12)
    with pytest.raises(ValueError):  # a high-field seeker is not held in a field minimum
        mt.harmonic_trap_frequency(-mu, b2, rb.mass_kg)


def test_gravity_sag_harmonic():
    # minimum of m w^2 z^2 / 2 + m g z lies at -g / w^2
    w = 2 * np.pi * 20.0
    zmin = optimize.minimize_scalar(lambda z: 0.5 * w**2 * z**2 + 9.80665 * z).x
    assert mt.gravity_sag(w) == pytest.approx(-zmin, rel=1e-6)
