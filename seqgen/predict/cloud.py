"""The cloud at an image: its size from the trap the release opened (optical beams, the sample's
trap_frequencies, or a magnetic hold: Ioffe-Pritchard frequencies, or the Boltzmann profile of a linear
quadrupole) and the expansion; the position of every populated internal-state component from the fall and
the pushes and separations; and the Stern-Gerlach separation of two components at the image.

Sources: free fall under standard gravity (SI Brochure); condensate expansion Phys. Rev. Lett. 77, 5315
(1996); ballistic thermal expansion (textbook); Thomas-Fermi radius (Bose-Einstein Condensation in Dilute
Gases, 2nd ed., Cambridge University Press (2008))."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import constants as sc

from ..values import value_at
from .cache import per_shot_cache
from .magnetic import hold_analysis
from .pushes import Components, components_at
from .species import G_N, MU_B, bias, gaussian_beams, sample_state, species
from .states import populated_states, state_fractions
from .traps import held

UP = np.array([0.0, 0.0, 1.0])  # gravity along -z, as for the trap minimisation
EQUAL_MOMENT = 0.01 * MU_B  # moments closer than this cannot be separated
SEPARATION_WIDTHS = 3.0  # components count as resolved this many combined rms widths apart


# which trap the release opened (CloudAtImage.trap)
TRAP_SAMPLE, TRAP_OPTICAL, TRAP_IOFFE_PRITCHARD, TRAP_QUADRUPOLE = "sample", "optical", "ioffe_pritchard", "quadrupole"


@dataclass(frozen=True, eq=False)
class CloudAtImage:
    """The cloud released before an image: tof (s), drop (m, g_n tof^2 / 2), size (m) and size_kind
    ("Thomas-Fermi radius" or "rms width"), omegas (rad/s, of the trap the release opened; None for a linear
    magnetic trap), trap (which trap: one of the TRAP_* codes), trap_block (the magnetic hold's block),
    sigma0 (in-trap rms width, m, thermal only), thermal_stand_in (a condensate in a linear trap, sized as a
    thermal cloud at the sample's temperature)."""

    tof: float
    drop: float
    omegas: np.ndarray | None
    trap: str
    size: float
    size_kind: str
    sigma0: float | None = None
    trap_block: str | None = None
    thermal_stand_in: bool = False

    def as_dict(self) -> dict:
        return {f: getattr(self, f) for f in ("tof", "drop", "omegas", "trap", "trap_block", "size", "size_kind",
                                              "sigma0", "thermal_stand_in")}

    @property
    def edge(self) -> float:
        """The cloud's reach from its centre: a Thomas-Fermi radius is its edge; for a Gaussian 2 rms widths."""
        return self.size if self.size_kind.startswith("Thomas") else 2 * self.size


@dataclass(frozen=True, eq=False)
class ImageComponent:
    """One internal-state component at an image: state, fraction, positions (n_cases, 3) m from the origin
    incl. gravity, plane (n_cases, 2) right / up image coordinates from the setup's centre, along (n_cases,)
    offset along the line of sight from the focal plane (None without a line of sight), from_release
    (n_cases,) in-plane distance from the release point, parts (see pushes.Component)."""

    state: tuple | None
    fraction: float
    positions: np.ndarray
    plane: np.ndarray
    along: np.ndarray | None
    from_release: np.ndarray
    parts: tuple


# why an image has no cloud size (SizeUnknown.reason)
IN_SITU = "in_situ"  # no release before the image
TRAP_EMPTY = "trap_empty"  # the trap beams on before the release hold no atoms
NO_TRAP = "no_trap"  # no trap beams, no magnetic hold, no sample trap_frequencies
QUADRUPOLE_NEEDS_TEMPERATURE = "quadrupole_needs_temperature"
QUADRUPOLE_FLAT = "quadrupole_flat"  # a direction without gradient
HOLD_NO_SIZE = "hold_no_size"  # the magnetic hold gives no trap (see `hold`)
NO_SCATTERING_LENGTH = "no_scattering_length"
NO_TEMPERATURE = "no_temperature"  # thermal sample without a temperature
NO_TEMPERATURE_NOR_ATOMS = "no_temperature_nor_atoms"  # condensate without an atom number or a temperature


@dataclass(frozen=True, eq=False)
class SizeUnknown:
    """Why an image has no cloud size: reason (one of the codes above), block of the magnetic hold, species
    name, and the hold's prediction (magnetic.HoldPrediction) for HOLD_NO_SIZE."""

    reason: str
    block: str | None = None
    species: str | None = None
    hold: object = None


@dataclass(frozen=True, eq=False)
class ImagePrediction:
    """Everything known of the cloud at an image (see `image_prediction`)."""

    setup: object
    release: object = None
    tof: float | None = None
    cloud: CloudAtImage | None = None
    why: SizeUnknown | None = None
    components: tuple = ()
    unknown: tuple = ()
    signs: np.ndarray | None = None
    empty: tuple = ()
    los: np.ndarray | None = None
    edge: float = 0.0
    top_down: bool = False
    state_known: bool = True


def _release_before(shot, t):
    rels = [a for a in shot.actions("release") if a.t0 <= t]
    return max(rels, key=lambda a: a.t0) if rels else None


def _magnetic_hold_before(shot, t):
    """The last magnetic hold that has begun before t and whose coils still carry current just before t, or None."""
    holds = [a for a in shot.actions("magnetic_hold") if a.t0 < t]
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
    """(omegas or None, rms widths in a linear trap or None, trap code, block of a magnetic hold, SizeUnknown or
    None) of the trap the release opens."""
    from ..physics.kinematics import linear_trap_rms_widths

    if shot.sample.trap_frequencies_hz:
        return 2 * np.pi * np.asarray(shot.sample.trap_frequencies_hz, dtype=float), None, TRAP_SAMPLE, None, None
    beams = gaussian_beams(shot, [rel.t0 - 1e-9])[0]
    if beams:
        omegas = held(sp, tuple(beams)).omegas
        if omegas is None or not np.all(np.isfinite(omegas)):
            return None, None, None, None, SizeUnknown(TRAP_EMPTY)
        return omegas, None, TRAP_OPTICAL, None, None
    hold = _magnetic_hold_before(shot, rel.t0)
    if hold is None:
        return None, None, None, None, SizeUnknown(NO_TRAP)
    rep = hold_analysis(shot, hold)
    if rep.omega_radial:
        w_r, w_z = rep.omega_radial, rep.omega_axial
        return np.array([w_r, w_r, w_z]), None, TRAP_IOFFE_PRITCHARD, hold.block, None
    if rep.kind == "quadrupole" and rep.trappable:
        temp = shot.sample.temperature_k
        grads = np.abs(np.linalg.eigvalsh(np.asarray(rep.matrix, dtype=float)))
        if not temp:
            return None, None, None, None, SizeUnknown(QUADRUPOLE_NEEDS_TEMPERATURE, hold.block)
        if not np.all(grads > 0):
            return None, None, None, None, SizeUnknown(QUADRUPOLE_FLAT, hold.block)
        return None, linear_trap_rms_widths(temp, rep.moment, grads), TRAP_QUADRUPOLE, hold.block, None
    return None, None, None, None, SizeUnknown(HOLD_NO_SIZE, hold.block, hold=rep)


def _cloud_size(shot, img, rel):
    """(CloudAtImage, None) or (None, SizeUnknown) for the cloud released by `rel` and imaged by `img`."""
    from ..physics.expansion import condensate_tof_radii, thermal_width, thomas_fermi

    sp = species(shot)
    tof = img.t0 - rel.t0
    drop = 0.5 * G_N * tof ** 2
    omegas, widths, trap, block, why = _trap_before_release(shot, sp, rel)
    if why:
        return None, why
    s = shot.sample
    cloud = {"tof": tof, "drop": drop, "omegas": omegas, "trap": trap, "trap_block": block}
    if s.condensed and s.atoms and omegas is not None:
        a = next(iter(sp.scattering_lengths_m.values()), None)
        a = sp.scattering_lengths_m.get(f"F={s.F},mF={s.mF}", a)
        if not a or a <= 0:
            return None, SizeUnknown(NO_SCATTERING_LENGTH, species=sp.name)
        _, radii = thomas_fermi(s.atoms, sp.mass_kg, a, omegas)
        r = condensate_tof_radii(radii, omegas, np.array([tof]))
        cloud.update(size=float(np.max(np.asarray(r).reshape(3, -1)[:, -1])), size_kind="Thomas-Fermi radius")
        return CloudAtImage(**cloud), None
    if not s.temperature_k:
        return None, SizeUnknown(NO_TEMPERATURE_NOR_ATOMS if s.condensed else NO_TEMPERATURE)
    if widths is not None:
        sigma0 = np.asarray(widths, dtype=float)  # 2 k_B T / (|mu| b'_i) per principal axis
    else:
        sigma0 = np.sqrt(sc.k * s.temperature_k / (sp.mass_kg * np.asarray(omegas, dtype=float) ** 2))
    cloud.update(size=float(np.max(thermal_width(sigma0, s.temperature_k, sp.mass_kg, tof))), size_kind="rms width",
                 sigma0=float(np.max(sigma0)))
    if s.condensed:
        cloud["thermal_stand_in"] = True
    return CloudAtImage(**cloud), None


def cloud_at_image(shot, img) -> CloudAtImage | None:
    """Predicted centre drop and size of the cloud at an image, or None (`image_prediction` says why)."""
    pred = image_prediction(shot, img)
    return pred.cloud if pred else None


@per_shot_cache(lambda shot, img: ("image-prediction", img.index, img.t0))
def image_prediction(shot, img) -> ImagePrediction | None:
    """Everything known of the cloud at an image, or None without a species / sample.

    Geometry (stated assumptions): positions are in the rig's frame, the atoms sit at the origin before the
    first push (the rig's convention for beam positions), z is up. The camera looks along its setup's
    probe beam (`direction`), so the image plane is perpendicular to that beam and contains the vertical
    when the probe is horizontal; the field of view is a square of side `field_of_view` centred on the
    setup's `center` (metres, default the origin) with sides along the image's horizontal and vertical (a
    circle of that diameter when the camera looks along the vertical), the focal plane goes through the
    centre, and the aperture is a circle of `aperture_radius` around the release point in the image plane.
    Without a probe beam the line of sight is unknown: the image plane is taken as vertical and every
    horizontal displacement counts at its full length in it (the conservative side)."""
    from ..physics.kinematics import image_plane_basis

    sp = species(shot)
    if sp is None or shot.sample is None:
        return None
    setup = shot.rig.imaging.get(img.args.get("setup"))
    rel = _release_before(shot, img.t0)
    if rel is None:
        return ImagePrediction(setup, why=SizeUnknown(IN_SITU))
    tof = img.t0 - rel.t0
    cloud, why = _cloud_size(shot, img, rel)
    gravity = np.array([0.0, 0.0, -0.5 * G_N * tof ** 2])
    beam = shot.rig.beams.get(setup.probe_beam) if setup is not None and setup.probe_beam else None
    basis = los = None
    if beam is not None:
        try:
            basis = image_plane_basis(beam.direction, UP)
            los = basis[2]
        except ValueError:
            basis = None
    centre = np.asarray(setup.center_m if setup is not None else (0.0, 0.0, 0.0), dtype=float)
    motion = components_at(shot, img) or Components((), (), (), None)
    comps = []
    for comp in motion.components:
        pos = comp.displacements + gravity  # (n_cases, 3)
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
        comps.append(ImageComponent(comp.state, comp.fraction, pos, plane, along,
                                    np.hypot(rel_plane[:, 0], rel_plane[:, 1]), comp.parts))
    return ImagePrediction(setup, rel, tof, cloud, why, tuple(comps), motion.unknown, motion.signs, motion.empty, los,
                           cloud.edge if cloud is not None else 0.0,
                           basis is not None and abs(float(np.dot(basis[2], UP))) > 1 - 1e-6,
                           shot.sample.F is not None and shot.sample.mF is not None)


def view_reach(pred: ImagePrediction, comp: ImageComponent):
    """Per case: how far the component's centre lies from the centre of view in the field-of-view metric."""
    h, v = np.abs(comp.plane[:, 0]), np.abs(comp.plane[:, 1])
    return np.hypot(h, v) if pred.top_down else np.maximum(h, v)


def focus_offset(pred: ImagePrediction, comp: ImageComponent):
    """Per case: the component centre's distance from the focal plane (0 without a line of sight)."""
    if comp.along is None:
        return np.zeros(len(comp.plane))
    return np.abs(comp.along)


# --------------------------------------------------------------------------- Stern-Gerlach separation

@dataclass(frozen=True)
class Separation:
    """Separation of the populated components at the next image: states and their fractions; pair (None when
    only one state holds atoms) and its moments (-dE/dB, J/T); equal: moments too close to separate;
    separation (m) at the image; sigma, combined (m): each component's and the combined rms width; resolved:
    at least SEPARATION_WIDTHS combined widths apart (None without a cloud size)."""

    image: object
    states: tuple
    fractions: tuple
    pair: tuple | None = None
    equal: bool = False
    moments: tuple | None = None
    separation: float | None = None
    sigma: float | None = None
    combined: float | None = None
    resolved: bool | None = None


@per_shot_cache(lambda shot, act: ("state-separate", act.index, act.t0))
def separation_analysis(shot, act) -> Separation | None:
    """Separation of the populated components at the next image, against their widths, or None.

    The components are the states that hold atoms when the gradient pulse starts; of several, the two
    closest in moment (the hardest to separate) are compared (Stern-Gerlach: relative acceleration
    (mu_1 - mu_2) b'/m, moments from the Breit-Rabi formula, Phys. Rev. 38, 2082 (1931))."""
    from itertools import combinations

    from ..physics.kinematics import components_resolved, stern_gerlach_separation
    from ..physics.zeeman import magnetic_moment

    sp = species(shot)
    if sp is None or sample_state(shot) is None:
        return None
    images = [a for a in shot.actions("image") if a.t0 >= act.t1]
    if not images:
        return None
    img = min(images, key=lambda a: a.t0)
    states = populated_states(shot, act.t0)
    fractions = state_fractions(shot, act.t0) or {}
    b = bias(shot)
    try:
        mus = {st: float(magnetic_moment(st[0], st[1], b, atom=sp)) for st in states}
    except ValueError:
        return None
    rep = dict(image=img, states=tuple(states), fractions=tuple(fractions[st] for st in states), pair=None, equal=False)
    if len(states) < 2:
        return Separation(**rep)
    pair = min(combinations(states, 2), key=lambda ab: abs(mus[ab[0]] - mus[ab[1]]))
    mu = (mus[pair[0]], mus[pair[1]])
    rep.update(pair=pair, moments=mu, equal=abs(mu[0] - mu[1]) < EQUAL_MOMENT)
    tof_after = img.t0 - act.t1
    rep["separation"] = float(stern_gerlach_separation(mu[0], mu[1], act.args["gradient"], act.args["duration"],
                                                       tof_after, sp.mass_kg))
    cloud = cloud_at_image(shot, img)
    if cloud:
        # rms of a Thomas-Fermi profile along an axis is R / sqrt(7)
        # (Bose-Einstein Condensation in Dilute Gases, Cambridge University Press, 2nd ed. 2008)
        sigma = cloud.size / math.sqrt(7) if cloud.size_kind.startswith("Thomas") else cloud.size
        rep.update(sigma=sigma, combined=math.sqrt(2) * sigma,
                   resolved=bool(components_resolved(rep["separation"], sigma, sigma, SEPARATION_WIDTHS)))
    return Separation(**rep)


def separations(shot):
    """(separate action, Separation) of every `separate` with a prediction."""
    for act in shot.actions("separate"):
        rep = separation_analysis(shot, act)
        if rep:
            yield act, rep
