"""Several seqgen processes writing the same output at once: one writes, the others are refused or wait.

The oracle is outside the code under test: sha256 (hashlib, FIPS 180-4) of every file against its manifest,
the exit codes the README promises (0 written, 2 refused), process ids from the operating system, and which
input file each folder was built from (its manifest's `sequence`).
"""

import hashlib
import json
import os
import shutil
import signal
import subprocess
import sys
import threading
import time
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
DEMO = "na23_thermometry.yaml"
TOF = "  tof: 8 ms\n"  # the demo's one top-level param; the variants change it
_SCAN = "  tof: {value: 8 ms, scan: [8 ms, 10 ms]}\n"  # the demo scanned over two times of flight


def _env(**extra):
    return dict(os.environ, PYTHONPATH=str(ROOT), **extra)


@pytest.fixture(scope="module")
def proj(tmp_path_factory):
    """A copy of the demo sequences with variants v0..v5 of the demo, each with another time of flight."""
    root = tmp_path_factory.mktemp("conc")
    shutil.copytree(ROOT / "sequences", root / "sequences")
    (root / "seqgen.toml").write_text("", encoding="utf-8")  # marks the project root
    text = (root / "sequences" / DEMO).read_text(encoding="utf-8")
    assert text.count(TOF) == 1
    for i in range(6):
        (root / "sequences" / f"v{i}.yaml").write_text(text.replace(TOF, f"  tof: {8 + i} ms\n"), encoding="utf-8")
    return root


def _whole(folder: Path) -> str:
    """The input file a build folder was built from, after checking it is whole: every table's sha256 matches
    its manifest, nothing unlisted, the caution there."""
    man = json.loads((folder / "manifest.json").read_text(encoding="utf-8"))
    listed = {"manifest.json"}
    for dev in man["devices"].values():
        for entry in dev["files"].values():
            if "/" not in entry["path"]:  # a scan shot's tables are shared files in ../tables/ (README)
                listed.add(entry["path"])
            assert hashlib.sha256((folder / entry["path"]).read_bytes()).hexdigest() == entry["sha256"], entry
    assert {p.name for p in folder.iterdir()} == listed
    assert "no substitute for hardware interlocks" in man["caution"]
    return Path(man["sequence"]).name


def _leftovers(folder: Path) -> list:
    return sorted(p.name for p in folder.iterdir() if p.name.endswith((".lock", ".tmp")) or ".old-" in p.name)


# ----------------------------------------------------------------------------- many writers, real processes

# `seqgen ARGS...` in N processes at once. Starting N interpreters costs N imports of seqgen (about 2 s each, most
# of a 2-core CI's budget), so one interpreter imports it and forks one child per command: each child is its own
# process running the command line's `main` (what `python -m seqgen` runs), with its own pid, open files and
# locks. All children wait at one pipe, so their builds start together.
_FORKER = """import json, os, sys
import seqgen.cli, seqgen.pipeline, seqgen.emit.build, seqgen.scan.run
commands, folder = json.loads(sys.argv[1]), sys.argv[2]
go_r, go_w = os.pipe()
kids = []
for i, argv in enumerate(commands):
    pid = os.fork()
    if pid == 0:
        os.close(go_w)
        os.read(go_r, 1)
        for fd, name in ((1, "out"), (2, "err")):
            f = os.open(os.path.join(folder, f"{i}.{name}"), os.O_WRONLY | os.O_CREAT | os.O_TRUNC)
            os.dup2(f, fd)
        sys.argv = ["seqgen", *argv]
        code = seqgen.cli.main(argv)
        sys.stdout.flush()
        sys.stderr.flush()
        os._exit(code)
    kids.append(pid)
os.close(go_r)
os.write(go_w, b"x" * len(kids))
print(json.dumps([os.waitstatus_to_exitcode(os.waitpid(pid, 0)[1]) for pid in kids]))
"""


def _run_together(proj: Path, commands: list, logs: Path) -> list:
    """[(exit code, stdout, stderr)] of `seqgen ARGV` for each argv, all run at once in their own processes."""
    logs.mkdir()
    r = subprocess.run([sys.executable, "-c", _FORKER, json.dumps(commands), str(logs)], cwd=proj, env=_env(),
                       capture_output=True, text=True, timeout=600)
    assert r.returncode == 0, r.stderr
    codes = json.loads(r.stdout)
    return [(rc, (logs / f"{i}.out").read_text(), (logs / f"{i}.err").read_text()) for i, rc in enumerate(codes)]


def test_concurrent_builds_one_writes_force_waits_and_replaces(proj, tmp_path):
    # six builds started together into two folders, with and without --force, and two scan builds of one folder
    jobs = [("out_x", 0, False), ("out_x", 1, False), ("out_x", 2, True),
            ("out_y", 3, False), ("out_y", 4, True), ("out_y", 5, True)]
    text = (proj / "sequences" / DEMO).read_text(encoding="utf-8").replace(TOF, _SCAN)
    (proj / "sequences" / "scan2.yaml").write_text(text, encoding="utf-8")
    scan_cmd = ["build", "sequences/scan2.yaml", "-o", "out_scan", "--jobs", "1", "--json"]
    done = _run_together(proj, [["build", f"sequences/v{v}.yaml", "-o", out] + (["--force"] if force else [])
                                for out, v, force in jobs] + [scan_cmd, scan_cmd], tmp_path / "logs")
    for out in ("out_x", "out_y"):
        mine = [(v, force, rc, err) for (o, v, force), (rc, _, err) in zip(jobs, done) if o == out]
        for v, force, rc, err in mine:
            assert rc in (0, 2) and "Traceback" not in err, (v, rc, err)
            if rc == 2:  # refused: the output was there already, or another process was writing it (named)
                assert not force, err
                assert "exists; use --force" in err or "being written by another seqgen process (pid " in err, err
        written = [(v, force) for v, force, rc, _ in mine if rc == 0]
        assert len([v for v, force in written if not force]) <= 1  # never two plain builds both "written"
        assert all(rc == 0 for _, force, rc, _ in mine if force)  # --force waits its turn, then writes
        built_from = _whole(proj / out)
        forced = [f"v{v}.yaml" for v, force in written if force]
        # the last writer is in place: a --force build if one ran, else the one plain build that wrote
        assert built_from in (forced or [f"v{v}.yaml" for v, _ in written])
    # the two scan builds: one builds the shots; the other is refused, or resumes after it keeping every shot
    wrote = 0
    for rc, out, err in done[len(jobs):]:
        assert rc in (0, 2) and "Traceback" not in err, err
        if rc == 2:
            assert "being written by another seqgen process (pid " in err, err
        else:
            stats = json.loads(out)["stats"]
            wrote += stats["built"] > 0
            assert stats["built"] + stats["reused"] == 2
    assert wrote == 1  # never two processes writing shots into one scan folder
    scan = json.loads((proj / "out_scan" / "scan.json").read_text(encoding="utf-8"))
    assert [s["status"] for s in scan["shots"]] == ["built", "built"]
    for s in scan["shots"]:
        _whole(proj / "out_scan" / s["build"])
    assert _leftovers(proj) == [] and _leftovers(proj / "out_scan") == []


# ----------------------------------------------------------------------------- a killed holder


_HOLDER = """import os, sys, time
from seqgen.emit.claim import claim
claim(sys.argv[1])
if len(sys.argv) > 2:  # a forked child inherits the open lock file; the claim must still end with this process
    r, w = os.pipe()
    pid = os.fork()
    if pid == 0:  # the fork hooks have run once the child executes this: say so, so the test never races them
        os.write(w, b"x")
        time.sleep(120)
        os._exit(0)
    os.read(r, 1)
    print(pid, flush=True)
print("held", flush=True)
time.sleep(120)
"""


def _holder(out: Path, *extra):
    child = subprocess.Popen([sys.executable, "-c", _HOLDER, str(out), *extra], env=_env(), stdout=subprocess.PIPE,
                             text=True)
    lines = [child.stdout.readline().strip() for _ in range(1 + len(extra))]
    assert lines[-1] == "held", lines
    return child, [int(x) for x in lines[:-1]]


@pytest.fixture(scope="module")
def demo_build(proj):
    """The demo's preflight result (in this process), to write builds through the library."""
    from seqgen import preflight

    here = os.getcwd()
    os.chdir(proj)
    try:
        res = {v: preflight(f"sequences/v{v}.yaml") for v in (0, 1)}
    finally:
        os.chdir(here)
    assert all(r.ok for r in res.values())
    return res


def test_sigkill_of_the_holder_frees_the_output_without_clean_up(tmp_path, demo_build):
    from seqgen import write_build
    from seqgen.emit.claim import OutputBusy, claim, lock_path

    out = tmp_path / "out"
    child, _ = _holder(out)
    try:
        with pytest.raises(OutputBusy, match=f"pid {child.pid} on "):
            claim(out)
        t0 = time.monotonic()
        with pytest.raises(OutputBusy, match="still being written"):
            claim(out, wait=True, wait_s=0.3)  # --force waits, but not for ever
        assert time.monotonic() - t0 < 5
        res = demo_build[0]
        with pytest.raises(OutputBusy):
            write_build(out, res.shot, res.compiled, res.findings)
        assert not out.exists()
    finally:
        child.send_signal(signal.SIGKILL)  # no clean-up can run
        child.wait(timeout=60)
    assert lock_path(out).exists()  # the dead holder's lock file is still there, held by nobody
    res = demo_build[0]
    write_build(out, res.shot, res.compiled, res.findings)
    assert _whole(out) == "v0.yaml"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out"]  # the lock file went with the claim


def test_a_forked_child_does_not_keep_a_killed_parents_claim(tmp_path):
    from seqgen.emit.claim import claimed

    out = tmp_path / "out"
    child, (grandchild,) = _holder(out, "fork")
    try:
        child.send_signal(signal.SIGKILL)
        child.wait(timeout=60)
        os.kill(grandchild, 0)  # still alive, with the parent's open lock file inherited
        with claimed(out) as c:
            assert c.fd is not None
    finally:
        try:
            os.kill(grandchild, signal.SIGKILL)
        except ProcessLookupError:
            pass


# ----------------------------------------------------------------------------- readers during a forced replace


def _read_whole_build(folder: Path) -> str:
    """Read a build through seqgen.emit.claim.read_whole and check every file against the manifest read with it."""
    from seqgen.emit.claim import read_whole

    def read(open_file):
        with open_file("manifest.json") as fh:
            man = json.loads(fh.read())
        for dev in man["devices"].values():
            for entry in dev["files"].values():
                with open_file(entry["path"]) as fh:
                    assert hashlib.sha256(fh.read()).hexdigest() == entry["sha256"], entry["path"]
        return Path(man["sequence"]).name

    return read_whole(folder, read)


@pytest.mark.parametrize("exchange", [True, False], ids=["atomic-exchange", "two-renames"])
def test_a_reader_sees_only_whole_builds_while_a_forced_build_replaces_them(tmp_path, demo_build, monkeypatch,
                                                                           exchange):
    import numpy as np

    import seqgen.emit.build as build
    from seqgen import write_build
    from seqgen.diff.inputs import load_version

    if not exchange:  # the fallback of file systems without renameat2: for a moment there is no folder at all
        monkeypatch.setattr(build, "_exchange", lambda a, b: False)
    out = tmp_path / "out"
    res = demo_build
    write_build(out, res[0].shot, res[0].compiled, res[0].findings)
    tables = {f"v{v}.yaml": {t.device: t for t in r.compiled.tables} for v, r in res.items()}
    stop = threading.Event()
    errors = []

    def writer():
        try:
            for i in range(4):
                r = res[(i + 1) % 2]
                write_build(out, r.shot, r.compiled, r.findings, force=True)
        except BaseException as exc:  # reported by the test below
            errors.append(exc)
        finally:
            stop.set()

    t = threading.Thread(target=writer)
    t.start()
    seen = []
    try:
        while not stop.is_set():
            seen.append(_read_whole_build(out))
            v = load_version(str(out))  # seqgen diff's reader: manifest and tables from one build
            name = Path(v.manifest["sequence"]).name
            for table in v.tables:
                ref = tables[name][table.device]
                assert np.array_equal(table.ticks, ref.ticks) and np.allclose(table.values, ref.values)
            seen.append(name)
    finally:
        t.join(timeout=120)
    assert not errors, errors
    assert set(seen) <= {"v0.yaml", "v1.yaml"} and seen
    assert _whole(out) == "v0.yaml" and _leftovers(tmp_path) == []


# ----------------------------------------------------------------------------- scans


def test_a_scan_build_or_resume_is_refused_while_another_holds_the_folder(proj, monkeypatch):
    from seqgen.emit.claim import OutputBusy, claimed
    from seqgen.scan.plan import plan_scan
    from seqgen.scan.run import run_scan

    text = (proj / "sequences" / DEMO).read_text(encoding="utf-8").replace(TOF, _SCAN)
    (proj / "sequences" / "scan_held.yaml").write_text(text, encoding="utf-8")
    monkeypatch.chdir(proj)
    monkeypatch.setenv("SEQGEN_LOCK_WAIT", "0.2")
    out = proj / "out_held"
    with claimed(out):  # another writer (a claim is one per open lock file, so this process counts as another)
        with pytest.raises(OutputBusy, match=f"pid {os.getpid()} "):
            run_scan(plan_scan("sequences/scan_held.yaml"), out=out, jobs=1)
        with pytest.raises(OutputBusy, match="still being written"):
            run_scan(plan_scan("sequences/scan_held.yaml"), out=out, jobs=1, force=True)
        assert not out.exists()  # not one shot written
    scan = run_scan(plan_scan("sequences/scan_held.yaml"), out=out, jobs=1)
    assert scan.stats["built"] == 2


# ----------------------------------------------------------------------------- pictures and reports


def test_a_picture_or_report_being_written_is_refused_or_waited_for(tmp_path, monkeypatch, capsys):
    from seqgen.cli import main
    from seqgen.emit.claim import OutputBusy, claimed
    from seqgen.emit.plot import write_atomic

    monkeypatch.setenv("SEQGEN_LOCK_WAIT", "0.2")
    pic = tmp_path / "t.svg"
    with claimed(pic):
        with pytest.raises(OutputBusy):
            write_atomic(pic, b"<svg/>")
        with pytest.raises(OutputBusy, match="still being written"):
            write_atomic(pic, b"<svg/>", force=True)
        report = tmp_path / "r.html"
        with claimed(report):
            code = main(["check", str(ROOT / "sequences" / DEMO), "--report", str(report)])
            err = capsys.readouterr().err
            assert code == 2 and f"pid {os.getpid()} " in err and not report.exists()
    assert not pic.exists()
    write_atomic(pic, b"<svg/>")
    assert pic.read_bytes() == b"<svg/>" and sorted(p.name for p in tmp_path.iterdir()) == ["t.svg"]


def test_without_locks_it_says_so_once_and_writes_as_before(tmp_path):
    # a file system that refuses flock(2) (ENOLCK, as some network mounts): one line on stderr, then no claim
    code = ("import errno, fcntl, sys\n"
            "def no(*a):\n    raise OSError(errno.ENOLCK, 'No locks available')\n"
            "fcntl.flock = no\n"
            "from seqgen.emit.claim import claimed\n"
            "for _ in range(2):\n"
            "    with claimed(sys.argv[1] + '/a.svg', wait=True) as c:\n"
            "        assert c.fd is None\n")
    r = subprocess.run([sys.executable, "-c", code, str(tmp_path)], env=_env(), capture_output=True, text=True,
                       timeout=120)
    assert r.returncode == 0, r.stderr
    assert r.stderr.count("cannot lock") == 1 and "not kept apart" in r.stderr
    assert list(tmp_path.iterdir()) == []  # nothing left beside the output
