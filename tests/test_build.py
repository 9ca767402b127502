"""Building the demo: manifest schema, determinism, atomic writes, --force, table contents, table writers,
the safety caution in manifest.json and scan.json."""

import hashlib
import json
from dataclasses import dataclass, field
from importlib.metadata import EntryPoint
from pathlib import Path

import jsonschema
import numpy as np
import pytest

from seqgen.caution import CAUTION
from seqgen.emit import writers as W
from seqgen.emit.build import BuildExists, write_build
from seqgen.emit.writers import CSV, NPZ, Writer, WriterError
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
        n = len(info["columns"])
        assert csv.shape[1] == 2 + 2 * n  # tick, time_s, a value column and a code column per output
        np.testing.assert_allclose(csv[:, 2:2 + n], z["values"], rtol=1e-9, atol=1e-12)
        assert z["codes"].dtype == np.int64 and z["codes"].shape == z["values"].shape
        np.testing.assert_array_equal(csv[:, 2 + n:], z["codes"])
        for j, col in enumerate(info["columns"]):
            code = col["code"]
            if code["convention"] != "none":  # value = zero + code x lsb (schemas/manifest.schema.json)
                np.testing.assert_allclose(code["zero"] + z["codes"][:, j] * code["lsb"], z["values"][:, j],
                                           rtol=0, atol=1e-9 * max(1.0, abs(code["zero"])))


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
    lsb = 20.0 / 2 ** 16  # IEEE Std 1658-2011: 2^N LSB span the range
    assert ao.values[0, col] == 0.0  # safe 0 W: 0 V has its own code, 0x8000 in offset binary
    assert ao.codes[0, col] == 0x8000 and ao.code_conventions[col] == "offset_binary"
    first_on = ao.values[np.argmax(ao.values[:, col] > 1.0), col]
    assert abs(first_on - 6.4) <= lsb / 2 + 1e-12


# ----------------------------------------------------------------------------- table writers
# A test writer: the ticks of a table as text, one per line. Its expected bytes are made here from the .npz
# table numpy.load reads back (numpy's own reader), not from the writer.


@dataclass(frozen=True)
class TickLines:
    name: str = "ticks"
    suffix: str = ".ticks.txt"
    calls: list = field(default_factory=list, compare=False, hash=False)

    def write(self, table, path):
        self.calls.append(table.device)
        Path(path).write_text("".join(f"{int(t)}\n" for t in table.ticks), encoding="ascii")


TICK_LINES = TickLines()  # the object a (programmatically made) entry point below names


def _schema(name):
    return jsonschema.Draft202012Validator(json.loads((ROOT / "schemas" / name).read_text(encoding="utf-8")))


@pytest.fixture
def entry_points(monkeypatch):
    """Stand in for the installed `seqgen.writers` entry points (the built-in ones are always there)."""
    def use(*eps):
        monkeypatch.setattr(W, "declared_entry_points", lambda: tuple(eps))
        W.available_writers.cache_clear()
    yield use
    W.available_writers.cache_clear()


def test_an_entry_point_writer_is_called_and_listed_in_the_manifest(demo, tmp_path, entry_points):
    TICK_LINES.calls.clear()
    entry_points(EntryPoint("ticks", "tests.test_build:TICK_LINES", "seqgen.writers"),
                 EntryPoint("npz", "seqgen.emit.writers:NPZ", "seqgen.writers"))  # a built-in: listed once
    out = write_build(tmp_path / "b", demo.shot, demo.compiled, demo.findings)
    man = json.loads((out / "manifest.json").read_text(encoding="utf-8"))
    _schema("manifest.schema.json").validate(man)
    # twice per table: a writer not built in is run again to check its bytes depend on the table only
    assert sorted(TICK_LINES.calls) == sorted(list(man["devices"]) * 2)
    for dev, info in man["devices"].items():
        assert set(info["files"]) == {"npz", "csv", "ticks"}
        entry = info["files"]["ticks"]
        assert entry["path"] == f"{dev}.ticks.txt"
        raw = (out / entry["path"]).read_bytes()
        assert hashlib.sha256(raw).hexdigest() == entry["sha256"]
        ticks = np.load(out / info["files"]["npz"]["path"])["tick"]
        assert raw == "".join(f"{t}\n" for t in ticks.tolist()).encode("ascii")
    listed = {e["path"] for info in man["devices"].values() for e in info["files"].values()}
    assert {p.name for p in out.iterdir()} == listed | {"manifest.json"}


def test_an_explicit_tuple_of_writers_is_all_that_is_written(demo, tmp_path):
    out = write_build(tmp_path / "b", demo.shot, demo.compiled, demo.findings, writers=(NPZ, TickLines()))
    man = json.loads((out / "manifest.json").read_text(encoding="utf-8"))
    _schema("manifest.schema.json").validate(man)
    assert {k for info in man["devices"].values() for k in info["files"]} == {"npz", "ticks"}
    assert not list(out.glob("*.csv"))


# The build's table bytes (sequences/na23_thermometry.yaml) since tables carry DAC codes (LSB = span / 2^bits,
# a `codes` array in the .npz, code columns in the .csv): a regression pin on the file formats, taken when that
# change was made on purpose (the earlier pin, of commit 713f9be, had LSB = span / (2^bits - 1) and no codes).
# dio_main re-pinned when the demo rig was wired: it gained the wiring lines ao_start and rf_step and the analog
# card's start pulse (500 ns to 1.5 us); its other columns and rows are as before (the other tables are unchanged).
THERMOMETRY_TABLES_DAC_CODES = {
    "ao_main.csv": "ffb99e7e7f19f5659fa8d37b695586b3e2dfa5a449c1371a5439aefeffdc659a",
    "ao_main.npz": "aa313488aa6a4e8d4a5aee8779a6c00d02540d16cd666544e58d6f3df2b55e21",
    "dio_main.csv": "89ef4f0839f6dbe6cd63e1623cae697294b36d781fbaef8997a54eebc9a1933f",
    "dio_main.npz": "cad9e849150285e7cb6259bc779e68920ce10f27e5f76a6c207fc3ea3ca9bfbb",
    "synth_rf.csv": "c5d173444a0f3369c6c637ee0e40d85fd947e3b2e0936182405b5ba5d3ec0df9",
    "synth_rf.npz": "f0d95e84006308b14b4bbdcd0770a68105fb539dec5a2eb871ffe70e445d4665",
}


def test_default_writers_give_the_same_table_bytes_as_before(tmp_path, entry_points):
    entry_points()  # no installed writer but the built-in ones
    res = preflight(SEQUENCES / "na23_thermometry.yaml")
    out = write_build(tmp_path / "t", res.shot, res.compiled, res.findings)
    tables = {k: v for k, v in _hashes(out).items() if k != "manifest.json"}
    assert tables == THERMOMETRY_TABLES_DAC_CODES


@dataclass(frozen=True)
class Broken:
    """A writer broken in one way: `how` is raise-second (raises on the second table), random, no-file, extra,
    or embeds-path."""
    how: str
    name: str = "broken"
    suffix: str = ".bin"
    calls: list = field(default_factory=list, compare=False, hash=False)

    def write(self, table, path):
        import os

        self.calls.append(table.device)
        path = Path(path)
        if self.how == "raise-second" and len({*self.calls}) == 2:
            raise ValueError("cannot encode this table")
        if self.how == "random":
            path.write_bytes(os.urandom(16))
        elif self.how == "embeds-path":
            path.write_text(str(path.resolve()), encoding="utf-8")
        elif self.how == "extra":
            path.write_bytes(b"x")
            (path.parent / "notes.txt").write_bytes(b"y")
        elif self.how != "no-file":
            path.write_bytes(b"x")


@pytest.mark.parametrize("how,words", [
    ("raise-second", ["'broken' failed on device", "ValueError: cannot encode this table"]),
    ("random", ["'broken' wrote different bytes for the same table"]),
    ("embeds-path", ["'broken' wrote different bytes for the same table"]),
    ("no-file", ["'broken' wrote no file"]),
    ("extra", ["notes.txt"]),
])
def test_a_broken_writer_is_a_clear_error_and_the_previous_build_stays(demo, tmp_path, how, words):
    out = write_build(tmp_path / "b", demo.shot, demo.compiled, demo.findings)
    before = _hashes(out)
    with pytest.raises(WriterError) as err:
        write_build(out, demo.shot, demo.compiled, demo.findings, force=True, writers=(NPZ, CSV, Broken(how)))
    for w in words:
        assert w in str(err.value)
    assert "was not written" in str(err.value)
    assert _hashes(out) == before
    assert [p.name for p in tmp_path.iterdir()] == ["b"]  # no half-written folder left behind


def test_a_writer_entry_point_that_does_not_load_names_itself(demo, tmp_path, entry_points):
    entry_points(EntryPoint("gone", "tests.no_such_module:WRITER", "seqgen.writers"))
    with pytest.raises(WriterError, match=r"gone = tests\.no_such_module:WRITER .*does not load: "
                                          r"ModuleNotFoundError"):
        write_build(tmp_path / "b", demo.shot, demo.compiled, demo.findings)
    assert not (tmp_path / "b").exists()


@pytest.mark.parametrize("writers,words", [
    ((), "no table writer"),
    ((NPZ, object()), "is not a writer"),
    ((NPZ, Writer("Bad Name", ".x", NPZ.write)), "lower-case word"),
    ((NPZ, Writer("meta", ".json", NPZ.write)), "manifest"),
    ((NPZ, Writer("meta", "x", NPZ.write)), "not a file suffix"),
    ((NPZ, Writer("npz2", ".NPZ", NPZ.write)), "share"),
    ((NPZ, Writer("npz", ".other", NPZ.write)), "share"),
    ((NPZ, Writer("x", ".x", NPZ.write, max_rows=-1)), "max_rows"),
])
def test_writers_that_cannot_be_used_are_refused_before_anything_is_written(demo, tmp_path, writers, words):
    with pytest.raises(WriterError, match=words):
        write_build(tmp_path / "b", demo.shot, demo.compiled, demo.findings, writers=writers)
    assert not list(tmp_path.iterdir())


def test_the_csv_row_limit_leaves_larger_tables_as_npz_only(demo, tmp_path):
    rows = {t.device: len(t.ticks) for t in demo.compiled.tables}
    limit = sorted(rows.values())[0]  # the smallest table keeps its csv, larger ones do not
    out = write_build(tmp_path / "b", demo.shot, demo.compiled, demo.findings, csv_row_limit=limit)
    man = json.loads((out / "manifest.json").read_text(encoding="utf-8"))
    for dev, n in rows.items():
        assert ("csv" in man["devices"][dev]["files"]) == (n <= limit)


# ----------------------------------------------------------------------------- the safety caution


def test_the_caution_defers_to_codes_procedures_and_licensed_practice():
    for words in ("no substitute", "hardware interlocks", "laser-safety", "high-voltage",
                  "local codes and regulations", "procedures", "licensed practice"):
        assert words in CAUTION


def test_manifest_and_scan_json_carry_the_caution_and_validate(demo, tmp_path):
    from seqgen.scan.plan import plan_scan
    from seqgen.scan.run import run_scan

    out = write_build(tmp_path / "b", demo.shot, demo.compiled, demo.findings)
    man = json.loads((out / "manifest.json").read_text(encoding="utf-8"))
    assert man["caution"] == CAUTION
    schema = _schema("manifest.schema.json")
    schema.validate(man)
    assert not schema.is_valid({k: v for k, v in man.items() if k != "caution"})  # the caution is required

    scan = plan_scan(SEQUENCES / "na23_barrier_scatter.yaml")
    run_scan(scan, out=tmp_path / "s", jobs=1)
    doc = json.loads((tmp_path / "s" / "scan.json").read_text(encoding="utf-8"))
    assert doc["caution"] == CAUTION
    schema = _schema("scan.schema.json")
    schema.validate(doc)
    assert not schema.is_valid({k: v for k, v in doc.items() if k != "caution"})
    for rec in doc["shots"]:
        shot_man = json.loads((tmp_path / "s" / rec["build"] / "manifest.json").read_text(encoding="utf-8"))
        assert shot_man["caution"] == CAUTION
        assert rec["tables"] == {d: {k: e["sha256"] for k, e in info["files"].items()}
                                 for d, info in shot_man["devices"].items()}
