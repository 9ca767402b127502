"""Physics checks of trap stages: adiabaticity, depth against temperature and
gravity, and the cloud at imaging after release.

The cloud at an image (`image_prediction`): its size from the trap the
release opened (optical beams, the sample's trap_frequencies, or a
magnetic hold: Ioffe-Pritchard frequencies, or the Boltzmann profile of a
linear quadrupole) and the expansion; the position of every populated
internal-state component from the fall and the pushes and separations
(physics_states.components_at); both against the camera's field of view,
depth of field and aperture in the image plane perpendicular to the probe
beam (assumptions in `image_prediction`)."""

from __future__ import annotations

import functools
import math
import threading

import numpy as np
from scipy import constants as sc

from ..findings import make
from .rules import rule
from ..values import value_at
from ..codes import CLOUD_CLIPPED, CLOUD_OUTSIDE_VIEW, CLOUD_OUT_OF_FOCUS, NONADIABATIC_RAMP, SHALLOW_TRAP, TRAP_LOST

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




@rule(TRAP_LOST, stage="physics")
def trap_lost(shot):
    if _species(shot) is None:
        return
    for act in _trap_ramps(shot):
        rep = _stage_report(shot, act)
        lost = np.nonzero(rep["depth_g"] <= 0)[0]
        if len(lost):
            t = float(rep["times"][lost[0]])
            yield make(TRAP_LOST, f"the trap no longer holds {shot.sample.species} against gravity from "
                       f"t = {t * 1e3:.6g} ms (power of '{act.args['beam']}' {value_at(shot, act.args['output'], t)[0] * 1e3:.4g} mW)",
                       act.pos, block=act.block, time_s=t, hint="end the ramp at a higher power")


@rule(NONADIABATIC_RAMP, stage="physics")
def nonadiabatic_ramp(shot):
    for act in _trap_ramps(shot) if _species(shot) else ():
        rep = _stage_report(shot, act)
        exc = rep["excitation"]
        if exc is None:
            continue
        worst = max(exc)
        if worst > shot.limits.max_excitation:
            axis = int(np.argmax(exc))
            yield make(NONADIABATIC_RAMP, f"ramp of '{act.args['beam']}' leaves {worst:.3g} of the energy above "
                       f"adiabatic on its axis {axis + 1} (limit {shot.limits.max_excitation:g}); max |d omega/dt|/omega^2 = "
                       f"{rep['adiabaticity']:.3g}", act.pos, block=act.block, time_s=act.t0,
                       hint="make the ramp longer or smoother (minimum_jerk / smooth shapes)",
                       data={"excitation": worst, "adiabaticity": rep["adiabaticity"]})


@rule(SHALLOW_TRAP, stage="physics")
def shallow_trap(shot):
    if shot.sample is None or not shot.sample.temperature_k or _species(shot) is None:
        return
    for act in _trap_ramps(shot):
        rep = _stage_report(shot, act)
        eta = rep.get("eta")
        if eta is not None and 0 < eta < shot.limits.min_eta:
            yield make(SHALLOW_TRAP, f"after the ramp of '{act.args['beam']}' the trap is only {eta:.3g} k_B T deep "
                       f"for T = {shot.sample.temperature_k * 1e9:.4g} nK (limit {shot.limits.min_eta:g})", act.pos,
                       block=act.block, time_s=act.t1, hint="end at a higher power, or accept it if spilling is intended")


UP = np.array([0.0, 0.0, 1.0])  # gravity along -z, as for the trap minimisation


def _release_before(shot, t):
    rels = [a for a in shot.phys if a.kind == "release" and a.t0 <= t]
    return max(rels, key=lambda a: a.t0) if rels else None


def _magnetic_hold_before(shot, t):
    """The last magnetic hold that has begun before t and whose coils still carry current just before t, or None."""
    holds = [a for a in shot.phys if a.kind == "magnetic_hold" and a.t0 < t]
    if not holds:
        return None
    hold = max(holds, key=lambda a: a.t0)
    names = [c for c, _ in hold.args.get("currents", ())] or list(shot.rig.coils)
    for name in names:
        coil = shot.rig.coils.get(name)
        if coil is not None and coil.current_channel in shot.rig.outputs:
            if float(value_at(shot, coil.current_channel, t - 1e-9)[0]) != 0:
                return hold
    return None


def _trap_before_release(shot, sp, rel):
    """(omegas or None, rms widths in a linear trap or None, text, reason) of the trap the release opens."""
    from ..physics.kinematics import linear_trap_rms_widths

    if shot.sample.trap_frequencies_hz:
        return 2 * np.pi * np.asarray(shot.sample.trap_frequencies_hz, dtype=float), None, "the sample's trap_frequencies", None
    beams = _gaussian_beams(shot, [rel.t0 - 1e-9])[0]
    if beams:
        omegas = _held(sp, tuple(beams))[1]
        if omegas is None or not np.all(np.isfinite(omegas)):
            return None, None, None, "the trap beams on before the release hold no atoms (no trap frequencies)"
        return omegas, None, "the optical trap", None
    hold = _magnetic_hold_before(shot, rel.t0)
    if hold is None:
        return None, None, None, ("no trap is known before the release: no trap beams on, no magnetic_hold, and the "
                                  "sample gives no trap_frequencies")
    from .physics_magnetic import hold_analysis

    rep = hold_analysis(shot, hold)
    where = f"the magnetic trap of block '{hold.block}'"
    if rep.get("omega_radial"):
        w_r, w_z = rep["omega_radial"], rep["omega_axial"]
        return np.array([w_r, w_r, w_z]), None, f"{where} (Ioffe-Pritchard)", None
    if rep.get("kind") == "quadrupole" and rep.get("trappable"):
        temp = shot.sample.temperature_k
        grads = np.abs(np.linalg.eigvalsh(np.asarray(rep["matrix"], dtype=float)))
        if not temp:
            return None, None, None, f"{where} is a linear quadrupole: its cloud size needs the sample's temperature"
        if not np.all(grads > 0):
            return None, None, None, f"{where} has a direction without gradient: the cloud is not confined"
        return None, linear_trap_rms_widths(temp, rep["moment"], grads), f"{where} (linear quadrupole)", None
    why = rep.get("bad_state") or rep.get("unconfined") or ("the held state is not trappable" if "trappable" in rep
                                                            else "the trap could not be evaluated")
    return None, None, None, f"{where} gives no cloud size: {why}"


def _cloud_size(shot, img, rel):
    """(cloud dict, None) or (None, reason) for the cloud released by `rel` and imaged by `img`."""
    from ..physics.expansion import condensate_tof_radii, thermal_width, thomas_fermi

    sp = _species(shot)
    tof = img.t0 - rel.t0
    drop = 0.5 * 9.80665 * tof ** 2
    omegas, widths, trap, why = _trap_before_release(shot, sp, rel)
    if why:
        return None, why
    s = shot.sample
    cloud = {"tof": tof, "drop": drop, "omegas": omegas, "trap": trap}
    if s.condensed and s.atoms and omegas is not None:
        a = next(iter(sp.scattering_lengths_m.values()), None)
        a = sp.scattering_lengths_m.get(f"F={s.F},mF={s.mF}", a)
        if not a or a <= 0:
            return None, f"no positive scattering length of {sp.name} for a Thomas-Fermi condensate"
        _, radii = thomas_fermi(s.atoms, sp.mass_kg, a, omegas)
        r = condensate_tof_radii(radii, omegas, np.array([tof]))
        cloud.update(size=float(np.max(np.asarray(r).reshape(3, -1)[:, -1])), size_kind="Thomas-Fermi radius")
        return cloud, None
    if not s.temperature_k:
        return None, ("the sample gives neither a temperature nor, for a condensate, an atom number"
                      if s.condensed else "the sample has no temperature")
    if widths is not None:
        sigma0 = np.asarray(widths, dtype=float)  # 2 k_B T / (|mu| b'_i) per principal axis
    else:
        sigma0 = np.sqrt(sc.k * s.temperature_k / (sp.mass_kg * np.asarray(omegas, dtype=float) ** 2))
    cloud.update(size=float(np.max(thermal_width(sigma0, s.temperature_k, sp.mass_kg, tof))), size_kind="rms width",
                 sigma0=float(np.max(sigma0)))
    if s.condensed:
        cloud["note"] = "condensate in a linear trap: sized as a thermal cloud at the sample's temperature"
    return cloud, None


def cloud_at_image(shot, img):
    """Predicted centre drop (m) and size (m; Thomas-Fermi radius or rms width) of the cloud at an image, or None.

    Keys: tof, drop (free fall g_n tof^2 / 2 since the last release), size, size_kind, omegas (of the trap that
    the release opened; None for a linear magnetic trap), trap (which trap). `image_prediction` says why when
    this is None, and adds where each internal-state component is."""
    pred = image_prediction(shot, img)
    return pred["cloud"] if pred else None


def _edge(cloud) -> float:
    """The cloud's reach from its centre: a Thomas-Fermi radius is its edge; for a Gaussian take 2 rms widths."""
    if cloud is None:
        return 0.0
    return cloud["size"] if cloud["size_kind"].startswith("Thomas") else 2 * cloud["size"]


@per_shot_cache(lambda shot, img: ("image-prediction", img.index, img.t0))
def image_prediction(shot, img):
    """Everything known of the cloud at an image (dict), or None without a species / sample.

    Geometry (stated assumptions): positions are in the rig's frame, the atoms sit at the origin before the
    first push (the rig's convention for beam positions), z is up. The camera looks along its setup's
    probe beam (`direction`), so the image plane is perpendicular to that beam and contains the vertical
    when the probe is horizontal; the field of view is a square of side `field_of_view` centred on the
    setup's `center` (metres, default the origin) with sides along the image's horizontal and vertical (a
    circle of that diameter when the camera looks along the vertical), the focal plane goes through the
    centre, and the aperture is a circle of `aperture_radius` around the release point in the image plane.
    Without a probe beam the line of sight is unknown: the image plane is taken as vertical and every
    horizontal displacement counts at its full length in it (the conservative side).

    Keys: setup, release (action or None), tof (s), cloud (cloud dict or None), why (reason when cloud is None),
    components (each: state, fraction, positions (n_cases, 3) m from the origin incl. gravity, plane
    (n_cases, 2) right / up image coordinates from the setup's centre, along (n_cases,) offset
    along the line of sight from the focal plane, from_release (n_cases,) in-plane distance from the
    release point, parts), unknown (forces of unknown sign), signs (see physics_states.components_at), empty
    (states below the detection floor), los (unit line of sight or None), top_down, edge (m: the size's reach)."""
    from ..physics.kinematics import image_plane_basis
    from .physics_states import components_at

    sp = _species(shot)
    if sp is None or shot.sample is None:
        return None
    setup = shot.rig.imaging.get(img.args.get("setup"))
    out = {"setup": setup, "release": None, "tof": None, "cloud": None, "why": None, "components": [], "unknown": [],
           "signs": None, "empty": [], "los": None, "edge": 0.0, "top_down": False}
    rel = _release_before(shot, img.t0)
    if rel is None:
        out["why"] = "no release before the image (an in-situ image): no time-of-flight prediction"
        return out
    out["release"], out["tof"] = rel, img.t0 - rel.t0
    out["cloud"], out["why"] = _cloud_size(shot, img, rel)
    out["edge"] = _edge(out["cloud"])
    tof = img.t0 - rel.t0
    gravity = np.array([0.0, 0.0, -0.5 * 9.80665 * tof ** 2])
    beam = shot.rig.beams.get(setup.probe_beam) if setup is not None and setup.probe_beam else None
    basis = None
    if beam is not None:
        try:
            basis = image_plane_basis(beam.direction, UP)
            out["los"] = basis[2]
        except ValueError:
            basis = None
    centre = np.asarray(setup.center_m if setup is not None else (0.0, 0.0, 0.0), dtype=float)
    motion = components_at(shot, img) or {"components": [], "unknown": [], "empty": [], "signs": None}
    out["unknown"], out["empty"], out["signs"] = motion["unknown"], motion["empty"], motion["signs"]
    out["state_known"] = shot.sample.F is not None and shot.sample.mF is not None
    for comp in motion["components"]:
        pos = comp["displacements"] + gravity  # (n_cases, 3)
        off = pos - centre
        if basis is not None:
            e_h, e_v, n = basis
            plane = np.stack([off @ e_h, off @ e_v], axis=-1)
            along = off @ n
            rel_plane = np.stack([pos @ e_h, pos @ e_v], axis=-1)
        else:  # line of sight unknown: vertical image plane, horizontal offsets at full length
            plane = np.stack([np.hypot(off[:, 0], off[:, 1]), off[:, 2]], axis=-1)
            along = None
            rel_plane = np.stack([np.hypot(pos[:, 0], pos[:, 1]), pos[:, 2]], axis=-1)
        out["components"].append(dict(state=comp["state"], fraction=comp["fraction"], positions=pos, plane=plane,
                                      along=along, from_release=np.hypot(rel_plane[:, 0], rel_plane[:, 1]),
                                      parts=comp["parts"]))
    out["top_down"] = basis is not None and abs(float(np.dot(basis[2], UP))) > 1 - 1e-6
    return out


def _view_reach(pred, comp):
    """Per case: how far the component's centre lies from the centre of view in the field-of-view metric."""
    h, v = np.abs(comp["plane"][:, 0]), np.abs(comp["plane"][:, 1])
    return np.hypot(h, v) if pred["top_down"] else np.maximum(h, v)


def _who(comp) -> str:
    from .physics_states import state_text

    st = comp["state"]
    return (f"{state_text(st)} ({comp['fraction'] * 100:.3g} % of the atoms)" if st is not None else "the cloud")


def _why_there(pred, comp, case) -> str:
    """How a component got where it is in one case: its fall and each force's displacement (mm)."""
    bits = [f"fall {0.5 * 9.80665 * pred['tof'] ** 2 * 1e3:.3g} mm"]
    signs = pred["signs"]
    for label, known, vec, slot in comp["parts"]:
        length = float(np.linalg.norm(vec))
        if length == 0:
            continue
        if known:
            bits.append(f"{label} {length * 1e3:.3g} mm along {_vec(vec / length)}")
        elif signs is not None:
            bits.append(f"{label} {length * 1e3:.3g} mm along {_vec(signs[case, slot] * vec / length)} (the coil has no "
                        f"field_grows_along: both ways checked)")
        else:
            bits.append(f"{label} {length * 1e3:.3g} mm either way along {_vec(vec / length)}")
    return ", ".join(bits)


def _vec(v) -> str:
    return "[" + ", ".join(f"{x + 0.0:.3g}" for x in v) + "]"


def _worst(pred, metric):
    """(component, case, value) with the largest metric(pred, comp)[case], or None."""
    best = None
    for comp in pred["components"]:
        vals = metric(pred, comp)
        if vals is None or not len(vals):
            continue
        i = int(np.argmax(vals))
        if best is None or vals[i] > best[2]:
            best = (comp, i, float(vals[i]))
    return best


def _imaging_predictions(shot, needs: str):
    """(image action, setup, prediction) for images after a release whose setup declares `needs`."""
    for img in (a for a in shot.phys if a.kind == "image"):
        setup = shot.rig.imaging.get(img.args["setup"])
        if setup is None or not getattr(setup, needs):
            continue
        pred = image_prediction(shot, img)
        if pred and pred["release"] is not None and pred["components"]:
            yield img, setup, pred


def _length(x) -> str:
    return f"{x * 1e6:.3g} um" if abs(x) < 1e-3 else f"{x * 1e3:.3g} mm"


def _size_text(pred) -> str:
    c = pred["cloud"]
    if c is None:
        return f"cloud size unknown ({pred['why']}): its centre alone is checked"
    return f"{c['size_kind']} {_length(c['size'])}"


_SRC_VIEW = ("free fall under standard gravity (SI Brochure); condensate expansion Phys. Rev. Lett. 77, 5315 (1996); "
             "ballistic thermal expansion (textbook); Stern-Gerlach and push displacements with moments from the "
             "Breit-Rabi formula, Phys. Rev. 38, 2082 (1931), force = moment x grad|B|, uniform acceleration then "
             "free flight (textbook)")


@rule(CLOUD_OUTSIDE_VIEW, stage="physics")
def cloud_outside_view(shot):
    for img, setup, pred in _imaging_predictions(shot, "field_of_view_m"):
        half = setup.field_of_view_m / 2
        edge = pred["edge"]
        worst = _worst(pred, _view_reach)
        if worst is None or worst[2] + edge <= half:
            continue
        comp, case, reach = worst
        out = sum(1 for c in pred["components"] if np.any(_view_reach(pred, c) + edge > half))
        others = f" ({out} of {len(pred['components'])} components leave it)" if len(pred["components"]) > 1 else ""
        h, v = comp["plane"][case]
        yield make(CLOUD_OUTSIDE_VIEW, f"after {pred['tof'] * 1e3:.4g} ms of flight {_who(comp)} is centred "
                   f"{reach * 1e3:.3g} mm from the centre of view of '{setup.name}' (image plane: {h * 1e3 + 0.0:+.3g} mm right, "
                   f"{v * 1e3 + 0.0:+.3g} mm up; {_why_there(pred, comp, case)}), {_size_text(pred)}; the field of view reaches "
                   f"{half * 1e3:.3g} mm from its centre{others}", img.pos, block=img.block, time_s=img.t0,
                   hint=("shorten the time of flight, weaken the push or separation, or recentre the camera (the imaging "
                         "setup's center)" if reach > half - edge / 2 else
                         "the cloud itself is too large for the view: shorten the time of flight or image a colder cloud"),
                   data={"reach_m": reach + edge, "half_view_m": half})


def _focus_offset(pred, comp):
    if comp["along"] is None:
        return np.zeros(len(comp["plane"]))
    return np.abs(comp["along"])


def report(shot) -> list[dict]:
    rows = []
    if _species(shot) is None:
        return rows
    seen: dict = {}  # ramps of several beams over the same interval describe one trap: one row, all beams named
    for act in _trap_ramps(shot):
        key = (act.block, act.t0, act.t1)
        if key in seen:
            first = seen[key]["items"]
            first[0] = first[0].replace("beam ", "beams ", 1) if first[0].startswith("beam ") else first[0]
            first[0] += f" + {act.args['beam']}"
            continue
        rep = _stage_report(shot, act)
        items = []
        w = rep["omegas"]
        if np.all(np.isfinite(w[[0, -1]])):
            f0, f1 = w[0] / (2 * math.pi), w[-1] / (2 * math.pi)
            items.append("trap frequencies " + "/".join(f"{x:.4g}" for x in f0) + " Hz -> " + "/".join(f"{x:.4g}" for x in f1) + " Hz")
        items.insert(0, f"beam {act.args['beam']}")  # the crossed trap of every beam on at the time, not this beam alone
        items.append(f"depth with gravity k_B x {rep['depth_g'][0] / sc.k * 1e6:.4g} uK -> {rep['depth_g'][-1] / sc.k * 1e6:.4g} uK")
        if rep.get("eta") is not None:
            items.append(f"eta at end {rep['eta']:.3g}")
        if rep["excitation"] is not None:
            if rep.get("excitation_is_bound"):
                items.append(f"excitation E/E_ad-1 <= {rep['excitation'][0]:.2g} (slow ramp: bound from max |d omega/dt|/omega^2)")
            else:
                items.append("excitation E/E_ad-1 per axis " + ", ".join(f"{x:.2e}" for x in rep["excitation"]))
        rows.append({"block": act.block, "kind": "trap_ramp", "time_s": act.t0, "items": items})
        seen[key] = rows[-1]
    for img in (a for a in shot.phys if a.kind == "image"):
        pred = image_prediction(shot, img)
        if pred:
            rows.append({"block": img.block, "kind": "image", "time_s": img.t0, "items": _image_items(pred)})
    return rows


def _mm(v) -> str:
    return "[" + ", ".join(f"{x * 1e3 + 0.0:.3g}" for x in v) + "] mm"


def _image_items(pred) -> list:
    """`show --physics` lines of one image: flight, size (or why unknown), geometry, each component."""
    if pred["release"] is None:
        return [pred["why"]]
    c = pred["cloud"]
    items = [f"time of flight {pred['tof'] * 1e3:.4g} ms",
             f"free fall {0.5 * 9.80665 * pred['tof'] ** 2 * 1e3:.3g} mm below release"]
    if c is None:
        items.append(f"no size prediction: {pred['why']}; centres alone are checked")
    else:
        items.append(f"{c['size_kind']} {_length(c['size'])} (released from {c['trap']})")
        if c.get("note"):
            items.append(c["note"])
    setup = pred["setup"]
    if pred["los"] is not None:
        items.append(f"camera looks along {_vec(pred['los'])} (probe beam '{setup.probe_beam}'), image plane perpendicular")
    elif setup is not None:
        items.append("line of sight unknown (no probe beam): vertical image plane, horizontal offsets counted in full")
    if pred["unknown"]:
        items.append("sign unknown, both ways checked: " + ", ".join(pred["unknown"]))
    if not pred.get("state_known", True):
        items.append("sample state unknown: magnetic pushes and separations left out")
    half = setup.field_of_view_m / 2 if setup is not None and setup.field_of_view_m else None
    for comp in pred["components"]:
        pos = comp["positions"]
        where = (" or ".join(_mm(p) for p in pos) if len(pos) <= 4 else
                 "within " + _mm(pos.min(axis=0)) + " .. " + _mm(pos.max(axis=0)))
        text = f"{_who(comp)} centred at {where} (rig frame)"
        if half is not None:
            reach = _view_reach(pred, comp) + pred["edge"]
            text += f", reaching {float(np.max(reach)) * 1e3:.3g} mm of the {half * 1e3:.3g} mm half field of view"
        items.append(text)
    if pred["empty"]:
        from .physics_states import state_text

        items.append("below the detection floor: " + ", ".join(f"{state_text(st)} ({f * 100:.2g} %)" for st, f in pred["empty"]))
    return items


@rule(CLOUD_OUT_OF_FOCUS, stage="physics")
def cloud_out_of_focus(shot):
    for img, setup, pred in _imaging_predictions(shot, "depth_of_field_m"):
        edge = pred["edge"]
        worst = _worst(pred, _focus_offset)
        if worst is None or 2 * (worst[2] + edge) <= setup.depth_of_field_m:
            continue
        comp, case, off = worst
        where = f", centred {off * 1e3:.3g} mm from the focal plane" if off > 0 else ""
        yield make(CLOUD_OUT_OF_FOCUS, f"{_who(comp)} spans {2 * (off + edge) * 1e3:.3g} mm about the focal plane "
                   f"along the line of sight{where} ({_size_text(pred)}), more than the {setup.depth_of_field_m * 1e3:.3g} mm "
                   f"depth of field of '{setup.name}'", img.pos, block=img.block, time_s=img.t0,
                   hint="shorten the time of flight" + (", or push across the line of sight" if off > 0 else ""),
                   data={"extent_m": 2 * (off + edge), "depth_of_field_m": setup.depth_of_field_m})


@rule(CLOUD_CLIPPED, stage="physics")
def cloud_clipped(shot):
    for img, setup, pred in _imaging_predictions(shot, "aperture_radius_m"):
        edge = pred["edge"]
        worst = _worst(pred, lambda p, c: c["from_release"])
        if worst is None or worst[2] + edge <= setup.aperture_radius_m:
            continue
        comp, case, dist = worst
        yield make(CLOUD_CLIPPED, f"after {pred['tof'] * 1e3:.4g} ms {_who(comp)} reaches {(dist + edge) * 1e3:.3g} mm "
                   f"from the release point ({_why_there(pred, comp, case)}; {_size_text(pred)}), beyond the "
                   f"{setup.aperture_radius_m * 1e3:.3g} mm aperture of '{setup.name}'",
                   img.pos, block=img.block, time_s=img.t0, hint="shorten the time of flight",
                   data={"reach_m": dist + edge, "aperture_m": setup.aperture_radius_m})
