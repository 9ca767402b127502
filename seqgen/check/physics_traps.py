"""Physics checks of trap stages: adiabaticity, depth against temperature and
gravity, and the cloud at imaging after release."""

from __future__ import annotations

import functools
import math
import threading

import numpy as np
from scipy import constants as sc

from ..findings import make
from ..registry import check
from ..values import value_at

N_SAMPLES = 24  # trap evaluations per ramp: frequencies vary smoothly with power


def _species(shot):
    from ..physics.atoms import get_species

    if shot.sample is None:
        return None
    try:
        return get_species(shot.sample.species)
    except KeyError:
        return None


def _trap_beams(shot):
    return [b for b in shot.rig.beams.values() if b.role == "trap" and b.waist_m]


def _gaussian_beams(shot, times):
    """For each time, the list of GaussianBeam of the trap beams that are on."""
    from ..physics.optical import GaussianBeam

    beams = _trap_beams(shot)
    powers = {b.name: value_at(shot, b.power_channel, times) for b in beams}
    out = []
    for i in range(len(times)):
        on = [GaussianBeam(float(powers[b.name][i]), b.waist_m, b.wavelength_m, b.direction, b.position_m,
                           b.waist_y_m) for b in beams if powers[b.name][i] > 0]
        out.append(on)
    return out


@functools.lru_cache(maxsize=4096)
def _held(species, beams: tuple):
    """Depth with gravity (J) and trap frequencies (rad/s or None) of one set of beams.

    Keyed on content (species and the beams' powers and geometry), not on the
    shot: the shots of a scan, and the flat parts of a ramp, reuse each other's
    minimisations."""
    from ..physics.optical import held_trap

    try:
        depth, omegas = held_trap(species, beams)
    except (ValueError, RuntimeError, np.linalg.LinAlgError):
        return 0.0, None
    if omegas is not None:
        omegas = np.array(omegas, dtype=float)
        omegas.setflags(write=False)  # shared by every shot that meets these beams
    return depth, omegas


def trap_stage(shot, t0, t1, n=N_SAMPLES):
    """Frequencies (rad/s, shape (n, 3)), effective depths with gravity (J) and depths at n times in [t0, t1]."""
    sp = _species(shot)
    # just before t1: a release at the ramp's end time must not count as part of the ramp
    times = np.linspace(t0, t1 - 1e-9 * max(1.0, t1 - t0), n)
    omegas = np.full((n, 3), np.nan)
    depth_g = np.zeros(n)
    for i, beams in enumerate(_gaussian_beams(shot, times)):
        if not beams:
            continue
        depth_g[i], w = _held(sp, tuple(beams))
        if w is not None:
            omegas[i] = w
    return times, omegas, depth_g


def _trap_ramps(shot):
    return [a for a in shot.phys if a.kind == "trap_ramp"]


_LOCAL = threading.local()  # per thread: a threaded cluster worker checks several shots at once


def _cache(shot) -> dict:
    # one cache for the shot being checked, so the report view and the checks share work
    slot = getattr(_LOCAL, "slot", None)
    if slot is None or slot[0] is not shot:
        slot = _LOCAL.slot = (shot, {})
    return slot[1]


def clear_caches() -> None:
    """Drop the per-shot analyses (of this thread) and the content-keyed trap minimisations."""
    _LOCAL.slot = None
    _held.cache_clear()


def per_shot_cache(key_of):
    """Cache a per-action analysis for the current shot under the key `key_of(*args)`.

    The checks and the `show --physics` report ask for the same analyses; this
    computes each once per shot. A re-entrant call sees None instead of recursing.
    """

    def wrap(func):
        @functools.wraps(func)
        def cached(shot, *args):
            cache = _cache(shot)
            key = key_of(shot, *args)
            if key not in cache:
                cache[key] = None
                try:
                    cache[key] = func(shot, *args)
                except BaseException:
                    del cache[key]  # the next caller retries (and meets the same error itself), not a stale None
                    raise
            return cache[key]

        return cached

    return wrap


@per_shot_cache(lambda shot, act: ("trap", act.index))
def _stage_report(shot, act):
    """Cached per-ramp physics: frequencies, depth, eta, excitation."""
    from ..physics.adiabatic import adiabaticity_parameter, ermakov_final_energy_ratio

    times, omegas, depth_g = trap_stage(shot, act.t0, act.t1)
    rep = {"times": times, "omegas": omegas, "depth_g": depth_g, "excitation": None, "adiabaticity": None}
    if shot.sample is not None and shot.sample.temperature_k:
        rep["eta"] = float(depth_g[-1] / (sc.k * shot.sample.temperature_k))
    if np.all(np.isfinite(omegas)) and np.all(depth_g > 0):
        rep["adiabaticity"] = float(np.max(adiabaticity_parameter(times, omegas.T, axis=-1)))
        exc = []
        if rep["adiabaticity"] ** 2 < shot.limits.max_excitation * 1e-2:
            # the excess energy of a slow ramp stays below (adiabaticity parameter)^2 (checked in
            # tests/physics/test_adiabatic.py); integrating thousands of trap periods would add nothing
            rep["excitation"] = [rep["adiabaticity"] ** 2] * 3
            rep["excitation_is_bound"] = True
            return rep
        for axis in range(3):
            w = omegas[:, axis]

            def omega_of_t(t, w=w):
                return np.interp(t, times, w)

            try:
                exc.append(ermakov_final_energy_ratio(omega_of_t, act.t0, act.t1, rtol=1e-8).energy_ratio - 1.0)
            except (ValueError, RuntimeError):
                exc.append(float("nan"))
        rep["excitation"] = exc
    return rep




@check("physics.trap-lost", "error", "optical dipole potential: Adv. At. Mol. Opt. Phys. 42, 95 (2000); "
       "standard gravity g_n (SI Brochure)", stage="physics")
def trap_lost(shot):
    """During a trap ramp the optical trap no longer holds the atoms against
    gravity: the depth along the vertical, including the gravitational tilt
    m g z, drops to zero. Computed from the rig's beams (power from the
    sequence, waist, wavelength) with the D1 + D2 dipole potential of the
    sample's species. Raise the final power, or declare the release with a
    `release` action if dropping the atoms is intended."""
    if _species(shot) is None:
        return
    for act in _trap_ramps(shot):
        rep = _stage_report(shot, act)
        lost = np.nonzero(rep["depth_g"] <= 0)[0]
        if len(lost):
            t = float(rep["times"][lost[0]])
            yield make("physics.trap-lost", f"the trap no longer holds {shot.sample.species} against gravity from "
                       f"t = {t * 1e3:.6g} ms (power of '{act.args['beam']}' {value_at(shot, act.args['output'], t)[0] * 1e3:.4g} mW)",
                       act.pos, block=act.block, time_s=t, hint="end the ramp at a higher power")


@check("physics.nonadiabatic-ramp", "warning", "Ermakov scaling equation, J. Math. Phys. 10, 1458 (1969); "
       "adiabaticity |d omega/dt| << omega^2 (common practice, no source)", stage="physics")
def nonadiabatic_ramp(shot):
    """A trap ramp that leaves the cloud excited. For each axis seqgen follows
    the trap frequency through the ramp (from beam powers, waists and the
    species' polarizability), integrates the Ermakov scaling equation
    b'' + omega(t)^2 b = omega_0^2 / b^3 and reports the final energy above the
    adiabatic value, E / E_ad - 1, which for a harmonic trap is the same for
    every initial state (so for a thermal cloud too). The threshold is
    `limits: {max_excitation: ...}` (default 0.05). Lengthen the ramp, use a
    smooth shape, or accept the finding with a reason."""
    for act in _trap_ramps(shot) if _species(shot) else ():
        rep = _stage_report(shot, act)
        exc = rep["excitation"]
        if exc is None:
            continue
        worst = max(exc)
        if worst > shot.limits.max_excitation:
            axis = int(np.argmax(exc))
            yield make("physics.nonadiabatic-ramp", f"ramp of '{act.args['beam']}' leaves {worst:.3g} of the energy above "
                       f"adiabatic on its axis {axis + 1} (limit {shot.limits.max_excitation:g}); max |d omega/dt|/omega^2 = "
                       f"{rep['adiabaticity']:.3g}", act.pos, block=act.block, time_s=act.t0,
                       hint="make the ramp longer or smoother (minimum_jerk / smooth shapes)",
                       data={"excitation": worst, "adiabaticity": rep["adiabaticity"]})


@check("physics.shallow-trap", "warning", "truncation parameter eta = U / k_B T of about 6 to 10 in evaporation "
       "(common practice, no source)", stage="physics")
def shallow_trap(shot):
    """At the end of a trap ramp the depth (with gravity) is less than
    `limits.min_eta` (default 5) times k_B T of the sample: atoms spill out.
    Intended in forced evaporation; accept it there with a reason."""
    if shot.sample is None or not shot.sample.temperature_k or _species(shot) is None:
        return
    for act in _trap_ramps(shot):
        rep = _stage_report(shot, act)
        eta = rep.get("eta")
        if eta is not None and 0 < eta < shot.limits.min_eta:
            yield make("physics.shallow-trap", f"after the ramp of '{act.args['beam']}' the trap is only {eta:.3g} k_B T deep "
                       f"for T = {shot.sample.temperature_k * 1e9:.4g} nK (limit {shot.limits.min_eta:g})", act.pos,
                       block=act.block, time_s=act.t1, hint="end at a higher power, or accept it if spilling is intended")


def _imaged_clouds(shot, needs: str):
    """(image action, imaging setup, predicted cloud) for images whose setup declares `needs`."""
    for img in (a for a in shot.phys if a.kind == "image"):
        setup = shot.rig.imaging.get(img.args["setup"])
        if setup is None or not getattr(setup, needs):
            continue
        c = cloud_at_image(shot, img)
        if c is not None:
            yield img, setup, c


def cloud_at_image(shot, img):
    """Predicted centre drop (m) and rms size (m) of the cloud at an image, or None."""
    from ..physics.expansion import condensate_tof_radii, thermal_width, thomas_fermi

    sp = _species(shot)
    if sp is None or shot.sample is None:
        return None
    releases = [a for a in shot.phys if a.kind == "release" and a.t0 <= img.t0]
    if not releases:
        return None
    rel = releases[-1]
    tof = img.t0 - rel.t0
    before = rel.t0 - 1e-9
    beams = _gaussian_beams(shot, [before])[0]
    omegas = None
    if shot.sample.trap_frequencies_hz:
        omegas = 2 * np.pi * np.asarray(shot.sample.trap_frequencies_hz)
    elif beams:
        omegas = _held(sp, tuple(beams))[1]
    if omegas is None or not np.all(np.isfinite(omegas)):
        return None
    drop = 0.5 * 9.80665 * tof ** 2
    if shot.sample.condensed and shot.sample.atoms:
        a = next(iter(sp.scattering_lengths_m.values()), None)
        key = f"F={shot.sample.F},mF={shot.sample.mF}"
        a = sp.scattering_lengths_m.get(key, a)
        if not a or a <= 0:
            return None
        _, radii = thomas_fermi(shot.sample.atoms, sp.mass_kg, a, omegas)
        r = condensate_tof_radii(radii, omegas, np.array([tof]))
        size = float(np.max(np.asarray(r).reshape(3, -1)[:, -1]))  # Thomas-Fermi radius, largest axis
        kind = "Thomas-Fermi radius"
    elif shot.sample.temperature_k:
        sigma0 = np.sqrt(sc.k * shot.sample.temperature_k / (sp.mass_kg * np.asarray(omegas) ** 2))
        size = float(np.max(thermal_width(sigma0, shot.sample.temperature_k, sp.mass_kg, tof)))
        kind = "rms width"
    else:
        return None
    return {"tof": tof, "drop": drop, "size": size, "size_kind": kind, "omegas": omegas}


@check("physics.cloud-outside-view", "error", "free fall under standard gravity (SI Brochure); condensate expansion "
       "Phys. Rev. Lett. 77, 5315 (1996); ballistic thermal expansion (textbook)", stage="physics")
def cloud_outside_view(shot):
    """At the image time the cloud, falling from where it was released and
    expanding (Thomas-Fermi scaling solution for a condensate, ballistic for a
    thermal cloud), lies partly or wholly outside the imaging setup's field of
    view. Shorten the time of flight or move the camera."""
    for img, setup, c in _imaged_clouds(shot, "field_of_view_m"):
        half = setup.field_of_view_m / 2
        # a Thomas-Fermi radius is the cloud's edge; for a Gaussian take 2 rms widths
        edge = c["drop"] + (c["size"] if c["size_kind"].startswith("Thomas") else 2 * c["size"])
        if edge > half:
            yield make("physics.cloud-outside-view", f"after {c['tof'] * 1e3:.4g} ms of flight the cloud has fallen "
                       f"{c['drop'] * 1e3:.3g} mm and is {c['size'] * 1e6:.3g} um in size ({c['size_kind']}); "
                       f"the field of view reaches {half * 1e3:.3g} mm from the centre", img.pos, block=img.block,
                       time_s=img.t0, hint="shorten the time of flight or recentre the camera")


def report(shot) -> list[dict]:
    rows = []
    if _species(shot) is None:
        return rows
    for act in _trap_ramps(shot):
        rep = _stage_report(shot, act)
        items = []
        w = rep["omegas"]
        if np.all(np.isfinite(w[[0, -1]])):
            f0, f1 = w[0] / (2 * math.pi), w[-1] / (2 * math.pi)
            items.append("trap frequencies " + "/".join(f"{x:.4g}" for x in f0) + " Hz -> " + "/".join(f"{x:.4g}" for x in f1) + " Hz")
        items.insert(0, f"beam {act.args['beam']}")
        items.append(f"depth with gravity k_B x {rep['depth_g'][0] / sc.k * 1e6:.4g} uK -> {rep['depth_g'][-1] / sc.k * 1e6:.4g} uK")
        if rep.get("eta") is not None:
            items.append(f"eta at end {rep['eta']:.3g}")
        if rep["excitation"] is not None:
            if rep.get("excitation_is_bound"):
                items.append(f"excitation E/E_ad-1 <= {rep['excitation'][0]:.2g} (slow ramp: bound from max |d omega/dt|/omega^2)")
            else:
                items.append("excitation E/E_ad-1 per axis " + ", ".join(f"{x:.2e}" for x in rep["excitation"]))
        rows.append({"block": act.block, "kind": "trap_ramp", "time_s": act.t0, "items": items})
    for img in (a for a in shot.phys if a.kind == "image"):
        c = cloud_at_image(shot, img)
        if c:
            rows.append({"block": img.block, "kind": "image", "time_s": img.t0,
                         "items": [f"time of flight {c['tof'] * 1e3:.4g} ms", f"cloud centre {c['drop'] * 1e3:.3g} mm below release",
                                   f"{c['size_kind']} {c['size'] * 1e6:.3g} um"]})
    return rows


@check("physics.cloud-out-of-focus", "warning", "ballistic / Thomas-Fermi expansion as for physics.cloud-outside-view; "
       "depth of field of the imaging setup (rig file)", stage="physics")
def cloud_out_of_focus(shot):
    """At the image time the cloud is larger along the line of sight than the
    imaging setup's depth of field: its near and far parts are imaged out of
    focus, which blurs the picture and biases fitted sizes. Shorten the time
    of flight or image a smaller cloud."""
    for img, setup, c in _imaged_clouds(shot, "depth_of_field_m"):
        extent = 2 * c["size"] if c["size_kind"].startswith("Thomas") else 4 * c["size"]
        if extent > setup.depth_of_field_m:
            yield make("physics.cloud-out-of-focus", f"the cloud spans {extent * 1e3:.3g} mm along the line of sight, more "
                       f"than the {setup.depth_of_field_m * 1e3:.3g} mm depth of field of '{setup.name}'", img.pos,
                       block=img.block, time_s=img.t0, hint="shorten the time of flight")


@check("physics.cloud-clipped", "error", "free fall under standard gravity (SI Brochure); expansion as for "
       "physics.cloud-outside-view; aperture radius of the rig's imaging setup", stage="physics")
def cloud_clipped(shot):
    """Falling and expanding after release, the cloud reaches the apparatus
    aperture declared for the imaging setup (`aperture_radius`, e.g. the inner
    radius of a glass cell or waveguide) before the image is taken: atoms are
    lost on the wall. Shorten the time of flight."""
    for img, setup, c in _imaged_clouds(shot, "aperture_radius_m"):
        edge = c["drop"] + (c["size"] if c["size_kind"].startswith("Thomas") else 2 * c["size"])
        if edge > setup.aperture_radius_m:
            yield make("physics.cloud-clipped", f"after {c['tof'] * 1e3:.4g} ms the cloud reaches {edge * 1e3:.3g} mm from "
                       f"the release point, beyond the {setup.aperture_radius_m * 1e3:.3g} mm aperture of '{setup.name}'",
                       img.pos, block=img.block, time_s=img.t0, hint="shorten the time of flight")
