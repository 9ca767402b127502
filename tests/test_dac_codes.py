"""The integer codes in the tables, against the conventions' definitions (IEEE Std 1658-2011, DAC terminology):
2^N codes span the full-scale range, one LSB = FSR / 2^N, code 0 at the bottom and the top code one LSB below
the top (so a range around 0 V has a code at exactly 0 V).

- offset binary, +-10 V, 16 bits: -10 V <-> 0x0000, 0 V <-> 0x8000, +10 V - 1 LSB <-> 0xFFFF;
- two's complement: -10 V <-> 0x8000 (as a signed number -32768), 0 V <-> 0, +10 V - 1 LSB <-> 0x7FFF;
- straight binary, 0 .. 10 V: 0 V <-> 0, 10 V - 1 LSB <-> 0xFFFF;
- a synthesizer's frequency tuning word with a reference clock: word = f / f_clk x 2^N (resolution f_clk / 2^N);
  without one, (f - lo) / span x 2^N; digital lines 0 / 1.

The expected codes are written here from those definitions. Each rig and sequence is built and read back
through the build folder (the .npz `codes`, the .csv code columns and the manifest's code grid) and played by
`seqgen.play`.
"""

import json

import numpy as np
import pytest

import seqgen

LSB16 = 20.0 / 2 ** 16  # +-10 V over 16 bits

RIG = """seqgen_rig: 1
name: codes
devices:
  ao: {timebase: 1 MHz, min_interval: 1 us}
  tc: {timebase: 1 MHz, min_interval: 1 us, code: twos_complement}
  dds: {timebase: 1 MHz, min_interval: 1 us}
  dio: {timebase: 1 MHz}
channels:
  bip: {device: ao, kind: analog, output: {unit: V, range: [-10 V, 10 V], bits: 16}}
  tc_own: {device: ao, kind: analog, output: {unit: V, range: [-10 V, 10 V], bits: 16, code: twos_complement}}
  tc_dev: {device: tc, kind: analog, output: {unit: V, range: [-10 V, 10 V], bits: 16}}
  uni: {device: ao, kind: analog, output: {unit: V, range: [0 V, 10 V], bits: 16}}
  gate: {device: dio, kind: digital}
  rf:
    device: dds
    kind: synth
    reference_clock: 1 GHz
    frequency: {range: [0 Hz, 400 MHz], bits: 32}
    amplitude: {range: [0, 1], bits: 14}
  mw:
    device: dds
    kind: synth
    frequency: {range: [1 GHz, 3 GHz], bits: 32}
"""

# (channel, value written with its unit, expected code): at 1 ms, one write per block
WRITES = [
    ("bip", "-10 V", 0x0000), ("bip", "0 V", 0x8000), ("bip", f"{10 - LSB16!r} V", 0xFFFF), ("bip", "10 V", 0xFFFF),
    ("tc_own", "-10 V", -32768), ("tc_own", "0 V", 0), ("tc_own", f"{10 - LSB16!r} V", 0x7FFF),
    ("tc_dev", "-10 V", -32768), ("tc_dev", "0 V", 0), ("tc_dev", "10 V", 0x7FFF),
    ("uni", "0 V", 0), ("uni", f"{10 - 10 / 2 ** 16!r} V", 0xFFFF), ("uni", "10 V", 0xFFFF),
    ("gate", "1", 1), ("gate", "0", 0),
    # 250 MHz of a 1 GHz clock is a quarter turn per clock: 2^30; 100 MHz: round(0.1 x 2^32)
    ("rf.freq", "250 MHz", 2 ** 30), ("rf.freq", "100 MHz", round(0.1 * 2 ** 32)),
    ("rf.amp", "0.5", 2 ** 13), ("rf.amp", "1", 2 ** 14 - 1),
    # no reference clock: (f - 1 GHz) / 2 GHz x 2^32
    ("mw.freq", "2 GHz", 2 ** 31), ("mw.freq", "1 GHz", 0),
]


def _sequence(writes):
    blocks = []
    for i, (ch, value, _) in enumerate(writes):
        blocks.append(f"  - name: w{i}\n    at: {1 + 2 * i} ms\n    actions:\n      - set: {{channel: {ch}, value: {value}}}\n")
    blocks.append(f"  - name: end\n    at: {2 + 2 * len(writes)} ms\n    actions:\n      - hold: {{duration: 1 ms}}\n")
    return "seqgen: 1\nrig: rig.yaml\nend:\n  leave_on: [bip, tc_own, tc_dev, uni, rf, mw]\nblocks:\n" + "".join(blocks)


@pytest.fixture(scope="module")
def build(tmp_path_factory):
    root = tmp_path_factory.mktemp("codes")
    (root / "seqgen.toml").write_text("", encoding="utf-8")
    (root / "rig.yaml").write_text(RIG, encoding="utf-8")
    (root / "s.yaml").write_text(_sequence(WRITES), encoding="utf-8")
    res = seqgen.preflight(root / "s.yaml")
    assert res.ok, [(f.code, f.message) for f in res.findings if f.severity == "error"]
    # a value at the top of the range is not out of range: it plays the top code
    assert "hardware.out-of-range" not in [f.code for f in res.findings]
    return res, seqgen.write_build(root / "build", res.shot, res.compiled, res.findings)


def _code_after(folder, man, name, t):
    for dev, info in man["devices"].items():
        names = [c["name"] for c in info["columns"]]
        if name in names:
            z = np.load(folder / info["files"]["npz"]["path"])
            row = np.searchsorted(z["tick"], round(t * info["timebase_hz"]), side="right") - 1
            return int(z["codes"][row, names.index(name)]), info["columns"][names.index(name)]
    raise KeyError(name)


@pytest.mark.parametrize("i", range(len(WRITES)), ids=[f"{c}={v}" for c, v, _ in WRITES])
def test_each_write_has_the_code_of_its_convention(build, i):
    _, folder = build
    man = json.loads((folder / "manifest.json").read_text(encoding="utf-8"))
    ch, _, want = WRITES[i]
    code, col = _code_after(folder, man, ch, (1 + 2 * i) * 1e-3 + 0.5e-3)
    assert code == want
    # the manifest's grid gives the value played: zero + code x lsb
    played = seqgen.play(folder, [(1 + 2 * i) * 1e-3 + 0.5e-3], outputs=[ch])[ch].output[0]
    assert played == pytest.approx(col["code"]["zero"] + code * col["code"]["lsb"], abs=1e-9 * max(1, abs(played)))


def test_conventions_and_grids_in_the_manifest(build):
    _, folder = build
    man = json.loads((folder / "manifest.json").read_text(encoding="utf-8"))
    cols = {c["name"]: c["code"] for d in man["devices"].values() for c in d["columns"]}
    assert cols["bip"] == {"convention": "offset_binary", "bits": 16, "lsb": LSB16, "zero": -10.0}
    assert cols["tc_own"] == {"convention": "twos_complement", "bits": 16, "lsb": LSB16, "zero": 0.0}
    assert cols["tc_dev"]["convention"] == "twos_complement"  # the device's default
    assert cols["uni"] == {"convention": "straight_binary", "bits": 16, "lsb": 10.0 / 2 ** 16, "zero": 0.0}
    assert cols["gate"] == {"convention": "digital", "bits": 1, "lsb": 1.0, "zero": 0.0}
    assert cols["rf.freq"] == {"convention": "straight_binary", "bits": 32, "lsb": 1e9 / 2 ** 32, "zero": 0.0}
    assert cols["mw.freq"] == {"convention": "straight_binary", "bits": 32, "lsb": 2e9 / 2 ** 32, "zero": 1e9}


def test_the_table_type_carries_codes_and_column_metadata(build):
    res, _ = build
    ao = next(t for t in res.compiled.tables if t.device == "ao")
    assert ao.codes.dtype == np.int64 and ao.codes.shape == ao.values.shape
    assert ao.code_conventions == ("offset_binary", "twos_complement", "straight_binary")
    assert ao.code_bits == (16, 16, 16) and ao.code_lsb == (LSB16, LSB16, 10.0 / 2 ** 16)
    assert ao.code_zero == (-10.0, 0.0, 0.0)
    # the safe values (0 V) have exact codes: 0x8000, 0 and 0
    assert ao.codes[0].tolist() == [0x8000, 0, 0] and ao.values[0].tolist() == [0.0, 0.0, 0.0]


@pytest.mark.parametrize("bad,message", [
    ("  x: {device: ao, kind: analog, output: {unit: V, range: [0 V, 1 V], bits: 8}, reference_clock: 1 GHz}\n",
     "only a synth"),
    ("  y: {device: dds, kind: synth, reference_clock: 100 MHz, frequency: {range: [0 Hz, 400 MHz], bits: 32}}\n",
     "does not fit its word"),
    ("  z: {device: dds, kind: synth, amplitude: {range: [0, 1], bits: 14, code: twos_complement}}\n",
     "unsigned"),
])
def test_a_rig_that_cannot_have_those_codes_is_a_finding(tmp_path, bad, message):
    (tmp_path / "seqgen.toml").write_text("", encoding="utf-8")
    (tmp_path / "rig.yaml").write_text(RIG + bad, encoding="utf-8")
    (tmp_path / "s.yaml").write_text("seqgen: 1\nrig: rig.yaml\nblocks:\n  - name: a\n    actions:\n"
                                     "      - hold: {duration: 1 ms}\n", encoding="utf-8")
    res = seqgen.preflight(tmp_path / "s.yaml")
    hits = [f for f in res.findings if f.code == "schema.bad-rig" and message in f.message]
    assert hits and hits[0].line > 0 and hits[0].hint
