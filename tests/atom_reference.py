"""Reference values and published formulas for the tests, written out here and never taken from seqgen.

Atomic data of Na-23 (Sodium D Line Data, alkali data compilation; from memory): nu_hfs = 1 771 626 128.8 Hz,
g_J = 2.00229600, g_I = -0.00080461080, I = 3/2, D2 / D1 vacuum wavelengths 589.1583264 / 589.7558147 nm,
Gamma/2pi = 9.7946 / 9.765 MHz, I_sat = 6.2600 mW/cm^2; mass 22.989769282 u (AME2020, Chinese Physics C 45,
030003 (2021); from memory); scattering length of |F=1, mF=-1> 54.54 a0 (Phys. Rev. A 83, 042704 (2011); from
memory). Constants, and standard gravity g_n, from scipy.constants (CODATA, SI Brochure).
"""

import math

import numpy as np
from scipy import constants as sc
from scipy import integrate
from scipy.integrate import solve_ivp

MU_B = sc.physical_constants["Bohr magneton"][0]
A0 = sc.physical_constants["Bohr radius"][0]
G_N = sc.g  # standard acceleration of gravity, 9.80665 m/s^2 exact
NU_HFS, G_J, G_I, I_NA = 1771626128.8, 2.00229600, -0.00080461080, 1.5
MASS = 22.989769282 * sc.physical_constants["atomic mass constant"][0]
LAMBDA_D2, LAMBDA_D1 = 589.1583264e-9, 589.7558147e-9
GAMMA_HZ, GAMMA_D1_HZ, I_SAT = 9.7946e6, 9.765e6, 62.600  # I_SAT in W/m^2
A_1M1 = 54.54 * A0  # |F=1, mF=-1>
BIAS = 1.2e-4  # T, the demo rig's fields.bias (our own invented number)


def breit_rabi_hz(F, m, B):
    """E/h of a Na-23 ground level, Breit-Rabi formula written out (Phys. Rev. 38, 2082 (1931)):
    E = -h nu/(2(2I+1)) + g_I mu_B m B +/- (h nu/2) sqrt(1 + 4 m x/(2I+1) + x^2), x = (g_J - g_I) mu_B B/(h nu);
    for the stretched states |m| = I + 1/2 the root is 1 + sign(m) x."""
    x = (G_J - G_I) * MU_B * B / (sc.h * NU_HFS)
    sign = 1.0 if F == 2 else -1.0
    root = 1 + math.copysign(x, m) if abs(m) == 2 else math.sqrt(1 + 4 * m * x / (2 * I_NA + 1) + x * x)
    return -NU_HFS / (2 * (2 * I_NA + 1)) + G_I * MU_B * m * B / sc.h + sign * 0.5 * NU_HFS * root


def moment(F, mF, B=BIAS):
    """-dE/dB (J/T) from the written-out Breit-Rabi energies (central difference; the formula is for B >= 0,
    so the difference is centred at B = h at least)."""
    h = 1e-8
    B = max(B, h)
    return -(breit_rabi_hz(F, mF, B + h) - breit_rabi_hz(F, mF, B - h)) * sc.h / (2 * h)


def dipole_u_per_intensity(wavelength_m):
    """Dipole potential per intensity (J per W/m^2) of the D1 and D2 lines, weights 1/3 and 2/3, with the
    counter-rotating terms: U/I = -sum_i w_i (3 pi c^2 / (2 w_i^3)) Gamma_i [1/(w_i - w) + 1/(w_i + w)]
    (Adv. At. Mol. Opt. Phys. 42, 95 (2000))."""
    omega = 2 * np.pi * sc.c / wavelength_m
    out = 0.0
    for weight, lam_i, gamma_hz in ((2 / 3, LAMBDA_D2, GAMMA_HZ), (1 / 3, LAMBDA_D1, GAMMA_D1_HZ)):
        w_i = 2 * np.pi * sc.c / lam_i
        out -= weight * 3 * np.pi * sc.c**2 / (2 * w_i**3) * 2 * np.pi * gamma_hz * (1 / (w_i - omega) + 1 / (w_i + omega))
    return out


def gaussian_beam_omega2(power_w, waist_m, wavelength_m, axis, mass=MASS):
    """omega^2 per lab axis (x, y, z) of a red-detuned round Gaussian beam along `axis` (0, 1 or 2) at its focus,
    harmonic about the centre: 4 U0 / (m w0^2) across it, 2 U0 / (m z_R^2) along it, z_R = pi w0^2 / lambda,
    U0 = |U/I| 2P / (pi w0^2) (Adv. At. Mol. Opt. Phys. 42, 95 (2000)). Gravity sag is not included."""
    u0 = abs(dipole_u_per_intensity(wavelength_m)) * 2 * power_w / (np.pi * waist_m**2)
    z_r = np.pi * waist_m**2 / wavelength_m
    out = np.full(3, 4 * u0 / (mass * waist_m**2))
    out[axis] = 2 * u0 / (mass * z_r**2)
    return out


def thomas_fermi_mu(n_atoms, omegas, a=A_1M1, mass=MASS):
    """Chemical potential mu = (hbar w_bar / 2)(15 N a / a_ho)^(2/5), a_ho = sqrt(hbar / (m w_bar)); radii
    R_i = sqrt(2 mu / (m w_i^2)) (Rev. Mod. Phys. 71, 463 (1999))."""
    w = np.asarray(omegas, dtype=float)
    wbar = float(np.prod(w) ** (1 / 3))
    return 0.5 * sc.hbar * wbar * (15 * n_atoms * a / math.sqrt(sc.hbar / (mass * wbar))) ** 0.4


def thomas_fermi_radii(n_atoms, omegas, a=A_1M1, mass=MASS):
    return np.sqrt(2 * thomas_fermi_mu(n_atoms, omegas, a, mass) / (mass * np.asarray(omegas, dtype=float) ** 2))


def scaling_factors(omegas, tof):
    """lambda_i(tof) of a released Thomas-Fermi condensate: lambda_i'' = w_i^2 / (lambda_i lambda_x lambda_y
    lambda_z), lambda = 1 and lambda' = 0 at release (Phys. Rev. Lett. 77, 5315 (1996)); integrated here with
    scipy's RK45."""
    w2 = np.asarray(omegas, dtype=float) ** 2

    def rhs(_t, y):
        lam = y[:3]
        return np.concatenate([y[3:], w2 / (lam * np.prod(lam))])

    sol = solve_ivp(rhs, (0.0, tof), np.array([1.0, 1.0, 1.0, 0.0, 0.0, 0.0]), rtol=1e-10, atol=1e-12)
    return sol.y[:3, -1]


def condensate_radius_after(n_atoms, omegas, tof, a=A_1M1, mass=MASS):
    """The largest Thomas-Fermi radius after a time of flight (Phys. Rev. Lett. 77, 5315 (1996))."""
    return float(np.max(thomas_fermi_radii(n_atoms, omegas, a, mass) * scaling_factors(omegas, tof)))


def thermal_width_after(sigma0, temperature_k, tof, mass=MASS):
    """Ballistic expansion of a thermal cloud: sigma^2 = sigma_0^2 + k_B T t^2 / m (free flight of a
    Maxwell-Boltzmann velocity distribution uncorrelated with position; Phys. Rev. Lett. 77, 5315 (1996),
    the non-interacting limit)."""
    return math.sqrt(sigma0**2 + sc.k * temperature_k * tof**2 / mass)


def thomas_fermi_fraction_beyond_by_integration(u):
    """Fraction of a Thomas-Fermi condensate, n ~ 1 - x^2 - y^2 - z^2 in units of the radii (Rev. Mod. Phys. 71,
    463 (1999)), with x > u: direct numerical integration over slabs and rings of the unit ball, normalised by its
    integral 8 pi / 15."""
    val, _ = integrate.dblquad(lambda rho, x: 2 * np.pi * rho * (1 - x * x - rho * rho), u, 1.0,
                               lambda x: 0.0, lambda x: math.sqrt(max(1 - x * x, 0.0)), epsabs=1e-12)
    return val / (8 * np.pi / 15)
