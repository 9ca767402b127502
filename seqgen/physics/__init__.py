"""Physics of the preflight checks: plain, vectorised numpy functions in SI units.

Nothing here imports YAML or the rest of seqgen; every function works from a
notebook. Units are SI throughout (kg, m, s, J, T, W/m^2, Hz for frequencies
f, rad/s for angular frequencies omega; the argument or field name says which).

Conventions shared by every module of this package:

* Magnetic moment: ``moment = -dE/dB`` (J/T), E the energy of the internal
  state and B the field along the quantisation axis (its magnitude |B| for an
  atom that follows the field adiabatically). To first order in B,
  E = g_F m_F mu_B B (the sign convention of the alkali D-line data
  compilations and of the Breit-Rabi formula, Phys. Rev. 38, 2082 (1931)),
  so ``moment = -g_F m_F mu_B``.
* A low-field seeker, whose energy rises with |B| (g_F m_F > 0, e.g. Rb-87
  |F=2, mF=2> or |F=1, mF=-1> with g_F = -1/2), has a NEGATIVE moment; a
  high-field seeker a positive one; m_F = 0 has none to first order.
* Force: F = -grad E = moment * grad|B|, so a low-field seeker is pulled
  towards weaker field, and its potential energy in a trap is
  U = -moment |B| = |moment| |B|. A gradient pulse of length tau changes the
  velocity by moment b' tau / m (``kinematics.gradient_kick_velocity``).
* Moments come from ``zeeman.magnetic_moment`` (exact, Breit-Rabi, at a
  given field) or ``atoms.magnetic_moment_first_order`` (low-field limit);
  both follow this sign.
"""
