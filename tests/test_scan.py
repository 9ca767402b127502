"""Parameter scans and batch preflight: expansion, order, summaries, resume, the cluster path.

The test sequences carry no sample, so the (slow) physics checks skip and each shot costs milliseconds.
"""

import hashlib
import itertools
import json

import numpy as np
import pytest

from seqgen.cli import main
from seqgen.emit.build import BuildExists
from seqgen.pipeline import preflight
from seqgen.scan.plan import plan_scan, shuffled_order, uniform_draws
from seqgen.scan.run import run_scan
from seqgen.scan.summary import scan_json, summarize
from seqgen.validate.schema import load_schema

from .conftest import ROOT, SEQUENCES, readme_shuffled_order

RIG = (SEQUENCES / "rigs" / "na23_demo_rig.yaml").resolve()


@pytest.fixture(autouse=True)
def _repo_rig_from_tmp_path(monkeypatch):
    # these sequences live in tmp_path and name the repository's rig by absolute path, outside their project
    # root (schema.rig-outside-root): allowed here, as --allow-outside-root would
    monkeypatch.setenv("SEQGEN_ALLOW_OUTSIDE", "1")


MS, US = 1e-3, 1e-6

# Two ramps on guide_power, the first lasting `rt`; `b` and `c` are extra scanned params that only
# shift the second ramp (so every shot differs). ao_main's minimum interval is 2 us (the rig file).
BASE = """seqgen: 1
rig: {rig}
params:
{params}
{top}blocks:
  - name: a
    at: 0 s
    actions:
      - ramp: {{channel: guide_power, to: 0.5 W, over: rt}}
      - ramp: {{channel: guide_power, to: 0 W, over: 1 ms, at: 1 ms + b + c}}
"""


def _seq(tmp_path, params, top="", name="s.yaml"):
    lines = {"rt": "rt: 10 us", "b": "b: 0 s", "c": "c: 0 s"}
    for ln in params:
        lines[ln.split(":")[0].strip()] = ln
    text = BASE.format(rig=RIG, params="\n".join("  " + v for v in lines.values()), top=top)
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def _values(scan, name):
    k = scan.plan.names.index(name)
    return [pt[k].value for pt in scan.plan.points]


# ----------------------------------------------------------------------------- expansion


def test_grid_is_the_outer_product_first_written_slowest(tmp_path):
    p = _seq(tmp_path, ["b: {value: 0 s, scan: [1 ms, 2 ms, 3 ms]}", "c: {value: 0 s, scan: {from: 10 us, to: 20 us, steps: 2}}"])
    scan = plan_scan(p)
    assert not scan.findings and len(scan.plan) == 6
    # itertools.product is "equivalent to nested for-loops ... the rightmost element advancing on every
    # iteration" (Python standard library documentation, itertools.product)
    want = list(itertools.product([1 * MS, 2 * MS, 3 * MS], [10 * US, 20 * US]))
    got = list(zip(_values(scan, "b"), _values(scan, "c")))
    np.testing.assert_allclose(np.array(got, dtype=float), np.array(want, dtype=float), rtol=1e-12)


def test_nest_reorders_the_grid(tmp_path):
    p = _seq(tmp_path, ["b: {value: 0 s, scan: [1 ms, 2 ms, 3 ms]}", "c: {value: 0 s, scan: [10 us, 20 us]}"],
             top="scan: {nest: [c, b]}\n")
    scan = plan_scan(p)
    want = [(b, c) for c, b in itertools.product([10 * US, 20 * US], [1 * MS, 2 * MS, 3 * MS])]
    np.testing.assert_allclose(np.array(list(zip(_values(scan, "b"), _values(scan, "c")))), np.array(want), rtol=1e-12)


def test_groups_advance_in_lockstep_and_combine_with_a_grid(tmp_path):
    p = _seq(tmp_path, ["rt: {value: 10 us, scan: {values: [4 us, 6 us, 8 us], group: g1}}",
                        "b: {value: 0 s, scan: {from: 1 ms, to: 3 ms, steps: 3, group: g1}}",
                        "c: {value: 0 s, scan: [10 us, 20 us]}"])
    scan = plan_scan(p)
    assert len(scan.plan) == 3 * 2  # lockstep group (3) x c (2), not 3 x 3 x 2
    lockstep = list(zip([4 * US, 6 * US, 8 * US], [1 * MS, 2 * MS, 3 * MS]))
    want = [(r, b, c) for (r, b), c in itertools.product(lockstep, [10 * US, 20 * US])]
    np.testing.assert_allclose(np.array(list(zip(_values(scan, "rt"), _values(scan, "b"), _values(scan, "c")))),
                               np.array(want), rtol=1e-12)


def test_combine_lockstep_puts_every_param_in_one_group(tmp_path):
    p = _seq(tmp_path, ["b: {value: 0 s, scan: [1 ms, 2 ms, 3 ms]}", "c: {value: 0 s, scan: [10 us, 20 us, 30 us]}"],
             top="scan: {combine: lockstep}\n")
    scan = plan_scan(p)
    np.testing.assert_allclose(np.array(list(zip(_values(scan, "b"), _values(scan, "c")))),
                               np.array(list(zip([1 * MS, 2 * MS, 3 * MS], [10 * US, 20 * US, 30 * US]))), rtol=1e-12)


def test_ranges_match_numpy_linspace_and_geomspace(tmp_path):
    p = _seq(tmp_path, ["b: {value: 0 s, scan: {from: 1 ms, to: 2 ms, steps: 5}}",
                        "c: {value: 1 us, scan: {from: 1 us, to: 1 ms, steps: 4, spacing: log}}"])
    scan = plan_scan(p)
    assert len(scan.plan) == 20
    # reference: numpy.linspace / numpy.geomspace (ends included)
    assert sorted(set(_values(scan, "b"))) == pytest.approx(np.linspace(1e-3, 2e-3, 5), rel=1e-12)
    assert sorted(set(_values(scan, "c"))) == pytest.approx(np.geomspace(1e-6, 1e-3, 4), rel=1e-12)
    assert max(_values(scan, "c")) == 1e-3  # the end is exact


def test_random_set_is_reproducible_and_in_range(tmp_path):
    spec = "b: {value: 0 s, scan: {from: 1 ms, to: 5 ms, random: 12, seed: 42}}"
    a = _values(plan_scan(_seq(tmp_path, [spec], name="a.yaml")), "b")
    b = _values(plan_scan(_seq(tmp_path, [spec], name="b.yaml")), "b")
    other = _values(plan_scan(_seq(tmp_path, [spec.replace("42", "43")], name="c.yaml")), "b")
    assert a == b and a != other and len(a) == 12
    assert all(1e-3 <= v <= 5e-3 for v in a)
    # the documented rule (README, seqgen/scan/plan.py): first 8 bytes of sha256("seqgen-random:<seed>:<k>") / 2**64
    u = [int.from_bytes(hashlib.sha256(f"seqgen-random:42:{k}".encode()).digest()[:8], "big") / 2 ** 64 for k in range(12)]
    assert a == pytest.approx([1e-3 + 4e-3 * x for x in u], rel=1e-12)
    assert uniform_draws(42, 12) == u


def test_shuffled_order_is_reproducible(tmp_path):
    params = ["b: {value: 0 s, scan: {from: 1 ms, to: 10 ms, steps: 10}}", "c: {value: 0 s, scan: [10 us, 20 us]}"]
    s1 = plan_scan(_seq(tmp_path, params, top="scan: {order: shuffled, seed: 7}\n", name="a.yaml"))
    s2 = plan_scan(_seq(tmp_path, params, top="scan: {order: shuffled, seed: 7}\n", name="b.yaml"))
    s3 = plan_scan(_seq(tmp_path, params, top="scan: {order: shuffled, seed: 8}\n", name="c.yaml"))
    plain = plan_scan(_seq(tmp_path, params, name="d.yaml"))
    assert s1.plan.points == s2.plan.points and s1.plan.written_index == s2.plan.written_index
    assert s1.plan.written_index != s3.plan.written_index
    assert sorted(s1.plan.written_index) == list(range(20))  # a permutation: every point once
    assert [plain.plan.points[i] for i in s1.plan.written_index] == list(s1.plan.points)
    # the documented rule: written indices sorted by sha256("seqgen-order:<seed>:<i>")
    want = readme_shuffled_order(7, 20)
    assert list(s1.plan.written_index) == want == shuffled_order(7, 20)


def test_shuffle_needs_a_seed(tmp_path):
    scan = plan_scan(_seq(tmp_path, ["b: {value: 0 s, scan: [1 ms, 2 ms]}"], top="scan: {order: shuffled}\n"))
    assert scan.plan is None and [f.code for f in scan.findings] == ["schema.bad-scan"]
    assert scan.findings[0].line == 7  # the top-level scan: line


# ----------------------------------------------------------------------------- scan mistakes become findings


@pytest.mark.parametrize("param,code,line", [
    ("b: {value: 0 s, scan: [1 ms, 2 mW]}", "schema.wrong-dimension", 5),  # SI Brochure: a time is not a power
    ("b: {value: 0 s, scan: [1 ms, 2]}", "schema.missing-unit", 5),
    ("b: {value: 0 s, scan: {from: 1 ms, to: 2 ms, stpes: 3}}", "schema.unknown-key", 5),
    ("b: {value: 0 s, scan: {from: 1 ms, to: 2 ms}}", "schema.bad-scan", 5),
    ("b: {value: 0 s, scan: {from: -1 ms, to: 2 ms, steps: 3, spacing: log}}", "schema.bad-scan", 5),
    ("b: {value: 0 s, scan: {from: 1 ms, to: 2 ms, random: 3}}", "schema.bad-scan", 5),
    ("b: {value: 0 s, scan: {from: 1 ms, to: 2 ms, steps: 100000000}}", "schema.scan-too-large", 5),
])
def test_bad_scans_are_findings_at_their_line(tmp_path, param, code, line):
    scan = plan_scan(_seq(tmp_path, [param]))
    findings = scan.findings if scan.findings else (scan.sources.findings if scan.sources else [])
    hits = [f for f in findings if f.code == code]
    assert hits, [(f.code, f.line) for f in findings]
    assert hits[0].line == line and hits[0].hint


def test_lockstep_lengths_must_match(tmp_path):
    scan = plan_scan(_seq(tmp_path, ["b: {value: 0 s, scan: {values: [1 ms, 2 ms], group: g}}",
                                     "c: {value: 0 s, scan: {values: [1 us, 2 us, 3 us], group: g}}"]))
    assert scan.plan is None
    assert [(f.code, f.line) for f in scan.findings] == [("schema.scan-length-mismatch", 6)]


def test_check_of_a_bad_scan_exits_1_with_the_finding(tmp_path, capsys):
    p = _seq(tmp_path, ["b: {value: 0 s, scan: [1 ms, 2 mW]}"])
    assert main(["check", str(p)]) == 1
    out = capsys.readouterr().out
    assert "schema.wrong-dimension" in out and "caution:" in out


# ----------------------------------------------------------------------------- summaries


def test_summary_gives_the_range_where_a_finding_fires(tmp_path, capsys):
    # threshold from the rig file: ao_main min_interval 2 us; a ramp needs at least two rows
    path = SEQUENCES / "faults" / "scan_ramp_too_fast.yaml"
    scan = run_scan(plan_scan(path), jobs=1)
    rt = _values(scan, "ramp_time")
    codes = {c.code: c for c in summarize(scan)}
    fast = codes["timing.ramp-too-fast"]
    assert list(fast.shots) == [i for i, v in enumerate(rt) if v < 2 * US]
    assert fast.where == "for ramp_time <= 1 us; quiet from 2 us"
    assert [r.ok for r in scan.shots] == [v >= 2 * US for v in rt]
    assert main(["check", str(path), "--jobs", "1"]) == 1
    out = capsys.readouterr().out
    assert "timing.ramp-too-fast (error): 1 of 5 shots, for ramp_time <= 1 us; quiet from 2 us" in out
    assert "4 of 5 shots pass" in out and "caution:" in out


def test_summary_on_a_grid_names_only_the_param_that_matters(tmp_path):
    p = _seq(tmp_path, ["rt: {value: 10 us, scan: [1 us, 2 us, 4 us]}", "b: {value: 0 s, scan: [1 ms, 2 ms]}"])
    scan = run_scan(plan_scan(p), jobs=1)
    fast = {c.code: c for c in summarize(scan)}["timing.ramp-too-fast"]
    assert len(fast.shots) == 2 and fast.where.startswith("for rt <= 1 us")


def test_summary_when_no_single_param_explains(tmp_path):
    # the ramp lasts rt * n: too fast (< 2 us, the rig's minimum interval) only for rt = 1 us with n = 1
    text = _seq(tmp_path, ["rt: {value: 10 us, scan: [1 us, 3 us]}"]).read_text().replace("over: rt", "over: rt * n")
    text = text.replace("params:\n", "params:\n  n: {value: 1, scan: [1, 3]}\n")
    p = tmp_path / "n.yaml"
    p.write_text(text)
    scan = run_scan(plan_scan(p), jobs=1)
    fast = {c.code: c for c in summarize(scan)}["timing.ramp-too-fast"]
    want = [r.index for r in scan.shots if r.values[scan.plan.names.index("rt")].value *
            r.values[scan.plan.names.index("n")].value < 2 * US]
    assert list(fast.shots) == want == [0]
    assert fast.where == "for n <= 1 and rt <= 1 us"  # a box: both conditions together


def test_json_gives_per_shot_results(tmp_path, capsys):
    path = SEQUENCES / "faults" / "scan_ramp_too_fast.yaml"
    assert main(["check", str(path), "--json", "--jobs", "1"]) == 1
    doc = json.loads(capsys.readouterr().out)
    assert doc["summary"] == {"shots": 5, "pass": 4, "fail": 1}
    assert [s["params"]["ramp_time"]["value"] for s in doc["shots"]] == pytest.approx([1e-6, 2e-6, 3e-6, 5e-6, 1e-5])
    assert [s["ok"] for s in doc["shots"]] == [False, True, True, True, True]
    assert any(f["code"] == "timing.ramp-too-fast" and f["line"] == 10 for f in doc["shots"][0]["findings"])
    assert doc["codes"]["timing.ramp-too-fast"]["shots"] == [0]


def test_unscanned_sequence_checks_as_before(tmp_path, capsys):
    path = _seq(tmp_path, [])
    assert not plan_scan(path).is_scan
    code = main(["check", str(path), "--json"])
    doc = json.loads(capsys.readouterr().out)
    res = preflight(path)
    assert code == 0 and set(doc) == {"file", "summary", "findings", "caution"}
    assert doc["findings"] == [f.to_dict() for f in res.findings]


# ----------------------------------------------------------------------------- execution


def test_pool_and_in_process_agree_and_a_failing_shot_does_not_stop_the_scan(tmp_path):
    p = _seq(tmp_path, ["b: {value: 0 s, scan: [1 ms, 2 ms, 3 ms, 4 ms]}"])
    one = run_scan(plan_scan(p), jobs=1)
    pool = run_scan(plan_scan(p), jobs=2, _crash={1: "raise", 2: "exit"})
    assert [r.ok for r in pool.shots] == [True, False, False, True]
    for i in (1, 2):
        assert [f.code for f in pool.shots[i].findings] == ["schema.shot-failed"]
        assert "b = 2 ms" in pool.shots[1].findings[0].message
    for i in (0, 3):
        assert pool.shots[i].input_sha256 == one.shots[i].input_sha256
        assert pool.shots[i].findings == one.shots[i].findings


def _hashes(scan):
    return [(r.folder, r.manifest_sha256, r.tables) for r in scan.shots]


def test_build_writes_one_build_per_shot_and_a_scan_manifest(tmp_path):
    import jsonschema

    p = _seq(tmp_path, ["b: {value: 0 s, scan: [1 ms, 2 ms, 3 ms]}"], top="scan: {order: shuffled, seed: 3}\n")
    out = tmp_path / "out"
    scan = run_scan(plan_scan(p), out=out, jobs=1)
    man = json.loads((out / "scan.json").read_text())
    # checked against the published JSON Schema draft 2020-12 meta-schema, then against our schema
    jsonschema.Draft202012Validator.check_schema(load_schema("scan.schema.json"))
    jsonschema.validate(man, load_schema("scan.schema.json"))
    assert man["summary"] == {"shots": 3, "built": 3, "refused": 0, "pending": 0}
    assert man["scan"]["seed"] == 3 and man["scan"]["order"] == "shuffled"
    for rec, r in zip(man["shots"], scan.shots):
        folder = out / rec["build"]
        assert hashlib.sha256((folder / "manifest.json").read_bytes()).hexdigest() == rec["manifest_sha256"]
        shot_man = json.loads((folder / "manifest.json").read_text())
        jsonschema.validate(shot_man, load_schema("manifest.schema.json"))
        assert shot_man["params"]["b"]["value"] == pytest.approx(rec["params"]["b"]["value"])
        assert shot_man["params"]["b"]["text"] == f"{rec['params']['b']['value'] * 1e3:g} ms"
        for dev, files in rec["tables"].items():  # the shot's tables, stored once in OUT/tables/ (README)
            entry = shot_man["devices"][dev]["files"]["npz"]
            assert entry["path"] == f"../tables/{files['npz']}.npz"
            assert hashlib.sha256((folder / entry["path"]).read_bytes()).hexdigest() == files["npz"]
    # deterministic: a second fresh build gives the same bytes
    run_scan(plan_scan(p), out=tmp_path / "again", jobs=1)
    assert (tmp_path / "again" / "scan.json").read_bytes() == (out / "scan.json").read_bytes()


def test_resume_rebuilds_only_what_changed(tmp_path):
    p = _seq(tmp_path, ["b: {value: 0 s, scan: [1 ms, 2 ms, 3 ms, 4 ms]}"])
    out = tmp_path / "out"
    # an interrupted build: shot 2 fails, the rest are written
    first = run_scan(plan_scan(p), out=out, jobs=1, _crash={2: "raise"})
    assert first.stats["built"] == 3 and not (out / "shot_0002").exists()
    # same inputs: resume without --force; only the missing shot is built
    again = run_scan(plan_scan(p), out=out, jobs=1)
    assert (again.stats["built"], again.stats["reused"]) == (1, 3) and again.ok
    before = {r.folder: r.manifest_sha256 for r in again.shots}
    # a corrupted table is detected and that shot rebuilt (b moves a ramp of ao_main: its table is the shot's own)
    man = json.loads((out / "shot_0000" / "manifest.json").read_text())
    (out / "shot_0000" / man["devices"]["ao_main"]["files"]["csv"]["path"]).write_bytes(b"garbage\n")
    fixed = run_scan(plan_scan(p), out=out, jobs=1)
    assert (fixed.stats["built"], fixed.stats["reused"]) == (1, 3)
    # other inputs: refused without force; with force only the changed shot is rebuilt
    p.write_text(p.read_text().replace("3 ms, 4 ms", "3.5 ms, 4 ms"))
    with pytest.raises(BuildExists):
        run_scan(plan_scan(p), out=out, jobs=1)
    changed = run_scan(plan_scan(p), out=out, jobs=1, force=True)
    assert (changed.stats["built"], changed.stats["reused"]) == (1, 3)
    assert [r.reused for r in changed.shots] == [True, True, False, True]
    after = {r.folder: r.manifest_sha256 for r in changed.shots}
    assert [before[k] == after[k] for k in sorted(before)] == [True, True, False, True]
    # a shorter scan removes the shots that left it
    p.write_text(p.read_text().replace(", 4 ms]", "]"))
    shorter = run_scan(plan_scan(p), out=out, jobs=1, force=True)
    assert shorter.stats["reused"] == 3 and not (out / "shot_0003").exists()


def test_input_hashes_do_not_depend_on_where_the_project_sits(tmp_path):
    # the same files in two folders: the same shots (a colleague's clone must resume, and diff as unchanged)
    import shutil

    hashes = []
    for where in ("a", "b/deeper"):
        folder = tmp_path / where
        (folder / "rigs").mkdir(parents=True)
        shutil.copy(RIG, folder / "rigs" / "rig.yaml")
        (folder / "pyproject.toml").write_text("", encoding="utf-8")
        p = _seq(folder, ["b: {value: 0 s, scan: [1 ms, 2 ms]}"])
        p.write_text(p.read_text().replace(f"rig: {RIG}", "rig: rigs/rig.yaml"))
        hashes.append([r.input_sha256 for r in run_scan(plan_scan(p), jobs=1).shots])
    assert hashes[0] == hashes[1] and len(set(hashes[0])) == 2


def _tree(folder):
    return {str(p.relative_to(folder)): p.read_bytes() for p in sorted(folder.rglob("*")) if p.is_file()}


def test_a_forced_rebuild_whose_every_shot_fails_keeps_the_previous_build(tmp_path, capsys):
    # as for one file (a build with error findings is not written), nothing is lost: README "Parameter scans"
    p = _seq(tmp_path, ["rt: {value: 10 us, scan: [10 us, 20 us]}"])
    out = tmp_path / "out"
    assert run_scan(plan_scan(p), out=out, jobs=1).stats["built"] == 2
    before = _tree(out)
    # 1 us ramps are shorter than ao_main's 2 us minimum interval (the rig file): every shot has an error
    p.write_text(p.read_text().replace("scan: [10 us, 20 us]", "scan: [1 us, 1.5 us, 0.5 us]"))
    assert main(["build", str(p), "-o", str(out), "--force"]) == 1
    assert "left as it was" in capsys.readouterr().out
    assert _tree(out) == before
    # when some shots pass, the scan is updated: the refused shot's old folder no longer matches and goes
    p.write_text(p.read_text().replace("scan: [1 us, 1.5 us, 0.5 us]", "scan: [10 us, 1 us]"))
    partial = run_scan(plan_scan(p), out=out, jobs=1, force=True)
    assert [r.ok for r in partial.shots] == [True, False]
    assert (out / "shot_0000").is_dir() and not (out / "shot_0001").exists()
    doc = json.loads((out / "scan.json").read_text())
    assert [s["status"] for s in doc["shots"]] == ["built", "refused"]


def test_build_refuses_a_folder_that_is_not_a_scan(tmp_path, capsys):
    p = _seq(tmp_path, ["b: {value: 0 s, scan: [1 ms, 2 ms]}"])
    out = tmp_path / "out"
    out.mkdir()
    (out / "keep.txt").write_text("x")
    assert main(["build", str(p), "-o", str(out), "--jobs", "1"]) == 2
    assert (out / "keep.txt").exists()
    assert main(["build", str(p), "-o", str(out), "--jobs", "1", "--force"]) == 0
    assert not (out / "keep.txt").exists() and (out / "shot_0001" / "manifest.json").exists()
    assert "built 2 of 2 shots" in capsys.readouterr().out


def test_dask_gives_the_same_hashes_as_the_local_pool(tmp_path):
    distributed = pytest.importorskip("distributed")
    p = _seq(tmp_path, ["b: {value: 0 s, scan: [1 ms, 2 ms, 3 ms]}", "rt: {value: 10 us, scan: [1 us, 10 us]}"])
    local = run_scan(plan_scan(p), out=tmp_path / "local", jobs=2)
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=False, dashboard_address=None) as cl:
        remote = run_scan(plan_scan(p), out=tmp_path / "dask", cluster=cl.scheduler_address)
    assert _hashes(local) == _hashes(remote)
    # rt = 1 us is too fast (rig file: ao_main's minimum interval is 2 us): those shots are not built
    assert [r.ok for r in remote.shots] == [v >= 2 * US for v in _values(remote, "rt")] == [False] * 3 + [True] * 3
    assert [r.folder is not None for r in remote.shots] == [r.ok for r in remote.shots]
    assert (tmp_path / "local" / "scan.json").read_bytes() == (tmp_path / "dask" / "scan.json").read_bytes()


def test_scan_json_lists_every_shot_once(tmp_path):
    p = _seq(tmp_path, ["b: {value: 0 s, scan: [1 ms, 2 ms]}", "c: {value: 0 s, scan: [1 us, 2 us]}"])
    doc = scan_json(run_scan(plan_scan(p), jobs=1))
    assert [s["index"] for s in doc["shots"]] == [0, 1, 2, 3]
    assert doc["scan"]["params"][0]["name"] == "b" and doc["summary"]["pass"] == 4


def test_demo_scan_is_clean():
    scan = plan_scan(ROOT / "sequences" / "na23_barrier_scatter.yaml")
    assert scan.plan is not None and len(scan.plan) >= 2 and not scan.findings
