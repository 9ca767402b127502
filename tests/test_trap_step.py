"""A sudden step of an optical trap (plain sets of trap beams' powers) is checked for the excitation it leaves.

The closed form, E/E_ad = (omega0^2 + omega1^2) / (2 omega0 omega1) per axis (virial theorem before the step,
adiabatic invariant E/omega; from memory), is checked here against two numeric integrations written in this
file: the Ermakov equation (J. Math. Phys. 10, 1458 (1969)) and a classical thermal ensemble, both through a
linear ramp of 1e-4 trap periods. The finding on the fault file is checked against the powers written in it, and
its proposed ramp is written into the file and checked again."""

import re

import numpy as np
import pytest
from scipy.integrate import solve_ivp

import seqgen
from seqgen.physics.adiabatic import sudden_energy_ratio

from .conftest import SEQUENCES
from .test_faults import check

FAULT = SEQUENCES / "faults" / "trap_set_sudden.yaml"


def _closed_form(w0, w1):
    return (w0 ** 2 + w1 ** 2) / (2 * w0 * w1)


def _linear(w0, w1, tau):
    return lambda t: w0 + (w1 - w0) * min(max(t / tau, 0.0), 1.0)


def _ermakov_ratio(w0, w1, tau):
    """E/E_ad after omega goes linearly from w0 to w1 over tau: b'' + omega^2 b = w0^2 / b^3, b(0) = 1, b'(0) = 0;
    E/E_ad = (b'^2 + w1^2 b^2 + w0^2 / b^2) / (2 w0 w1)."""
    omega = _linear(w0, w1, tau)
    sol = solve_ivp(lambda t, y: (y[1], w0 ** 2 / y[0] ** 3 - omega(t) ** 2 * y[0]), (0.0, tau), [1.0, 0.0],
                    method="DOP853", rtol=1e-12, atol=1e-14)
    b, bd = sol.y[:, -1]
    return (bd ** 2 + w1 ** 2 * b ** 2 + w0 ** 2 / b ** 2) / (2 * w0 * w1)


def _ensemble_ratio(w0, w1, tau):
    """The same for a classical thermal ensemble (m = k_B T = 1: <x^2> = 1/w0^2, <v^2> = 1, E0 = 1 per axis):
    every trajectory is a sum of the two fundamental solutions of x'' = -omega(t)^2 x, so the mean energy after
    the ramp is exact without sampling; the adiabatic energy is E0 w1/w0 (E/omega kept)."""
    omega = _linear(w0, w1, tau)
    ends = []
    for start in ([1.0, 0.0], [0.0, 1.0]):
        sol = solve_ivp(lambda t, y: (y[1], -omega(t) ** 2 * y[0]), (0.0, tau), start, method="DOP853",
                        rtol=1e-12, atol=1e-14)
        x, v = sol.y[:, -1]
        ends.append(0.5 * (v ** 2 + w1 ** 2 * x ** 2))
    energy = ends[0] / w0 ** 2 + ends[1]
    return energy / (w1 / w0)


@pytest.mark.parametrize("w0,w1", [(2 * np.pi * 277, 2 * np.pi * 123), (2 * np.pi * 100, 2 * np.pi * 250),
                                   (2 * np.pi * 50, 2 * np.pi * 48)])
def test_sudden_change_closed_form_matches_a_fast_ramp(w0, w1):
    tau = 1e-4 * 2 * np.pi / max(w0, w1)  # 1e-4 trap periods: sudden
    expected = _closed_form(w0, w1)
    assert _ermakov_ratio(w0, w1, tau) == pytest.approx(expected, rel=1e-5)
    assert _ensemble_ratio(w0, w1, tau) == pytest.approx(expected, rel=1e-5)
    assert float(sudden_energy_ratio(w0, w1)) == pytest.approx(expected, rel=1e-12)


def _sudden(found):
    return [f for f in found if f.code == "physics.nonadiabatic-ramp"]


def test_sudden_set_of_both_arms_is_reported_with_the_sudden_excitation():
    _, found, _ = check(FAULT)
    hits = _sudden(found)
    assert [f.line for f in hits] == [19], [(f.code, f.line, f.message) for f in found]
    data = hits[0].data
    w0, w1 = np.array(data["omegas_before_rad_s"]), np.array(data["omegas_after_rad_s"])
    assert data["excitation"] == pytest.approx(float(np.max(_closed_form(w0, w1))) - 1, rel=1e-9)
    # crossed equal beams: the vertical frequency is sqrt(2) times the horizontal ones (both beams confine it);
    # omega ~ sqrt(P) without gravity, and gravity's sag only lowers the frequencies at the lower power (0.6 W of 3 W)
    assert w0[2] / w0[0] == pytest.approx(np.sqrt(2), rel=0.02)
    ratio = w1 / w0
    assert np.all(ratio <= np.sqrt(0.2) * 1.001) and np.all(ratio > 0.9 * np.sqrt(0.2))
    assert hits[0].data["excitation"] > 0.3  # (1 + 0.2) / (2 sqrt 0.2) - 1 = 0.342 without the sag


def test_the_proposed_ramp_passes_when_applied(tmp_path):
    _, found, _ = check(FAULT)
    (hit,) = _sudden(found)
    m = re.search(r"by ramps to the same values of at least ([0-9.]+) ms", hit.hint)
    assert m, hit.hint
    over = f"{m.group(1)} ms"
    (tmp_path / "good").mkdir()
    (tmp_path / "faults").mkdir()
    (tmp_path / "seqgen.toml").write_text("", encoding="utf-8")
    (tmp_path / "good" / "rig_cs133.yaml").write_bytes((SEQUENCES / "good" / "rig_cs133.yaml").read_bytes())
    text = FAULT.read_text(encoding="utf-8")
    for arm, extra in (("a", ""), ("b", ", at: 0 s")):
        old = f"      - set: {{channel: arm_{arm}_power, value: 600 mW}}\n"
        assert old in text
        text = text.replace(old, f"      - ramp: {{channel: arm_{arm}_power, to: 600 mW, over: {over}{extra}}}\n")
    seq = tmp_path / "faults" / "ramped.yaml"
    seq.write_text(text, encoding="utf-8")
    _, after, _ = check(seq)
    assert not [(f.code, f.message) for f in after if f.severity in ("error", "warning")]


def _crossed(tmp_path, step):
    (tmp_path / "seqgen.toml").write_text("", encoding="utf-8")
    (tmp_path / "rig.yaml").write_bytes((SEQUENCES / "good" / "rig_cs133.yaml").read_bytes())
    seq = tmp_path / "seq.yaml"
    seq.write_text("seqgen: 1\nrig: rig.yaml\nsample: {species: Cs133, state: {F: 3, mF: 3}, atoms: 2e5, "
                   "temperature: 1 uK}\nblocks:\n  - name: load\n    at: 1 ms\n    actions:\n"
                   "      - set: {channel: arm_a_power, value: 3000 mW}\n"
                   "      - set: {channel: arm_b_power, value: 3000 mW}\n      - hold: {duration: 100 ms}\n"
                   "  - name: step\n    after: load\n    actions:\n" + step +
                   "      - hold: {duration: 10 ms}\n  - name: off\n    after: step\n    actions:\n"
                   "      - release: {}\n", encoding="utf-8")
    return seq


def test_switching_one_arm_off_is_a_release_along_the_other_arm_and_stays_quiet(tmp_path):
    # the frequency along arm_a drops from ~280 Hz to its axial value (Rayleigh length ~19 mm: about 1 Hz)
    seq = _crossed(tmp_path, "      - set: {channel: arm_b_power, value: 0 mW}\n")
    _, found, _ = check(seq)
    assert not _sudden(found), [f.message for f in _sudden(found)]


def test_switching_the_trap_on_or_off_is_not_a_step(tmp_path):
    # the load block switches the trap on from nothing (lines 8, 9) and the release leaves no trap
    seq = _crossed(tmp_path, "      - set: {channel: arm_a_power, value: 0 mW}\n"
                             "      - set: {channel: arm_b_power, value: 0 mW}\n")
    _, found, _ = check(seq)
    assert not _sudden(found), [f.message for f in _sudden(found)]


def test_a_small_step_stays_within_the_limit(tmp_path):
    # 3 W -> 2.7 W: omega1/omega0 ~ sqrt(0.9), E/E_ad - 1 ~ (1 + 0.9) / (2 sqrt 0.9) - 1 = 0.0014 < 0.05
    seq = _crossed(tmp_path, "      - set: {channel: arm_a_power, value: 2700 mW}\n"
                             "      - set: {channel: arm_b_power, value: 2700 mW}\n")
    _, found, _ = check(seq)
    assert not _sudden(found), [f.message for f in _sudden(found)]


def test_the_dimple_switched_off_in_the_guide_is_not_reported():
    # na23_barrier_scatter.yaml's `kick` block: the dimple goes off and the atoms spread along the guide
    res = seqgen.preflight(str(SEQUENCES / "na23_barrier_scatter.yaml"))
    assert not [f.message for f in res.findings if f.code == "physics.nonadiabatic-ramp"]
