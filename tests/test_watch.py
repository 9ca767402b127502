"""`seqgen check FILE --watch`: a change of the sequence, of a file it uses or of its rig triggers a new check,
and the findings that appeared and went away are told apart (the expected findings are the ones a plain
`preflight` of each version gives)."""

import os
import subprocess
import sys
import time

from seqgen.pipeline import preflight
from seqgen.watch import finding_key, watch, watched_files

from .conftest import ROOT, SEQUENCES

BROKEN = """seqgen: 1
rig: rigs/na23_demo_rig.yaml
blocks:
  - name: a
    at: 1 ms
    actions:
      - hold: {duration: 5}
"""


def _project(tmp_path):
    (tmp_path / "rigs").mkdir()
    rig = (SEQUENCES / "rigs" / "na23_demo_rig.yaml").read_text(encoding="utf-8")
    (tmp_path / "rigs" / "na23_demo_rig.yaml").write_text(rig, encoding="utf-8")
    (tmp_path / "pyproject.toml").write_text("", encoding="utf-8")
    seq = tmp_path / "s.yaml"
    seq.write_text(BROKEN, encoding="utf-8")
    return seq


def _edit(path, old, new):
    text = path.read_text(encoding="utf-8")
    assert old in text
    time.sleep(0.01)  # a distinct modification time even on coarse clocks (the size changes too)
    path.write_text(text.replace(old, new), encoding="utf-8")


def test_a_fix_is_reported_as_resolved_and_a_new_mistake_as_new(tmp_path):
    seq = _project(tmp_path)
    edits = iter([lambda: _edit(seq, "duration: 5}", "duration: 5 ms}"),
                  lambda: _edit(seq, "at: 1 ms", "at: 1 mss")])

    def sleep(_):
        next(edits)()

    changes = list(watch(seq, lambda p: preflight(p).findings, sleep=sleep, max_checks=3))
    assert [len(c.new) for c in changes] == [1, 0, 1] and [len(c.resolved) for c in changes] == [0, 1, 0]
    assert changes[0].first and not changes[1].first
    assert changes[1].resolved[0].code == "schema.missing-unit"
    assert changes[2].new[0].code == "schema.unknown-unit"
    assert {finding_key(f) for f in changes[2].findings} == {finding_key(f) for f in preflight(seq).findings}


def test_a_change_of_the_rig_triggers_a_check(tmp_path):
    seq = _project(tmp_path)
    _edit(seq, "duration: 5}", "duration: 5 ms}")
    rig = tmp_path / "rigs" / "na23_demo_rig.yaml"
    assert rig.resolve() in {p.resolve() for p in watched_files(seq)}

    def sleep(_):
        _edit(rig, "seqgen_rig: 1", "seqgen_rig: 2")

    changes = list(watch(seq, lambda p: preflight(p).findings, sleep=sleep, max_checks=2))
    assert not changes[0].findings
    assert [f.code for f in changes[1].new] == ["schema.version"]


def test_the_command_prints_the_change_and_the_caution(tmp_path):
    seq = _project(tmp_path)
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    proc = subprocess.Popen([sys.executable, "-m", "seqgen", "check", str(seq), "--watch", "--watch-checks", "2"],
                            cwd=tmp_path, env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    lines = []
    while not any("watching for changes" in x for x in lines):  # the first check is done
        line = proc.stdout.readline()
        assert line, proc.stderr.read()
        lines.append(line)
    _edit(seq, "duration: 5}", "duration: 5 ms}")
    out, err = proc.communicate(timeout=120)
    text = "".join(lines) + out
    assert proc.returncode == 0, err
    assert "1 new" not in text and "0 new, 1 resolved" in text
    assert "\n- " in text and "schema.missing-unit" in text
    assert text.startswith("caution:") and text.rstrip().splitlines()[-1].startswith("caution:")
    assert "Traceback" not in err


def test_notifications_report_a_real_change_of_a_watched_file(tmp_path):
    """With watchfiles (a test extra), the wait returns the file that changed on disk; a change of another file
    in the same folder is not one of the watched files."""
    import threading

    from seqgen.watch import event_wait

    seq = _project(tmp_path)
    other = tmp_path / "notes.txt"

    def later():
        time.sleep(0.3)  # after the watcher has started
        other.write_text("unrelated", encoding="utf-8")
        _edit(seq, "duration: 5}", "duration: 5 ms}")

    t = threading.Thread(target=later)
    t.start()
    changed = set()
    for _ in range(10):  # a wait may end on its timeout before the edit; the edit ends one of them
        changed = event_wait([seq], timeout_ms=5000)
        if changed:
            break
    t.join()
    assert {os.path.realpath(p) for p in changed} == {os.path.realpath(seq)}
