"""Robustness and security: hostile files, include paths, expressions, numbers, interrupted and failing builds.

Outside references, beside each check:
- UTF-8: RFC 3629 (2003): a lone byte 0xB5 or 0xFF is not UTF-8.
- YAML 1.2 specification (yaml.org, 2009): flow collections `[...]` nest without limit in the grammar,
  so a loader must bound nesting itself; tabs may not indent.
- errno values and messages: POSIX (IEEE Std 1003.1), through Python's errno / os.strerror.
- SIGKILL cannot be caught or ignored: POSIX signal.h.
- Python's limit of 4300 digits for int <-> str conversion (Python 3.11 documentation, "Integer string
  conversion length limitation").
Everything else here is seqgen's own contract (README, DEVELOPERS.md): bad input gives findings with a
position, never a traceback; a build is complete or absent; disk errors exit with code 2.
"""

from __future__ import annotations

import ctypes
import errno
import hashlib
import io
import json
import os
import random
import shutil
import signal
import subprocess
import sys
import time
from contextlib import redirect_stderr, redirect_stdout
from pathlib import Path

import pytest

from seqgen.cli import main
from seqgen.load.yamlsrc import MAX_DEPTH, MAX_FILE_BYTES, LoadError, load_file, load_text
from seqgen.pipeline import preflight
from seqgen.resolve.expr import ExprError, evaluate
from seqgen.resolve.sources import load_sources, project_root

from .conftest import ROOT, SEQUENCES

RIG = SEQUENCES / "rigs" / "na23_demo_rig.yaml"


def _cli(argv):
    out, err = io.StringIO(), io.StringIO()
    with redirect_stdout(out), redirect_stderr(err):
        code = main(argv)
    return code, out.getvalue(), err.getvalue()


def _seq(body: str, rig: str = "rig.yaml") -> str:
    return f"seqgen: 1\nrig: {rig}\n" + body


def _write(path: Path, body: str) -> Path:
    """A sequence file with a copy of the demo rig beside it (a rig outside the project root is refused)."""
    shutil.copy(RIG, path.parent / "rig.yaml")
    path.write_text(_seq(body), encoding="utf-8")
    return path


# ----------------------------------------------------------------------------- YAML and files


def test_file_over_the_size_limit(tmp_path):
    big = tmp_path / "big.yaml"
    with open(big, "wb") as fh:  # sparse: the size check must not need to read it
        fh.truncate(MAX_FILE_BYTES + 1)
    with pytest.raises(LoadError) as exc:
        load_file(big)
    assert exc.value.finding.code == "schema.file-too-large"
    code, out, _ = _cli(["check", str(big)])
    assert code == 2 and "schema.file-too-large" in out


def test_deep_flow_nesting_is_refused_not_a_crash():
    # 100 000 nested '[' (YAML 1.2 allows any depth) overflowed the C stack of the libyaml composer and killed
    # the process (SIGSEGV) before the depth was counted on the event stream: run it in a child process
    code = ("from seqgen.load.yamlsrc import load_text, LoadError\n"
            "try:\n    load_text('a: ' + '[' * 100000 + ']' * 100000, 'deep.yaml')\n"
            "except LoadError as e:\n    print(e.finding.code, e.finding.line)\n")
    r = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True, timeout=120)
    assert r.returncode == 0, r.stderr[-2000:]
    # refused at line 1 either by seqgen's depth limit or, with PyYAML >= 6.0.4, by the parser's own
    code, line = r.stdout.split()
    assert code in ("schema.yaml-too-complex", "schema.yaml-syntax") and line == "1"


@pytest.mark.parametrize("text", [
    "- " * (MAX_DEPTH + 5) + "x\n",  # compact block sequences: one level per '- ' on one line
    "".join("  " * i + f"k{i}:\n" for i in range(MAX_DEPTH + 5)) + "  " * (MAX_DEPTH + 5) + "v\n",
    "a: " + "{b: " * (MAX_DEPTH + 5) + "1" + "}" * (MAX_DEPTH + 5) + "\n",
], ids=["compact-sequences", "indented-mappings", "flow-mappings"])
def test_deep_nesting_of_every_kind_is_refused(text):
    with pytest.raises(LoadError) as exc:
        load_text(text, "deep.yaml")
    assert exc.value.finding.code == "schema.yaml-too-complex" and exc.value.finding.line >= 1


def test_directory_given_as_file(tmp_path):
    code, out, _ = _cli(["check", str(tmp_path)])
    assert code == 2 and "is a folder" in out


def test_special_files_are_refused_without_reading(tmp_path):
    # /dev/zero never ends and a FIFO blocks until written: both must be refused from stat alone
    fifo = tmp_path / "pipe.yaml"
    os.mkfifo(fifo)
    for path in (Path("/dev/zero"), fifo):
        with pytest.raises(LoadError) as exc:
            load_file(path)
        assert exc.value.finding.code == "schema.file-missing" and "not a regular file" in exc.value.finding.message


@pytest.mark.parametrize("data,why", [
    (bytes(random.Random(7).randrange(256) for _ in range(4096)), "random bytes"),
    (b"seqgen: 1\nrig: x\nnote: 2.5 \xb5s\n", "Latin-1 micro sign (RFC 3629: lone 0xB5 is not UTF-8)"),
    ("seqgen: 1\n".encode("utf-16"), "UTF-16 with byte-order mark (starts 0xFF 0xFE)"),
    (b"\x7fELF\x02\x01\x01\x00" + b"\x00" * 64, "an executable's header"),
], ids=["random", "latin1", "utf16", "elf"])
def test_binary_and_non_utf8_files(tmp_path, data, why):
    p = tmp_path / "bad.yaml"
    p.write_bytes(data)
    with pytest.raises(LoadError) as exc:
        load_file(p)
    f = exc.value.finding
    assert f.code == "schema.yaml-syntax" and f.file
    if "UTF-8" in f.message:
        assert "UTF-8" in f.hint
    code, out, err = _cli(["check", str(p)])
    assert code == 1 and "Traceback" not in out + err


@pytest.mark.parametrize("text,code", [
    ("seqgen: 1\n\trig: x\n", "schema.yaml-syntax"),  # YAML 1.2: tabs may not indent
    ("seqgen: 1\nx: \x00\n", "schema.yaml-syntax"),  # NUL is not a printable YAML character
    ("seqgen: 1\nx: !!python/object/apply:os.system ['true']\n", "schema.yaml-unsupported"),
    ("seqgen: 1\n? [a, b]\n: 1\n", "schema.yaml-unsupported"),
    ("seqgen: 1\n---\nseqgen: 1\n", "schema.yaml-unsupported"),
    ("seqgen: 1\nx: !!int " + "9" * 5000 + "\n", "schema.yaml-unsupported"),
], ids=["tab", "nul", "python-tag", "complex-key", "two-documents", "huge-tagged-int"])
def test_hostile_yaml_gives_a_load_finding(text, code):
    with pytest.raises(LoadError) as exc:
        load_text(text, "h.yaml")
    assert exc.value.finding.code == code


# ----------------------------------------------------------------------------- use: paths


def _project(tmp_path, marker: str | None):
    root = tmp_path / "lab"
    (root / "seqs").mkdir(parents=True)
    (root / "shared").mkdir()
    if marker == ".git":
        (root / ".git").mkdir()
    elif marker:
        (root / marker).write_text("", encoding="utf-8")
    fragment = "seqgen: 1\nfragment: true\nparams:\n  t_hold: 2 ms\n"
    (root / "shared" / "prep.yaml").write_text(fragment, encoding="utf-8")
    (tmp_path / "outside.yaml").write_text(fragment, encoding="utf-8")
    return root


def _using(root: Path, target: str) -> Path:
    return _write(root / "seqs" / "main.yaml", f"use:\n  - file: {target}\nblocks:\n  - name: a\n    at: 1 ms\n"
                  "    actions:\n      - hold: {duration: t_hold}\n")


def _codes(path, **kw):
    return [(f.code, f.line) for f in load_sources(path, **kw).findings if f.severity == "error"]


@pytest.mark.parametrize("marker", ["pyproject.toml", ".git", "seqgen.toml"])
def test_project_root_is_the_nearest_marked_folder(tmp_path, marker):
    root = _project(tmp_path, marker)
    assert project_root((root / "seqs" / "main.yaml").resolve()) == root.resolve()
    assert _codes(_using(root, "../shared/prep.yaml")) == []
    assert _codes(_using(root, "../../outside.yaml")) == [("schema.use-outside-root", 4)]


def test_without_a_marker_the_root_is_the_sequence_folder(tmp_path):
    root = _project(tmp_path, None)
    assert project_root((root / "seqs" / "main.yaml").resolve()) == (root / "seqs").resolve()
    assert _codes(_using(root, "../shared/prep.yaml")) == [("schema.use-outside-root", 4)]


def test_absolute_paths_and_symlinks_leading_out_are_refused(tmp_path):
    root = _project(tmp_path, "pyproject.toml")
    assert _codes(_using(root, str(tmp_path / "outside.yaml"))) == [("schema.use-outside-root", 4)]
    (root / "shared" / "link.yaml").symlink_to(tmp_path / "outside.yaml")  # inside by name, outside in fact
    assert _codes(_using(root, "../shared/link.yaml")) == [("schema.use-outside-root", 4)]
    (root / "shared" / "inner.yaml").symlink_to(root / "shared" / "prep.yaml")
    assert _codes(_using(root, "../shared/inner.yaml")) == []


def test_a_used_file_may_not_reach_out_either(tmp_path):
    root = _project(tmp_path, "pyproject.toml")
    (root / "shared" / "hop.yaml").write_text("seqgen: 1\nfragment: true\nuse:\n  - file: ../../outside.yaml\n",
                                              encoding="utf-8")
    found = [(f.code, f.file.endswith("hop.yaml"), f.line) for f in load_sources(_using(root, "../shared/hop.yaml")).findings
             if f.severity == "error"]
    assert found == [("schema.use-outside-root", True, 4)]


def test_outside_root_allowed_by_env_or_flag(tmp_path, monkeypatch):
    root = _project(tmp_path, "pyproject.toml")
    seq = _using(root, "../../outside.yaml")
    assert _codes(seq, allow_outside_root=True) == []
    monkeypatch.setenv("SEQGEN_ALLOW_OUTSIDE", "1")
    assert _codes(seq) == []
    monkeypatch.delenv("SEQGEN_ALLOW_OUTSIDE")
    code, out, _ = _cli(["check", str(seq)])
    assert code == 1 and "schema.use-outside-root" in out
    code, out, _ = _cli(["check", str(seq), "--allow-outside-root"])
    assert code == 0, out
    assert "SEQGEN_ALLOW_OUTSIDE" not in os.environ  # the flag does not leak out of the command


def test_symlink_loop_in_use_is_a_finding(tmp_path):
    root = _project(tmp_path, "pyproject.toml")
    (root / "shared" / "loop_a.yaml").symlink_to(root / "shared" / "loop_b.yaml")
    (root / "shared" / "loop_b.yaml").symlink_to(root / "shared" / "loop_a.yaml")
    found = [f for f in load_sources(_using(root, "../shared/loop_a.yaml")).findings if f.severity == "error"]
    assert [(f.code, f.line) for f in found] == [("schema.file-missing", 4)]
    assert "link" in found[0].hint


def test_symlink_loop_as_the_sequence_itself(tmp_path):
    (tmp_path / "a.yaml").symlink_to(tmp_path / "b.yaml")
    (tmp_path / "b.yaml").symlink_to(tmp_path / "a.yaml")
    code, out, err = _cli(["check", str(tmp_path / "a.yaml")])
    assert code == 2 and "schema.file-missing" in out and "Traceback" not in err


# ----------------------------------------------------------------------------- rig: paths (the use: policy)

_RIGGED = "blocks:\n  - name: a\n    at: 5 ms\n    actions:\n      - pulse: {channel: camera, duration: 20 us}\n"


def _rigged(root: Path, rig: str) -> Path:
    seq = root / "seqs" / "main.yaml"
    seq.write_text(_seq(_RIGGED, rig=rig), encoding="utf-8")
    return seq


def _lab_with_rigs(tmp_path, marker="pyproject.toml"):
    root = _project(tmp_path, marker)
    (root / "rigs").mkdir()
    shutil.copy(RIG, root / "rigs" / "demo.yaml")
    shutil.copy(RIG, tmp_path / "outside_rig.yaml")
    return root


@pytest.mark.parametrize("marker", ["pyproject.toml", ".git", "seqgen.toml"])
def test_a_rig_inside_the_project_root_is_read(tmp_path, marker):
    root = _lab_with_rigs(tmp_path, marker)
    src = load_sources(_rigged(root, "../rigs/demo.yaml"))
    assert _codes(_rigged(root, "../rigs/demo.yaml")) == [] and src.rig is not None
    assert _codes(_rigged(root, str(root / "rigs" / "demo.yaml"))) == []  # absolute, but inside


@pytest.mark.parametrize("how", ["relative", "absolute", "symlink", "no-marker"])
def test_a_rig_outside_the_project_root_is_refused_at_its_line(tmp_path, how):
    root = _lab_with_rigs(tmp_path, None if how == "no-marker" else "pyproject.toml")
    rig = {"relative": "../../outside_rig.yaml", "absolute": str(tmp_path / "outside_rig.yaml"),
           "symlink": "../rigs/link.yaml", "no-marker": "../rigs/demo.yaml"}[how]
    (root / "rigs" / "link.yaml").symlink_to(tmp_path / "outside_rig.yaml")  # inside by name, outside in fact
    seq = _rigged(root, rig)
    src = load_sources(seq)
    assert [(f.code, f.line, f.column) for f in src.findings] == [("schema.rig-outside-root", 2, 1)]
    assert src.rig is None and "--allow-outside-root" in src.findings[0].hint
    code, out, err = _cli(["check", str(seq)])
    assert code == 1 and "schema.rig-outside-root" in out and "Traceback" not in err


def test_an_outside_rig_is_refused_before_it_is_read(tmp_path):
    # what the file holds never reaches the findings: refused by path alone (a non-YAML file would be quoted
    # in a syntax finding, and an unreadable one would be a different finding)
    root = _lab_with_rigs(tmp_path)
    secret = tmp_path / "secret.txt"
    secret.write_text("token-3f9a\n", encoding="utf-8")
    seq = _rigged(root, str(secret))
    assert _codes(seq) == [("schema.rig-outside-root", 2)]
    assert [f.code for f in load_sources(seq, allow_outside_root=True).findings] == ["schema.wrong-type"]
    secret.chmod(0)
    for fmt in ("text", "json", "sarif"):
        code, out, err = _cli(["check", str(seq), "--format", fmt])
        assert code == 1 and "token-3f9a" not in out + err and "schema.rig-outside-root" in out


def test_an_outside_rig_is_allowed_by_env_or_flag(tmp_path, monkeypatch):
    root = _lab_with_rigs(tmp_path)
    seq = _rigged(root, "../../outside_rig.yaml")
    assert _codes(seq, allow_outside_root=True) == []
    monkeypatch.setenv("SEQGEN_ALLOW_OUTSIDE", "1")
    assert _codes(seq) == []
    monkeypatch.delenv("SEQGEN_ALLOW_OUTSIDE")
    for verb in ("check", "show"):
        assert _cli([verb, str(seq)])[0] == 1
        code, out, _ = _cli([verb, str(seq), "--allow-outside-root"])
        assert code == 0, out
    assert "SEQGEN_ALLOW_OUTSIDE" not in os.environ  # the flag does not leak out of the command


def test_a_scanned_sequence_with_an_outside_rig(tmp_path):
    # seqgen check plans a scan through the same loader: refused there too, allowed by the same switch
    root = _lab_with_rigs(tmp_path)
    seq = root / "seqs" / "scan.yaml"
    seq.write_text(_seq("params:\n  w: {value: 20 us, scan: [20 us, 30 us]}\nblocks:\n  - name: a\n    at: 1 ms\n"
                        "    actions:\n      - pulse: {channel: camera, duration: w}\n", rig="../../outside_rig.yaml"),
                   encoding="utf-8")
    code, out, _ = _cli(["check", str(seq), "--json", "--jobs", "1"])
    assert code == 1 and [f["code"] for f in json.loads(out)["findings"]] == ["schema.rig-outside-root"]
    code, out, _ = _cli(["check", str(seq), "--json", "--jobs", "1", "--allow-outside-root"])
    assert code == 0 and len(json.loads(out)["shots"]) == 2


def test_symlink_loop_as_the_rig_is_a_finding(tmp_path):
    root = _lab_with_rigs(tmp_path)
    (root / "rigs" / "loop_a.yaml").symlink_to(root / "rigs" / "loop_b.yaml")
    (root / "rigs" / "loop_b.yaml").symlink_to(root / "rigs" / "loop_a.yaml")
    found = load_sources(_rigged(root, "../rigs/loop_a.yaml")).findings
    assert [(f.code, f.line) for f in found] == [("schema.file-missing", 2)] and "link" in found[0].hint


# ----------------------------------------------------------------------------- expressions

HOSTILE = [
    "__import__('os').system('touch {canary}')",
    "().__class__.__bases__[0].__subclasses__()",
    "(1).__class__", "open('{canary}', 'w')", "eval('1')", "exec('x=1')", "globals()", "lambda: 1",
    "(lambda: 1)()", "[x for x in (1, 2)]", "{{1: 2}}", "x[0]", "f'{{1}}'", "(x := 1)", "'a' * 1000000",
    "b'x'", "1 if 1 else 2", "1 < 2", "not 1", "1 and 2", "~1", "1 << 64", "1 % 2", "1 // 2", "max(*(1, 2))",
    "max(a=1)", "min()", "sqrt()", "sqrt(1, 2)", "pi()", "e.real", "sin.__call__(1)", "...", "None", "True",
    "import os", "1; 2", "yield 1", "await x", "\\x00", "()", "[]", "",
]
OVERFLOWS = ["10 ** 10 ** 10", "(2 ** 64) ** 64", "exp(1000)", "1e308 * 10", "9 ** 64 * 9 ** 64 * 9 ** 64 * 9 ** 64 * 9 ** 64 * 9 ** 64",
             "1" * 400, "log(0)", "sqrt(-1)", "(-8) ** 0.5", "2 ** 65", "1e200 * 1e200 - 1e200 * 1e200"]


@pytest.mark.parametrize("text", HOSTILE)
def test_hostile_expressions_are_refused(text, tmp_path):
    canary = tmp_path / "canary"
    with pytest.raises(ExprError) as exc:
        evaluate(text.format(canary=canary), {})
    assert exc.value.kind in ("syntax", "forbidden", "undefined", "dimension")
    assert not canary.exists()


@pytest.mark.parametrize("text", OVERFLOWS)
def test_overflowing_expressions_are_findings(text):
    with pytest.raises(ExprError) as exc:
        evaluate(text, {})
    assert exc.value.kind in ("overflow", "zero-division")


def test_deeply_nested_expression_is_refused():
    for text in ("-" * 1990 + "1", "+-" * 995 + "1", "(" * 300 + "1" + ")" * 300, "+".join(["1"] * 999)):
        with pytest.raises(ExprError) as exc:  # nesting past the parser's or the walker's depth fails cleanly
            evaluate(text, {})
        assert exc.value.kind == "syntax"
    assert evaluate("+".join(["1"] * 200), {}).value == 200  # a sum of 200 terms is fine (arithmetic)


# ----------------------------------------------------------------------------- numbers


@pytest.mark.parametrize("action,code,line", [
    ("hold: {duration: .nan}", "schema.non-finite", 7),
    ("hold: {duration: .inf}", "schema.non-finite", 7),
    ("hold: {duration: 1e400 ms}", "schema.overflow", 7),  # overflows to inf when read (IEEE 754 binary64)
    ("hold: {duration: nan ms}", "schema.bad-expression", 7),
    ("hold: {duration: 0 ms}", "schema.negative-duration", 7),
    ("hold: {duration: -1 ms}", "schema.negative-duration", 7),
    ("hold: {duration: 1e30 s}", "schema.overflow", 7),
    ("hold: {duration: 1e11 s}", "schema.overflow", 4),  # under the magnitude bound, past 2^52 ticks at 10 MHz
    ("hold: {duration: " + "9" * 4000 + "}", "schema.overflow", 7),  # an int too large for a float
    ("hold: {duration: " + "9" * 5000 + "}", "schema.non-finite", 7),  # past Python's 4300-digit int limit
    ("hold: {duration: '" + "1" * 400 + " * 1 ms'}", "schema.overflow", 7),
    ("hold: {duration: 'exp(1000) * 1 s'}", "schema.overflow", 7),
    ("set: {channel: guide_power, value: .nan}", "schema.non-finite", 7),
    ("set: {channel: guide_power, value: 1e300 W}", "schema.overflow", 7),
    ("ramp: {channel: guide_power, to: 1 W, over: 10 ms, shape: table, table: [[0, 0], [0.5, .nan], [1, 1]]}",
     "schema.non-finite", 7),
    ("ramp: {channel: guide_power, to: 1 W, over: 10 ms, shape: table, table: [[1, 0], [0, 1]]}", "schema.bad-value", 7),
    ("ramp: {channel: guide_power, to: 1 W, over: 10 ms, shape: table}", "schema.missing-key", 7),
    ("ramp: {channel: guide_power, to: 1 W, over: 10 ms, tolerance: 0 V}", "schema.bad-value", 7),
    ("ramp: {channel: guide_power, to: 1 W, over: 10 ms, tolerance: 1e-300 V}", "schema.bad-value", 7),
    ("push: {beam: cross_a, duration: 1 ms}", "schema.missing-key", 7),
])
def test_bad_numbers_are_findings_at_their_line(tmp_path, action, code, line):
    p = tmp_path / "n.yaml"
    _write(p, "blocks:\n  - name: a\n    at: 1 ms\n    actions:\n      - " + action + "\n")
    res = preflight(p)
    hits = [f for f in res.findings if f.code == code]
    assert hits, [(f.code, f.message) for f in res.findings]
    assert hits[0].line == line and hits[0].hint
    assert not res.ok


def test_no_traceback_from_the_cli_on_hostile_files(tmp_path):
    bodies = ["hold: {duration: '(1).__class__'}", "hold: {duration: '10**10**10 s'}",
              "set: {channel: probe_shutter, value: 1e300}", "trigger: {channel: camera, width: 0 s}"]
    for i, body in enumerate(bodies):
        p = tmp_path / f"h{i}.yaml"
        _write(p, "blocks:\n  - name: a\n    at: 1 ms\n    actions:\n      - " + body + "\n")
        for fmt in ("text", "json", "sarif"):
            code, out, err = _cli(["check", str(p), "--format", fmt])
            assert code == 1 and "Traceback" not in out + err and out


# ----------------------------------------------------------------------------- builds: interruption, disk errors


def _tree(folder: Path) -> dict:
    return {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in sorted(folder.iterdir())}


def _complete(folder: Path) -> bool:
    """Every file the manifest lists is there with its hash, and nothing else."""
    man = json.loads((folder / "manifest.json").read_text(encoding="utf-8"))
    listed = {"manifest.json"}
    for dev in man["devices"].values():
        for entry in dev["files"].values():
            listed.add(entry["path"])
            if hashlib.sha256((folder / entry["path"]).read_bytes()).hexdigest() != entry["sha256"]:
                return False
    return {p.name for p in folder.iterdir()} == listed


_TINY = """seqgen: 1
rig: rigs/na23_demo_rig.yaml
params:
  level: LEVEL
blocks:
  - name: ramp_up
    at: 1 ms
    actions:
      - ramp: {channel: guide_power, to: level, over: 300 ms, shape: minimum_jerk}
      - pulse: {channel: camera, duration: 20 us}
      - sweep: {channel: mw, from: 1.7 GHz, to: 1.8 GHz, over: 2 ms}
  - name: off
    after: ramp_up + 1 ms
    actions:
      - set: {channel: guide_power, value: 0 W}
"""


@pytest.fixture(scope="module")
def two_builds(tmp_path_factory):
    """A small project with two sequences (about 20 000 table rows each) and a reference build of each."""
    from seqgen.emit.build import write_build

    proj = tmp_path_factory.mktemp("proj")
    (proj / "rigs").mkdir()
    shutil.copy(RIG, proj / "rigs" / RIG.name)
    (proj / "a.yaml").write_text(_TINY.replace("LEVEL", "0.6 W"), encoding="utf-8")
    (proj / "b.yaml").write_text(_TINY.replace("LEVEL", "0.7 W"), encoding="utf-8")
    refs = {}
    here = os.getcwd()
    os.chdir(proj)  # file names in the manifest are relative to the working folder, as in the child processes
    try:
        for name in ("a", "b"):
            res = preflight(f"{name}.yaml")
            assert res.ok, [str(f) for f in res.findings]
            refs[name] = _tree(write_build(proj / f"ref_{name}", res.shot, res.compiled, res.findings))
    finally:
        os.chdir(here)
    assert refs["a"] != refs["b"]
    return proj, refs


def _build_proc(proj: Path, name: str, out: Path, prelude: str = "", **env):
    code = prelude + f"import sys\nfrom seqgen.cli import main\nsys.exit(main(['build', '{name}.yaml', '-o', '{out}', '--force']))\n"
    return subprocess.Popen([sys.executable, "-c", code], cwd=proj, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE,
                            env=dict(os.environ, PYTHONPATH=str(ROOT), **env))


def _state(out: Path, refs: dict) -> str:
    assert out.is_dir(), "the build folder vanished"
    tree = _tree(out)
    for name, ref in refs.items():
        if tree == ref:
            assert _complete(out)
            return name
    raise AssertionError(f"half-written build folder: {sorted(tree)}")


def test_sigkill_at_random_moments_leaves_a_whole_build(two_builds):
    proj, refs = two_builds
    out = proj / "out"
    t0 = time.perf_counter()
    assert _build_proc(proj, "a", out).wait(timeout=300) == 0
    seconds = time.perf_counter() - t0  # one whole build in a child process, start-up included
    assert _state(out, refs) == "a"  # the child's build is byte for byte the reference
    current = "a"
    rng = random.Random(20261202)  # seeded: the same moments on every run
    kills = 0
    for i in range(4):
        target = "b" if current == "a" else "a"
        proc = _build_proc(proj, target, out)
        time.sleep(rng.uniform(0.4, 1.05) * seconds)  # mostly late, where the files are written
        if proc.poll() is None:
            proc.send_signal(signal.SIGKILL)  # POSIX: cannot be caught, no clean-up runs
            kills += 1
        proc.wait(timeout=300)
        state = _state(out, refs)
        assert state in (current, target)
        current = state
        # nothing but hidden temporary folders may remain beside it
        visible = {p.name for p in proj.iterdir() if not p.name.startswith(".")}
        assert visible <= {"rigs", "a.yaml", "b.yaml", "ref_a", "ref_b", "out"} | \
            {n for n in visible if n.startswith("out_")}
    assert kills >= 1  # at least one build really was killed mid-way


@pytest.mark.parametrize("where,expect", [
    ("write_npz", "old"),  # SIGKILL while writing the second table
    ("manifest", "old"),   # after every file is written, before the swap
    ("rmtree", "new"),     # right after the swap, before the previous build is removed
    ("rename", "any"),     # at the first rename: with two renames (old away, new in) there was no build at all here
])
def test_sigkill_at_each_step_of_the_write(two_builds, tmp_path, where, expect):
    proj, refs = two_builds
    out = proj / f"out_{where}"
    shutil.copytree(proj / "ref_a", out)  # the previous build
    prelude = {
        "write_npz": "import os, signal, seqgen.emit.writers as W\n_w = W.write_npz\n_n = [0]\n"
                     "def w(*a, **k):\n    _n[0] += 1\n    if _n[0] == 2:\n        os.kill(os.getpid(), signal.SIGKILL)\n"
                     "    return _w(*a, **k)\nW.write_npz = w\n",
        "manifest": "import os, signal, seqgen.emit.build as B\n_s = B._swap_into_place\n"
                    "def s(*a, **k):\n    os.kill(os.getpid(), signal.SIGKILL)\nB._swap_into_place = s\n",
        "rmtree": "import os, signal, seqgen.emit.build as B\n_r = B.shutil.rmtree\n"
                  "def r(*a, **k):\n    os.kill(os.getpid(), signal.SIGKILL)\nB.shutil.rmtree = r\n",
        "rename": "import os, signal\n_o = os.rename\n"
                  "def r(*a, **k):\n    _o(*a, **k)\n    os.kill(os.getpid(), signal.SIGKILL)\nos.rename = r\n",
    }[where]
    proc = _build_proc(proj, "b", out, prelude)
    rc = proc.wait(timeout=300)
    if expect == "any":  # killed at the first rename if there is one; else the build ran to its end
        assert rc in (0, -signal.SIGKILL)
        assert _state(out, refs) in ("a", "b")
        return
    assert rc == -signal.SIGKILL, proc.stderr.read().decode(errors="replace")[-2000:]
    assert _state(out, refs) == ("a" if expect == "old" else "b")


def _at_second_table(action: str) -> str:
    """A child prelude that runs `action` (Python, indented by 8) when the build starts its second table file."""
    return ("import os, signal, time, seqgen.emit.writers as W\n_w = W.write_npz\n_n = [0]\n"
            "def w(*a, **k):\n    _n[0] += 1\n    if _n[0] == 2:\n" + action + "    return _w(*a, **k)\nW.write_npz = w\n")


_KILL = "        os.kill(os.getpid(), signal.SIGKILL)\n"


def _temporaries(out: Path) -> list:
    staging = out.parent / f".{out.name}.tmp"
    return sorted(p.name for p in staging.iterdir()) if staging.exists() else []


def test_the_next_build_removes_what_a_killed_build_left(two_builds):
    proj, refs = two_builds
    out = proj / "out_stale"
    shutil.copytree(proj / "ref_a", out)
    killed = _build_proc(proj, "b", out, _at_second_table(_KILL))
    assert killed.wait(timeout=300) == -signal.SIGKILL
    left = _temporaries(out)
    assert len(left) == 1 and left[0].startswith(f"{killed.pid}-")  # the dead writer's, named with its pid
    assert _state(out, refs) == "a"
    assert _build_proc(proj, "b", out).wait(timeout=300) == 0
    assert _state(out, refs) == "b"
    assert not (proj / ".out_stale.tmp").exists()  # removed, and the emptied staging folder with it
    assert not [p.name for p in proj.iterdir() if p.name.startswith(".out_stale")]


def test_a_live_builds_temporary_is_left_alone(two_builds):
    # a build paused half-way (another process, alive) owns its temporary folder and the claim on the output: a
    # second build of the same output (--force: waits for the claim, here at most 1 s) must not remove it, nor
    # write; once the first is killed, the next build does
    proj, refs = two_builds
    out = proj / "out_live"
    shutil.copytree(proj / "ref_a", out)
    flag = proj / "paused.flag"
    pause = f"        open({str(flag)!r}, 'w').close()\n        time.sleep(300)\n"
    paused = _build_proc(proj, "b", out, _at_second_table(pause))
    try:
        for _ in range(6000):
            if flag.exists() or paused.poll() is not None:
                break
            time.sleep(0.05)
        assert flag.exists(), "the paused build never reached its second table"
        owned = _temporaries(out)
        assert len(owned) == 1 and owned[0].startswith(f"{paused.pid}-")
        second = _build_proc(proj, "b", out, SEQGEN_LOCK_WAIT="1")
        assert second.wait(timeout=300) == 2
        assert f"pid {paused.pid} " in second.stderr.read().decode(errors="replace")  # names the writer
        assert _state(out, refs) == "a" and _temporaries(out) == owned  # left alone while its writer lives
    finally:
        paused.kill()
        paused.wait(timeout=60)
        flag.unlink(missing_ok=True)
    assert _build_proc(proj, "a", out).wait(timeout=300) == 0
    assert _state(out, refs) == "a" and _temporaries(out) == []


def _dead_pid() -> int:
    child = subprocess.Popen(["true"])
    child.wait()  # reaped: its pid names no process now (POSIX kill(2) with signal 0 gives ESRCH)
    return child.pid


def test_only_this_outputs_dead_unlocked_temporaries_are_removed(tmp_path):
    import fcntl

    from seqgen.emit.build import remove_stale_temporaries

    out = tmp_path / "out"
    staging = tmp_path / ".out.tmp"
    dead = _dead_pid()
    for name in (f"{dead}-abcdefgh", f"{os.getpid()}-livewrtr", f"{dead}-lockedxx", f"{dead}-short", "notes",
                 f"{dead}-abcdefgh.x"):
        (staging / name).mkdir(parents=True)
        (staging / name / "t.npz").write_bytes(b"x")
    (tmp_path / "precious").mkdir()
    (tmp_path / "precious" / "data").write_bytes(b"keep")
    (staging / f"{dead}-symlinkx").symlink_to(tmp_path / "precious")  # a link of the right name: never followed
    (staging / f"{dead}-plainfil").write_bytes(b"a file, not a folder")
    (tmp_path / ".other.tmp" / f"{dead}-abcdefgh").mkdir(parents=True)  # another output's
    (tmp_path / ".out.tmp-abcdefgh").mkdir()  # an older layout: no pid, so no way to tell its writer is gone
    fd = os.open(staging / f"{dead}-lockedxx", os.O_RDONLY)  # a writer elsewhere (another machine) holds it
    fcntl.flock(fd, fcntl.LOCK_EX)
    try:
        removed = remove_stale_temporaries(out)
    finally:
        os.close(fd)
    assert removed == [staging / f"{dead}-abcdefgh"]
    assert sorted(p.name for p in staging.iterdir()) == sorted(
        [f"{os.getpid()}-livewrtr", f"{dead}-lockedxx", f"{dead}-short", "notes", f"{dead}-abcdefgh.x",
         f"{dead}-symlinkx", f"{dead}-plainfil"])
    assert (tmp_path / "precious" / "data").read_bytes() == b"keep"
    assert (tmp_path / ".other.tmp" / f"{dead}-abcdefgh").is_dir() and (tmp_path / ".out.tmp-abcdefgh").is_dir()
    assert remove_stale_temporaries(out) == [staging / f"{dead}-lockedxx"]  # once its lock is released


def test_a_file_in_the_way_of_the_staging_folder_is_exit_2(two_builds, tmp_path):
    (tmp_path / ".b.tmp").write_text("not a folder", encoding="utf-8")
    code, _, err = _cli(["build", str(two_builds[0] / "a.yaml"), "-o", str(tmp_path / "b")])
    assert code == 2 and "cannot write build" in err and ".b.tmp" in err and "Traceback" not in err
    assert sorted(p.name for p in tmp_path.iterdir()) == [".b.tmp"]


def _enospc(*args, **kwargs):
    raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))


def test_disk_full_is_a_clear_message_and_exit_2(two_builds, tmp_path, monkeypatch):
    import seqgen.emit.writers as W

    seq = str(two_builds[0] / "a.yaml")
    out = tmp_path / "b"
    assert _cli(["build", seq, "-o", str(out)])[0] == 0
    before = _tree(out)
    monkeypatch.setattr(W, "write_csv", _enospc)
    code, _, err = _cli(["build", seq, "-o", str(out), "--force"])
    assert code == 2
    assert "cannot write build" in err and os.strerror(errno.ENOSPC) in err and "Traceback" not in err
    assert _tree(out) == before  # the previous build is untouched
    assert [p.name for p in tmp_path.iterdir()] == ["b"]  # and the half-written temporary folder is gone


def test_permission_denied_by_monkeypatch_is_exit_2(two_builds, tmp_path, monkeypatch):
    import seqgen.emit.build as B

    def denied(*a, **k):
        raise PermissionError(errno.EACCES, os.strerror(errno.EACCES), str(tmp_path))

    monkeypatch.setattr(B.tempfile, "mkdtemp", denied)
    code, _, err = _cli(["build", str(two_builds[0] / "a.yaml"), "-o", str(tmp_path / "b")])
    assert code == 2 and os.strerror(errno.EACCES) in err


def _drop_dac_override():
    # as root the mode bits of a folder do not stop writes (CAP_DAC_OVERRIDE); drop that capability from the
    # bounding set before exec so the child sees the read-only folder as any user would (prctl PR_CAPBSET_DROP)
    libc = ctypes.CDLL(None, use_errno=True)
    for cap in (1, 2, 3):  # CAP_DAC_OVERRIDE, CAP_DAC_READ_SEARCH, CAP_FOWNER (linux/capability.h)
        if libc.prctl(24, cap, 0, 0, 0) != 0:
            raise OSError(ctypes.get_errno(), "prctl(PR_CAPBSET_DROP)")


def test_read_only_folder_is_a_clear_message_and_exit_2(two_builds, tmp_path):
    ro = tmp_path / "ro"
    ro.mkdir()
    ro.chmod(0o555)
    try:
        r = subprocess.run([sys.executable, "-m", "seqgen", "build", str(two_builds[0] / "a.yaml"),
                            "-o", str(ro / "b")], cwd=ROOT, capture_output=True, text=True, timeout=300,
                           preexec_fn=_drop_dac_override if os.geteuid() == 0 else None)
    finally:
        ro.chmod(0o755)
    assert r.returncode == 2, r.stderr
    assert os.strerror(errno.EACCES) in r.stderr and "Traceback" not in r.stderr
    assert list(ro.iterdir()) == []


def test_output_below_a_file_is_exit_2(two_builds, tmp_path):
    (tmp_path / "f").write_text("x", encoding="utf-8")
    code, _, err = _cli(["build", str(two_builds[0] / "a.yaml"), "-o", str(tmp_path / "f" / "b")])
    assert code == 2 and "cannot write build" in err
