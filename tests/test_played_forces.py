"""Pushes, Stern-Gerlach separations and the probe are predicted from what the hardware plays (the DAC code the
channel holds, through its calibration), not from the numbers written in the sequence: on a rig of our own
whose coil and probe channels have coarse 8-bit DACs, the kick, the separation and the probe's saturation
follow the played current and power, computed here by hand from the DAC's codes."""

import math
import shutil

import pytest

from seqgen import predict as ps
from seqgen.resolve.sequence import resolve
from seqgen.resolve.sources import load_sources

from .atom_reference import GAMMA_HZ, I_SAT, MASS, moment
from .conftest import SEQUENCES


def dac(value, lo, hi, bits):
    """The value a DAC of 2^bits codes over [lo, hi] plays for `value`: the nearest code, LSB (hi - lo) / 2^bits
    (IEEE Std 1658-2011, DAC terminology)."""
    lsb = (hi - lo) / 2 ** bits
    return lo + min(math.floor((value - lo) / lsb + 0.5), 2 ** bits - 1) * lsb


KICK_A_PER_V, SG_A_PER_V, PROBE_UW_PER_V = 1 / 0.1, 1 / 0.13, 1 / 0.05  # calibrations of the rig below
KICK_T_M_PER_A, SG_T_M_PER_A = 0.25e-2, 0.4e-2  # 0.25 and 0.4 G/cm per A (coils of the demo rig)


@pytest.fixture(scope="module")
def coarse(tmp_path_factory):
    """The barrier demo on a copy of the demo rig whose kick, Stern-Gerlach and probe channels have 8-bit DACs
    (and the Stern-Gerlach calibration 0.13 V/A, so that 35 A falls between codes)."""
    root = tmp_path_factory.mktemp("coarse")
    for part in ("rigs", "common"):
        shutil.copytree(SEQUENCES / part, root / part)
    shutil.copy(SEQUENCES / "na23_barrier_scatter.yaml", root / "demo.yaml")
    rig = root / "rigs" / "na23_demo_rig.yaml"
    text = rig.read_text()
    lines = text.splitlines(keepends=True)
    out, section = [], None
    for line in lines:
        if line.startswith("  ") and not line.startswith("   ") and line.strip().endswith(":"):
            section = line.strip()[:-1]
        if section in ("kick_current", "sg_current", "probe_power") and "bits: 16" in line:
            line = line.replace("bits: 16", "bits: 8")
        if section == "sg_current" and "slope: 0.125 V/A" in line:
            line = line.replace("slope: 0.125 V/A", "slope: 0.13 V/A")
        out.append(line)
    edited = "".join(out)
    assert edited.count("bits: 8") == 3 and "0.13 V/A" in edited
    rig.write_text(edited)
    shot, findings = resolve(load_sources(root / "demo.yaml"))
    assert shot is not None, [f.code for f in findings]
    return shot


def only(shot, kind):
    (act,) = [a for a in shot.phys if a.kind == kind]
    return act


def test_push_follows_the_played_coil_current(coarse):
    act = only(coarse, "push")
    written = act.args["gradient"] / KICK_T_M_PER_A  # 8 G/cm -> 32 A -> 3.2 V
    current = dac(written / KICK_A_PER_V, 0.0, 10.0, 8) * KICK_A_PER_V  # code 82: 3.203125 V, 32.03 A
    assert abs(current / written - 1) > 5e-4  # far enough from the written current to tell them apart
    rep = ps.push_analysis(coarse, act)
    # dv = |mu| b' tau / m, mu = -dE/dB from the Breit-Rabi energies (Phys. Rev. 38, 2082 (1931))
    hand = abs(moment(1, -1)) * KICK_T_M_PER_A * current * act.args["duration"] / MASS
    assert abs(rep.velocity) == pytest.approx(hand, rel=1e-6)
    assert rep.gradient == pytest.approx(KICK_T_M_PER_A * current, rel=1e-12)


def test_separation_follows_the_played_coil_current(coarse):
    act, img = only(coarse, "separate"), only(coarse, "image")
    written = act.args["gradient"] / SG_T_M_PER_A  # 14 G/cm -> 35 A -> 4.55 V
    current = dac(written / SG_A_PER_V, 0.0, 10.0, 8) * SG_A_PER_V  # code 116: 4.53125 V
    assert abs(current / written - 1) > 1e-3
    rep = ps.separation_analysis(coarse, act)
    # relative displacement (mu_1 - mu_2) b' tau (tau / 2 + t_after) / m (uniform force for tau, then free flight)
    tau = act.args["duration"]
    dmu = moment(1, -1) - moment(2, -2)
    hand = abs(dmu) * SG_T_M_PER_A * current / MASS * tau * (tau / 2 + (img.t0 - act.t1))
    assert abs(rep.separation) == pytest.approx(hand, rel=1e-6)


def test_probe_saturation_follows_the_played_power(coarse):
    img = only(coarse, "image")
    written = img.args["probe_power"] * 1e6  # 40 uW -> 2 V on 0..5 V
    power = dac(written / PROBE_UW_PER_V, 0.0, 5.0, 8) * PROBE_UW_PER_V * 1e-6  # code 102: 39.84 uW
    assert abs(power / img.args["probe_power"] - 1) > 1e-3
    rep = ps.probe_analysis(coarse, img)
    # peak intensity of a Gaussian beam 2 P / (pi w^2), w = 2.5 mm (rig), over I_sat
    assert rep.saturation == pytest.approx(2 * power / (math.pi * 2.5e-3 ** 2) / I_SAT, rel=1e-9)
    # resonant scattering rate Gamma/2 s / (1 + s) times the pulse (Atom-Photon Interactions, Wiley 1992)
    s0 = rep.saturation
    rate = 2 * math.pi * GAMMA_HZ / 2 * s0 / (1 + s0)
    assert rep.photons == pytest.approx(rate * img.args["duration"], rel=1e-6)


def test_the_demo_rig_plays_the_written_numbers_to_its_16_bit_step():
    # on the demo's own 16-bit channels the played and written values differ by less than one code in 2^16
    shot, _ = resolve(load_sources(SEQUENCES / "na23_barrier_scatter.yaml"))
    rep = ps.push_analysis(shot, only(shot, "push"))
    assert rep.gradient == pytest.approx(0.08, rel=2 ** -15)
