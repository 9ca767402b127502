"""Compact scan builds: tables stored compressed, once per scan build by content (README "Parameter scans",
"Scan build folder"): OUT/tables/<sha256><suffix>, shot manifests pointing there; resume, verify, diff and the
claim keep working.

The test sequence carries no sample (no physics checks) and its scanned param `b` sets only the power a ramp of
guide_power reaches, an output of the device ao_main (the rig file): the duration stays, so the other devices'
tables (whose last row marks the end of the sequence) are the same in every shot.
"""

import gzip
import hashlib
import io
import json
import zipfile

import numpy as np
import pytest

from seqgen.cli import main
from seqgen.emit.build import write_build
from seqgen.pipeline import preflight
from seqgen.scan.plan import plan_scan
from seqgen.scan.run import run_scan
from seqgen.validate.schema import load_schema

from .conftest import SEQUENCES

RIG = (SEQUENCES / "rigs" / "na23_demo_rig.yaml").resolve()
SEQ = f"""seqgen: 1
rig: {RIG}
params:
  b: {{value: 0.3 W, scan: [0.3 W, 0.4 W, 0.5 W]}}
blocks:
  - name: a
    at: 0 s
    actions:
      - ramp: {{channel: guide_power, to: b, over: 10 ms}}
      - ramp: {{channel: guide_power, to: 0 W, over: 1 ms, at: 12 ms}}
"""


@pytest.fixture
def seq(tmp_path, monkeypatch):
    monkeypatch.setenv("SEQGEN_ALLOW_OUTSIDE", "1")  # the file names the repository's rig by absolute path
    p = tmp_path / "s.yaml"
    p.write_text(SEQ, encoding="utf-8")
    return p


def _sha(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def _tree(folder):
    return {str(p.relative_to(folder)): p.read_bytes() for p in sorted(folder.rglob("*")) if p.is_file()}


def _findings(shot_folder):
    """The findings a shot's manifest records, in its order."""
    return json.loads((shot_folder / "manifest.json").read_text(encoding="utf-8"))["findings_list"]


def _shot_manifests(out):
    doc = json.loads((out / "scan.json").read_text(encoding="utf-8"))
    return doc, {r["build"]: json.loads((out / r["build"] / "manifest.json").read_text()) for r in doc["shots"]}


def test_tables_are_stored_once_by_content_and_shots_point_to_them(seq, tmp_path):
    out = tmp_path / "out"
    scan = run_scan(plan_scan(seq), out=out, jobs=1)
    assert scan.ok and scan.stats["built"] == 3
    doc, mans = _shot_manifests(out)
    schema = load_schema("manifest.schema.json")
    import jsonschema

    stored = {p.name for p in (out / "tables").iterdir()}
    referenced = set()
    for rec in doc["shots"]:
        folder = out / rec["build"]
        assert [p.name for p in folder.iterdir()] == ["manifest.json"]
        man = mans[rec["build"]]
        jsonschema.validate(man, schema)
        for dev, info in man["devices"].items():
            for writer, entry in info["files"].items():
                name = entry["path"].removeprefix("../tables/")
                assert entry["path"] == f"../tables/{entry['sha256']}{'.npz' if writer == 'npz' else '.csv.gz'}"
                assert _sha((folder / entry["path"]).read_bytes()) == entry["sha256"] == rec["tables"][dev][writer]
                referenced.add(name)
    assert stored == referenced  # nothing unlisted
    # b is a guide_power ramp's end value: ao_main differs in every shot, dio_main and synth_rf are stored once
    for dev, distinct in (("ao_main", 3), ("dio_main", 1), ("synth_rf", 1)):
        assert len({rec["tables"][dev]["npz"] for rec in doc["shots"]}) == distinct, dev
    assert len(stored) == 2 * (3 + 1 + 1)


def test_a_stored_table_holds_the_same_table_as_a_build_of_that_shot_alone(seq, tmp_path):
    out = tmp_path / "out"
    run_scan(plan_scan(seq), out=out, jobs=1)
    doc, mans = _shot_manifests(out)
    rec = doc["shots"][1]
    alone = preflight(seq, overrides={"b": "0.4 W"})
    single = write_build(tmp_path / "alone", alone.shot, alone.compiled, alone.findings)
    one = json.loads((single / "manifest.json").read_text())
    for dev, info in mans[rec["build"]]["devices"].items():
        shot_dir = out / rec["build"]
        with np.load(shot_dir / info["files"]["npz"]["path"]) as z, \
                np.load(single / one["devices"][dev]["files"]["npz"]["path"]) as y:
            assert sorted(z.files) == sorted(y.files)
            for k in y.files:
                np.testing.assert_array_equal(z[k], y[k])
        # the csv, gzipped: the same text as the single build's csv
        text = gzip.decompress((shot_dir / info["files"]["csv"]["path"]).read_bytes())
        assert text == (single / one["devices"][dev]["files"]["csv"]["path"]).read_bytes()


def test_compressed_tables_have_fixed_stamps_and_the_same_bytes_on_every_build(seq, tmp_path):
    a, b = tmp_path / "a", tmp_path / "b"
    run_scan(plan_scan(seq), out=a, jobs=1)
    run_scan(plan_scan(seq), out=b, jobs=2)
    assert _tree(a) == _tree(b)
    for p in (a / "tables").iterdir():
        raw = p.read_bytes()
        if p.name.endswith(".npz"):
            # zip (PKWARE APPNOTE): each entry deflated, its DOS date the earliest one, 1980-01-01 00:00:00
            with zipfile.ZipFile(io.BytesIO(raw)) as zf:
                for info in zf.infolist():
                    assert info.compress_type == zipfile.ZIP_DEFLATED and info.date_time == (1980, 1, 1, 0, 0, 0)
        else:
            # gzip member header (RFC 1952, 2.3.1): ID1 ID2 CM FLG MTIME(4) ...: no file name (FNAME bit 3), MTIME 0
            assert raw[:3] == b"\x1f\x8b\x08" and not raw[3] & 0x08 and raw[4:8] == b"\0\0\0\0"


def test_a_damaged_shared_table_is_found_and_rebuilt_on_resume(seq, tmp_path):
    out = tmp_path / "out"
    run_scan(plan_scan(seq), out=out, jobs=1)
    before = _tree(out)
    doc, _ = _shot_manifests(out)
    shared = out / "tables" / f"{doc['shots'][0]['tables']['dio_main']['npz']}.npz"  # every shot's dio_main
    shared.write_bytes(shared.read_bytes()[:-10] + b"0123456789")
    again = run_scan(plan_scan(seq), out=out, jobs=1)
    assert (again.stats["built"], again.stats["reused"]) == (3, 0)  # each shot listing it is rebuilt
    assert _tree(out) == before
    # a missing one likewise; an intact build is kept whole
    shared.unlink()
    assert run_scan(plan_scan(seq), out=out, jobs=1).stats["built"] == 3 and _tree(out) == before
    assert run_scan(plan_scan(seq), out=out, jobs=1).stats["reused"] == 3 and _tree(out) == before


def test_tables_no_shot_lists_are_removed(seq, tmp_path):
    out = tmp_path / "out"
    run_scan(plan_scan(seq), out=out, jobs=1)
    seq.write_text(seq.read_text().replace("[0.3 W, 0.4 W, 0.5 W]", "[0.3 W, 0.45 W]"))
    changed = run_scan(plan_scan(seq), out=out, jobs=1, force=True)
    assert [r.reused for r in changed.shots] == [True, False]
    doc, _ = _shot_manifests(out)
    listed = {sha for rec in doc["shots"] for files in rec["tables"].values() for sha in files.values()}
    assert {p.name.split(".")[0] for p in (out / "tables").iterdir()} == listed
    assert len(listed) == 2 * (2 + 1 + 1)


def test_diff_reads_shot_folders_and_scan_builds_through_the_shared_tables(seq, tmp_path, capsys):
    a, b = tmp_path / "a", tmp_path / "b"
    run_scan(plan_scan(seq), out=a, jobs=1)
    seq.write_text(seq.read_text().replace("[0.3 W, 0.4 W, 0.5 W]", "[0.3 W, 0.4 W, 0.6 W]"))
    run_scan(plan_scan(seq), out=b, jobs=1)
    assert main(["diff", str(a / "shot_0001"), str(b / "shot_0001")]) == 0
    capsys.readouterr()
    assert main(["diff", str(a / "shot_0002"), str(b / "shot_0002"), "--json"]) == 1
    rep = json.loads(capsys.readouterr().out)  # the tables were read: guide_power's output differs
    # a finding whose text moved with the ramp's height (as the two shots' own manifests record) is changed
    moved = {f"{x['code']} [{x['block']}]" for x, y in zip(*(_findings(out / "shot_0002") for out in (a, b)))
             if (x["code"], x["block"]) == (y["code"], y["block"]) and x["message"] != y["message"]}
    assert moved == {"hardware.ramp-undersampled [a]"}  # a taller ramp deviates more from its curve
    assert {(c["kind"], c["subject"]) for c in rep["changes"]} == {("output-differs", "guide_power"),
                                                                   ("param-changed", "b")} | \
        {("finding-changed", m) for m in moved}
    assert {f"{e['code']} [{e['block']}]" for e in rep["changed_findings"]} == moved
    assert main(["diff", str(a), str(b), "--json"]) == 1
    rep = json.loads(capsys.readouterr().out)
    assert {(c["kind"], c["subject"]) for c in rep["changes"]} >= {("scan-shot-removed", "b=500 mW"),
                                                                   ("scan-shot-added", "b=600 mW")}


def test_the_scan_holds_its_claim_while_it_writes_the_shared_tables(seq, tmp_path, monkeypatch):
    from seqgen.emit.claim import writer_active
    from seqgen.scan import tables

    out = tmp_path / "out"
    seen = []
    store = tables.TableStore.__call__

    def watched(self, path, sha, suffix):
        seen.append(writer_active(out))  # asked as another process would: is the claim on OUT held?
        return store(self, path, sha, suffix)

    monkeypatch.setattr(tables.TableStore, "__call__", watched)
    run_scan(plan_scan(seq), out=out, jobs=1)
    assert len(seen) == 3 * 3 * 2 and all(seen)
    assert not writer_active(out)


def test_scan_builds_choose_their_writers_by_name(seq, tmp_path, capsys):
    pytest.importorskip("h5py")
    out = tmp_path / "out"
    assert main(["build", str(seq), "-o", str(out), "--tables", "npz,hdf5", "--jobs", "1"]) == 0
    doc, mans = _shot_manifests(out)
    for rec in doc["shots"]:
        for dev, info in mans[rec["build"]]["devices"].items():
            assert set(info["files"]) == {"npz", "hdf5"}
            assert info["files"]["hdf5"]["path"] == f"../tables/{info['files']['hdf5']['sha256']}.h5"
    assert main(["build", str(seq), "-o", str(tmp_path / "x"), "--tables", "npz,hfd5"]) == 2
    assert "did you mean hdf5?" in capsys.readouterr().err and not (tmp_path / "x").exists()
