"""Building the demo: manifest schema, determinism, atomic writes, --force, table contents."""

import hashlib
import json
from pathlib import Path

import jsonschema
import numpy as np
import pytest

from seqgen.emit.build import BuildExists, write_build
from seqgen.pipeline import preflight

from .conftest import ROOT, SEQUENCES

DEMOS = sorted(p for p in SEQUENCES.glob("*.yaml"))


@pytest.fixture(scope="module")
def demo():
    res = preflight(SEQUENCES / "na23_barrier_scatter.yaml")
    assert res.ok, [str(f) for f in res.findings if f.severity == "error"]
    return res


def _hashes(folder: Path) -> dict:
    return {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in sorted(folder.iterdir())}


@pytest.mark.parametrize("path", DEMOS, ids=[p.stem for p in DEMOS])
def test_every_demo_sequence_checks_without_error(path):
    res = preflight(path)
    assert res.shot is not None
    assert not [f for f in res.findings if f.severity == "error" and not f.accepted]


def test_manifest_validates_and_tables_load(demo, tmp_path):
    out = write_build(tmp_path / "b", demo.shot, demo.compiled, demo.findings)
    man = json.loads((out / "manifest.json").read_text())
    schema = json.loads((ROOT / "schemas" / "manifest.schema.json").read_text())
    jsonschema.Draft202012Validator(schema).validate(man)
    for dev, info in man["devices"].items():
        z = np.load(out / info["files"]["npz"]["path"])
        assert len(z["tick"]) == info["rows"]
        assert np.all(np.diff(z["tick"]) > 0)
        assert z["values"].shape == (info["rows"], len(info["columns"]))
        np.testing.assert_allclose(z["time_s"], z["tick"] / info["timebase_hz"])
        csv = np.loadtxt(out / info["files"]["csv"]["path"], delimiter=",", skiprows=1, ndmin=2)
        np.testing.assert_array_equal(csv[:, 0], z["tick"])
        np.testing.assert_allclose(csv[:, 2:], z["values"], rtol=1e-9, atol=1e-12)


def test_same_input_same_bytes(demo, tmp_path):
    a = write_build(tmp_path / "a", demo.shot, demo.compiled, demo.findings)
    again = preflight(SEQUENCES / "na23_barrier_scatter.yaml")
    b = write_build(tmp_path / "b", again.shot, again.compiled, again.findings)
    assert _hashes(a) == _hashes(b)


def test_existing_build_needs_force(demo, tmp_path):
    out = write_build(tmp_path / "b", demo.shot, demo.compiled, demo.findings)
    with pytest.raises(BuildExists):
        write_build(out, demo.shot, demo.compiled, demo.findings)
    write_build(out, demo.shot, demo.compiled, demo.findings, force=True)
    assert (out / "manifest.json").exists()


def test_crash_between_table_writes_keeps_previous_build(demo, tmp_path):
    out = write_build(tmp_path / "b", demo.shot, demo.compiled, demo.findings)
    before = _hashes(out)
    with pytest.raises(RuntimeError):
        write_build(out, demo.shot, demo.compiled, demo.findings, force=True, _crash_after=1)
    assert _hashes(out) == before
    assert [p.name for p in tmp_path.iterdir()] == ["b"]  # no half-written folder left behind


def test_digital_edges_latency_compensated(demo):
    # the probe shutter opens 3.2 ms late (rig): its command must come 3.2 ms before the image block's first write
    shot, comp = demo.shot, demo.compiled
    img = shot.block("image")
    dio = next(t for t in comp.tables if t.device == "dio_main")
    col = dio.columns.index("probe_shutter")
    rises = dio.ticks[1:][np.diff(dio.values[:, col]) > 0]
    assert len(rises) == 1
    assert rises[0] * dio.tick_s == pytest.approx(img.start_s - 3.2e-3, abs=dio.tick_s)


def test_calibrated_values_in_output_units(demo):
    # cross_a: 2 V per W (rig); the load block sets 3.2 W -> 6.4 V, quantized to a 16-bit code over +-10 V
    ao = next(t for t in demo.compiled.tables if t.device == "ao_main")
    col = ao.columns.index("cross_a_power")
    lsb = 20.0 / (2 ** 16 - 1)
    assert abs(ao.values[0, col]) <= lsb / 2  # safe 0 W: nearest code to 0 V
    first_on = ao.values[np.argmax(ao.values[:, col] > 1.0), col]
    assert abs(first_on - 6.4) <= lsb / 2 + 1e-12
