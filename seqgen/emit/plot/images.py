"""Predicted absorption images (seqgen.predict.images) as a picture, as arrays (npz) and in words.

`images_figure(rows)`: one panel per image (optical depth, colour bar, axes in um at the atoms, each component
labelled), one row per shot. `images_npz(rows)`: the OD arrays with their pixel coordinates, for comparing
with a lab's own images. `image_notes(image)`: what a prediction assumes, in words (the plot, the npz and the
HTML report print them)."""

from __future__ import annotations

import io
import json
import math
import textwrap
import zipfile

import numpy as np

from ...caution import CAUTION
from ...predict import images as pi
from ...textfmt import fmt_length, fmt_when
from . import labels as lb
from .layout import LABEL_PT, TICK_PT

PANEL_IN = (4.6, 3.9)  # width, height of one image panel with its title, labels and colour bar (inches)
AXES_LEFT_IN, AXES_RIGHT_IN, AXES_TOP_IN, AXES_BOTTOM_IN = 0.75, 0.95, 0.5, 0.5  # room around the image axes
ROW_LABEL_IN = 0.25  # a row's label (the shot of a scan) above its panels
HEAD_IN = 0.4
NOTE_ROW_IN = 0.13
DISPLAY_MARGIN = 0.15  # the drawn window reaches this fraction beyond the components' edges
MIN_DISPLAY_PIXELS = 24
CORE_TF, CORE_GAUSS = 0.8, 1.5  # a label should rather not hide this much of a cloud: of its TF radii, its rms widths
COLOUR_MAP = "viridis"  # perceptually uniform, readable in grey and with the common colour-vision deficiencies
_ZIP_DATE = (1980, 1, 1, 0, 0, 0)

_WHY = {
    pi.NO_SPECIES: "no species or sample, or an unknown imaging setup",
    pi.NO_PROBE_BEAM: "the imaging setup names no probe beam with a wavelength and direction",
    pi.NO_CLOUD: "the cloud's size at the image is not known (see 'seqgen show --physics')",
    pi.NO_ATOMS: "the sample gives no atom number",
    pi.NO_COMPONENTS: "no internal state holds atoms at the image",
}
def why_text(why: str) -> str:
    """Why an image has no prediction, in words."""
    return _WHY.get(why, why)


_FLAGS = {
    pi.WEAK_PROBE: "probe intensity unknown (no probe_power on an analog probe line, no saturation_parameter): "
                   "weak-probe limit, no shot noise",
    pi.NO_RESOLUTION: "no numerical_aperture (nor aperture_radius with lens_distance): optics not blurred",
    pi.NO_PIXEL: "no pixel_size in the imaging setup: pixels chosen to span the cloud",
    pi.SIGN_CASES: "a push of unknown direction: the first of its possible directions is drawn",
    pi.OUTSIDE_FRAME: "some imaged atoms fall outside the camera's field of view",
    pi.FRAME_CUT: f"field of view over {pi.MAX_FRAME_PIXELS} pixels: cut to that about the atoms",
    pi.NOT_IMAGED: "components outside the imaged level are not seen (imaged_F)",
    pi.NONE_IMAGED: "no atoms in the imaged level (imaged_F): a blank picture (physics.nothing-imaged)",
    pi.D1_LINE: "probe nearest the D1 line: no cycling transition there, 3 lambda^2/2pi overestimates the OD",
    pi.NO_NOISE_PHOTONS: "no shot noise: the probe's photon count is unknown",
}


def state_text(state) -> str:
    return f"|{state[0]},{state[1]}>" if state is not None else "atoms"


def part_text(c) -> str:
    """'|1,-1> reflected': the state and, for a part a barrier sheet split off, its side (the last sheet's)."""
    return state_text(c.state) + (f" {c.split[-1][0]}" if c.split else "")


def image_notes(img: "pi.PredictedImage") -> list[str]:
    """What one predicted image assumes and gives, in words."""
    where = f"{img.block or 'image'} at {fmt_when(img.time_s)}" + (f", setup '{img.setup}'" if img.setup else "")
    if img.od is None:
        return [f"{where}: no predicted image: {_WHY.get(img.why, img.why)}"]
    res = (f"NA {img.na:.3g} (Rayleigh {fmt_length(img.rayleigh, 3, unit='um')}; Gaussian "
           f"PSF rms {fmt_length(img.psf_sigma, 3, unit='um')})" if img.na else "no optics blur")
    out = [f"{where}: peak OD {img.peak_od:.3g}; probe I/I_sat {img.saturation:.3g} at the beam centre, "
           f"{img.saturation_at_atoms:.3g} at the atoms; detuning {img.detuning_hz / img.linewidth_hz:.3g} "
           f"linewidths; sigma0 = 3 lambda^2/2pi = {img.sigma0 * 1e4:.4g} cm^2"
           + (f" / alpha {img.alpha:.3g}" if img.alpha != 1 else "")
           + f"; {res}, recoil blur {fmt_length(img.recoil_blur, 3, unit='um')}; "
           f"pixel {fmt_length(img.pixel, 3, unit='um')} at the atoms ({len(img.x)} x {len(img.y)}); "
           f"atoms from the OD (saturation-corrected, noise-free) {img.atoms_from_od:.4g}"
           + (f"; {img.photons:.3g} photo-electrons per pixel from the probe" if img.photons else "")
           + (f"; shot noise seed {img.noise_seed}" if img.noise_seed is not None else "")]
    comps = "; ".join(f"{part_text(c)}" + (f" (barrier '{c.split[-1][1]}')" if c.split else "")
                      + f" {c.atoms:.3g} atoms" + ("" if c.imaged else " (not imaged)") for c in img.components)
    out.append(f"  components: {comps}")
    out += [f"  {_FLAGS.get(f, f)}" for f in img.flags]
    return out


ASSUMPTIONS = ("Model: column densities of the predicted clouds (Thomas-Fermi or Gaussian), Beer-Lambert absorption "
               "with saturation and detuning (Opt. Lett. 32, 3143 (2007)), a Gaussian point-spread function of rms "
               "0.21 lambda/NA for the Airy pattern, with the recoil blur in quadrature, summed into camera pixels; "
               "a barrier sheet splits the cloud it meets into transmitted and reflected parts at the centre's "
               "arrival (specular reflection, both parts keep the cloud's size); not modelled: defocus, the Doppler "
               "shift during the probe, interference fringes, multiple scattering, the camera's read noise.")


MIN_DISPLAY_ASPECT = 0.6  # the drawn window's shorter side, at least this fraction of its longer one


def _window(img):
    """(i0, i1, j0, j1): the pixels drawn, about the components (the whole frame without any in it)."""
    nx, ny = len(img.x), len(img.y)
    boxes = []
    for c in img.components:
        reach = np.sqrt(np.diag(c.shadow)) * (1.0 if c.thomas_fermi else 3.0) * (1 + DISPLAY_MARGIN) + 3 * img.blur
        boxes.append((c.centre[0] - reach[0], c.centre[0] + reach[0], c.centre[1] - reach[1], c.centre[1] + reach[1]))
    if not boxes:
        return 0, nx, 0, ny
    x0, x1 = min(b[0] for b in boxes), max(b[1] for b in boxes)
    y0, y1 = min(b[2] for b in boxes), max(b[3] for b in boxes)
    i0, i1 = int(np.searchsorted(img.x, x0)), int(np.searchsorted(img.x, x1))
    j0, j1 = int(np.searchsorted(img.y, y0)), int(np.searchsorted(img.y, y1))
    if i1 - i0 < 2 or j1 - j0 < 2:
        return 0, nx, 0, ny

    # at least MIN_DISPLAY_PIXELS, and no side under MIN_DISPLAY_ASPECT of the other (two clouds far apart
    # along one axis would otherwise give a sliver too thin for its labels and ticks)
    least = max(MIN_DISPLAY_PIXELS, int(MIN_DISPLAY_ASPECT * max(i1 - i0, j1 - j0)))

    def widen(a, b, n):
        grow = max(0, least - (b - a))
        a, b = a - grow // 2, b + grow - grow // 2
        if a < 0:  # against one edge of the frame: grow on the other side
            a, b = 0, b - a
        if b > n:
            a, b = max(0, a - (b - n)), n
        return a, b

    return (*widen(i0, i1, nx), *widen(j0, j1, ny))


def _panel(fig, ax, img, title: str) -> None:
    ax.set_title(title, fontsize=LABEL_PT, loc="left")
    if img.od is None:
        ax.set_axis_off()
        ax.text(0.5, 0.5, "\n".join(textwrap.wrap(f"no predicted image: {_WHY.get(img.why, img.why)}", 40)),
                ha="center", va="center", fontsize=LABEL_PT, transform=ax.transAxes)
        return
    i0, i1, j0, j1 = _window(img)
    od = img.od[j0:j1, i0:i1]
    h = 0.5 * img.pixel
    ext = [(img.x[i0] - h) * 1e6, (img.x[i1 - 1] + h) * 1e6, (img.y[j0] - h) * 1e6, (img.y[j1 - 1] + h) * 1e6]
    lo = min(0.0, float(np.percentile(od, 0.5))) if img.noise_seed is not None else 0.0
    hi = max(float(np.max(od)), lo + 1e-3)
    im = ax.imshow(od, origin="lower", extent=ext, cmap=COLOUR_MAP, vmin=lo, vmax=hi, interpolation="nearest",
                   aspect="equal")
    bar = fig.colorbar(im, ax=ax, fraction=0.046, pad=0.03)
    bar.set_label("optical depth", fontsize=TICK_PT + 0.5)
    bar.ax.tick_params(labelsize=TICK_PT)
    ax.set_xlabel("image horizontal (um at the atoms)", fontsize=TICK_PT + 0.5)
    ax.set_ylabel("image vertical (um at the atoms)", fontsize=TICK_PT + 0.5)
    ax.tick_params(labelsize=TICK_PT)
    shown = [(c, c.centre[0] * 1e6, c.centre[1] * 1e6) for c in img.components]
    shown = [(c, x, y) for c, x, y in shown if ext[0] <= x <= ext[1] and ext[2] <= y <= ext[3]]
    for c, x, y in shown:
        ax.plot([x], [y], marker="+", color="white" if c.imaged else "#bbbbbb", markersize=7, mew=1.2)
    ax.set_xlim(ext[0], ext[1])  # the image's extent, fixed before the labels read positions
    ax.set_ylim(ext[2], ext[3])
    _label_parts(fig, ax, shown)


def _label_parts(fig, ax, shown) -> None:
    """Each shown part's label ("|1,-1> reflected" over its atom number) beside its own cloud, placed by
    `labels.place_labels` on the text's measured size; a leader line where a label had to move away."""
    from matplotlib import patheffects
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    if not shown:
        return
    renderer = FigureCanvasAgg(fig).get_renderer()  # measures text as the png draws it
    ax.apply_aspect()  # the equal-aspect box as drawn, before reading positions
    px = fig.dpi / 72.0
    halo = [patheffects.withStroke(linewidth=2.2, foreground="white")]
    texts, sizes, anchors, cores = [], [], [], []
    for c, x, y in shown:
        words = f"{part_text(c)}\n{c.atoms:.2g} atoms" + ("" if c.imaged else "\nnot imaged")
        t = ax.text(x, y, words, fontsize=TICK_PT + 0.5, ha="center", va="center", multialignment="center")
        ext = t.get_window_extent(renderer)
        t.remove()
        sizes.append((ext.width + 2.2 * px, ext.height + 2.2 * px))  # the halo's stroke around the glyphs
        anchors.append(tuple(float(v) for v in ax.transData.transform((x, y))))
        reach = np.sqrt(np.diag(c.shadow)) * (CORE_TF if c.thomas_fermi else CORE_GAUSS) * 1e6
        (x0, y0), (x1, y1) = ax.transData.transform([(x - reach[0], y - reach[1]), (x + reach[0], y + reach[1])])
        cores.append(lb.Box(float(x0), float(y0), float(x1), float(y1)))
        texts.append(words)
    frame = ax.get_window_extent(renderer)
    spots = lb.place_labels(anchors, sizes, lb.Box(frame.x0, frame.y0, frame.x1, frame.y1), cores, px)
    for (c, x, y), words, (ax_x, ax_y), (w, h), spot in zip(shown, texts, anchors, sizes, spots):
        if spot is None:  # larger than the panel: above its cloud
            spot = lb.Spot(ax_x, ax_y + lb.GAP_PT * px + h / 2, False, 0.0, lb.Box(0, 0, 0, 0))
        lead = dict(arrowstyle="-", color="white", lw=1.0, shrinkA=1.5, shrinkB=0,
                    path_effects=[patheffects.withStroke(linewidth=2.4, foreground="#1a1a1a")])
        ax.annotate(words, (x, y), xytext=((spot.x - ax_x) / px, (spot.y - ax_y) / px), textcoords="offset points",
                    fontsize=TICK_PT + 0.5, color="#1a1a1a", path_effects=halo, ha="center", va="center",
                    multialignment="center", arrowprops=lead if spot.leader else None, gid="part-label")


def _title(img) -> str:
    if img.od is None:
        return f"{img.block} at {fmt_when(img.time_s)}"
    return (f"{img.block} at {fmt_when(img.time_s)}: peak OD {img.peak_od:.2f}, I/I_sat {img.saturation_at_atoms:.2g}"
            f"\natoms from OD {img.atoms_from_od:.3g} (model {sum(c.atoms for c in img.components if c.imaged):.3g})")


def images_figure(rows, title: str = "", subtitle: str | None = None):
    """A matplotlib Figure: one row per (label, images) of `rows` (label None for a file without scans), one
    panel per image; the notes of every image and the model's assumptions under the panels."""
    from matplotlib.figure import Figure

    rows = [(label, tuple(imgs)) for label, imgs in rows]
    cols = max([len(imgs) for _, imgs in rows] + [1])
    width = max(PANEL_IN[0] * cols, 8.0)
    chars = int(width * 72 / (0.6 * TICK_PT) * 0.92)  # monospace characters across the figure
    lines = []
    for label, imgs in rows:
        for img in imgs:
            for n in image_notes(img):
                lines += textwrap.wrap((f"[{label}] " if label else "") + n, chars, subsequent_indent="    ")
    for n in (ASSUMPTIONS, "caution: " + CAUTION):
        lines += textwrap.wrap(n, chars, subsequent_indent="    ")
    head = HEAD_IN + (0.18 if subtitle else 0.0)
    row_in = PANEL_IN[1] + (ROW_LABEL_IN if any(label for label, _ in rows) else 0.0)
    notes_in = NOTE_ROW_IN * (len(lines) + 1)
    height = head + row_in * max(1, len(rows)) + notes_in
    fig = Figure(figsize=(width, height), dpi=110)

    def y(inches_from_top):
        return 1 - inches_from_top / height

    fig.text(0.01, y(0.12), title or "Predicted absorption images", fontsize=LABEL_PT + 2, va="top", weight="bold")
    if subtitle:
        fig.text(0.01, y(0.36), subtitle, fontsize=TICK_PT + 0.5, va="top")
    for r, (label, imgs) in enumerate(rows):
        top = head + r * row_in
        if label:
            fig.text(0.01, y(top + 0.05), label, fontsize=LABEL_PT + 0.5, va="top", weight="bold")
            top += ROW_LABEL_IN
        if not imgs:
            fig.text(0.03, y(top + 0.3), "no image action in this shot", fontsize=LABEL_PT, va="top")
            continue
        for c, img in enumerate(imgs):
            left = c * PANEL_IN[0] + AXES_LEFT_IN
            rect = [left / width, y(top + PANEL_IN[1] - AXES_BOTTOM_IN),
                    (PANEL_IN[0] - AXES_LEFT_IN - AXES_RIGHT_IN) / width,
                    (PANEL_IN[1] - AXES_TOP_IN - AXES_BOTTOM_IN) / height]
            _panel(fig, fig.add_axes(rect), img, _title(img))
    fig.text(0.01, y(height - notes_in + 0.08), "\n".join(lines), fontsize=TICK_PT, va="top", family="monospace",
             linespacing=1.25)
    fig.seqgen_info = {"images": sum(len(imgs) for _, imgs in rows), "rows": len(rows)}
    return fig


def images_npz(rows) -> bytes:
    """The predicted images as an .npz (deterministic bytes): for image k (in row order, then time order)
    `od_k` (rows along the image vertical, y ascending; columns along the horizontal), `x_m_k` and `y_m_k`
    (pixel centres, m at the atoms, from the imaging setup's centre); per image `row` (the row label: the shot
    of a scan, or ""), `block`, `setup`, `time_s`, `pixel_m`, `peak_od`, `saturation` (I/I_sat at the beam
    centre), `sigma0_m2`, `atoms_from_od`; `components` (JSON text: per image, each component's state, atoms,
    imaged, centre_m, split: [[side, barrier block], ...] for a part a barrier sheet split off), `notes` (per
    image, its notes joined by newlines) and `caution`."""
    arrays, meta = {}, {k: [] for k in ("row", "block", "setup", "time_s", "pixel_m", "peak_od", "saturation",
                                         "sigma0_m2", "atoms_from_od", "notes")}
    comps = []
    k = 0
    for label, imgs in rows:
        for img in imgs:
            if img.od is not None:
                arrays[f"od_{k}"] = np.asarray(img.od, dtype=np.float64)
                arrays[f"x_m_{k}"] = np.asarray(img.x, dtype=np.float64)
                arrays[f"y_m_{k}"] = np.asarray(img.y, dtype=np.float64)
            for key, val in (("row", label or ""), ("block", img.block or ""), ("setup", img.setup or ""),
                             ("time_s", img.time_s), ("pixel_m", img.pixel or math.nan), ("peak_od", img.peak_od),
                             ("saturation", img.saturation), ("sigma0_m2", img.sigma0 or math.nan),
                             ("atoms_from_od", img.atoms_from_od), ("notes", "\n".join(image_notes(img)))):
                meta[key].append(val)
            comps.append([{"state": list(c.state) if c.state is not None else None, "atoms": c.atoms,
                           "imaged": c.imaged, "centre_m": list(c.centre), "split": [list(p) for p in c.split]}
                          for c in img.components])
            k += 1
    for key, vals in meta.items():
        arrays[key] = np.array(vals, dtype="U" if key in ("row", "block", "setup", "notes") else np.float64)
    arrays["components"] = np.array(json.dumps(comps, sort_keys=True))
    arrays["caution"] = np.array(CAUTION)
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w", compression=zipfile.ZIP_DEFLATED, compresslevel=6) as zf:
        for name, arr in arrays.items():
            info = zipfile.ZipInfo(f"{name}.npy", date_time=_ZIP_DATE)
            info.external_attr = 0o644 << 16
            info.compress_type = zipfile.ZIP_DEFLATED
            with zf.open(info, "w", force_zip64=True) as fh:
                np.lib.format.write_array(fh, np.require(arr, requirements='C'), allow_pickle=False)  # keeps 0-d as 0-d
    return buf.getvalue()
