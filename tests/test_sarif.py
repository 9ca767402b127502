"""`seqgen check --format sarif`: findings as a SARIF 2.1.0 log for code-review tools.

Checked against the published SARIF 2.1.0 JSON schema, tests/data/sarif-schema-2.1.0.json:
the file `sarif-2.1.0-rtm.4.json` shipped in the source distribution of the PyPI package
sarif-om 1.0.4 (MIT licence; sha256 49729d59...9f61), the schema of the OASIS standard
"Static Analysis Results Interchange Format (SARIF) Version 2.1.0" as of its final
release candidate (rtm.4). It is a draft-04 JSON Schema. The level values, the 1-based
startLine / startColumn and the suppression kinds are those of the OASIS standard
(sections 3.27.10, 3.30.5, 3.30.6 and 3.35.2 (from memory)). The final standard added an optional
`status` to suppressions, which rtm.4 does not allow, so seqgen writes none.
"""

import hashlib
import io
import json
from contextlib import redirect_stdout

import jsonschema
import pytest

from seqgen.cli import main
from seqgen.emit.sarif import SARIF_VERSION, to_sarif, to_sarif_json
from seqgen.findings import Finding, make
from seqgen.pipeline import preflight

from .conftest import ROOT, SEQUENCES
from seqgen.codes import ALL, Code

def _code(slug):
    """The catalogue's code, or a stand-in of a made-up slug (severity error, as an unknown code had)."""
    return ALL.get(slug) or Code(slug, "error", stage="test")



@pytest.fixture(autouse=True)
def _repo_rig_from_tmp_path(monkeypatch):
    # these sequences live in tmp_path and name the repository's rig by absolute path, outside their project
    # root (schema.rig-outside-root): allowed here, as --allow-outside-root would
    monkeypatch.setenv("SEQGEN_ALLOW_OUTSIDE", "1")

SCHEMA_FILE = ROOT / "tests" / "data" / "sarif-schema-2.1.0.json"
SCHEMA_SHA256 = "49729d5909e2b1b976621a29dcebef22e57c78c20d469dfe6c7f15f759904f61"


@pytest.fixture(scope="module")
def validator():
    raw = SCHEMA_FILE.read_bytes()
    assert hashlib.sha256(raw).hexdigest() == SCHEMA_SHA256  # the published file, unmodified
    schema = json.loads(raw)
    jsonschema.Draft4Validator.check_schema(schema)  # the schema declares draft-04
    return jsonschema.Draft4Validator(schema)


def _errors(validator, log):
    return [f"{list(e.absolute_path)}: {e.message}" for e in validator.iter_errors(log)]


def _cli(argv):
    buf = io.StringIO()
    with redirect_stdout(buf):
        code = main(argv)
    return code, buf.getvalue()


def test_schema_rejects_what_the_standard_forbids(validator):
    # the validator is live: a wrong version and an unknown level are refused (SARIF 2.1.0, 3.13.2 and 3.27.10)
    ok = {"version": "2.1.0", "runs": [{"tool": {"driver": {"name": "x"}}, "results": []}]}
    assert not _errors(validator, ok)
    assert _errors(validator, dict(ok, version="2.0.0"))
    bad_level = {"version": "2.1.0", "runs": [{"tool": {"driver": {"name": "x"}},
                                               "results": [{"message": {"text": "m"}, "level": "fatal"}]}]}
    assert _errors(validator, bad_level)


@pytest.mark.parametrize("name", ["unknown_key", "duplicate_key", "negative_duration", "use_outside_root",
                                  "hard_limit", "yaml_syntax", "missing_rig"])
def test_fault_files_give_valid_sarif_with_positions(validator, name):
    res = preflight(SEQUENCES / "faults" / f"{name}.yaml")
    log = json.loads(to_sarif_json(res.findings, sources=res.sources.hashes if res.sources else None))
    assert not _errors(validator, log)
    assert log["version"] == SARIF_VERSION
    run = log["runs"][0]
    rules = run["tool"]["driver"]["rules"]
    assert len(run["results"]) == len(res.findings) > 0
    for f, r in zip(res.findings, run["results"]):
        assert r["ruleId"] == f.code and rules[r["ruleIndex"]]["id"] == f.code
        assert r["level"] == {"error": "error", "warning": "warning", "note": "note"}[f.severity]
        assert f.message in r["message"]["text"]
        loc = r["locations"][0]["physicalLocation"]
        assert loc["artifactLocation"]["uri"] == f.file  # relative path of the file, against SRCROOT
        if f.line:
            assert loc["region"]["startLine"] == f.line and loc["region"]["startColumn"] == f.column


def test_demo_scan_gives_valid_sarif_through_the_cli(validator):
    code, out = _cli(["check", str(SEQUENCES / "na23_thermometry.yaml"), "--format", "sarif"])
    log = json.loads(out)
    assert not _errors(validator, log)
    assert code == 0
    driver = log["runs"][0]["tool"]["driver"]
    assert driver["name"] == "seqgen"
    for rule in driver["rules"]:
        assert rule["shortDescription"]["text"] and rule["defaultConfiguration"]["level"] in ("error", "warning", "note")
    hashes = {a["location"]["uri"]: a["hashes"]["sha-256"] for a in log["runs"][0]["artifacts"]}
    rig = SEQUENCES / "rigs" / "na23_demo_rig.yaml"
    # artifact hashes are the sha256 of the file text (FIPS 180-4 via hashlib)
    assert hashes["sequences/rigs/na23_demo_rig.yaml"] == hashlib.sha256(rig.read_bytes()).hexdigest()


def test_cli_formats_and_json_synonym():
    f = str(SEQUENCES / "faults" / "unknown_key.yaml")
    c1, j1 = _cli(["check", f, "--json"])
    c2, j2 = _cli(["check", f, "--format", "json"])
    c3, t3 = _cli(["check", f, "--format", "text"])
    c4, s4 = _cli(["check", f, "--format", "sarif"])
    assert c1 == c2 == c3 == c4 == 1
    assert json.loads(j1) == json.loads(j2)
    assert "schema.unknown-key" in t3 and "fix:" in t3
    assert json.loads(s4)["runs"][0]["results"][0]["ruleId"] == "schema.unknown-key"


def test_cli_rejects_unknown_format(capsys):
    with pytest.raises(SystemExit) as exc:
        main(["check", str(SEQUENCES / "na23_thermometry.yaml"), "--format", "xml"])
    assert exc.value.code == 2  # argparse usage error: the command could not run


def test_accepted_finding_is_suppressed_in_source(validator):
    f = make(_code("timing.sub-tick"), "edge moved by 20 ns", None, block="load")
    from dataclasses import replace

    acc = replace(f, file="sequences/x.yaml", line=3, column=5, accepted=True, accept_reason="known and harmless")
    log = to_sarif([acc])
    assert not _errors(validator, log)
    sup = log["runs"][0]["results"][0]["suppressions"]
    assert sup == [{"kind": "inSource", "justification": "known and harmless"}]


def test_odd_findings_stay_valid(validator):
    # no file, no line, non-finite numbers in data, absolute and Windows paths, spaces in names
    odd = [
        Finding("schema.check-crashed", "error", "boom"),
        Finding("physics.trap-lost", "warning", "lost", file="/abs/path with space/s.yaml", line=2, column=0,
                time_s=float("nan"), data=(("depth", float("inf")), ("n", 3))),
        Finding("timing.overlap", "note", "x", file="C:\\lab\\seq.yaml", line=1, column=1),
        Finding("not.declared", "note", "a code no module declared", file="s.yaml"),
    ]
    text = to_sarif_json(odd)  # strict JSON (allow_nan=False inside): must not raise
    log = json.loads(text)
    assert not _errors(validator, log)
    res = log["runs"][0]["results"]
    assert "locations" not in res[0]
    assert res[1]["locations"][0]["physicalLocation"]["artifactLocation"]["uri"] == "file:///abs/path%20with%20space/s.yaml"
    assert "region" not in res[1]["locations"][0]["physicalLocation"] or \
        res[1]["locations"][0]["physicalLocation"]["region"]["startLine"] == 2
    assert res[1]["properties"]["data"]["depth"] == "inf"
    assert res[2]["locations"][0]["physicalLocation"]["artifactLocation"]["uri"] == "file:///C:/lab/seq.yaml"


def test_same_findings_same_bytes():
    a = preflight(SEQUENCES / "faults" / "hard_limit.yaml")
    b = preflight(SEQUENCES / "faults" / "hard_limit.yaml")
    assert to_sarif_json(a.findings, sources=a.sources.hashes) == to_sarif_json(b.findings, sources=b.sources.hashes)


def test_scan_findings_merge_into_one_result_per_place(validator, tmp_path):
    rig = (SEQUENCES / "rigs" / "na23_demo_rig.yaml").as_posix()
    seq = tmp_path / "scan.yaml"
    seq.write_text(f"""seqgen: 1
rig: {rig}
params:
  width: {{value: 20 us, scan: [2 us, 20 us, 3 us]}}
blocks:
  - name: a
    at: 1 ms
    actions:
      - pulse: {{channel: camera, duration: width}}
""", encoding="utf-8")
    code, out = _cli(["check", str(seq), "--format", "sarif", "--jobs", "1"])
    log = json.loads(out)
    assert not _errors(validator, log)
    hits = [r for r in log["runs"][0]["results"] if r["ruleId"] == "hardware.pulse-too-short"]
    # the rig's camera needs 10 us pulses: shots 0 and 2 (2 us, 3 us) fail, shot 1 (20 us) passes
    assert len(hits) == 1 and hits[0]["properties"]["data"]["shots"] == [0, 2]
    assert "in shots 0, 2 of 3" in hits[0]["message"]["text"]
    assert code == 1


def test_every_sarif_log_carries_the_safety_caution(validator, tmp_path):
    from seqgen.caution import CAUTION

    rig = (SEQUENCES / "rigs" / "na23_demo_rig.yaml").as_posix()
    scanned = tmp_path / "scan.yaml"
    scanned.write_text(f"seqgen: 1\nrig: {rig}\nparams:\n  width: {{value: 20 us, scan: [2 us, 20 us]}}\n"
                       "blocks:\n  - name: a\n    at: 1 ms\n    actions:\n      - pulse: {channel: camera, "
                       "duration: width}\n", encoding="utf-8")
    broken = SEQUENCES / "faults" / "scan_zip_lengths_differ.yaml"  # a scan that cannot be expanded: its own path
    for path in (SEQUENCES / "na23_thermometry.yaml", SEQUENCES / "faults" / "overlap.yaml", scanned, broken):
        _, out = _cli(["check", str(path), "--format", "sarif", "--jobs", "1"])
        log = json.loads(out)
        assert not _errors(validator, log), path
        assert log["runs"][0]["properties"]["caution"] == CAUTION, path
