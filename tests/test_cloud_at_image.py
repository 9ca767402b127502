"""Where the clouds are at an image, and which states the atoms are in (seqgen.predict `image_prediction`,
`populations`, `components_at` and the rules that read them: the three imaging checks in
seqgen/check/physics_trapr.py, physics.transition-unpopulated), through the pipeline on temporary sequences,
against hand formulas.

The rig is a copy of the demo rig in tmp_path with our own Stern-Gerlach coil, probe beam and camera lines,
so the demo's numbers may change without touching these tests. Geometry (the checks' stated assumption):
the camera looks along the probe beam, the image plane is perpendicular to it, z is up.

Hand formulas and data (written out in tests/atom_reference.py, never taken from seqgen): Breit-Rabi formula
(Phys. Rev. 38, 2082 (1931)) with the Sodium D Line Data values (from memory); moment = -dE/dB;
force = moment x grad|B|, uniform acceleration during a pulse then free flight, free fall g_n t^2 / 2
(g_n from scipy.constants, exact by the SI Brochure); Rabi formula (Phys. Rev. 51, 652 (1937)); Thomas-Fermi
radius R = sqrt(2 mu / (m omega^2)) (Rev. Mod. Phys. 71, 463 (1999)) and its scaling expansion (Phys. Rev.
Lett. 77, 5315 (1996)); thermal ballistic expansion sigma^2 = sigma_0^2 + k_B T t^2 / m (free flight of a
Maxwell-Boltzmann velocity distribution uncorrelated with position) with sigma_0 = sqrt(k_B T / (m omega^2))
(equipartition: m omega^2 <x^2> / 2 = k_B T / 2); Ioffe-Pritchard frequencies omega_rho^2 = |mu|/m
(B'^2/B0 - B''/2), omega_z^2 = |mu| B''/m (Phys. Rev. Lett. 51, 1336 (1983), from memory); Gaussian-beam trap
frequencies from the dipole potential (Adv. At. Mol. Opr. Phys. 42, 95 (2000)); the rms width 2 k_B T / (|mu| b')
of a linear trap is checked against the Boltzmann integral in tests/physics/test_kinematics.py. Constants:
scipy.constants.
"""

import math
import re

import numpy as np
import pytest
from scipy import constants as sc

from seqgen import predict as pr
from seqgen.pipeline import preflight
from seqgen.show import physics_rows

from .conftest import SEQUENCES
from .atom_reference import (BIAS, G_N, MASS, breit_rabi_hz, condensate_radius_after, gaussian_beam_omega2, moment,
                             thermal_width_after)

BASE_RIG = (SEQUENCES / "rigs" / "na23_demo_rig.yaml").read_text(encoding="utf-8")
SG_UP = ("  sg_coil:   {current_channel: sg_current, gradient_per_amp: 0.4 G/cm/A, axis: [0, 0, 1], "
         "field_grows_along: [0, 0, 1], max_current: 60 A, continuous_current: 20 A}")
SG_UNKNOWN = ("  sg_coil:   {current_channel: sg_current, gradient_per_amp: 0.4 G/cm/A, axis: [0, 0, 1], "
              "max_current: 60 A, continuous_current: 20 A}")
KICK = ("  kick_coil: {current_channel: kick_current, gradient_per_amp: 0.25 G/cm/A, axis: [1, 0, 0], "
        "field_grows_along: [-1, 0, 0], max_current: 80 A, continuous_current: 25 A}")
PROBE = ("  probe:   {{wavelength: 589.158 nm, waist: 2.5 mm, power_channel: probe_power, direction: {d}, "
         "role: probe}}")
CAMERA = ("  side_camera: {{probe_beam: probe, camera_channel: camera, pixel_size: 6.5 um, magnification: 2.0, "
          "field_of_view: {fov}, depth_of_field: {dof}, center: {center}, aperture_radius: 6 mm}}")
CONDENSATE = ("{species: Na23, state: {F: 1, mF: -1}, atoms: 1.2e5, temperature: 80 nK, condensed: true, "
              "trap_frequencies: [340 Hz, 340 Hz, 480 Hz]}")
THERMAL = "{species: Na23, state: {F: 1, mF: -1}, atoms: 1e5, temperature: 50 nK, trap_frequencies: [340 Hz, 340 Hz, 480 Hz]}"


def _line(text, key, new):
    pattern = re.compile(rf"^  {key}:.*$", re.M)
    assert len(pattern.findall(text)) == 1, key
    return pattern.sub(lambda m: new, text)


def rig_text(sg=SG_UP, probe_dir="[0, 1, 0]", fov="4 mm", dof="1.5 mm", center="[0, 0, 0]", extra=None):
    text = _line(BASE_RIG, "sg_coil", sg)
    text = _line(text, "kick_coil", KICK)
    text = _line(text, "probe", PROBE.format(d=probe_dir))
    text = _line(text, "side_camera", CAMERA.format(fov=fov, dof=dof, center=center))
    return extra(text) if extra else text


def run(tmp_path, blocks, sample=CONDENSATE, rig=None, name="seq.yaml"):
    (tmp_path / "rig.yaml").write_text(rig or rig_text(), encoding="utf-8")
    seq = tmp_path / name
    seq.write_text(f"seqgen: 1\nrig: rig.yaml\nsample: {sample}\nblocks:\n{blocks}", encoding="utf-8")
    res = preflight(seq, compile_tables=False)
    assert res.shot is not None, [f.code for f in res.findings]
    return res


def codes(res):
    return [f.code for f in res.findings]


def only(shot, kind):
    acts = [a for a in shot.phys if a.kind == kind]
    assert len(acts) == 1
    return acts[0]


def line_of(a, b):
    """|nu| (Hz) of |F, mF> a -> b at the demo rig's bias (Breit-Rabi, tests/atom_reference.py): the pulses write it
    as their frequency, since the synth plays its idle frequency (far off the line) where a pulse writes none."""
    return abs(breit_rabi_hz(*b, BIAS) - breit_rabi_hz(*a, BIAS))


def dac(value, lo, hi, bits):
    """The value a DAC of 2^bits codes over [lo, hi] plays: the nearest code (ties up), LSB (hi - lo) / 2^bits,
    the top code hi - 1 LSB (IEEE Std 1658-2011, DAC terminology)."""
    lsb = (hi - lo) / 2 ** bits
    return lo + min(math.floor((value - lo) / lsb + 0.5), 2 ** bits - 1) * lsb


# the mw synth's 14-bit amplitude word over [0, 1] (rig): a pi/2 pulse of 50 us at 5 kHz per unit amplitude asks
# for amplitude 1, the top of the range, which plays the top code, 1 - 2^-14
MW_FULL = dac(1.0, 0.0, 1.0, 14)


def sg_blocks(pulse="clock_pulse: {drive: mw, angle: pi/2, duration: 50 us, frequency: "
              f"{line_of((1, -1), (2, -2)):.3f} Hz, transition: [{{F: 1, mF: -1}}, {{F: 2, mF: -2}}]}}",
              sg="separate: {coil: sg_coil, gradient: 20 G/cm, duration: 3 ms}", tof="12 ms", sg_after="0.5 ms"):
    return (f"  - name: analyse\n    at: 1 ms\n    actions:\n      - {pulse}\n"
            f"  - name: release\n    after: analyse + 10 us\n    actions:\n      - release: {{}}\n"
            f"  - name: separate\n    after: release + {sg_after}\n    actions:\n      - {sg}\n"
            f"  - name: image\n    after: release + {tof}\n    actions:\n"
            f"      - image: {{setup: side_camera, probe_power: 40 uW, duration: 30 us, exposure: 60 us}}\n")


def tof_of(shot):
    """Time of flight from the resolved release and image times (the resolve stage's, not the prediction's)."""
    return only(shot, "image").t0 - only(shot, "release").t0


def condensate_edge(shot):
    """Thomas-Fermi radius at the image of CONDENSATE (1.2e5 atoms, 340/340/480 Hz), hand formulas."""
    return condensate_radius_after(1.2e5, 2 * math.pi * np.array([340.0, 340.0, 480.0]), tof_of(shot))


def sg_hand_z(shot, state, sign=1.0):
    """Height at the image: free fall plus the Stern-Gerlach pulse's uniform acceleration, then free flight."""
    rel, sep, img = only(shot, "release"), only(shot, "separate"), only(shot, "image")
    tau, after, tof = sep.t1 - sep.t0, img.t0 - sep.t1, img.t0 - rel.t0
    acc = sign * moment(*state) * abs(sep.args["gradient"]) / MASS  # |B| grows upwards (+z) for sign +1
    return -0.5 * G_N * tof**2 + acc * tau * (tau / 2 + after)


# --------------------------------------------------------------------------- Stern-Gerlach components


def test_separated_components_sit_where_the_moments_send_them(tmp_path):
    res = run(tmp_path, sg_blocks())
    shot = res.shot
    pred = pr.image_prediction(shot, only(shot, "image"))
    by_state = {c.state: c for c in pred.components}
    assert set(by_state) == {(1, -1), (2, -2)}
    for st, comp in by_state.items():
        # a resonant pi/2 pulse: Rabi formula sin^2(pi/4) = 1/2 in each state, at the played amplitude
        p = math.sin(math.pi / 4 * MW_FULL) ** 2
        assert comp.fraction == pytest.approx(p if st == (2, -2) else 1 - p, abs=1e-9)
        assert comp.positions.shape == (1, 3)  # the coil says where |B| grows: one case
        assert comp.positions[0, 2] == pytest.approx(sg_hand_z(shot, st), rel=1e-6)
        assert comp.positions[0, :2] == pytest.approx([0.0, 0.0], abs=1e-15)
    # |2,-2> (moment ~ +mu_B, high-field seeker) goes up, |1,-1> (~ -mu_B/2) down
    assert by_state[(2, -2)].positions[0, 2] > -0.5 * G_N * tof_of(shot) ** 2 > by_state[(1, -1)].positions[0, 2]
    # both inside the 2 mm half field of view with their Thomas-Fermi radius: quiet
    assert "physics.cloud-outside-view" not in codes(res)
    rows = [r for r in physics_rows(shot) if r["kind"] == "image"]
    text = " ; ".join(rows[0]["items"])
    assert "|F=1, mF=-1> (50 % of the atoms)" in text and "|F=2, mF=-2> (50 % of the atoms)" in text
    assert "camera looks along [0, 1, 0]" in text


def test_separation_out_of_view_fires_where_free_fall_alone_would_not(tmp_path):
    # a longer flight: |1,-1> falls g t^2/2 and is pulled down by the gradient on top
    res = run(tmp_path, sg_blocks(sg="separate: {coil: sg_coil, gradient: 20 G/cm, duration: 4 ms}", tof="14 ms"))
    shot = res.shot
    half = 2e-3
    pred = pr.image_prediction(shot, only(shot, "image"))
    z_down = sg_hand_z(shot, (1, -1))
    edge = condensate_edge(shot)
    # the scaling solution integrated here and in seqgen agree to the ODE tolerance
    assert pred.edge == pytest.approx(edge, rel=1e-5)
    assert abs(z_down) + edge > half > 0.5 * G_N * tof_of(shot) ** 2 + edge
    hits = [f for f in res.findings if f.code == "physics.cloud-outside-view"]
    assert len(hits) == 1 and "|F=1, mF=-1>" in hits[0].message and "separate" in hits[0].message
    assert hits[0].data and dict(hits[0].data)["reach_m"] == pytest.approx(abs(z_down) + edge, rel=1e-5)


def test_unknown_gradient_direction_checks_both_ways(tmp_path):
    blocks = sg_blocks()
    (tmp_path / "known").mkdir()
    (tmp_path / "unknown").mkdir()
    assert "physics.cloud-outside-view" not in codes(run(tmp_path / "known", blocks))
    res = run(tmp_path / "unknown", blocks, rig=rig_text(sg=SG_UNKNOWN))
    shot = res.shot
    pred = pr.image_prediction(shot, only(shot, "image"))
    assert pred.unknown and "sg_coil" in pred.unknown[0]
    comp = {c.state: c for c in pred.components}[(2, -2)]
    got = sorted(comp.positions[:, 2])
    want = sorted(sg_hand_z(shot, (2, -2), s) for s in (1.0, -1.0))
    assert got == pytest.approx(want, rel=1e-6)
    # pulled down instead of up, |2,-2> leaves the view: the conservative reading fires
    assert abs(want[0]) + condensate_edge(shot) > 2e-3
    hits = [f for f in res.findings if f.code == "physics.cloud-outside-view"]
    assert len(hits) == 1 and "both ways checked" in hits[0].message and "|F=2, mF=-2>" in hits[0].message


# --------------------------------------------------------------------------- pushes and the image plane

PUSH = ("  - name: release\n    at: 1 ms\n    actions:\n      - release: {}\n"
        "  - name: kick\n    after: release + 0.5 ms\n    actions:\n"
        "      - push: {coil: kick_coil, gradient: 16 G/cm, duration: 4 ms}\n"
        "  - name: image\n    after: release + 14 ms\n    actions:\n"
        "      - image: {setup: side_camera, probe_power: 40 uW, duration: 30 us, exposure: 60 us}\n")


def push_hand_x(shot):
    kick, img = only(shot, "push"), only(shot, "image")
    tau, after = kick.t1 - kick.t0, img.t0 - kick.t1
    # |B| grows along -x (rig), |1,-1> has moment < 0: pushed along +x
    return -moment(1, -1) * abs(kick.args["gradient"]) / MASS * tau * (tau / 2 + after)


@pytest.mark.parametrize("probe_dir,outside,blurred", [("[0, 1, 0]", True, False), ("[1, 0, 0]", False, True)])
def test_push_across_the_line_of_sight_leaves_the_view_along_it_the_focus(tmp_path, probe_dir, outside, blurred):
    # the camera is centred on the fall (center z = -g t^2/2), its field of view is 1.6 mm: only the push can
    # take the cloud out of it
    fall = 0.5 * G_N * (14e-3 + 0.0) ** 2
    rig = rig_text(probe_dir=probe_dir, fov="1.6 mm", dof="1.5 mm", center=f"[0, 0, {-fall:.9f}]")
    res = run(tmp_path, PUSH, sample=THERMAL, rig=rig)
    shot = res.shot
    pred = pr.image_prediction(shot, only(shot, "image"))
    (comp,) = pred.components
    x = push_hand_x(shot)
    assert comp.positions[0] == pytest.approx([x, 0.0, -0.5 * G_N * tof_of(shot) ** 2], rel=1e-6, abs=1e-12)
    # thermal cloud: sigma^2 = sigma_0^2 + k_B T t^2 / m, sigma_0 from the largest width in the trap
    sigma0 = math.sqrt(sc.k * 50e-9 / MASS) / (2 * math.pi * 340)
    sigma = thermal_width_after(sigma0, 50e-9, tof_of(shot))
    assert pred.cloud.size == pytest.approx(sigma, rel=1e-3)  # Na-23 mass of the species table vs AME2020
    edge = 2 * sigma
    assert (abs(x) + edge > 0.8e-3) and (2 * (abs(x) + edge) > 1.5e-3)  # the numbers that decide both cases
    assert ("physics.cloud-outside-view" in codes(res)) is outside
    assert ("physics.cloud-out-of-focus" in codes(res)) is blurred
    if blurred:
        hit = [f for f in res.findings if f.code == "physics.cloud-out-of-focus"][0]
        assert "from the focal plane" in hit.message


# --------------------------------------------------------------------------- magnetic release


HOLD = ("  - name: hold\n    at: 1 ms\n    actions:\n"
        "      - magnetic_hold: {{currents: {{{coil}: 50 A}}, duration: 100 ms}}\n"
        "      - release: {{coils: [{coil}]}}\n"
        "  - name: image\n    after: hold + {tof}\n    actions:\n"
        "      - image: {{setup: side_camera, probe_power: 40 uW, duration: 30 us, exposure: 60 us}}\n")


def test_release_from_a_quadrupole_has_the_boltzmann_size(tmp_path):
    temp = 2e-6
    res = run(tmp_path, HOLD.format(coil="sg_coil", tof="3 ms"),
              sample=f"{{species: Na23, state: {{F: 1, mF: -1}}, atoms: 3e5, temperature: {temp * 1e6:g} uK}}")
    shot = res.shot
    pred = pr.image_prediction(shot, only(shot, "image"))
    c = pred.cloud
    assert c is not None and c.trap == "quadrupole" and c.trap_block == "hold"
    # 50 A x 0.4 G/cm/A = 20 G/cm along the vertical axis, 10 G/cm across it; moment at the field zero. The
    # Boltzmann density exp(-(|mu| |B(r)| + m g z) / k_B T) with |B| = b' sqrt(rho^2 + 4 z^2), b' = 10 G/cm,
    # integrated here in cylindrical coordinates (scipy dblquad): gravity stretches the cloud beyond the
    # no-gravity rms 2 k_B T / (|mu| b') across the axis
    from scipy.integrate import dblquad

    b1, mu, weight = 50 * 0.4 * 0.01 / 2, abs(moment(1, -1, 0.0)), MASS * sc.g

    def density(rho, z):
        return rho * np.exp(-(mu * b1 * np.hypot(rho, 2 * z) + weight * z) / (sc.k * temp))

    span = 60 * sc.k * temp / (mu * b1)
    norm = dblquad(density, -span, span, 0, span)[0]
    x2 = dblquad(lambda rho, z: density(rho, z) * rho**2 / 2, -span, span, 0, span)[0] / norm
    zm = dblquad(lambda rho, z: density(rho, z) * z, -span, span, 0, span)[0] / norm
    z2 = dblquad(lambda rho, z: density(rho, z) * z**2, -span, span, 0, span)[0] / norm - zm**2
    assert math.sqrt(x2) > 1.05 * 2 * sc.k * temp / (mu * b1)  # gravity matters at this support
    expected = max(thermal_width_after(math.sqrt(v), temp, tof_of(shot)) for v in (x2, z2))
    assert c.size == pytest.approx(expected, rel=5e-3)
    items = " ; ".join(r for row in physics_rows(shot) if row["kind"] == "image" for r in row["items"])
    assert "released from the magnetic trap of block 'hold' (linear quadrupole)" in items


IP_CHANNEL = """
  ip_current:
    device: ao_main
    kind: analog
    output: {unit: V, range: [0 V, 10 V], bits: 16}
    calibration: {quantity: A, linear: {slope: 0.1 V/A}}
    safe: 0 A"""
IP_COIL = ("\n  ip_coil: {current_channel: ip_current, gradient_per_amp: 2 G/cm/A, bias_per_amp: 0.02 G/A, "
           "curvature_per_amp: 2 G/cm^2/A, axis: [1, 0, 0]}")


def test_release_from_an_ioffe_pritchard_trap_uses_its_frequencies(tmp_path):
    temp = 1e-6
    rig = rig_text(extra=lambda t: t.replace("channels:", "channels:" + IP_CHANNEL, 1).replace("coils:", "coils:" + IP_COIL, 1))
    res = run(tmp_path, HOLD.format(coil="ip_coil", tof="5 ms"), rig=rig,
              sample=f"{{species: Na23, state: {{F: 1, mF: -1}}, atoms: 3e5, temperature: {temp * 1e6:g} uK}}")
    shot = res.shot
    pred = pr.image_prediction(shot, only(shot, "image"))
    c = pred.cloud
    assert c is not None and c.trap == "ioffe_pritchard" and c.trap_block == "hold"
    amps = dac(50 * 0.1, 0.0, 10.0, 16) / 0.1  # 50 A as the 16-bit 0..10 V channel (0.1 V/A) plays it
    b0, b1, b2 = amps * 0.02e-4, amps * 2 * 0.01, amps * 2.0  # T, T/m, T/m^2
    mu = abs(moment(1, -1, b0))
    w_z = math.sqrt(mu * b2 / MASS)
    w_rho = math.sqrt(mu / MASS * (b1**2 / b0 - b2 / 2))
    assert sorted(c.omegas) == pytest.approx(sorted([w_rho, w_rho, w_z]), rel=1e-6)
    sigma0 = math.sqrt(sc.k * temp / (MASS * w_z**2))  # the weak axis holds the widest cloud
    assert c.size == pytest.approx(thermal_width_after(sigma0, temp, tof_of(shot)), rel=1e-3)


def test_unknown_trap_is_said_and_the_centre_still_checked(tmp_path):
    # nothing holds the atoms before the release and the sample gives no trap frequencies: no size,
    # but a 30 ms fall, g t^2/2 = 4.4 mm, is beyond the 2 mm half field of view by itself
    blocks = ("  - name: release\n    at: 1 ms\n    actions:\n      - release: {}\n"
              "  - name: image\n    after: release + 30 ms\n    actions:\n"
              "      - image: {setup: side_camera, probe_power: 40 uW, duration: 30 us, exposure: 60 us}\n")
    res = run(tmp_path, blocks, sample="{species: Na23, state: {F: 1, mF: -1}, atoms: 1e5, temperature: 1 uK}")
    shot = res.shot
    pred = pr.image_prediction(shot, only(shot, "image"))
    assert pred.cloud is None and pred.why.reason == "no_trap"
    items = " ; ".join(r for row in physics_rows(shot) if row["kind"] == "image" for r in row["items"])
    assert "no size prediction: no trap is known" in items
    hits = [f for f in res.findings if f.code == "physics.cloud-outside-view"]
    assert len(hits) == 1 and "cloud size unknown" in hits[0].message
    assert dict(hits[0].data)["reach_m"] == pytest.approx(0.5 * G_N * tof_of(shot) ** 2, rel=1e-9)


def test_in_situ_image_says_so(tmp_path):
    blocks = ("  - name: image\n    at: 1 ms\n    actions:\n"
              "      - image: {setup: side_camera, probe_power: 40 uW, duration: 30 us, exposure: 60 us}\n")
    res = run(tmp_path, blocks)
    items = [r for row in physics_rows(res.shot) if row["kind"] == "image" for r in row["items"]]
    assert any("no release before the image" in r for r in items)


# --------------------------------------------------------------------------- which states the atoms are in


def pulse(angle, transition, at="at: 1 ms", name="p1"):
    return (f"  - name: {name}\n    {at}\n    actions:\n      - clock_pulse: {{drive: mw, angle: {angle}, duration: "
            f"{'100 us' if angle == 'pi' else '50 us'}, frequency: {_line_text(transition):.3f} Hz, transition: {transition}}}\n")


def _line_text(transition):
    """The line of a transition written as '[{F: a, mF: b}, {F: c, mF: d}]'."""
    f = [int(x) for x in re.findall(r"-?\d+", transition)]
    return line_of((f[0], f[1]), (f[2], f[3]))


T_1M1_2M2 = "[{F: 1, mF: -1}, {F: 2, mF: -2}]"
T_1M1_2M1 = "[{F: 1, mF: -1}, {F: 2, mF: -1}]"


def test_pi_pulse_empties_the_sample_state(tmp_path):
    # resonant pi pulse (frequency on the line), Omega t = 2 pi x 5 kHz x 100 us = pi: transfer 1
    # (Rabi formula); then a pulse on |1,-1> -> |2,-1> finds no atoms in either state
    blocks = pulse("pi", T_1M1_2M2) + pulse("pi/2", T_1M1_2M1, at="after: p1 + 10 us", name="p2")
    res = run(tmp_path, blocks)
    shot = res.shot
    p2 = [a for a in shot.phys if a.kind == "clock_pulse"][1]
    fr = pr.state_fractions(shot, p2.t0)
    assert fr[(2, -2)] == pytest.approx(1.0, abs=1e-8)  # the synth plays the line to within half a 0.35 Hz code
    assert pr.populated_states(shot, p2.t0) == [(2, -2)]
    hits = [f for f in res.findings if f.code == "physics.transition-unpopulated"]
    assert len(hits) == 1 and hits[0].block == "p2" and "|F=2, mF=-2> (100 %)" in hits[0].message
    assert hits[0].severity == "warning"


def test_populations_follow_the_rabi_formula(tmp_path):
    # a detuned pi/2 pulse: P = Omega^2 / (Omega^2 + Delta^2) sin^2(sqrt(Omega^2 + Delta^2) t / 2)
    delta = 3e3
    line = abs(breit_rabi_hz(2, -2, BIAS) - breit_rabi_hz(1, -1, BIAS))
    blocks = ("  - name: p1\n    at: 1 ms\n    actions:\n      - clock_pulse: {drive: mw, angle: pi/2, duration: 50 us, "
              f"frequency: {line + delta:.3f} Hz, transition: {T_1M1_2M2}}}\n")
    res = run(tmp_path, blocks)
    shot = res.shot
    # the synth plays the 32-bit code nearest the frequency written (rig: 1.0 GHz .. 2.5 GHz)
    played = dac(float(f"{line + delta:.3f}"), 1.0e9, 2.5e9, 32)
    om, de, t = 2 * math.pi * 5e3 * MW_FULL, 2 * math.pi * (played - line), 50e-6
    w = math.hypot(om, de)
    p = om**2 / w**2 * math.sin(w * t / 2) ** 2
    fr = pr.state_fractions(shot, shot.duration_s + 1.0)
    assert fr[(2, -2)] == pytest.approx(p, abs=1e-6) and fr[(1, -1)] == pytest.approx(1 - p, abs=1e-6)


def test_ramsey_pair_counts_both_states(tmp_path):
    # populations are followed incoherently: after two pi/2 pulses both states count as populated
    blocks = pulse("pi/2", T_1M1_2M2) + pulse("pi/2", T_1M1_2M2, at="after: p1 + 1 ms", name="p2")
    shot = run(tmp_path, blocks).shot
    fr = pr.state_fractions(shot, shot.duration_s + 1.0)
    assert fr[(1, -1)] == pytest.approx(0.5, abs=1e-8) and fr[(2, -2)] == pytest.approx(0.5, abs=1e-8)


def test_separation_follows_the_populated_states(tmp_path):
    # the sample is in |2,+2>; the pulse drives |1,-1> -> |2,-2>: one state only, nothing to separate
    res = run(tmp_path, sg_blocks(), sample=CONDENSATE.replace("{F: 1, mF: -1}", "{F: 2, mF: 2}"))
    shot = res.shot
    assert "physics.transition-unpopulated" in codes(res)
    assert "physics.components-separated" not in codes(res) and "physics.equal-moments" not in codes(res)
    rep = pr.separation_analysis(shot, only(shot, "separate"))
    assert rep.pair is None and tuple(rep.states) == ((2, 2),)
    rows = [r for r in physics_rows(shot) if r["kind"] == "separate"]
    assert "only |F=2, mF=+2> holds atoms: nothing to separate" in rows[0]["items"][0]
    # the image holds one component, |2,+2> (moment ~ -mu_B: pulled down by the gradient that grows upwards)
    pred = pr.image_prediction(shot, only(shot, "image"))
    (comp,) = pred.components
    assert comp.state == (2, 2) and comp.positions[0, 2] == pytest.approx(sg_hand_z(shot, (2, 2)), rel=1e-6)


def test_barrier_drive_makes_its_partner_possibly_populated(tmp_path):
    bar = ("  - name: bar\n    at: 1 ms\n    actions:\n      - barrier: {beam: sheet, power: 0.43 mW, duration: 5 ms, "
           f"modulation: {{channel: sheet_eom, frequency: 1.769946343 GHz, depth: 0.2, transition: {T_1M1_2M1}}}}}\n")
    later = pulse("pi/2", "[{F: 2, mF: -1}, {F: 1, mF: 0}]", at="after: bar + 1 ms", name="p2")
    assert "physics.transition-unpopulated" not in codes(run(tmp_path, bar + later, name="a.yaml"))
    alone = pulse("pi/2", "[{F: 2, mF: -1}, {F: 1, mF: 0}]", at="at: 7 ms", name="p2")
    assert "physics.transition-unpopulated" in codes(run(tmp_path, alone, name="b.yaml"))


# --------------------------------------------------------------------------- the picture


def test_plot_cloud_panel_shows_each_component(tmp_path):
    from seqgen.emit import plot

    res = preflight(_write_for_plot(tmp_path), compile_tables=True)
    fig = plot.timeline_figure(res.shot, res.compiled, res.findings)
    (cloud,) = [ax for ax in fig.axes if ax.get_label() == "physics:cloud"]
    marks = [ln for ln in cloud.get_lines() if ln.get_marker() == "s"]
    heights = sorted(float(ln.get_ydata()[0]) for ln in marks)
    want = sorted(sg_hand_z(res.shot, st) * 1e3 for st in ((1, -1), (2, -2)))
    assert heights == pytest.approx(want, rel=1e-6)
    # the free-fall centre stays the round marker
    centre = [ln for ln in cloud.get_lines() if ln.get_marker() == "o"][0]
    tof = only(res.shot, "image").t0 - only(res.shot, "release").t0
    assert float(centre.get_ydata()[0]) == pytest.approx(-0.5 * G_N * tof**2 * 1e3, rel=1e-9)


def _write_for_plot(tmp_path):
    (tmp_path / "rig.yaml").write_text(rig_text(), encoding="utf-8")
    seq = tmp_path / "plot.yaml"
    seq.write_text(f"seqgen: 1\nrig: rig.yaml\nsample: {CONDENSATE}\nblocks:\n{sg_blocks()}", encoding="utf-8")
    return seq


def test_a_push_inside_a_holding_trap_is_bounded_by_the_oscillation(tmp_path):
    # a kick of v at the centre of a harmonic trap gives x(t) = (v / omega) sin(omega t), so |x| <= v / omega
    # (solution of x'' = -omega^2 x, x(0) = 0, x'(0) = v); after the release the atoms fly at most at v. Free
    # flight from the push to the image (200 ms later) would be v x 0.2 s.
    blocks = ("  - name: load\n    at: 1 ms\n    actions:\n"
              "      - set: {channel: cross_a_power, value: 0.3 W}\n      - set: {channel: cross_b_power, value: 0.3 W}\n"
              "      - hold: {duration: 100 ms}\n"
              "  - name: kick\n    after: load\n    actions:\n"
              "      - push: {coil: kick_coil, gradient: 8 G/cm, duration: 2 ms}\n      - hold: {duration: 200 ms}\n"
              "  - name: release\n    after: kick\n    actions:\n      - release: {}\n"
              "  - name: image\n    after: release + 5 ms\n    actions:\n"
              "      - image: {setup: side_camera, probe_power: 40 uW, duration: 30 us, exposure: 60 us}\n")
    res = run(tmp_path, blocks)
    assert "physics.cloud-outside-view" not in codes(res)
    img = only(res.shot, "image")
    comp = pr.components_at(res.shot, img).components[0]
    dx = float(abs(comp.displacements[0][0]))
    v = abs(moment(1, -1)) * 0.08 * 2e-3 / MASS  # |mu| b' tau / m
    # the crossed trap: cross_a along x and cross_b along y, 0.3 W each, 42 um waists, 1064 nm (rig); harmonic
    # about the centre, so within the gravity sag and anharmonicity (under 0.1 % here) of the minimised trap
    w2 = gaussian_beam_omega2(0.3, 42e-6, 1064e-9, 0) + gaussian_beam_omega2(0.3, 42e-6, 1064e-9, 1)
    w_min = float(np.sqrt(np.min(w2)))
    assert dx == pytest.approx(v / w_min + v * 5e-3, rel=5e-3)  # the bound, far below free flight
    assert dx < 0.1 * v * 0.205
