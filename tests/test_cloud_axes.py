"""The cloud along three axes through the pipeline (seqgen.predict `image_prediction`, `separation_analysis` and
the rules that read them): a condensate in the demo rig's single-beam guide (a cigar along x) whose trap is
stepped down before the release, against a hand integration of the scaling equations; the depth of field
against the extent along the line of sight; the Stern-Gerlach widths along the separation.

Hand formulas (tests/atom_reference.py, never taken from seqgen): Gaussian-beam trap frequencies (Adv. At. Mol.
Opt. Phys. 42, 95 (2000); gravity sag left out, so frequencies agree to well under 1 %), Thomas-Fermi radii
(Rev. Mod. Phys. 71, 463 (1999)); the scaling equations of a condensate in a time-dependent harmonic trap,
b_j'' = omega_j(0)^2 / (b_j b_x b_y b_z) - omega_j(t)^2 b_j (Phys. Rev. Lett. 77, 5315 (1996); Phys. Rev. A 54,
R1753 (1996)), integrated here with scipy; the rms of a Thomas-Fermi profile R / sqrt(7); Stern-Gerlach
acceleration (mu_1 - mu_2) b' / m with Breit-Rabi moments; free fall g_n t^2 / 2 (scipy.constants).
"""

import math

import numpy as np
import pytest
from scipy import integrate

from seqgen import predict as pr
from seqgen.pipeline import preflight
from seqgen.show import physics_rows

from .atom_reference import (BIAS, G_N, MASS, breit_rabi_hz, condensate_radius_after, gaussian_beam_omega2, moment,
                             thomas_fermi_radii)
from .conftest import SEQUENCES

RIG = (SEQUENCES / "rigs" / "na23_demo_rig.yaml").read_text(encoding="utf-8")
SAMPLE = "{species: Na23, state: {F: 1, mF: -1}, atoms: 1e5, temperature: 50 nK, condensed: true}"
P_LOAD, P_HOLD, HOLD, TOF = 1.5, 0.9, 3e-3, 5e-3


def blocks(pulse=""):
    # load the guide at 1.5 W, step it down to 0.9 W (a sudden change: the condensate breathes), release 3 ms
    # later, image 5 ms after the release (powers high enough that the gravity sag, left out by hand, shifts the
    # trap frequencies by under 0.3 %)
    text = ("  - name: load\n    at: 1 ms\n    actions:\n      - set: {channel: guide_power, value: 1.5 W}\n"
            + (f"      - {pulse}\n" if pulse else "") +
            "      - hold: {duration: 50 ms}\n"
            "  - name: step\n    after: load\n    actions:\n      - set: {channel: guide_power, value: 0.9 W}\n"
            "      - hold: {duration: 3 ms}\n"
            "  - name: release\n    after: step\n    actions:\n      - release: {beams: [guide]}\n")
    text += ("  - name: image\n    after: release + 5 ms\n    actions:\n"
             "      - image: {setup: side_camera, probe_power: 40 uW, duration: 30 us, exposure: 60 us}\n")
    return text


def run(tmp_path, body, rig=RIG, sample=SAMPLE):
    (tmp_path / "rig.yaml").write_text(rig, encoding="utf-8")
    seq = tmp_path / "seq.yaml"
    seq.write_text(f"seqgen: 1\nrig: rig.yaml\nsample: {sample}\nblocks:\n{body}", encoding="utf-8")
    res = preflight(seq, compile_tables=False)
    assert res.shot is not None, [f.code for f in res.findings]
    return res


def only(shot, kind):
    acts = [a for a in shot.phys if a.kind == kind]
    assert len(acts) == 1
    return acts[0]


def hand_radii():
    """Thomas-Fermi radii (x, y, z) at the image: at rest at 1.5 W, 3 ms at 0.9 W, 5 ms of flight."""
    w0 = np.sqrt(gaussian_beam_omega2(P_LOAD, 55e-6, 1064e-9, 0))
    w1 = np.sqrt(gaussian_beam_omega2(P_HOLD, 55e-6, 1064e-9, 0))

    def rhs(t, y, trap):
        b, db = y[:3], y[3:]
        return np.r_[db, w0 ** 2 / (b * np.prod(b)) - (trap ** 2 if t < HOLD else 0.0) * b]

    y = np.r_[np.ones(3), np.zeros(3)]
    y = integrate.solve_ivp(rhs, (0.0, HOLD), y, args=(w1,), method="DOP853", rtol=1e-11, atol=1e-13).y[:, -1]
    y = integrate.solve_ivp(lambda t, v: rhs(t + HOLD, v, w1), (0.0, TOF), y, method="DOP853", rtol=1e-11,
                            atol=1e-13).y[:, -1]
    return thomas_fermi_radii(1e5, w0) * y[:3]


def sizes_xyz(cloud):
    return np.array([cloud.reach_along(e) for e in np.eye(3)])


def test_stepped_trap_condensate_follows_the_scaling_equations(tmp_path):
    res = run(tmp_path, blocks())
    pred = pr.image_prediction(res.shot, only(res.shot, "image"))
    c = pred.cloud
    assert c.size_kind == "Thomas-Fermi radius" and c.at_release is not None
    want = hand_radii()
    assert sizes_xyz(c) == pytest.approx(want, rel=1e-2)
    # a cloud taken at rest in the trap it is released from is another one: the step matters
    at_rest = condensate_radius_after(1e5, np.sqrt(gaussian_beam_omega2(P_HOLD, 55e-6, 1064e-9, 0)), TOF)
    assert abs(at_rest / float(np.max(want)) - 1) > 0.05
    text = " ; ".join(r for row in physics_rows(res.shot) if row["kind"] == "image" for r in row["items"])
    assert "not at rest when released" in text and "(x, y, z)" in text
    got = text.split("Thomas-Fermi radii ", 1)[1].split(" um (x, y, z)")[0]
    assert [float(v) for v in got.split(" x ")] == pytest.approx(want * 1e6, rel=1.5e-2)


@pytest.mark.parametrize("probe_dir,fires", [("[1, 0, 0]", True), ("[0, 1, 0]", False)])
def test_depth_of_field_reads_the_extent_along_the_line_of_sight(tmp_path, probe_dir, fires):
    want = hand_radii()
    x_long, y_thin = want[0], want[1]
    assert x_long > 3 * y_thin  # a cigar along the guide
    dof = x_long + 2 * y_thin  # between the two depths, 2 R_y and 2 R_x
    rig = RIG.replace("depth_of_field: 1.5 mm", f"depth_of_field: {dof * 1e3:.6f} mm")
    rig = rig.replace("power_channel: probe_power, direction: [0, 1, 0]", f"power_channel: probe_power, direction: {probe_dir}")
    res = run(tmp_path, blocks(), rig=rig)
    hits = [f for f in res.findings if f.code == "physics.cloud-out-of-focus"]
    assert bool(hits) is fires
    if fires:  # looking along the cigar: it spans 2 R_x about the focal plane (it is centred on it)
        assert dict(hits[0].data)["extent_m"] == pytest.approx(2 * x_long, rel=1e-2)


@pytest.mark.parametrize("coil,axis", [("sg_coil", 2), ("kick_coil", 0)])
def test_separation_width_is_the_width_along_the_separation(tmp_path, coil, axis):
    # a pi/2 pulse, then the gradient after the release: the components part along the coil's direction, and
    # their rms width along it is R_axis / sqrt(7)
    # on the line (Breit-Rabi at the rig's bias): without a frequency the synth would play its idle one
    line = abs(breit_rabi_hz(2, -2, BIAS) - breit_rabi_hz(1, -1, BIAS))
    pulse = ("clock_pulse: {drive: mw, angle: pi/2, duration: 50 us, frequency: " f"{line:.3f} Hz, "
             "transition: [{F: 1, mF: -1}, {F: 2, mF: -2}]}")
    body = blocks(pulse).replace("  - name: image\n", f"  - name: split\n    after: release + 0.5 ms\n    actions:\n"
                        f"      - separate: {{coil: {coil}, gradient: 20 G/cm, duration: 2 ms}}\n  - name: image\n")
    res = run(tmp_path, body)
    shot = res.shot
    rep = pr.separation_analysis(shot, only(shot, "separate"))
    assert rep.pair is not None
    way = np.zeros(3)
    way[axis] = 1.0
    assert np.abs(rep.direction) == pytest.approx(way)
    assert rep.sigma == pytest.approx(hand_radii()[axis] / math.sqrt(7), rel=1e-2)
    # velocities at the image: the fall and the Stern-Gerlach kick (uniform acceleration mu b' / m for 2 ms),
    # |B| growing along the coil's field_grows_along (rig: +z for sg_coil, -x for kick_coil)
    pred = pr.image_prediction(shot, only(shot, "image"))
    grows = {"sg_coil": np.array([0.0, 0.0, 1.0]), "kick_coil": np.array([-1.0, 0.0, 0.0])}[coil]
    for comp in pred.components:
        kick = moment(*comp.state) * 0.2 * 2e-3 / MASS * grows
        want = kick + np.array([0.0, 0.0, -G_N * TOF])
        assert comp.velocities[0] == pytest.approx(want, rel=5e-3, abs=1e-9)


@pytest.mark.parametrize("name", ["components_overlap", "components_overlap_long_axis"])
def test_overlap_fix_passes_when_applied(tmp_path, name):
    # the hint's gradient, written in the file, must resolve the components (it is rounded up, never down)
    import re

    src = SEQUENCES / "faults" / f"{name}.yaml"
    text = src.read_text(encoding="utf-8")
    rig = re.search(r"^rig: (.+)$", text, re.M).group(1)
    (tmp_path / "rig.yaml").write_text((src.parent / rig).read_text(encoding="utf-8"), encoding="utf-8")
    first = preflight(src, compile_tables=False)
    (hit,) = [f for f in first.findings if f.code == "physics.components-overlap"]
    fixed = re.search(r"raise the gradient to ([0-9.]+) G/cm", hit.hint).group(1)
    text = re.sub(r"(separate: \{coil: \w+, gradient: )[0-9.]+ G/cm", rf"\g<1>{fixed} G/cm", text)
    seq = tmp_path / "seq.yaml"
    seq.write_text(text.replace(f"rig: {rig}", "rig: rig.yaml"), encoding="utf-8")
    codes = [f.code for f in preflight(seq, compile_tables=False).findings]
    assert "physics.components-overlap" not in codes and "physics.components-separated" in codes
