"""Predicted absorption images: for every `image`, the optical depth the camera records.

From the forward model's clouds at the image (`cloud.image_prediction`: each populated internal-state component,
or its transmitted and reflected parts where a barrier sheet split it, with its centre and its Thomas-Fermi radii
or rms widths per principal axis) and the probe (`imaging`):
1. the column density of every component the probe images along the line of sight (analytic projections of the
   Gaussian and of the Thomas-Fermi profile, seqgen.physics.absorption), on a grid finer than the camera's
   pixels over the region that holds atoms;
2. Beer-Lambert absorption with saturation and detuning, the probe's intensity following its Gaussian beam
   across the image (Opt. Lett. 32, 3143 (2007); cross-section 3 lambda^2 / (2 pi) of the cycling transition,
   alkali D-line data compilations);
3. the absorbed light blurred by the optics (a Gaussian standing in for the Airy pattern, rms 0.21 lambda/NA)
   and by the recoil random walk during the probe (seqgen.predict.imaging), in quadrature;
4. probe and transmitted light summed into the camera's pixels (the pixel pitch over the magnification, at the
   atoms), OD = ln(I_probe / I_transmitted) per pixel; with a seed, photon shot noise on the counts of both
   the image with atoms and the probe alone.
The frame is the setup's field of view (a square about its centre), else the region that holds atoms.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .cache import per_shot_cache
from .cloud import UP, image_prediction
from .imaging import probe_analysis, probe_line
from .species import species

MAX_FRAME_PIXELS = 2048  # per side; a larger frame is cut to this many pixels about the atoms
MAX_FINE_SAMPLES = 6_000_000  # the fine grid's size bound (sets the oversampling of large regions)
MAX_OVERSAMPLING = 4
GAUSSIAN_REACH = 5.0  # a thermal component is drawn out to this many rms widths (its column density there: 4e-6)
DEFAULT_PIXELS = 256  # without a pixel size: the region with atoms spans this many pixels

# why an image has no OD map (PredictedImage.why); the words are in seqgen/emit/plot/images.py
NO_SPECIES, NO_CLOUD, NO_PROBE_BEAM, NO_ATOMS, NO_COMPONENTS = (
    "no_species", "no_cloud", "no_probe_beam", "no_atom_number", "no_components")
# assumptions and limits a prediction states (PredictedImage.flags)
WEAK_PROBE = "weak_probe"  # no probe intensity known: the weak-probe limit, no shot noise
NO_RESOLUTION = "no_resolution"  # no numerical aperture: only the recoil blur and the pixels
NO_PIXEL = "no_pixel"  # no pixel size: a pixel of the region / DEFAULT_PIXELS
SIGN_CASES = "sign_cases"  # a push of unknown direction: the first case is drawn
OUTSIDE_FRAME = "outside_frame"  # some imaged atoms fall outside the frame
FRAME_CUT = "frame_cut"  # the field of view is larger than MAX_FRAME_PIXELS pixels
NOT_IMAGED = "not_imaged"  # components in a level the state-selective probe does not address
NONE_IMAGED = "none_imaged"  # ... and none in the level it addresses: a blank picture
D1_LINE = "d1_line"  # the probe's nearest line is D1: no cycling transition, 3 lambda^2/2pi overestimates
NO_NOISE_PHOTONS = "no_noise_photons"  # noise asked for, but the probe's photon count is unknown


@dataclass(frozen=True, eq=False)
class ImagedComponent:
    """One internal-state component at an image: state (F, mF) or None, atoms, imaged (the probe addresses its
    level), centre (m, image horizontal and vertical from the setup's centre), shadow (2x2, m^2: the projected
    covariance of a thermal cloud, or the projected Thomas-Fermi ellipse), thomas_fermi, atoms_in_frame (the
    model's atoms on the frame's pixels, imaged components only), split ((side, barrier block), ...: the part of
    a component a barrier sheet split off, seqgen.predict.split; empty when none did)."""

    state: tuple | None
    atoms: float
    imaged: bool
    centre: tuple
    shadow: np.ndarray
    thomas_fermi: bool
    atoms_in_frame: float = 0.0
    split: tuple = ()


@dataclass(frozen=True, eq=False)
class PredictedImage:
    """The optical depth one `image` records. od: (rows, columns) float array, rows along the image's vertical
    (up: y ascending), columns along its horizontal; x, y: pixel centres (m at the atoms, from the setup's
    centre; horizontal = camera right, vertical = the part of up across the line of sight); pixel (m at the
    atoms); components; peak_od (of the map, noise included); saturation (I/I_sat at the beam centre),
    saturation_at_atoms (at the densest imaged component's centre; with none imaged,
    at the densest component's); sigma0 (m^2, 3 lambda^2/2pi of the line);
    detuning_hz, linewidth_hz, alpha (saturation_factor); na, rayleigh (m, 0.61 lambda/NA), psf_sigma (m, the
    Gaussian for the optics), recoil_blur (m), blur (m, both in quadrature); oversampling; photons (counted per
    pixel from the probe alone at the beam centre, None when unknown); atoms_from_od (sum over pixels of the saturation-corrected
    OD x pixel area / sigma0, noise-free); noise_seed (None: no noise); why (no map: one of the NO_* codes);
    flags (the assumptions and limits stated, see the codes above)."""

    image: object
    setup: str | None
    od: np.ndarray | None = None
    x: np.ndarray | None = None
    y: np.ndarray | None = None
    pixel: float | None = None
    components: tuple = ()
    peak_od: float = 0.0
    saturation: float = 0.0
    saturation_at_atoms: float = 0.0
    sigma0: float | None = None
    wavelength: float | None = None
    detuning_hz: float = 0.0
    linewidth_hz: float | None = None
    alpha: float = 1.0
    na: float | None = None
    rayleigh: float | None = None
    psf_sigma: float = 0.0
    recoil_blur: float = 0.0
    blur: float = 0.0
    oversampling: int = 1
    photons: float | None = None
    atoms_from_od: float = 0.0
    noise_seed: int | None = None
    why: str | None = None
    flags: tuple = ()
    time_s: float = 0.0
    block: str | None = None


def images_of(shot):
    return shot.actions("image")


@per_shot_cache(lambda shot, img, seed=None: ("predicted-image", img.index, img.t0, seed))
def predicted_image(shot, img, seed: int | None = None) -> PredictedImage:
    """The optical-depth map of one image (see the module's doc); `seed`: photon shot noise drawn from numpy's
    default generator seeded with it (the same seed, the same map), None: no noise."""
    from ..physics import absorption as ab
    from ..physics.kinematics import image_plane_basis

    setup = shot.rig.imaging.get(img.args.get("setup"))
    base = dict(image=img, setup=setup.name if setup else None, time_s=img.t0, block=img.block, noise_seed=seed)
    sp = species(shot)
    pred = image_prediction(shot, img)
    if sp is None or pred is None or setup is None:
        return PredictedImage(**base, why=NO_SPECIES)
    beam = shot.rig.beams.get(setup.probe_beam) if setup.probe_beam else None
    line = probe_line(shot, img)
    if beam is None or line is None:
        return PredictedImage(**base, why=NO_PROBE_BEAM)
    if pred.cloud is None:
        return PredictedImage(**base, why=NO_CLOUD)
    if not shot.sample.atoms:
        return PredictedImage(**base, why=NO_ATOMS)
    if not pred.components:
        return PredictedImage(**base, why=NO_COMPONENTS)
    flags = []
    try:
        e_h, e_v, _ = image_plane_basis(beam.direction, UP)
    except ValueError:
        return PredictedImage(**base, why=NO_PROBE_BEAM)
    basis = np.stack([e_h, e_v])

    # the probe: line, detuning, saturation, photons
    probe = probe_analysis(shot, img)
    lam = line.line_wavelength
    sigma0 = float(ab.resonant_cross_section(lam))
    if line.line == "D1":
        flags.append(D1_LINE)
    detuning = probe.detuning_hz if probe is not None else (
        img.args.get("detuning", 0.0) + (0.0 if line.on_line else line.detuning_hz))
    det_lw = detuning / line.linewidth_hz
    alpha = setup.saturation_factor
    s0 = probe.saturation if probe is not None else setup.saturation_parameter
    if s0 is None:
        s0 = 0.0
        flags.append(WEAK_PROBE)
    waist = beam.waist_m or math.inf

    # resolution: optics (a Gaussian for the Airy pattern) and the recoil random walk, in quadrature
    na = setup.numerical_aperture
    if na is None and setup.aperture_radius_m and setup.lens_distance_m:
        na = float(ab.numerical_aperture(setup.aperture_radius_m, setup.lens_distance_m))
    psf = float(ab.gaussian_psf_sigma(beam.wavelength_m, na)) if na else 0.0
    if not na:
        flags.append(NO_RESOLUTION)
    recoil = probe.blur if probe is not None else 0.0
    blur = math.hypot(psf, recoil)

    # components: atoms, centres, projected shapes
    thomas_fermi = pred.cloud.size_kind.startswith("Thomas")
    sizes = np.full(3, pred.cloud.size) if pred.cloud.sizes is None else np.asarray(pred.cloud.sizes, dtype=float)
    shadow = ab.plane_matrix(sizes, pred.cloud.axes, basis)
    if not (np.all(np.isfinite(shadow)) and np.linalg.det(shadow) > 0):  # a cloud of no extent across the probe
        return PredictedImage(**base, why=NO_CLOUD)
    comps = []
    for comp in pred.components:
        if len(comp.plane) > 1 and SIGN_CASES not in flags:
            flags.append(SIGN_CASES)
        imaged = setup.imaged_F is None or (comp.state is not None and comp.state[0] == setup.imaged_F)
        comps.append(ImagedComponent(comp.state, comp.fraction * shot.sample.atoms, imaged,
                                     (float(comp.plane[0][0]), float(comp.plane[0][1])), shadow, thomas_fermi,
                                     split=comp.split))
    if any(not c.imaged for c in comps):
        flags.append(NOT_IMAGED)
    lit = [c for c in comps if c.imaged]
    if not lit:
        flags.append(NONE_IMAGED)
    reach = np.sqrt(np.diag(shadow)) * (1.0 if thomas_fermi else GAUSSIAN_REACH)

    # the camera's pixels and the frame
    if setup.pixel_size_m:
        pix = setup.pixel_size_m / setup.magnification
    else:
        flags.append(NO_PIXEL)
        spans = [2 * reach[i] + 10 * blur for i in (0, 1)]
        pix = max(spans) / DEFAULT_PIXELS
    margin = 5 * blur + 2 * pix
    boxes = [(c.centre[0] - reach[0] - margin, c.centre[0] + reach[0] + margin,
              c.centre[1] - reach[1] - margin, c.centre[1] + reach[1] + margin) for c in (lit or comps)]
    roi = (min(b[0] for b in boxes), max(b[1] for b in boxes), min(b[2] for b in boxes), max(b[3] for b in boxes))
    if setup.field_of_view_m:  # the field of view: pixel centres symmetric about the setup's centre
        n = int(math.ceil(setup.field_of_view_m / pix - 1e-9))
        (xs, cut_x), (ys, cut_y) = (_grid(-(n - 1) / 2, n, pix, 0.5 * (roi[0] + roi[1])),
                                    _grid(-(n - 1) / 2, n, pix, 0.5 * (roi[2] + roi[3])))
    else:  # the region with atoms: pixel edges on multiples of the pixel
        gx, gy = (math.floor(roi[0] / pix), math.floor(roi[2] / pix))
        (xs, cut_x), (ys, cut_y) = (_grid(gx + 0.5, max(1, math.ceil(roi[1] / pix) - gx), pix, 0.5 * (roi[0] + roi[1])),
                                    _grid(gy + 0.5, max(1, math.ceil(roi[3] / pix) - gy), pix, 0.5 * (roi[2] + roi[3])))
    if cut_x or cut_y:
        flags.append(FRAME_CUT)
    i0, i1 = _span(xs, roi[0], roi[1], pix)
    j0, j1 = _span(ys, roi[2], roi[3], pix)

    # probe intensity (in units of I_sat) at the pixel centres of the frame
    def s_at(hh, vv):
        if not math.isfinite(waist):
            return np.full(np.broadcast(hh, vv).shape, s0)
        p = (np.asarray(setup.center_m, dtype=float)[:, None, None] + e_h[:, None, None] * hh
             + e_v[:, None, None] * vv) - np.asarray(beam.position_m, dtype=float)[:, None, None]
        d = np.asarray(beam.direction, dtype=float) / np.linalg.norm(beam.direction)
        along = np.einsum("i,ijk->jk", d, p)
        r2 = np.einsum("ijk,ijk->jk", p, p) - along ** 2
        return s0 * np.exp(-2 * r2 / waist ** 2)

    a = alpha * (1 + 4 * det_lw ** 2)
    od = np.zeros((len(ys), len(xs)))
    atoms_in = [0.0] * len(comps)
    k = 1
    if lit and i1 > i0 and j1 > j0:
        # fine samples resolve the blur and the cloud's narrowest side
        thinnest = float(np.sqrt(np.min(np.linalg.eigvalsh(shadow))))
        fine_cell = min([pix, thinnest / 3] + ([blur / 1.5] if blur > 0 else []))
        k = int(min(MAX_OVERSAMPLING, max(1, math.ceil(pix / fine_cell - 1e-9))))
        while k > 1 and (i1 - i0) * (j1 - j0) * k * k > MAX_FINE_SAMPLES:
            k -= 1
        sub = (np.arange(k) + 0.5) / k * pix - 0.5 * pix
        fx = (xs[i0:i1, None] + sub[None, :]).ravel()
        fy = (ys[j0:j1, None] + sub[None, :]).ravel()
        hh, vv = np.meshgrid(fx, fy)
        column = np.zeros_like(hh)
        for idx, c in enumerate(comps):
            if not c.imaged:
                continue
            dens = (ab.thomas_fermi_column_density if thomas_fermi else ab.gaussian_column_density)(
                c.atoms, shadow, hh - c.centre[0], vv - c.centre[1])
            atoms_in[idx] = float(np.sum(dens)) * (pix / k) ** 2
            column += dens
        od0 = sigma0 * column
        if s0 > 0:
            s_in = s_at(hh, vv)
            absorbed = s_in - ab.transmitted_saturation(od0, s_in, det_lw, alpha)
        else:  # weak probe: intensities relative to the probe's
            s_in = np.ones_like(od0)
            absorbed = 1 - np.exp(-od0 / a)
        absorbed = ab.blur(absorbed, blur / (pix / k))
        probe_pix = ab.bin_pixels(s_in, k)
        kept = np.maximum(probe_pix - ab.bin_pixels(absorbed, k), probe_pix * 1e-300)
        od[j0:j1, i0:i1] = np.log(probe_pix / kept)
    if (lit and sum(atoms_in) < 0.99 * sum(c.atoms for c in lit)) or (lit and not (i1 > i0 and j1 > j0)):
        flags.append(OUTSIDE_FRAME)
    comps = [ImagedComponent(c.state, c.atoms, c.imaged, c.centre, c.shadow, c.thomas_fermi, n, c.split)
             for c, n in zip(comps, atoms_in)]

    # atoms recovered from the noise-free map: saturation-corrected OD x pixel area / sigma0
    s_pix = s_at(*np.meshgrid(xs, ys)) if s0 > 0 else np.zeros_like(od)
    atoms_from_od = float(np.sum(ab.saturation_corrected_od(od, s_pix, a)) * pix ** 2 / sigma0)
    photons = None
    if s0 > 0:
        photons = float(ab.photons(s0 * sp.saturation_intensity_w_m2, pix ** 2, img.args["duration"], beam.wavelength_m,
                                   setup.quantum_efficiency))
    if seed is not None:
        if photons is None:
            flags.append(NO_NOISE_PHOTONS)
        else:
            counts = np.asarray(ab.photons(s_pix * sp.saturation_intensity_w_m2, pix ** 2, img.args["duration"],
                                           beam.wavelength_m, setup.quantum_efficiency))
            od = ab.noisy_od(np.exp(-od), counts, np.random.default_rng(seed))
    centre_s = 0.0
    if s0 > 0:  # the probe shines on the atoms whether it images them or not
        dense = max(lit or comps, key=lambda c: c.atoms)
        centre_s = float(s_at(np.array([[dense.centre[0]]]), np.array([[dense.centre[1]]]))[0, 0])
    od.setflags(write=False)
    return PredictedImage(**base, od=od, x=xs, y=ys, pixel=pix, components=tuple(comps),
                          peak_od=float(np.max(od)) if od.size else 0.0, saturation=float(s0),
                          saturation_at_atoms=centre_s, sigma0=sigma0, wavelength=lam, detuning_hz=float(detuning),
                          linewidth_hz=line.linewidth_hz, alpha=alpha, na=na, psf_sigma=psf, recoil_blur=recoil,
                          blur=blur, oversampling=k, photons=photons, atoms_from_od=atoms_from_od, flags=tuple(flags),
                          rayleigh=float(ab.rayleigh_radius(beam.wavelength_m, na)) if na else None)


def predicted_images(shot, seed: int | None = None) -> tuple:
    """The PredictedImage of every `image` of the shot, in time order."""
    return tuple(predicted_image(shot, img, seed) for img in sorted(images_of(shot), key=lambda a: a.t0))


def _grid(first: float, n: int, pix: float, about: float) -> tuple:
    """(pixel centres (first + j) x pix for j < n, cut): at most MAX_FRAME_PIXELS of them, about `about`."""
    if n <= MAX_FRAME_PIXELS:
        return (first + np.arange(n)) * pix, False
    j0 = int(np.clip(round(about / pix - first) - MAX_FRAME_PIXELS // 2, 0, n - MAX_FRAME_PIXELS))
    return (first + j0 + np.arange(MAX_FRAME_PIXELS)) * pix, True


def _span(centres: np.ndarray, lo: float, hi: float, pix: float) -> tuple:
    """(i0, i1): the pixels whose cells meet [lo, hi]."""
    i0 = int(np.searchsorted(centres + 0.5 * pix, lo))
    i1 = int(np.searchsorted(centres - 0.5 * pix, hi))
    return i0, max(i0, i1)
