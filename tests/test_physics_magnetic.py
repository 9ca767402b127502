"""Magnetic trap stages through the pipeline: the `magnetic_hold` action and the checks of
seqgen/check/physics_magnetic.py (physics.state-not-trappable, physics.magnetic-trap-lost,
physics.majorana-loss), against hand formulas; temporary sequences and a temporary rig with
Ioffe-Pritchard coils for the cases the demo rig does not cover.

Atomic data for the hand formulas (Sodium D Line Data compilation; from memory): g_J = 2.00229600,
g_I = -0.00080461080, I = 3/2; mass 22.989769282 u (AME2020, Chinese Physics C 45, 030003 (2021);
from memory). Constants from scipy.constants (CODATA); g_n = 9.80665 m/s^2 (exact, SI Brochure).
Coil calibrations are the demo rig's (our own invented numbers). Moment convention: -dE/dB.
"""

import math

import pytest
from scipy import constants as sc

from seqgen.pipeline import preflight
from seqgen.codes import explain
from seqgen.show import physics_rows

from .conftest import SEQUENCES

MU_B = sc.physical_constants["Bohr magneton"][0]
MASS = 22.989769282 * sc.physical_constants["atomic mass constant"][0]
G_J, G_I, I_NA = 2.00229600, -0.00080461080, 1.5
G_N = 9.80665
RIG_TEXT = (SEQUENCES / "rigs" / "na23_demo_rig.yaml").read_text(encoding="utf-8")
FAULTS = SEQUENCES / "faults"


def g_f(F):
    # hyperfine Lande factor (Rev. Mod. Phys. 49, 31 (1977))
    ff, ii = F * (F + 1), I_NA * (I_NA + 1)
    return G_J * (ff - ii + 0.75) / (2 * ff) + G_I * (ff + ii - 0.75) / (2 * ff)


MOMENT_1M1 = -g_f(1) * (-1) * MU_B  # -dE/dB of |1,-1> at low field: negative (low-field seeker)

IP_CHANNELS = "".join(f"""
  {n}_current:
    device: ao_main
    kind: analog
    output: {{unit: V, range: [0 V, 10 V], bits: 16}}
    calibration: {{quantity: A, linear: {{slope: 0.025 V/A}}}}
    safe: 0 A""" for n in ("ioffe", "pinch", "antibias"))
IP_COILS = """
  ioffe_bars: {current_channel: ioffe_current, gradient_per_amp: 1 G/cm/A, axis: [1, 0, 0]}
  pinch: {current_channel: pinch_current, curvature_per_amp: 0.5 G/cm^2/A, bias_per_amp: 0.1 G/A, axis: [1, 0, 0]}
  antibias: {current_channel: antibias_current, bias_per_amp: -0.1 G/A, axis: [1, 0, 0]}"""
IP_RIG = RIG_TEXT.replace("channels:", "channels:" + IP_CHANNELS, 1).replace("coils:", "coils:" + IP_COILS, 1)


def run(tmp_path, body, *, sample="{species: Na23, state: {F: 1, mF: -1}, atoms: 3e6, temperature: 40 uK}",
        rig=RIG_TEXT, compile_tables=False):
    (tmp_path / "rigs").mkdir(exist_ok=True)
    (tmp_path / "rigs" / "rig.yaml").write_text(rig, encoding="utf-8")
    seq = tmp_path / "seq.yaml"
    seq.write_text(f"seqgen: 1\nrig: rigs/rig.yaml\nsample: {sample}\nblocks:\n  - name: catch\n    at: 1 ms\n"
                   f"    actions:\n{body}", encoding="utf-8")
    return preflight(seq, compile_tables=compile_tables)


def hold(currents, duration="200 ms", extra=""):
    inner = ", ".join(f"{k}: {v}" for k, v in currents.items())
    coils = ", ".join(currents)
    return (f"      - magnetic_hold: {{currents: {{{inner}}}, duration: {duration}{extra}}}\n"
            f"      - release: {{coils: [{coils}]}}\n")


def codes(res, prefix="physics."):
    return sorted(f.code for f in res.findings if f.code.startswith(prefix))


def only(res, code):
    hits = [f for f in res.findings if f.code == code]
    assert len(hits) == 1, [(f.code, f.message) for f in res.findings]
    return hits[0]


# --------------------------------------------------------------------------- quadrupole, the demo rig's coils

def test_trap_lost_fault_against_levitation_formula():
    # sg_coil: 0.4 G/cm/A along z (demo rig), 15 A -> 6 G/cm axial; holds iff |mu| G >= m g_n
    res = preflight(FAULTS / "magnetic_trap_lost.yaml", compile_tables=False)
    f = only(res, "physics.magnetic-trap-lost")
    data = dict(f.data)
    assert data["support"] == pytest.approx(abs(MOMENT_1M1) * 15 * 0.4e-2 / (MASS * G_N), rel=1e-4)
    # levitation gradient m g_n / |mu|: ~8.05 G/cm with g_I (m g / (mu_B/2) = 8.07 G/cm without)
    assert data["levitation_gradient_t_m"] == pytest.approx(MASS * G_N / abs(MOMENT_1M1), rel=1e-4)
    assert f.severity == "error" and f.line == 9 and "20.1" in f.hint  # the current that would hold: 20.1 A


def test_levitation_threshold_of_a_vertical_coil(tmp_path):
    need_amps = MASS * G_N / abs(MOMENT_1M1) / 0.4e-2  # ~20.1 A through sg_coil
    assert "physics.magnetic-trap-lost" in codes(run(tmp_path, hold({"sg_coil": f"{0.98 * need_amps:.4f} A"})))
    assert codes(run(tmp_path, hold({"sg_coil": f"{1.02 * need_amps:.4f} A"}))) == []


def test_horizontal_coil_needs_twice_the_gradient(tmp_path):
    # kick_coil (0.25 G/cm/A) has a horizontal axis: gravity meets half its axial gradient (div B = 0),
    # so Na-23 |1,-1> needs ~16.1 G/cm along the axis, i.e. ~64.4 A
    need_amps = 2 * MASS * G_N / abs(MOMENT_1M1) / 0.25e-2
    assert need_amps == pytest.approx(64.4, abs=0.2)
    assert "physics.magnetic-trap-lost" in codes(run(tmp_path, hold({"kick_coil": f"{0.98 * need_amps:.4f} A"})))
    assert codes(run(tmp_path, hold({"kick_coil": f"{1.02 * need_amps:.4f} A"}))) == []


def test_majorana_fault_lifetime_hand_formula():
    # lifetime m l^2 / hbar, l = k_B T / (|mu| b'), b' = G/2 across the axis
    # (loss rate ~ hbar/(m l^2), Phys. Rev. Lett. 74, 3352 (1995), from memory)
    res = preflight(FAULTS / "magnetic_majorana.yaml", compile_tables=False)
    f = only(res, "physics.majorana-loss")
    size = sc.k * 1.1e-6 / (abs(MOMENT_1M1) * 50 * 0.4e-2 / 2)
    assert dict(f.data)["lifetime_s"] == pytest.approx(MASS * size ** 2 / sc.hbar, rel=1e-4)
    assert f.severity == "warning" and f.line == 9


def test_majorana_only_when_the_hold_outlasts_the_lifetime(tmp_path):
    cold = "{species: Na23, state: {F: 1, mF: -1}, atoms: 3e5, temperature: 1.1 uK}"
    size = sc.k * 1.1e-6 / (abs(MOMENT_1M1) * 50 * 0.4e-2 / 2)
    tau = MASS * size ** 2 / sc.hbar  # ~0.39 s
    assert codes(run(tmp_path, hold({"sg_coil": "50 A"}, f"{0.9 * tau:.4f} s"), sample=cold)) == []
    assert codes(run(tmp_path, hold({"sg_coil": "50 A"}, f"{1.1 * tau:.4f} s"), sample=cold)) == ["physics.majorana-loss"]


def test_not_trappable_fault_and_states(tmp_path):
    f = only(preflight(FAULTS / "magnetic_not_trappable.yaml", compile_tables=False), "physics.state-not-trappable")
    assert "high-field seeker" in f.message and f.line == 9
    # the low-field seekers of Na-23 at low field: g_F m_F > 0 (Rev. Mod. Phys. 49, 31 (1977))
    for s in ("|F=1, mF=-1>", "|F=2, mF=+1>", "|F=2, mF=+2>"):
        assert s in f.hint
    # mF = 0 has no first-order moment (common practice, no source)
    clock = "{species: Na23, state: {F: 1, mF: 0}, atoms: 3e6, temperature: 40 uK}"
    f0 = only(run(tmp_path, hold({"sg_coil": "40 A"}), sample=clock), "physics.state-not-trappable")
    assert "no magnetic moment" in f0.message
    # the hold's own state wins over the sample's
    assert codes(run(tmp_path, hold({"sg_coil": "40 A"}, extra=", state: {F: 1, mF: -1}"), sample=clock)) == []
    assert codes(run(tmp_path, hold({"sg_coil": "40 A"}, extra=", state: {F: 2, mF: -2}"))) == \
        ["physics.state-not-trappable"]  # g_F = +1/2, mF = -2: high-field seeker


def test_hybrid_trap_skips_the_gravity_error(tmp_path):
    # with the crossed optical trap still on, a weak quadrupole is a hybrid trap, not a lost one
    body = ("      - set: {channel: cross_a_power, value: 3 W}\n      - set: {channel: cross_b_power, value: 3 W}\n"
            + hold({"sg_coil": "5 A"}))
    res = run(tmp_path, body)
    assert "physics.magnetic-trap-lost" not in codes(res)
    row = next(r for r in physics_rows(res.shot) if r["kind"] == "magnetic_hold")
    assert any("hybrid" in item for item in row["items"])


def test_report_rows_and_ramp_on(tmp_path):
    res = run(tmp_path, hold({"sg_coil": "40 A"}, "300 ms", ", ramp_on: 20 ms, shape: smooth"), compile_tables=True)
    assert res.ok
    ramps = [s for s in res.shot.segments if s.output == "sg_current" and s.kind == "ramp"]
    assert len(ramps) == 1 and ramps[0].shape == "smooth" and ramps[0].t1 - ramps[0].t0 == pytest.approx(0.02)
    assert res.shot.block("catch").end_s == pytest.approx(1e-3 + 0.32)
    row = next(r for r in physics_rows(res.shot) if r["kind"] == "magnetic_hold")
    text = "; ".join(row["items"])
    # 40 A x 0.4 G/cm/A = 16 G/cm; force / weight = |mu| G / m g_n
    assert "16 G/cm" in text and "low-field seeker" in text
    assert f"{abs(MOMENT_1M1) * 0.16 / (MASS * G_N):.3g}" in text


# --------------------------------------------------------------------------- Ioffe-Pritchard, a temporary rig

def ip_hold(antibias_amps, ioffe="150 A", temperature="10 uK"):
    sample = f"{{species: Na23, state: {{F: 1, mF: -1}}, atoms: 3e6, temperature: {temperature}}}"
    return hold({"ioffe_bars": ioffe, "pinch": "200 A", "antibias": antibias_amps}, "2 s"), sample


def test_ioffe_pritchard_frequencies_in_the_report(tmp_path):
    # B0 = 0.1 G/A x (200 - 195) A = 0.5 G, B' = 150 G/cm, B'' = 100 G/cm^2 (temporary rig, invented numbers);
    # omega_rho = sqrt(mu/m (B'^2/B0 - B''/2)), omega_z = sqrt(mu B''/m) (Phys. Rev. Lett. 51, 1336 (1983))
    body, sample = ip_hold("195 A")
    res = run(tmp_path, body, sample=sample, rig=IP_RIG)
    assert codes(res) == []
    b0, b1, b2 = 0.5e-4, 1.5, 100.0
    mu = abs(MOMENT_1M1)  # at 0.5 G the Breit-Rabi moment differs from the low-field one by < 1e-3
    f_rho = math.sqrt(mu / MASS * (b1 ** 2 / b0 - b2 / 2)) / (2 * math.pi)
    f_z = math.sqrt(mu * b2 / MASS) / (2 * math.pi)
    row = next(r for r in physics_rows(res.shot) if r["kind"] == "magnetic_hold")
    item = next(i for i in row["items"] if i.startswith("trap frequencies"))
    got = [float(x) for x in item.split()[-2].split("/")]
    assert got[0] == pytest.approx(f_rho, rel=2e-3) and got[1] == pytest.approx(f_z, rel=2e-3)
    sag = next(i for i in row["items"] if i.startswith("gravity sag"))
    # horizontal axis: the minimum of m omega_rho^2 x^2 / 2 + m g_n x lies at x = -g_n / omega_rho^2 (derivation)
    assert float(sag.split()[2]) == pytest.approx(G_N / (2 * math.pi * f_rho) ** 2 * 1e6, rel=5e-3)


def test_ioffe_pritchard_low_bias_and_field_zero(tmp_path):
    body, sample = ip_hold("199.9 A")  # B0 = 0.01 G: Larmor ~7 kHz, below 10 x the radial frequency
    f = only(run(tmp_path, body, sample=sample, rig=IP_RIG), "physics.majorana-loss")
    # the currents as played: the nearest code of a 16-bit 0..10 V channel at 0.025 V/A (LSB 10 V / 2^16,
    # IEEE Std 1658-2011);
    # B0 is a small difference of two large currents, so the codes move it by a few per cent
    lsb = 10.0 / 2 ** 16

    def amps(i):
        return round(i * 0.025 / lsb) * lsb / 0.025

    b0, b1, b2 = 1e-5 * (amps(200) - amps(199.9)), 0.01 * amps(150), 0.5 * amps(200)  # T, T/m, T/m^2
    assert f.severity == "warning" and dict(f.data)["bias_t"] == pytest.approx(b0, rel=1e-6)
    # Larmor frequency |g_F| mu_B B0 / h at low field (Rev. Mod. Phys. 49, 31 (1977)) against the radial frequency
    larmor = abs(g_f(1)) * MU_B * b0 / sc.h
    f_rho = math.sqrt(abs(MOMENT_1M1) / MASS * (b1 ** 2 / b0 - b2 / 2)) / (2 * math.pi)
    rotation = b1 * math.sqrt(sc.k * 10e-6 / MASS) / b0 / (2 * math.pi)  # v B'/B0, v = sqrt(k_B T / m)
    assert dict(f.data)["adiabaticity"] == pytest.approx(larmor / max(f_rho, rotation), rel=1e-3)
    body, sample = ip_hold("201 A")  # B0 = -0.1 G: a field zero on the axis
    assert "field zero" in only(run(tmp_path, body, sample=sample, rig=IP_RIG), "physics.majorana-loss").message


def test_ioffe_pritchard_without_ioffe_bars_does_not_confine(tmp_path):
    # B' = 0: the radial curvature B'^2/B0 - B''/2 < 0 (Phys. Rev. Lett. 51, 1336 (1983))
    body, sample = ip_hold("195 A", ioffe="0 A")
    assert "radially" in only(run(tmp_path, body, sample=sample, rig=IP_RIG), "physics.magnetic-trap-lost").message


# --------------------------------------------------------------------------- bad input: findings, never a traceback

@pytest.mark.parametrize("body,code", [
    (hold({"sg_coyl": "40 A"}), "schema.unknown-name"),
    (hold({"sg_coil": "40 V"}), "schema.wrong-dimension"),
    (hold({"sg_coil": "40"}), "schema.missing-unit"),
    (hold({"sg_coil": ".nan"}), "schema.non-finite"),
    (hold({"sg_coil": "40 A"}, "-1 ms"), "schema.negative-duration"),
    (hold({"sg_coil": "40 A"}, extra=", state: {F: 1, mF: 3}"), "schema.bad-sample"),
    ("      - magnetic_hold: {currents: {}, duration: 1 ms}\n", None),
    ("      - magnetic_hold: {currents: {1: 40 A}, duration: 1 ms}\n", None),
    ("      - magnetic_hold: {currents: [sg_coil], duration: 1 ms}\n", None),
    (hold({"sg_coil": "40 A"}, extra=", shape: exponential"), None),
])
def test_bad_holds_give_findings(tmp_path, body, code):
    res = run(tmp_path, body)
    errors = [f for f in res.findings if f.severity == "error"]
    assert errors and not res.ok
    assert all(f.code != "schema.check-crashed" for f in res.findings)
    if code is not None:
        hit = next(f for f in errors if f.code == code)
        assert hit.line == 8, (hit.code, hit.line)
    else:
        assert all(f.code.startswith("schema.") for f in errors)


def test_unknown_coil_hint_names_the_close_one(tmp_path):
    res = run(tmp_path, "      - magnetic_hold: {currents: {sg_coyl: 40 A}, duration: 1 ms}\n")
    f = only(res, "schema.unknown-name")
    assert "sg_coil" in f.hint and f.line == 8 and f.block == "catch"


def test_explain_names_the_sources():
    assert "3352" in explain("physics.majorana-loss")
    assert "1336" in explain("physics.magnetic-trap-lost")
    assert "2082" in explain("physics.state-not-trappable")


def test_rig_coil_without_a_direction_is_not_a_crash(tmp_path):
    rig = RIG_TEXT.replace("gradient_per_amp: 0.4 G/cm/A, axis: [0, 0, 1]", "gradient_per_amp: 0.4 G/cm/A, axis: [0, 0, 0]")
    assert rig != RIG_TEXT
    res = run(tmp_path, hold({"sg_coil": "40 A"}), rig=rig)
    assert all(f.code != "schema.check-crashed" for f in res.findings)
    # the rig file itself is refused at the axis, with its line (a zero vector gives no direction)
    bad = [f for f in res.findings if f.code == "schema.bad-rig"]
    assert bad and "not a direction" in bad[0].message and bad[0].line > 0


def test_a_held_state_that_is_no_ground_level_is_named_with_its_numbers(tmp_path):
    # Na-23 has I = 3/2 (Sodium D Line Data, from memory): its ground levels are F = I -/+ 1/2 = 1 and 2, and
    # mF runs over -F..F; a held F = 5 is neither, and the hold's prediction says so as data, worded by the rule
    res = run(tmp_path, hold({"sg_coil": "40 A"}, extra=", state: {F: 5, mF: 0}"))
    f = only(res, "physics.state-not-trappable")
    assert f.message == "the held state is not a ground level of Na23: ground-state F must be 1 or 2, got 5.0"
    from seqgen.predict import hold_analysis

    act = next(a for a in res.shot.phys if a.kind == "magnetic_hold")
    problem = hold_analysis(res.shot, act).bad_state
    assert (problem.kind, problem.F, problem.nuclear_spin) == ("bad_F", 5, 1.5)
