"""A barrier sheet splits the cloud it meets into transmitted and reflected parts (seqgen.predict.split).

Outside references, written out here: the push's speed v = |mu| b' tau / m with the moment -dE/dB of the
written-out Breit-Rabi formula (Phys. Rev. 38, 2082 (1931); Sodium D Line Data, from memory:
tests/atom_reference.py); uniform acceleration during the push, then free flight (textbook kinematics): the
centre reaches the sheet at d after t_hit = tau + (d - v tau / 2) / v; specular reflection off a thin sheet
reverses the velocity along its normal (one-dimensional scattering: the reflected wave carries momentum
-hbar k, Quantum Mechanics: Non-Relativistic Theory, 3rd ed., Pergamon (1977), section 25), so the reflected
part is at x = d - v (t - t_hit) and the transmitted one at x = v tau / 2 + v (t - t0 - tau). The sheet's
place d and the kick's gradient and duration are read off the rig and sequence files."""

from __future__ import annotations

import numpy as np
from scipy import constants as sc
import pytest
import yaml

import seqgen
from seqgen.predict import REFLECTED, TRANSMITTED, barrier_analysis, predicted_image

from .atom_reference import MASS, moment
from .conftest import SEQUENCES

DEMO = SEQUENCES / "na23_barrier_scatter.yaml"
FAULT = SEQUENCES / "faults" / "barrier_reflected_out_of_view.yaml"
GOOD = SEQUENCES / "good" / "na23_split_parts_in_view.yaml"


def _sheet_x(rig_path):
    rig = yaml.safe_load(rig_path.read_text(encoding="utf-8"))
    return float(rig["beams"]["sheet"]["position"][0])


def _gradient_t_per_m(text, rig_path, coil):
    """The gradient the coil gives as played: the written one's current (gradient_per_amp) through its
    channel's linear calibration onto the nearest code of its DAC (LSB = range / 2^bits, IEEE Std 1658-2011,
    DAC terminology) and back; the units of the rig files are those written there (G/cm, G/cm/A, V/A, V)."""
    value, unit = text.split()
    assert unit == "G/cm"
    rig = yaml.safe_load(rig_path.read_text(encoding="utf-8"))
    per_amp, unit = rig["coils"][coil]["gradient_per_amp"].split()
    assert unit == "G/cm/A"
    out = rig["channels"][rig["coils"][coil]["current_channel"]]
    slope, unit = out["calibration"]["linear"]["slope"].split()
    assert unit == "V/A" and out["output"]["unit"] == "V"
    lo, hi = (float(v.split()[0]) for v in out["output"]["range"])
    lsb = (hi - lo) / 2 ** out["output"]["bits"]
    volts = float(value) / float(per_amp) * float(slope)
    played = lo + round((volts - lo) / lsb) * lsb
    return played / float(slope) * float(per_amp) * 1e-4 / 1e-2


def _parts(path, **overrides):
    res = seqgen.preflight(path, overrides=overrides)
    shot = res.shot
    img = shot.actions("image")[0]
    return res, shot, img, seqgen.image_prediction(shot, img)


def _expected(shot, img, d, gradient):
    """(x transmitted, x reflected, v, t_hit) from the closed forms of the module's doc."""
    kick = shot.actions("push")[0]
    tau = kick.t1 - kick.t0
    v = abs(moment(1, -1)) * gradient * tau / MASS
    assert d > v * tau / 2  # the sheet is reached after the push
    t_hit = kick.t0 + tau + (d - v * tau / 2) / v
    return v * tau / 2 + v * (img.t0 - kick.t0 - tau), d - v * (img.t0 - t_hit), v, t_hit


@pytest.mark.parametrize("tof", ["10 ms", "14 ms"])
def test_demo_parts_sit_where_straight_flight_and_specular_reflection_send_them(tof):
    res, shot, img, pred = _parts(DEMO, tof=tof)
    d = _sheet_x(SEQUENCES / "rigs" / "na23_demo_rig.yaml")
    seq = yaml.safe_load(DEMO.read_text(encoding="utf-8"))
    x_t, x_r, v, t_hit = _expected(shot, img, d, _gradient_t_per_m(seq["params"]["kick_gradient"],
                                                                     SEQUENCES / "rigs" / "na23_demo_rig.yaml", "kick_coil"))
    rep = barrier_analysis(shot, shot.actions("barrier")[0])
    assert rep.passage.push_t0 + rep.passage.centre_arrival == pytest.approx(t_hit, abs=1e-7)
    by = {(c.state, c.split[-1][0]): c for c in pred.components}
    assert len(by) == len(pred.components) == 4
    for state in ((1, -1), (2, -2)):
        t, r = by[(state, TRANSMITTED)], by[(state, REFLECTED)]
        assert t.positions[0][0] == pytest.approx(x_t, rel=1e-4)
        assert r.positions[0][0] == pytest.approx(x_r, rel=1e-4)
        assert x_r < d < x_t  # back on the near side of the sheet
        # across the normal nothing changes: the fall and the Stern-Gerlach kick act on both parts alike
        assert np.allclose(t.positions[0][1:], r.positions[0][1:], rtol=0, atol=1e-12)
        assert t.velocities[0][0] == pytest.approx(v, rel=1e-4)
        assert r.velocities[0][0] == pytest.approx(-v, rel=1e-4)
        assert t.split == (("transmitted", "scatter"),) and r.split == (("reflected", "scatter"),)
    assert not [f for f in res.findings if f.severity in ("error", "warning")]  # the demo stays quiet


def test_demo_fractions_are_T_and_1_minus_T_of_each_state():
    res, shot, img, pred = _parts(DEMO)
    rep = barrier_analysis(shot, shot.actions("barrier")[0])
    assert 0.3 < rep.T < 0.6
    assert sum(c.fraction for c in pred.components) == pytest.approx(1.0, abs=1e-12)
    for state in ((1, -1), (2, -2)):
        t = sum(c.fraction for c in pred.components if c.state == state and c.split[-1][0] == TRANSMITTED)
        r = sum(c.fraction for c in pred.components if c.state == state and c.split[-1][0] == REFLECTED)
        assert t / (t + r) == pytest.approx(rep.T, rel=1e-12)
        assert r / (t + r) == pytest.approx(1 - rep.T, rel=1e-12)
    # the atoms drawn per side are N_T and N_R of the barrier's prediction
    image = predicted_image(shot, img)
    for side, n in ((TRANSMITTED, rep.N_T), (REFLECTED, rep.N_R)):
        assert sum(c.atoms for c in image.components if c.split[-1][0] == side) == pytest.approx(n, rel=1e-12)


def test_only_the_reflected_part_leaves_the_view_in_the_fault_file():
    res, shot, img, pred = _parts(FAULT)
    rig = yaml.safe_load((SEQUENCES / "good" / "rig_na23_split_view.yaml").read_text(encoding="utf-8"))
    camera = rig["imaging"]["camera"]
    half = float(camera["field_of_view"].split()[0]) * 1e-3 / 2
    centre_x = float(camera["center"][0])
    push = yaml.safe_load(FAULT.read_text(encoding="utf-8"))["blocks"][1]["actions"][1]["push"]
    x_t, x_r, _, _ = _expected(shot, img, _sheet_x(SEQUENCES / "good" / "rig_na23_split_view.yaml"),
                               _gradient_t_per_m(push["gradient"], SEQUENCES / "good" / "rig_na23_split_view.yaml",
                                                 push["coil"]))
    assert abs(x_r - centre_x) > abs(x_t - centre_x)
    reach = pred.extents[0]  # the cloud's half-extent along the image's horizontal (both parts keep its size)
    assert abs(x_t - centre_x) + reach < half < abs(x_r - centre_x) + reach
    hits = [f for f in res.findings if f.code == "physics.cloud-outside-view"]
    assert len(hits) == 1 and "reflected by barrier 'scatter'" in hits[0].message
    assert [list(p) for p in dict(hits[0].data)["split"]] == [["reflected", "scatter"]]


def test_both_parts_in_view_raise_nothing():
    res, shot, img, pred = _parts(GOOD)
    assert sorted(c.split[-1][0] for c in pred.components) == [REFLECTED, TRANSMITTED]
    assert not [f for f in res.findings if f.severity in ("error", "warning")]


def test_a_sheet_off_when_the_centre_arrives_splits_nothing(tmp_path):
    # the same file with the sheet on only 5 ms (off before the centre arrives, 16.4 ms after the push starts)
    text = GOOD.read_text(encoding="utf-8").replace("duration: 20 ms, expect", "duration: 5 ms, expect")
    (tmp_path / "rig_na23_split_view.yaml").write_text(
        (SEQUENCES / "good" / "rig_na23_split_view.yaml").read_text(encoding="utf-8"), encoding="utf-8")
    (tmp_path / "seqgen.toml").write_text("", encoding="utf-8")
    path = tmp_path / "short_sheet.yaml"
    path.write_text(text, encoding="utf-8")
    _, _, _, pred = _parts(path)
    assert [c.split for c in pred.components] == [()]
    assert pred.components[0].fraction == pytest.approx(1.0)


def _variant(tmp_path, sheet_power=None, digital_sheet=False, atoms=None):
    """The good split file and its rig copied to tmp_path, with the sheet's power, its channel or the atom number
    changed."""
    text = GOOD.read_text(encoding="utf-8")
    if sheet_power:
        text = text.replace("power: 0.48 mW", f"power: {sheet_power}")
    if atoms:
        text = text.replace("atoms: 6e4", f"atoms: {atoms}")
    rig = (SEQUENCES / "good" / "rig_na23_split_view.yaml").read_text(encoding="utf-8")
    if digital_sheet:
        analog = ("  sheet_power:\n    device: ao\n    kind: analog\n    output: {unit: V, range: [0 V, 10 V], bits: 16}\n"
                  "    calibration: {quantity: mW, linear: {slope: 0.1 V/mW}}\n    hard_limit: {min: 0 mW, max: 50 mW}\n"
                  "    safe: 0 mW\n")
        assert analog in rig
        rig = rig.replace(analog, "  sheet_power:\n    device: ao\n    kind: digital\n")
    tmp_path.mkdir(parents=True, exist_ok=True)
    (tmp_path / "rig_na23_split_view.yaml").write_text(rig, encoding="utf-8")
    path = tmp_path / "s.yaml"
    path.write_text(text, encoding="utf-8")
    return path


def test_a_sheet_on_an_on_off_line_is_played_at_its_written_power(tmp_path):
    # a digital power line plays 0 or 1: the barrier switches it on, and the sheet's height is that of the
    # written power, as with the analog channel (V0 proportional to the power, Adv. At. Mol. Opt. Phys. 42, 95
    # (2000)); the analog channel plays 0.48 mW to its 16-bit step (0.15 uW in 1 mV/0.1 V/mW: 3e-4 relative)
    analog = seqgen.preflight(_variant(tmp_path / "a"))
    digital = seqgen.preflight(_variant(tmp_path / "d", digital_sheet=True))
    for res in (analog, digital):
        assert not [f for f in res.findings if f.severity in ("error", "warning")], [f.code for f in res.findings]
    ra = barrier_analysis(analog.shot, analog.shot.actions("barrier")[0])
    rd = barrier_analysis(digital.shot, digital.shot.actions("barrier")[0])
    assert rd.V0 > 0 and rd.V0 == pytest.approx(ra.V0, rel=3e-4)


def test_a_faint_part_of_a_populated_state_is_not_called_empty(tmp_path):
    # a weak sheet lets almost every atom through: the reflected part of |1,-1> falls below the detection floor
    # (100 atoms by default, README), the state itself does not
    res = seqgen.preflight(_variant(tmp_path, sheet_power="0.04 mW", atoms="1e4"))
    shot = res.shot
    img = shot.actions("image")[0]
    rep = barrier_analysis(shot, shot.actions("barrier")[0])
    assert 1e4 * (1 - rep.T) < 100 < 1e4 * rep.T
    comps = seqgen.predict.split_components(shot, img)
    assert [c.split[-1][0] for c in comps.components] == [TRANSMITTED]
    assert comps.empty == ()  # the state holds atoms: it is not listed below the floor


def test_parts_held_by_the_guide_stay_within_its_oscillation(tmp_path):
    # With the guide left on for 700 ms, the atoms oscillate in its weak axial harmonic potential: at speed v
    # they get no farther than v / omega_axial from the start (harmonic motion), plus v per second of flight
    # after the release; the reflected part moves in the same guide at the same speed, so it is held to the same
    # bound the other way. omega_axial^2 = 2 U0 / (m z_R^2) of the 0.65 W, 55 um, 1064 nm guide (Adv. At. Mol.
    # Opt. Phys. 42, 95 (2000); D lines only, so 1 % is allowed)
    from .atom_reference import gaussian_beam_omega2

    path = _variant(tmp_path)
    path.write_text(path.read_text(encoding="utf-8").replace("after: scatter + 6 ms", "after: scatter + 700 ms"),
                    encoding="utf-8")
    res, shot, img, _ = _parts(path)
    push = shot.actions("push")[0]
    rig = tmp_path / "rig_na23_split_view.yaml"
    v = abs(moment(1, -1)) * _gradient_t_per_m("8 G/cm", rig, "push_coil") * (push.t1 - push.t0) / MASS
    omega_axial = np.sqrt(gaussian_beam_omega2(0.65, 55e-6, 1064e-9, 0)[0])
    t_rel = shot.actions("release")[0].t0
    bound = v / omega_axial + v * (img.t0 - t_rel)
    comps = seqgen.predict.split_components(shot, img).components
    along = {c.split[-1][0]: float(c.displacements[0, 0]) for c in comps}
    d, tau = _sheet_x(rig), push.t1 - push.t0
    free_reflected = d - v * (img.t0 - (push.t0 + tau + (d - v * tau / 2) / v))
    assert free_reflected < -2 * bound  # free flight would carry it far beyond the guide's reach
    assert along[TRANSMITTED] == pytest.approx(bound, rel=1e-2)
    assert along[REFLECTED] == pytest.approx(-bound, rel=1e-2)


def test_parts_imaged_too_soon_after_the_split_overlap(tmp_path):
    # the fault file images 0.6 ms after the centre met the sheet: the parts are 2 v (t - t_hit) apart (straight
    # flight against specular reflection), and the share of each beyond the midpoint between them is the
    # Thomas-Fermi line density's tail 1/2 - (15/16)(u - 2u^3/3 + u^5/5), u = (gap / 2) / R (Rev. Mod. Phys.
    # 71, 463 (1999)), for the cloud's radius R along the path (the size prediction, tested on its own)
    path = SEQUENCES / "faults" / "barrier_parts_overlap.yaml"
    res, shot, img, pred = _parts(path)
    rig = SEQUENCES / "good" / "rig_na23_split_view.yaml"
    x_t, x_r, _, _ = _expected(shot, img, _sheet_x(rig), _gradient_t_per_m("8 G/cm", rig, "push_coil"))
    (hit,) = [f for f in res.findings if f.code == "physics.parts-overlap"]
    data = dict(hit.data)
    gap = data["separation_m"]
    assert gap == pytest.approx(x_t - x_r, rel=1e-3)
    u = 0.5 * gap / pred.cloud.reach_along((1.0, 0.0, 0.0))
    assert 0 < u < 1
    assert data["beyond_midpoint"] == pytest.approx(0.5 - 15 / 16 * (u - 2 * u**3 / 3 + u**5 / 5), rel=1e-9)
    assert data["beyond_midpoint"] > 0.02 and hit.severity == "warning"


def test_a_cloud_released_before_it_reaches_the_sheet_falls_under_it():
    # the guide goes off as the push ends: free fall g t^2 / 2 (standard gravity, SI Brochure) from then to the
    # centre's arrival t_hit = tau + (d - v tau / 2) / v, against the sheet's 45 um half-height (its wide waist,
    # vertical for a horizontal sheet across a horizontal path): no split, an error at the barrier
    path = SEQUENCES / "faults" / "barrier_fallen_under.yaml"
    res, shot, img, pred = _parts(path)
    rig = SEQUENCES / "good" / "rig_na23_split_view.yaml"
    _, _, v, t_hit = _expected(shot, img, _sheet_x(rig), _gradient_t_per_m("8 G/cm", rig, "push_coil"))
    t_rel = shot.actions("release")[0].t0
    fall = 0.5 * sc.g * (t_hit - t_rel) ** 2
    assert fall > 20 * 45e-6
    (hit,) = [f for f in res.findings if f.code == "physics.barrier-not-reached"]
    data = dict(hit.data)
    assert data["fall_m"] == pytest.approx(fall, rel=1e-4) and data["sheet_half_height_m"] == pytest.approx(45e-6)
    assert hit.severity == "error" and "passes under the sheet" in hit.message
    assert all(not c.split for c in pred.components)  # nothing meets the sheet: nothing is split
