"""A thermal cloud that is not in equilibrium in the trap the release opens: held in a dimple inside a weak guide,
the dimple switched off and the guide released 30 ms later. Its width along the guide at the image follows each
atom's harmonic motion (x = x0 cos(w t) + v0 sin(w t) / w; Mechanics, 3rd ed., Pergamon (1976), section 21) from
equipartition in the dimple (<x^2> = k_B T / (m w_d^2), <v^2> = k_B T / m), then free flight, not the guide's
equilibrium width sqrt(k_B T / m) / w_g, which a 30 ms hold in a 2 Hz guide is far from."""

import math

import pytest
from scipy import constants as sc

import seqgen

from .atom_reference import MASS, gaussian_beam_omega2
from .conftest import SEQUENCES

T = 200e-9
SEQ = """seqgen: 1
rig: rig.yaml
sample: {species: Na23, state: {F: 1, mF: -1}, atoms: 1e5, temperature: 200 nK, condensed: false}
blocks:
  - name: load
    at: 1 ms
    actions:
      - set: {channel: guide_power, value: 0.65 W}
      - set: {channel: dimple_power, value: 20 mW}
      - hold: {duration: 100 ms}
  - name: guide
    after: load
    actions:
      - set: {channel: dimple_power, value: 0 W}
      - hold: {duration: 30 ms}
  - name: drop
    after: guide
    actions:
      - release: {beams: [guide]}
  - name: image
    after: drop
    actions:
      - set: {channel: probe_shutter, value: 1, at: 0 s}
      - image: {setup: camera, probe_power: 40 uW, duration: 30 us, at: 4 ms}
      - set: {channel: probe_shutter, value: 0, at: 6 ms}
"""


def test_a_thermal_cloud_out_of_equilibrium_expands_from_where_it_was(tmp_path):
    (tmp_path / "rig.yaml").write_text((SEQUENCES / "good" / "rig_na23_split_view.yaml").read_text(encoding="utf-8"),
                                       encoding="utf-8")
    path = tmp_path / "s.yaml"
    path.write_text(SEQ, encoding="utf-8")
    res = seqgen.preflight(path)
    shot = res.shot
    img = shot.actions("image")[0]
    cloud = seqgen.image_prediction(shot, img).cloud
    # frequencies along x (the guide's axis) of the rig's guide (0.65 W, 55 um, along x) and dimple (20 mW,
    # 42 um, along y), both 1064 nm: Gaussian beams (Adv. At. Mol. Opt. Phys. 42, 95 (2000); D lines only)
    guide = gaussian_beam_omega2(0.65, 55e-6, 1064e-9, 0)
    dimple = gaussian_beam_omega2(0.02, 42e-6, 1064e-9, 1)
    w_d, w_g = math.sqrt(guide[0] + dimple[0]), math.sqrt(guide[0])
    V = sc.k * T / MASS
    X = V / w_d**2
    hold = 30e-3
    c, s = math.cos(w_g * hold), math.sin(w_g * hold)
    X, V, C = X * c * c + V * s * s / w_g**2, X * w_g**2 * s * s + V * c * c, (-X * w_g + V / w_g) * s * c
    tof = img.t0 - shot.actions("release")[0].t0
    expected = math.sqrt(X + 2 * C * tof + V * tof * tof)
    assert cloud.rms_along((1.0, 0.0, 0.0)) == pytest.approx(expected, rel=0.02)
    assert cloud.rms_along((1.0, 0.0, 0.0)) < 0.3 * math.sqrt(sc.k * T / MASS) / w_g  # far from the guide's equilibrium
