"""The cloud at an image, along three axes: its size per principal axis from the trap the release opened
(optical beams, the sample's trap_frequencies, or a magnetic hold: Ioffe-Pritchard frequencies, or the
Boltzmann profile of a linear quadrupole), a condensate followed through the optical trap's changes before
the release and its expansion after it; the centre and velocity of every populated internal-state component
from the fall and the pushes and separations; and the Stern-Gerlach separation of two components at the
image, against their widths along the line that joins them.

Sources: free fall under standard gravity (SI Brochure); condensate in a changing trap and its expansion
Phys. Rev. Lett. 77, 5315 (1996) and Phys. Rev. A 54, R1753 (1996); ballistic thermal expansion (textbook);
Thomas-Fermi radius (Bose-Einstein Condensation in Dilute Gases, 2nd ed., Cambridge University Press (2008))."""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np
from scipy import constants as sc

from ..values import value_at
from .cache import per_shot_cache
from .magnetic import hold_analysis
from .pushes import Components, played_gradient
from .species import (G_N, MU_B, bias, gaussian_beams, release_before, sample_state, scattering_length, species,
                      trap_before, unit)
from .split import split_components
from .states import populated_states, state_fractions
from .thermal import thermal_history
from .traps import held, trap_history

UP = np.array([0.0, 0.0, 1.0])  # gravity along -z, as for the trap minimisation
EQUAL_MOMENT = 0.01 * MU_B  # moments closer than this cannot be separated
SEPARATION_WIDTHS = 3.0  # components count as resolved this many combined rms widths apart
# a trap change with max |d omega/dt| / omega^2 below this leaves a condensate at rest at the new equilibrium
# (its breathing amplitude is of order this, its excess energy of its square: tests/physics/test_adiabatic.py)
ADIABATIC = 2e-2
# a breathing oscillation followed for longer than this many radians of the fastest trap frequency (about
# 160 periods) is taken as damped: the condensate at rest in the trap there (common practice, no source)
MAX_TRAP_RADIANS = 1000.0
HISTORY_SAMPLES = 24  # trap evaluations per ramp before a release (each a minimisation; frequencies vary smoothly)


# which trap the release opened (CloudAtImage.trap)
TRAP_SAMPLE, TRAP_OPTICAL, TRAP_IOFFE_PRITCHARD, TRAP_QUADRUPOLE = "sample", "optical", "ioffe_pritchard", "quadrupole"


@dataclass(frozen=True, eq=False)
class CloudAtImage:
    """The cloud released before an image: tof (s), drop (m, g_n tof^2 / 2), sizes (m, per principal axis:
    Thomas-Fermi radii or rms widths, size_kind "Thomas-Fermi radius" or "rms width") along the columns of
    axes (unit vectors in the rig frame), size (the largest), omegas (rad/s, of the trap the release opened,
    along the same axes; None for a linear magnetic trap), trap (which trap: one of the TRAP_* codes),
    trap_block (the magnetic hold's block), sigma0 (largest in-trap rms width, m, thermal only),
    thermal_stand_in (a condensate in a linear trap, sized as a thermal cloud at the sample's temperature),
    at_release and at_rest (a condensate that was not at rest when released: its Thomas-Fermi radii at the
    release and those at rest in that trap, m, along the axes; None when it was at rest), damped (a breathing
    oscillation was taken as damped, see MAX_TRAP_RADIANS)."""

    tof: float
    drop: float
    omegas: np.ndarray | None
    trap: str
    size: float
    size_kind: str
    sigma0: float | None = None
    trap_block: str | None = None
    thermal_stand_in: bool = False
    sizes: np.ndarray | None = None
    axes: np.ndarray | None = None
    at_release: np.ndarray | None = None
    at_rest: np.ndarray | None = None
    damped: bool = False

    def as_dict(self) -> dict:
        return {f: getattr(self, f) for f in ("tof", "drop", "omegas", "trap", "trap_block", "size", "size_kind",
                                              "sigma0", "thermal_stand_in", "sizes", "axes")}

    @property
    def edges(self) -> np.ndarray:
        """Reach from the centre per principal axis: a Thomas-Fermi radius is the edge; for a Gaussian 2 rms widths."""
        sizes = np.full(3, self.size) if self.sizes is None else np.asarray(self.sizes, dtype=float)
        return sizes if self.size_kind.startswith("Thomas") else 2 * sizes

    @property
    def edge(self) -> float:
        """The cloud's largest reach from its centre."""
        return self.size if self.size_kind.startswith("Thomas") else 2 * self.size

    def reach_along(self, direction) -> float:
        """Half-extent of the cloud's edge ellipsoid along `direction` (m)."""
        from ..physics.expansion import ellipsoid_half_extent

        return float(ellipsoid_half_extent(self.edges, self.axes, direction))

    def rms_along(self, direction) -> float:
        """rms width of the cloud's profile projected on `direction` (m): an ellipsoid's half-extent along u is
        |A u|, and a Thomas-Fermi profile's rms along an axis is R / sqrt(7) (Bose-Einstein Condensation in
        Dilute Gases, Cambridge University Press, 2nd ed. 2008)."""
        from ..physics.expansion import ellipsoid_half_extent

        sizes = np.full(3, self.size) if self.sizes is None else self.sizes
        r = float(ellipsoid_half_extent(sizes, self.axes, direction))
        return r / math.sqrt(7) if self.size_kind.startswith("Thomas") else r


@dataclass(frozen=True, eq=False)
class ImageComponent:
    """One internal-state component at an image: state, fraction, positions (n_cases, 3) m from the origin
    incl. gravity, plane (n_cases, 2) right / up image coordinates from the setup's centre, along (n_cases,)
    offset along the line of sight from the focal plane (None without a line of sight), from_release
    (n_cases,) in-plane distance from the release point, parts (see pushes.Component), velocities
    (n_cases, 3) m/s incl. gravity, cloud (its CloudAtImage: size per axis; every component of one release
    expands alike, None without a size), split ((side, barrier block), ...: the sheets that split it, see
    seqgen.predict.split), plane_velocity (n_cases, 2) m/s along the image's horizontal and vertical (None
    without a line of sight)."""

    state: tuple | None
    fraction: float
    positions: np.ndarray
    plane: np.ndarray
    along: np.ndarray | None
    from_release: np.ndarray
    parts: tuple
    velocities: np.ndarray | None = None
    cloud: CloudAtImage | None = None
    split: tuple = ()
    plane_velocity: np.ndarray | None = None


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
    """Everything known of the cloud at an image (see `image_prediction`). edge: the cloud's largest reach;
    extents: its half-extents (m) along the image's horizontal and vertical, along the line of sight, and the
    largest one in the image plane (0 without a size)."""

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
    extents: tuple = (0.0, 0.0, 0.0, 0.0)


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


def _perpendicular_axes(axis) -> np.ndarray:
    """Columns: two unit vectors perpendicular to `axis`, then `axis` itself (normalised)."""
    n = np.asarray(axis, dtype=float) / np.linalg.norm(axis)
    seed = np.eye(3)[int(np.argmin(np.abs(n)))]
    p1 = np.cross(n, seed)
    p1 /= np.linalg.norm(p1)
    return np.column_stack([p1, np.cross(n, p1), n])


def _trap_before_release(shot, sp, rel):
    """(omegas or None, rms widths in a linear trap or None, principal axes (columns), trap code, block of a
    magnetic hold, SizeUnknown or None) of the trap the release opens; omegas and widths along the axes."""
    from ..physics.kinematics import linear_trap_rms_widths
    from ..physics.magnetic_trap import linear_trap_cloud

    if shot.sample.trap_frequencies_hz:  # stated along the rig's x, y, z
        return 2 * np.pi * np.asarray(shot.sample.trap_frequencies_hz, dtype=float), None, np.eye(3), TRAP_SAMPLE, None, None
    beams = gaussian_beams(shot, [trap_before(shot, rel.t0)])[0]
    if beams:
        trap = held(sp, tuple(beams))
        omegas = trap.omegas
        if omegas is None or not np.all(np.isfinite(omegas)):
            return None, None, None, None, None, SizeUnknown(TRAP_EMPTY)
        axes = trap.axes if trap.axes is not None else np.eye(3)  # the principal axes of the same minimum
        return omegas, None, axes, TRAP_OPTICAL, None, None
    hold = _magnetic_hold_before(shot, rel.t0)
    if hold is None:
        return None, None, None, None, None, SizeUnknown(NO_TRAP)
    rep = hold_analysis(shot, hold)
    if rep.omega_radial:
        w_r, w_z = rep.omega_radial, rep.omega_axial
        axes = _perpendicular_axes(rep.axis) if rep.axis is not None else np.eye(3)
        return np.array([w_r, w_r, w_z]), None, axes, TRAP_IOFFE_PRITCHARD, hold.block, None
    if rep.kind == "quadrupole" and rep.trappable:
        temp = shot.sample.temperature_k
        eig, vec = np.linalg.eigh(np.asarray(rep.matrix, dtype=float))
        grads = np.abs(eig)
        if not temp:
            return None, None, None, None, None, SizeUnknown(QUADRUPOLE_NEEDS_TEMPERATURE, hold.block)
        if not np.all(grads > 0):
            return None, None, None, None, None, SizeUnknown(QUADRUPOLE_FLAT, hold.block)
        try:  # gravity pulls the cloud below the zero and stretches it as the support nears 1
            _, cov = linear_trap_cloud(rep.matrix, rep.moment, sp.mass_kg, temp)
            widths = np.sqrt(np.einsum("ji,jk,ki->i", vec, cov, vec))
        except ValueError:
            widths = linear_trap_rms_widths(temp, rep.moment, grads)
        return None, widths, vec, TRAP_QUADRUPOLE, hold.block, None
    return None, None, None, None, None, SizeUnknown(HOLD_NO_SIZE, hold.block, hold=rep)


def _at_rest(b, db, eq, omega) -> bool:
    """b at the equilibrium eq and b' negligible: a breathing of relative amplitude 1e-6 changes no size."""
    return bool(np.allclose(b, eq, rtol=1e-6, atol=0) and np.all(np.abs(db) <= 1e-6 * omega * b))


@functools.lru_cache(maxsize=1024)
def scaling_by_content(w0, times, omegas, b, db):
    """(b, b') at the last time of `trap_scaling`, keyed on content: the shots of a scan that share a trap
    history (a time-of-flight scan) share its integration. Read-only arrays."""
    from ..physics.expansion import trap_scaling

    bs, dbs = trap_scaling(np.array(w0), np.array(times), np.array(omegas).reshape(-1, 3), np.array(b), np.array(db),
                           rtol=1e-8)
    out = bs[:, -1].copy(), dbs[:, -1].copy()
    for x in out:
        x.setflags(write=False)
    return out


def _optical_history(shot, sp, t_rel):
    """A condensate through the optical trap's changes before a release at t_rel: (omega0 (3,) of the trap it
    was at rest in, b (3,), b' (3,) 1/s at the release, at_rest (at rest in the release's trap), damped), or
    None without a trap just before t_rel. The condensate is taken at rest in the trap as it was right after
    it was last switched on; the trap changes only where a trap beam's power channel is written: a set is a
    sudden change, a ramp follows `trap_stage`. Principal axes are followed by their rank (ascending
    frequency). Scaling equations: Phys. Rev. Lett. 77, 5315 (1996); Phys. Rev. A 54, R1753 (1996)."""
    from ..physics.adiabatic import adiabaticity_parameter
    from ..physics.expansion import scaling_equilibrium

    state = None  # (omega0, b, db, damped)
    for times, omegas, _ in trap_history(shot, sp, t_rel, HISTORY_SAMPLES):
        a, z = times[0], times[-1]
        if not np.all(np.isfinite(omegas)) or np.any(omegas <= 0):
            state = None  # the atoms are not held here: a later trap makes the condensate afresh
            continue
        if state is None:
            state = (omegas[0], np.ones(3), np.zeros(3), False)
        w0, b, db, damped = state
        top = float(np.max(omegas))
        slow = len(times) < 3 or float(np.max(adiabaticity_parameter(times, omegas.T, axis=-1))) < ADIABATIC
        if _at_rest(b, db, scaling_equilibrium(w0, omegas[0]), top) and slow:
            b, db = scaling_equilibrium(w0, omegas[-1]), np.zeros(3)
        elif top * (z - a) > MAX_TRAP_RADIANS:
            b, db, damped = scaling_equilibrium(w0, omegas[-1]), np.zeros(3), True
        else:
            b, db = scaling_by_content(tuple(w0.tolist()), tuple(times.tolist()), tuple(omegas.ravel().tolist()),
                                       tuple(np.ravel(b).tolist()), tuple(np.ravel(db).tolist()))
        state = (w0, b, db, damped)
    if state is None:
        return None
    w0, b, db, damped = state
    return w0, b, db, _at_rest(b, db, scaling_equilibrium(w0, omegas[-1]), float(np.max(omegas))), damped


def _condensate_sizes(shot, sp, rel, omegas, tof, a) -> dict:
    """Thomas-Fermi radii at the image along the release trap's axes (sizes), and when the condensate was not at
    rest at the release its radii there (at_release) and at rest in that trap (at_rest); damped."""
    from ..physics.expansion import condensate_tof_radii, free_scaling, thomas_fermi

    s = shot.sample
    _, radii = thomas_fermi(s.atoms, sp.mass_kg, a, omegas)
    try:
        hist = _optical_history(shot, sp, rel.t0) if not s.trap_frequencies_hz else None
        if hist is not None and not hist[3]:
            w0, b, db, _, damped = hist
            _, radii0 = thomas_fermi(s.atoms, sp.mass_kg, a, w0)
            r = radii0 * np.asarray(free_scaling(w0, b, db, np.array([tof]))).reshape(3, -1)[:, -1]
            if np.all(np.isfinite(r)):
                return dict(sizes=r, at_release=radii0 * b, at_rest=radii, damped=damped)
    except (ValueError, RuntimeError, ArithmeticError, np.linalg.LinAlgError):
        hist = None  # the history could not be followed: the condensate is taken at rest in the release's trap
    r = condensate_tof_radii(radii, omegas, np.array([tof]))  # at rest in the trap the release opens
    return dict(sizes=np.asarray(r, dtype=float).reshape(3, -1)[:, -1], damped=bool(hist and hist[4]))


def _cloud_size(shot, img, rel):
    """(CloudAtImage, None) or (None, SizeUnknown) for the cloud released by `rel` and imaged by `img`."""
    from ..physics.expansion import thermal_width

    sp = species(shot)
    tof = img.t0 - rel.t0
    drop = 0.5 * G_N * tof ** 2
    omegas, widths, axes, trap, block, why = _trap_before_release(shot, sp, rel)
    if why:
        return None, why
    s = shot.sample
    cloud = {"tof": tof, "drop": drop, "omegas": omegas, "trap": trap, "trap_block": block, "axes": axes}
    if s.condensed and s.atoms and omegas is not None:
        a = scattering_length(sp, sample_state(shot))
        if not a or a <= 0:
            return None, SizeUnknown(NO_SCATTERING_LENGTH, species=f"{sp.name} in |F={s.F}, mF={s.mF}>")
        sized = _condensate_sizes(shot, sp, rel, omegas, tof, a)
        cloud.update(size=float(np.max(sized["sizes"])), size_kind="Thomas-Fermi radius", **sized)
        return CloudAtImage(**cloud), None
    if not s.temperature_k:
        return None, SizeUnknown(NO_TEMPERATURE_NOR_ATOMS if s.condensed else NO_TEMPERATURE)
    hist = None
    if widths is not None:
        sigma0 = np.asarray(widths, dtype=float)  # 2 k_B T / (|mu| b'_i) per principal axis
    else:
        sigma0 = np.sqrt(sc.k * s.temperature_k / (sp.mass_kg * np.asarray(omegas, dtype=float) ** 2))
        if trap == TRAP_OPTICAL:  # not in equilibrium in the release's trap after a sudden change before it
            hist = thermal_history(shot, sp, rel.t0, s.temperature_k, ADIABATIC, HISTORY_SAMPLES, MAX_TRAP_RADIANS)
    if hist is not None and not hist[3]:
        X, V, C, _ = hist
        sigma0 = np.sqrt(X)
        sizes = np.sqrt(np.maximum(X + 2 * C * tof + V * tof * tof, 0.0))
    else:
        sizes = np.asarray(thermal_width(sigma0, s.temperature_k, sp.mass_kg, tof), dtype=float)
    cloud.update(size=float(np.max(sizes)), sizes=sizes, size_kind="rms width", sigma0=float(np.max(sigma0)))
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
    rel = release_before(shot, img.t0)
    if rel is None:
        return ImagePrediction(setup, why=SizeUnknown(IN_SITU))
    tof = img.t0 - rel.t0
    cloud, why = _cloud_size(shot, img, rel)
    gravity = np.array([0.0, 0.0, -0.5 * G_N * tof ** 2])
    fall_speed = np.array([0.0, 0.0, -G_N * tof])
    beam = shot.rig.beams.get(setup.probe_beam) if setup is not None and setup.probe_beam else None
    basis = los = None
    if beam is not None:
        try:
            basis = image_plane_basis(beam.direction, UP)
            los = basis[2]
        except ValueError:
            basis = None
    centre = np.asarray(setup.center_m if setup is not None else (0.0, 0.0, 0.0), dtype=float)
    motion = split_components(shot, img) or Components((), (), (), None)
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
        vel = (np.zeros_like(pos) if comp.velocities is None else comp.velocities) + fall_speed
        plane_vel = np.stack([vel @ basis[0], vel @ basis[1]], axis=-1) if basis is not None else None
        comps.append(ImageComponent(comp.state, comp.fraction, pos, plane, along,
                                    np.hypot(rel_plane[:, 0], rel_plane[:, 1]), comp.parts, vel, cloud, comp.split,
                                    plane_vel))
    return ImagePrediction(setup, rel, tof, cloud, why, tuple(comps), motion.unknown, motion.signs, motion.empty, los,
                           cloud.edge if cloud is not None else 0.0,
                           basis is not None and abs(float(np.dot(basis[2], UP))) > 1 - 1e-6,
                           shot.sample.F is not None and shot.sample.mF is not None,
                           _extents(cloud, basis))


def _extents(cloud, basis) -> tuple:
    """Half-extents of the cloud's edge ellipsoid: (image horizontal, image vertical, line of sight, largest in
    the image plane); without a line of sight the image plane is vertical and holds every horizontal direction
    (the conservative side), the line of sight taking the largest reach."""
    from ..physics.expansion import ellipsoid_plane_semi_major

    if cloud is None:
        return (0.0, 0.0, 0.0, 0.0)
    if basis is not None:
        e_h, e_v, n = basis
        return (cloud.reach_along(e_h), cloud.reach_along(e_v), cloud.reach_along(n),
                ellipsoid_plane_semi_major(cloud.edges, cloud.axes, np.stack([e_h, e_v])))
    flat = ellipsoid_plane_semi_major(cloud.edges, cloud.axes, np.eye(3)[:2])
    return (flat, cloud.reach_along(UP), cloud.edge, cloud.edge)


def view_reach(pred: ImagePrediction, comp: ImageComponent):
    """Per case: how far the component's centre lies from the centre of view in the field-of-view metric."""
    h, v = np.abs(comp.plane[:, 0]), np.abs(comp.plane[:, 1])
    return np.hypot(h, v) if pred.top_down else np.maximum(h, v)


def focus_offset(pred: ImagePrediction, comp: ImageComponent):
    """Per case: the component centre's distance from the focal plane (0 without a line of sight)."""
    if comp.along is None:
        return np.zeros(len(comp.plane))
    return np.abs(comp.along)


def view_edge_reach(pred: ImagePrediction, comp: ImageComponent):
    """Per case: how far the cloud's edge reaches from the centre of view in the field-of-view metric: per
    image axis |centre| + half-extent along it (a square view), or |centre| + the largest half-extent in the
    image plane (a circular view, looking along the vertical; an upper bound)."""
    ext_h, ext_v, _, ext_plane = pred.extents
    h, v = np.abs(comp.plane[:, 0]), np.abs(comp.plane[:, 1])
    return np.hypot(h, v) + ext_plane if pred.top_down else np.maximum(h + ext_h, v + ext_v)


def focus_reach(pred: ImagePrediction, comp: ImageComponent):
    """Per case: how far the cloud reaches from the focal plane: centre offset + half-extent along the line of
    sight."""
    return focus_offset(pred, comp) + pred.extents[2]


def aperture_reach(pred: ImagePrediction, comp: ImageComponent):
    """Per case: how far the cloud reaches from the release point in the image plane: centre distance + the
    largest half-extent in the plane (an upper bound)."""
    return comp.from_release + pred.extents[3]


# --------------------------------------------------------------------------- Stern-Gerlach separation

@dataclass(frozen=True)
class Separation:
    """Separation of the populated components at the next image: states and their fractions; pair (None when
    only one state holds atoms) and its moments (-dE/dB, J/T); equal: moments too close to separate;
    separation (m) at the image along direction (unit vector of the line joining the two centres: the
    gradient's, along the coil's `field_grows_along` or else its `axis`); sigma, combined (m): each
    component's rms width along that line and the combined one; resolved: at least SEPARATION_WIDTHS combined
    widths apart (None without a cloud size)."""

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
    direction: tuple | None = None


@per_shot_cache(lambda shot, act: ("state-separate", act.index, act.t0))
def separation_analysis(shot, act) -> Separation | None:
    """Separation of the populated components at the next image, against their widths along the line that
    joins them, or None.

    The components are the states that hold atoms when the gradient pulse starts; of several, the two
    closest in moment (the hardest to separate) are compared (Stern-Gerlach: relative acceleration
    (mu_1 - mu_2) b'/m, moments from the Breit-Rabi formula, Phys. Rev. 38, 2082 (1931)). The relative
    acceleration is along the gradient, so the centres part along it; both components are the same cloud
    (one release), whose rms width along that line is that of its profile projected on it."""
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
    rep["separation"] = float(stern_gerlach_separation(mu[0], mu[1], played_gradient(shot, act), act.args["duration"],
                                                       tof_after, sp.mass_kg))
    coil = shot.rig.coils.get(act.args.get("coil"))
    way = None
    if coil is not None:
        way = unit(coil.field_grows_along) if coil.field_grows_along is not None else unit(coil.axis)
    if way is not None:
        rep["direction"] = tuple(float(x) for x in way)
    cloud = cloud_at_image(shot, img)
    if cloud:
        # without a direction (no usable coil axis) the largest width: the safe side
        sigma = cloud.rms_along(way) if way is not None else (
            cloud.size / math.sqrt(7) if cloud.size_kind.startswith("Thomas") else cloud.size)
        rep.update(sigma=sigma, combined=math.sqrt(2) * sigma,
                   resolved=bool(components_resolved(rep["separation"], sigma, sigma, SEPARATION_WIDTHS)))
    return Separation(**rep)


def separations(shot):
    """(separate action, Separation) of every `separate` with a prediction."""
    for act in shot.actions("separate"):
        rep = separation_analysis(shot, act)
        if rep:
            yield act, rep
