"""Optical trap stages: the sign of each trap beam's light shift, the trap that the trap beams on at a time
make (depth with gravity, frequencies), and per `trap_ramp` its frequencies, depth, eta and the excitation
the ramp leaves."""

from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np
from scipy import constants as sc

from .cache import per_shot_cache
from .species import gaussian_beams, species, trap_beams

N_SAMPLES = 24  # trap evaluations per ramp: frequencies vary smoothly with power


@dataclass(frozen=True)
class TrapBeamShift:
    """One trap beam's ground-state light shift per intensity U/I (J per W/m^2; > 0 repels) and scalar
    polarisability (atomic units, < 0 repels) at its wavelength (m) for the sample's species."""

    beam: str
    wavelength: float
    potential_per_intensity: float
    polarizability_au: float

    @property
    def repulsive(self) -> bool:
        return self.potential_per_intensity > 0


@per_shot_cache(lambda shot: ("trap-beam-shifts",))
def trap_beam_shifts(shot) -> tuple:
    """TrapBeamShift of every trap beam of the rig (rig order), () without a known species."""
    from ..physics.optical import dipole_potential_per_intensity, scalar_polarizability_au

    sp = species(shot)
    if sp is None:
        return ()
    return tuple(TrapBeamShift(b.name, b.wavelength_m, float(dipole_potential_per_intensity(sp, b.wavelength_m)),
                               float(scalar_polarizability_au(sp, b.wavelength_m)))
                 for b in trap_beams(shot))


@dataclass(frozen=True, eq=False)
class HeldTrap:
    """Depth with gravity (J, 0 when nothing is held: the lowest escape route in 3-D, see
    seqgen.physics.optical.trap_escape), trap frequencies (rad/s, read-only, or None), recoil heating rate at the
    minimum (K/s, 0 when nothing is held) and the way out: unit vector from the minimum towards the lowest
    barrier (read-only, or None)."""

    depth: float
    omegas: np.ndarray | None
    heating: float = 0.0
    escape: np.ndarray | None = None


@functools.lru_cache(maxsize=4096)
def held(sp, beams: tuple) -> HeldTrap:
    """The trap of one set of beams, keyed on content (species and the beams' powers and geometry), not on
    the shot: the shots of a scan, and the flat parts of a ramp, reuse each other's minimisations."""
    from ..physics.optical import held_trap_escape

    try:
        h = held_trap_escape(sp, beams)
    except (ValueError, RuntimeError, np.linalg.LinAlgError):
        return HeldTrap(0.0, None)
    if h.omegas_rad_s is None:
        return HeldTrap(h.depth_j, None)
    omegas, escape = np.array(h.omegas_rad_s, dtype=float), np.array(h.escape, dtype=float)
    for a in (omegas, escape):
        a.setflags(write=False)  # shared by every shot that meets these beams
    return HeldTrap(h.depth_j, omegas, h.heating_k_s, escape)


def trap_stage(shot, t0, t1, n=N_SAMPLES, heating=False):
    """(times, frequencies (rad/s, shape (n, 3)), effective depths with gravity (J)) at n times in [t0, t1];
    with `heating`, the recoil heating rates (K/s) at those times as a fourth item."""
    sp = species(shot)
    # just before t1: a release at the ramp's end time must not count as part of the ramp
    times = np.linspace(t0, t1 - 1e-9 * max(1.0, t1 - t0), n)
    omegas = np.full((n, 3), np.nan)
    depth_g = np.zeros(n)
    rates = np.zeros(n)
    for i, beams in enumerate(gaussian_beams(shot, times)):
        if not beams:
            continue
        h = held(sp, tuple(beams))
        depth_g[i] = h.depth
        rates[i] = h.heating
        if h.omegas is not None:
            omegas[i] = h.omegas
    return (times, omegas, depth_g, rates) if heating else (times, omegas, depth_g)


def trap_ramps(shot):
    return shot.actions("trap_ramp")


@dataclass(frozen=True, eq=False)
class TrapStage:
    """One trap ramp: times (s), omegas (rad/s, (n, 3)), depth_g (J), eta = final depth / k_B T (None without
    a temperature), adiabaticity = max |d omega/dt| / omega^2 and excitation E/E_ad - 1 per axis (None when the
    trap is lost somewhere); excitation_is_bound: the excitation is the bound adiabaticity^2, not integrated;
    heating: recoil heating over the ramp (K, trapezoid integral of dT/dt at the minimum) and the largest
    rate heating_rate (K/s)."""

    times: np.ndarray
    omegas: np.ndarray
    depth_g: np.ndarray
    eta: float | None = None
    adiabaticity: float | None = None
    excitation: tuple | None = None
    excitation_is_bound: bool = False
    heating: float = 0.0
    heating_rate: float = 0.0


@per_shot_cache(lambda shot, act: ("trap", act.index))
def trap_stage_prediction(shot, act) -> TrapStage:
    """Frequencies, depth, eta and excitation of one trap ramp (Ermakov invariant, adiabaticity parameter:
    seqgen.physics.adiabatic)."""
    from ..physics.adiabatic import adiabaticity_parameter, ermakov_final_energy_ratio

    times, omegas, depth_g, rates = trap_stage(shot, act.t0, act.t1, heating=True)
    heat = (float(np.trapezoid(rates, times)), float(np.max(rates)))
    eta = adiabaticity = excitation = None
    if shot.sample is not None and shot.sample.temperature_k:
        eta = float(depth_g[-1] / (sc.k * shot.sample.temperature_k))
    if np.all(np.isfinite(omegas)) and np.all(depth_g > 0):
        adiabaticity = float(np.max(adiabaticity_parameter(times, omegas.T, axis=-1)))
        if adiabaticity ** 2 < shot.limits.max_excitation * 1e-2:
            # the excess energy of a slow ramp stays below (adiabaticity parameter)^2 (checked in
            # tests/physics/test_adiabatic.py); integrating thousands of trap periods would add nothing
            return TrapStage(times, omegas, depth_g, eta, adiabaticity, (adiabaticity ** 2,) * 3, True, *heat)
        exc = []
        for axis in range(3):
            w = omegas[:, axis]

            def omega_of_t(t, w=w):
                return np.interp(t, times, w)

            try:
                exc.append(ermakov_final_energy_ratio(omega_of_t, act.t0, act.t1, rtol=1e-8).energy_ratio - 1.0)
            except (ValueError, RuntimeError):
                exc.append(float("nan"))
        excitation = tuple(exc)
    return TrapStage(times, omegas, depth_g, eta, adiabaticity, excitation, False, *heat)
