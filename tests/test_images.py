"""Predicted absorption images of the demos (seqgen.predict.images, `seqgen plot --images`, the HTML report).

Expected values are written out here: the resonant cross-section 3 lambda^2/(2 pi) of the Na D2 line and
I_sat (Sodium D Line Data, from memory: tests/atom_reference.py), the probe's saturation 2 P / (pi w^2) / I_sat
from the demo's probe power and the rig's beam waist, the Gaussian column density N / (2 pi sqrt(det C)) of the
cloud the forward model predicts at the image, the saturation correction of Opt. Lett. 32, 3143 (2007), photon
counts I A tau / (h c / lambda) (scipy.constants), and the pixel pitch over the magnification of the rig file."""

from __future__ import annotations

import base64
import json
import math
import re

import numpy as np
import pytest
import yaml
from scipy import constants as sc
from scipy.optimize import brentq

import seqgen
from seqgen.caution import CAUTION
from seqgen.cli import main
from seqgen.predict.images import NOT_IMAGED, predicted_image

from .atom_reference import I_SAT, LAMBDA_D2
from .conftest import SEQUENCES

SIGMA0 = 3 * LAMBDA_D2 ** 2 / (2 * math.pi)
PIXEL = 6.5e-6 / 2.0  # the demo rig: pixel_size 6.5 um, magnification 2
WAIST = 2.5e-3  # the demo rig's probe beam
PROBE_NM = 589.158e-9
PNG = b"\x89PNG\r\n\x1a\n"


def _image(path, seed=None, **overrides):
    res = seqgen.preflight(path, overrides=overrides)
    assert res.shot is not None
    img = res.shot.actions("image")[0]
    return res.shot, img, predicted_image(res.shot, img, seed)


def _edit(path, old, new):
    text = path.read_text(encoding="utf-8")
    assert text.count(old) == 1, old
    path.write_text(text.replace(old, new), encoding="utf-8")


def test_peak_od_of_the_thermal_demo_from_its_cloud_and_probe(project):
    shot, img, pred = _image("sequences/na23_thermometry.yaml")
    cloud = seqgen.image_prediction(shot, img)
    comp = cloud.components[0]
    # the probe runs along y: the image plane is x (horizontal) and z (vertical)
    a = np.asarray(cloud.cloud.axes)
    cov3 = a @ np.diag(np.asarray(cloud.cloud.sizes) ** 2) @ a.T
    cov = cov3[np.ix_([0, 2], [0, 2])]
    column = 6e5 / (2 * math.pi * math.sqrt(np.linalg.det(cov)))
    x, _, z = comp.positions[0]
    s = 2 * 40e-6 / (math.pi * WAIST ** 2) / I_SAT * math.exp(-2 * (x * x + z * z) / WAIST ** 2)
    od_meas = brentq(lambda od: od + (1 - math.exp(-od)) * s - SIGMA0 * column, 0, 20)
    assert pred.peak_od == pytest.approx(od_meas, rel=0.01)
    assert pred.saturation == pytest.approx(2 * 40e-6 / (math.pi * WAIST ** 2) / I_SAT, rel=1e-3)
    assert pred.saturation_at_atoms == pytest.approx(s, rel=1e-3)
    assert pred.pixel == pytest.approx(PIXEL, rel=1e-12)
    assert pred.atoms_from_od == pytest.approx(6e5, rel=0.005)  # saturation-corrected sum of the noise-free map


def test_pixels_keep_the_atom_number_in_the_low_od_resonant_unsaturated_limit(project):
    seq = project / "sequences" / "na23_thermometry.yaml"
    _edit(seq, "atoms: 6e5", "atoms: 6e3")
    _edit(seq, "probe_power: 40 uW", "probe_power: 0.04 uW")
    _, _, pred = _image(seq)
    assert pred.peak_od < 0.01 and pred.saturation < 1e-4
    assert float(np.sum(pred.od)) * PIXEL ** 2 / SIGMA0 == pytest.approx(6e3, rel=0.002)


def test_a_state_selective_probe_sees_only_its_level(project):
    rig = project / "sequences" / "rigs" / "na23_demo_rig.yaml"
    _edit(rig, "lens_distance: 60 mm", "lens_distance: 60 mm, imaged_F: 2")
    _, _, pred = _image(project / "sequences" / "na23_barrier_scatter.yaml")
    states = {c.state: c for c in pred.components}
    assert not states[(1, -1)].imaged and states[(2, -2)].imaged
    assert NOT_IMAGED in pred.flags
    # the pi/2 clock pulse leaves half of the 6e4 atoms in |2,-2>
    assert pred.atoms_from_od == pytest.approx(3e4, rel=0.01)


def test_shot_noise_is_reproducible_and_follows_the_photon_counts(project):
    path = "sequences/na23_thermometry.yaml"
    _, _, a = _image(path, seed=7)
    _, _, b = _image(path, seed=7)
    _, _, c = _image(path, seed=8)
    assert np.array_equal(a.od, b.od) and not np.array_equal(a.od, c.od)
    # a patch without atoms (the cloud sits about x = 0, 0.3 mm below the centre, 0.16 mm rms wide)
    xs, ys = np.meshgrid(a.x, a.y)
    patch = (xs > 1.2e-3) & (xs < 1.6e-3) & (np.abs(ys) < 0.2e-3)
    i_probe = 2 * 40e-6 / (math.pi * WAIST ** 2) * np.exp(-2 * (xs ** 2 + ys ** 2) / WAIST ** 2)
    counts = 0.7 * i_probe * PIXEL ** 2 * 30e-6 / (sc.h * sc.c / PROBE_NM)  # quantum_efficiency 0.7
    # OD = ln(C_probe / C_atoms), both Poisson: Var = 1/N + 1/N
    assert float(np.var(a.od[patch])) == pytest.approx(float(np.mean(2 / counts[patch])), rel=0.05)
    assert float(np.mean(a.od[patch])) == pytest.approx(0.0, abs=0.002)


def _run(capsys, *argv):
    code = main(list(argv))
    cap = capsys.readouterr()
    assert "Traceback" not in cap.err
    return code, cap.out, cap.err


@pytest.mark.parametrize("name", ["na23_thermometry.yaml", "na23_barrier_scatter.yaml"])
def test_plot_images_of_both_demos_writes_a_picture_the_same_each_time(tmp_path, capsys, name):
    out = tmp_path / "images.png"
    code, text, _ = _run(capsys, "plot", str(SEQUENCES / name), "--images", "-o", str(out))
    assert code == 0 and out.read_bytes()[:8] == PNG
    assert "peak OD" in text and CAUTION in text
    first = out.read_bytes()
    assert _run(capsys, "plot", str(SEQUENCES / name), "--images", "-o", str(out))[0] == 2  # exists, no --force
    assert _run(capsys, "plot", str(SEQUENCES / name), "--images", "-o", str(out), "--force")[0] == 0
    assert out.read_bytes() == first


def test_plot_images_as_svg_and_as_arrays(tmp_path, capsys):
    svg = tmp_path / "i.svg"
    assert _run(capsys, "plot", str(SEQUENCES / "na23_thermometry.yaml"), "--images", "-o", str(svg))[0] == 0
    assert "<svg" in svg.read_text(encoding="utf-8")
    npz = tmp_path / "i.npz"
    assert _run(capsys, "plot", str(SEQUENCES / "na23_thermometry.yaml"), "--images", "-o", str(npz))[0] == 0
    data = np.load(npz)
    assert str(data["caution"]) == CAUTION
    od, x, y = data["od_0"], data["x_m_0"], data["y_m_0"]
    assert od.shape == (len(y), len(x)) and np.allclose(np.diff(x), PIXEL) and np.allclose(np.diff(y), PIXEL)
    assert float(data["pixel_m"][0]) == pytest.approx(PIXEL)
    assert float(np.max(od)) == pytest.approx(float(data["peak_od"][0]))
    assert "peak OD" in str(data["notes"][0])
    gif = tmp_path / "i.gif"
    assert _run(capsys, "plot", str(SEQUENCES / "na23_thermometry.yaml"), "--images", "-o", str(gif))[0] == 2
    code, text, _ = _run(capsys, "plot", str(SEQUENCES / "na23_thermometry.yaml"), "--images", "-o", str(npz),
                         "--force", "--json")
    doc = json.loads(text)
    assert code == 0 and doc["caution"] == CAUTION and doc["images"][0]["peak_od"] == pytest.approx(
        float(data["peak_od"][0]))


def test_a_scanned_sequence_gives_one_strip_per_shot(tmp_path, capsys):
    demo = SEQUENCES / "na23_barrier_scatter.yaml"
    scan = yaml.safe_load(demo.read_text(encoding="utf-8"))["params"]["tof"]["scan"]  # 10 ms to 14 ms, 3 steps
    npz = tmp_path / "scan.npz"
    code, text, _ = _run(capsys, "plot", str(demo), "--images", "-o", str(npz))
    assert code == 0 and "3 row(s)" in text
    rows = [str(r) for r in np.load(npz)["row"]]
    assert len(rows) == scan["steps"] and len(set(rows)) == 3
    assert [re.search(r"tof = ([\d.]+) ms", r).group(1) for r in rows] == ["10", "12", "14"]
    times = np.load(npz)["time_s"]
    assert np.allclose(np.diff(times), 2e-3)  # the image follows the release by tof
    one = tmp_path / "one.npz"
    assert _run(capsys, "plot", str(demo), "--images", "--shot", "1", "-o", str(one))[0] == 0
    assert [str(r) for r in np.load(one)["row"]] == [rows[1]]
    assert np.array_equal(np.load(one)["od_0"], np.load(npz)["od_1"])
    png = tmp_path / "scan.png"
    assert _run(capsys, "plot", str(demo), "--images", "-o", str(png))[0] == 0 and png.read_bytes()[:8] == PNG


def test_the_report_shows_the_predicted_image(tmp_path, capsys):
    out = tmp_path / "r.html"
    assert _run(capsys, "check", str(SEQUENCES / "na23_thermometry.yaml"), "--report", str(out))[0] == 0
    html = out.read_text(encoding="utf-8")
    assert '<section id="images">' in html
    uri = re.search(r'<img src="data:image/png;base64,([A-Za-z0-9+/=]+)"', html)
    assert uri and base64.b64decode(uri.group(1))[:8] == PNG
    assert "peak OD" in html[html.index('<section id="images">'):]


def test_rig_keys_out_of_range_are_findings_at_their_line(project):
    rig = project / "sequences" / "rigs" / "na23_demo_rig.yaml"
    _edit(rig, "lens_distance: 60 mm", "lens_distance: 60 mm, numerical_aperture: 1.5, imaged_F: -1")
    res = seqgen.preflight(project / "sequences" / "na23_thermometry.yaml")
    line = next(i for i, ln in enumerate(rig.read_text(encoding="utf-8").split("\n"), 1) if "numerical_aperture" in ln)
    bad = sorted((f.line, f.code) for f in res.findings if f.severity == "error")
    assert bad == [(line, "schema.bad-value"), (line, "schema.bad-value")]


def test_no_image_action_and_a_negative_seed_are_refused_without_a_file(tmp_path, capsys):
    out = tmp_path / "i.png"
    no_image = SEQUENCES / "good" / "rb87_sigma_pulse.yaml"
    assert "image:" not in no_image.read_text(encoding="utf-8")
    assert main(["plot", str(no_image), "--images", "-o", str(out)]) == 2
    assert "no `image` action" in capsys.readouterr().err and not out.exists()
    assert main(["plot", str(SEQUENCES / "na23_thermometry.yaml"), "--images", "--noise-seed", "-1",
                 "-o", str(out)]) == 2
    err = capsys.readouterr().err
    assert "--noise-seed" in err and "Traceback" not in err and not out.exists()
