"""`seqgen.play`, the reference player of a build folder, against the sequence's intent.

For both demos and the good corpus, each sequence is built (`seqgen.write_build`) and played back from the
folder alone; the played waveform (physical units) must match the intended values (`seqgen.values.value_at`,
what the sequence asks for) within one DAC code at every edge (just after the edge appears, after the
channel's latency) and within the ramp's tolerance plus one code inside every ramp (at the device's ticks, as
the row appears). One code is the converter's LSB, span / 2^bits (IEEE Std 1658-2011, DAC terminology),
taken to physical units through the local slope of the rig's calibration (linear: its slope; a table: the
derivative of scipy's PchipInterpolator through the table, the monotone cubic of SIAM J. Numer. Anal. 17, 238
(1980), and the end intervals' slopes beyond it). Also: the npz and csv files play the same, the codes follow
the conventions' definitions and a damaged table is refused.
"""

import json
from pathlib import Path

import numpy as np
import pytest
from scipy.interpolate import PchipInterpolator

import seqgen
from seqgen.values import value_at

ROOT = Path(__file__).resolve().parents[1]
SEQUENCES = ROOT / "sequences"
CASES = [SEQUENCES / "na23_thermometry.yaml", SEQUENCES / "na23_barrier_scatter.yaml"] + sorted(
    p for p in (SEQUENCES / "good").glob("*.yaml") if not p.name.startswith("rig_"))


def _slope(cal, phys: np.ndarray) -> np.ndarray:
    """d(output)/d(physical) of a rig calibration at physical values (None: 1)."""
    phys = np.asarray(phys, dtype=float)
    if cal is None:
        return np.ones_like(phys)
    if cal.kind == "linear":
        return np.full_like(phys, cal.slope)
    xp, yp = np.asarray(cal.table_phys, float), np.asarray(cal.table_out, float)
    if xp[0] > xp[-1]:
        xp, yp = xp[::-1], yp[::-1]
    inside = PchipInterpolator(xp, yp).derivative()(np.clip(phys, xp[0], xp[-1]))
    lo = (yp[1] - yp[0]) / (xp[1] - xp[0])
    hi = (yp[-1] - yp[-2]) / (xp[-1] - xp[-2])
    return np.where(phys < xp[0], lo, np.where(phys > xp[-1], hi, inside))


def _lsb(out) -> float:
    """One code in output units (IEEE Std 1658-2011: the span over 2^bits; a synth frequency word with a
    reference clock: the clock over 2^bits); a digital line: half a level; no bits: 0."""
    if out.kind == "digital":
        return 0.5
    if not out.bits:
        return 0.0
    if out.kind == "synth" and out.reference_clock_hz and out.name.endswith(".freq"):
        return out.reference_clock_hz / 2 ** out.bits
    return (out.hi - out.lo) / 2 ** out.bits


def _in_physical(out, amount, phys: np.ndarray) -> np.ndarray:
    """An amount in output units as physical units at these physical values (through the local slope)."""
    return amount / np.abs(_slope(out.calibration, phys))


def _latency(out, before: float, after: float) -> float:
    return out.latency_rise_s if after > before else out.latency_fall_s if after < before else 0.0


@pytest.fixture(scope="module", params=CASES, ids=[p.stem for p in CASES])
def built(request, tmp_path_factory):
    res = seqgen.preflight(request.param)
    assert res.ok, [(f.code, f.message) for f in res.findings if f.severity == "error"]
    out = seqgen.write_build(tmp_path_factory.mktemp("b") / "build", res.shot, res.compiled, res.findings)
    return res.shot, out


def _samples(shot):
    """(output, times, allowance fn) per output: just after each edge, and inside each ramp at its ticks."""
    by_output = {}
    for s in shot.segments:
        by_output.setdefault(s.output, []).append(s)
    for name, segs in by_output.items():
        out = shot.rig.outputs[name]
        tick = shot.rig.devices[out.device].tick_s
        segs.sort(key=lambda s: (s.t0, 0 if s.action.endswith(":end") else 1))
        starts = np.array([s.t0 for s in segs])
        edges, ramp_t, ramp_tol = [], [], []
        for i, s in enumerate(segs):
            before = float(value_at(shot, name, s.t0 - 1e-12)[0]) if s.kind == "set" else s.v0
            lat = _latency(out, before, s.v1)
            if s.t0 - lat < 0:
                continue
            end = s.t0 if s.kind == "set" else s.t1
            nxt = starts[i + 1] if i + 1 < len(segs) else np.inf
            # the row appears within half a tick of the intended time: look 0.75 tick after it, when nothing
            # else is written on the output for two ticks
            if nxt - end >= 2 * tick and (s.kind == "set" or s.t1 - s.t0 >= 2 * tick):
                edges.append(end + 0.75 * tick)
            if s.kind == "ramp":
                k0 = int(np.ceil((s.t0 - lat) / tick)) + 1
                k1 = int(np.floor((min(s.t1, nxt) - lat) / tick)) - 1
                if k1 > k0:
                    k = np.unique(np.linspace(k0, k1, 97).round().astype(np.int64))
                    ramp_t.append(k * tick + lat + 1e-6 * tick)
                    tol = s.tolerance if s.tolerance is not None else out.tolerance
                    if tol is None:
                        tol = ((out.hi - out.lo) / 2 ** out.bits / 2) if out.bits else (out.hi - out.lo) * 1e-4
                    ramp_tol.append(np.full(len(k), tol))
        yield name, out, np.array(edges), (np.concatenate(ramp_t) if ramp_t else np.empty(0)), \
            (np.concatenate(ramp_tol) if ramp_tol else np.empty(0))


def test_the_played_build_matches_the_intent_within_one_code(built):
    shot, folder = built
    checked = 0
    for name, out, edges, ramp_t, ramp_tol in _samples(shot):
        if len(edges):
            got = seqgen.play(folder, edges, outputs=[name])[name]
            want = value_at(shot, name, edges)
            allow = _in_physical(out, _lsb(out), want) * (1 + 1e-6) + 1e-12 * np.maximum(1.0, np.abs(want))
            bad = np.abs(got.physical - want) > allow
            assert not bad.any(), (name, edges[bad][:3], got.physical[bad][:3], want[bad][:3])
            checked += len(edges)
        if len(ramp_t):
            got = seqgen.play(folder, ramp_t, outputs=[name])[name]
            want = value_at(shot, name, ramp_t)
            allow = _in_physical(out, ramp_tol + _lsb(out), want) * (1 + 1e-6)
            bad = np.abs(got.physical - want) > allow + 1e-12 * np.maximum(1.0, np.abs(want))
            assert not bad.any(), (name, ramp_t[bad][:3], got.physical[bad][:3], want[bad][:3])
            checked += len(ramp_t)
    assert checked > 0


def test_npz_and_csv_play_the_same_and_codes_match_values(built, tmp_path):
    shot, folder = built
    man = json.loads((folder / "manifest.json").read_text(encoding="utf-8"))
    t = np.linspace(0.0, man["duration_s"], 501)
    a = seqgen.play(folder, t)
    # the same folder with only its csv tables listed: the player reads those instead
    only_csv = tmp_path / "csv"
    only_csv.mkdir()
    for dev in man["devices"].values():
        (only_csv / dev["files"]["csv"]["path"]).write_bytes((folder / dev["files"]["csv"]["path"]).read_bytes())
        dev["files"] = {"csv": dev["files"]["csv"]}
    (only_csv / "manifest.json").write_text(json.dumps(man), encoding="utf-8")
    b = seqgen.play(only_csv, t)
    assert set(a) == set(b) == {c["name"] for d in man["devices"].values() for c in d["columns"]}
    for name in a:
        np.testing.assert_allclose(b[name].output, a[name].output, rtol=1e-9, atol=1e-12)


def test_a_damaged_table_is_refused(built, tmp_path):
    _, folder = built
    man = json.loads((folder / "manifest.json").read_text(encoding="utf-8"))
    copy = tmp_path / "copy"
    copy.mkdir()
    for f in folder.iterdir():
        (copy / f.name).write_bytes(f.read_bytes())
    dev = next(iter(man["devices"].values()))
    path = copy / dev["files"]["npz"]["path"]
    raw = bytearray(path.read_bytes())
    raw[-30] ^= 0xFF
    path.write_bytes(bytes(raw))
    with pytest.raises(ValueError, match="sha256"):
        seqgen.play(copy, [0.0])


@pytest.mark.parametrize("seed", range(6))
def test_the_players_table_calibration_is_scipys_monotone_cubic(seed):
    # the player maps output values to physical ones with numpy alone: its table calibration must be the
    # monotone cubic scipy's PchipInterpolator gives (SIAM J. Numer. Anal. 17, 238 (1980); SIAM J. Sci. Stat.
    # Comput. 5, 300 (1984)), with straight lines beyond the table, and its inverse must undo it
    from seqgen.player import to_physical

    rng = np.random.default_rng(seed)
    n = int(rng.integers(2, 9))
    phys = np.cumsum(rng.uniform(0.1, 2.0, n))
    out = np.cumsum(rng.uniform(0.05, 3.0, n)) * (1 if seed % 2 else -1)
    cal = {"kind": "table", "physical": phys.tolist(), "output": out.tolist()}
    x = np.linspace(phys[0], phys[-1], 301)
    y = PchipInterpolator(phys, out)(x)
    np.testing.assert_allclose(to_physical(cal, y), x, rtol=0, atol=1e-9 * (phys[-1] - phys[0]))
    beyond = np.array([phys[0] - 0.5, phys[-1] + 0.7])
    lines = np.array([out[0] - 0.5 * (out[1] - out[0]) / (phys[1] - phys[0]),
                      out[-1] + 0.7 * (out[-1] - out[-2]) / (phys[-1] - phys[-2])])
    np.testing.assert_allclose(to_physical(cal, lines), beyond, rtol=0, atol=1e-9)
    assert to_physical({"kind": "linear", "slope": 2.0, "offset": 0.1}, np.array([0.1, 2.1])).tolist() == [0.0, 1.0]
