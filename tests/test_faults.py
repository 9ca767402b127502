"""The bad-input corpus: every file under sequences/faults/ whose first line is
'# expect: CODE [@ LINE]' must raise that finding (at that line), never a
traceback.

Each file is checked through the same entry point as `seqgen check FILE --json`
(seqgen/cli.py): a scanned file is planned and every shot preflighted
(seqgen/scan: `plan_scan` + `run_scan`), and a finding of any shot counts, as
do the scan-level findings (a scan that cannot be expanded). `--jobs 1` keeps the
shots in this process (a 2-core machine).
"""

import io
import json
import math
import re
from contextlib import redirect_stderr, redirect_stdout
from types import SimpleNamespace

import pytest
import scipy.constants as sc

from seqgen.cli import main
from seqgen.pipeline import preflight
from seqgen.scan.plan import plan_scan

from .conftest import SEQUENCES

_EXPECT = re.compile(r"^#\s*expect:\s*([a-z]+\.[a-z0-9-]+)(?:\s*@\s*(\d+))?")


def _corpus():
    out = []
    for path in sorted((SEQUENCES / "faults").glob("*.yaml")):
        m = _EXPECT.match(path.read_text(encoding="utf-8").splitlines()[0])
        if m:
            out.append(pytest.param(path, m.group(1), int(m.group(2)) if m.group(2) else None, id=path.stem))
    return out


CORPUS = _corpus()


def check(path):
    """`seqgen check PATH --json --jobs 1`: (exit code, findings of the file or of any shot, JSON document)."""
    out, err = io.StringIO(), io.StringIO()
    with redirect_stdout(out), redirect_stderr(err):
        code = main(["check", str(path), "--json", "--jobs", "1"])
    assert "Traceback" not in err.getvalue()
    doc = json.loads(out.getvalue())
    found = list(doc["findings"]) + [f for shot in doc.get("shots", []) for f in shot["findings"]]
    return code, [SimpleNamespace(**f) for f in found], doc


def test_corpus_is_large_enough():
    codes = {p.values[1] for p in CORPUS}
    assert len(CORPUS) >= 25 and len(codes) >= 25


def test_corpus_holds_scanned_faults():
    # the expansion codes of seqgen/scan/plan.py, and a scanned file whose finding only some shots raise
    scanned = {p.values[1] for p in CORPUS if plan_scan(p.values[0]).is_scan}
    assert {"schema.bad-scan", "schema.scan-length-mismatch", "schema.scan-too-large"} <= scanned
    assert any(c.startswith("physics.") for c in scanned)


@pytest.mark.parametrize("path,code,line", CORPUS)
def test_fault_raises_its_finding(path, code, line):
    exit_code, found, _ = check(path)
    hits = [f for f in found if f.code == code]
    assert hits, f"{path.name}: expected {code}, got {[(f.code, f.line) for f in found]}"
    hit = hits[0]
    assert hit.file  # may be the rig or a used file when that is where the mistake is
    if line is not None:
        assert any(h.line == line for h in hits), f"{code} at lines {[h.line for h in hits]}, expected {line}"
    assert hit.message and hit.severity in ("error", "warning", "note")
    if hit.severity == "error":
        assert exit_code in (1, 2)  # 2: the command could not run (its rig is missing)


def test_a_finding_of_part_of_a_scan_counts():
    """scan_cloud_leaves_view.yaml: quiet at its written value, out of view at the long end of the scan.

    Outside references: free fall d = g_n t^2 / 2 with standard gravity g_n = 9.80665 m/s^2 (exact; SI
    Brochure, 9th ed., 2019) and the rms velocity spread sqrt(k_B T / m) of a thermal cloud along one axis
    (Maxwell-Boltzmann distribution: each velocity component is normal with variance k_B T / m), k_B and u from scipy.constants (CODATA); sodium-23 mass
    22.98976928 u (from memory; AME2020, Chinese Physics C 45, 030003 (2021)). The in-trap size (tens of um)
    is left out. seqgen's own rule: the cloud's edge is 2 rms widths below its centre, the field of view
    (4 mm in the demo rig) is centred on the release point.
    """
    path = SEQUENCES / "faults" / "scan_cloud_leaves_view.yaml"
    assert not [f for f in preflight(path).findings if f.code == "physics.cloud-outside-view"]  # written value
    code, _, doc = check(path)
    assert code == 1
    sigma_v = math.sqrt(sc.k * 2e-6 / (22.98976928 * sc.atomic_mass))  # 2 uK (the file's sample)
    firing, expected = set(), set()
    for shot in doc["shots"]:
        t = shot["params"]["tof"]["value"] + 100e-6  # the image starts 100 us into its block
        if 9.80665 * t ** 2 / 2 + 2 * sigma_v * t > 4e-3 / 2:
            expected.add(shot["index"])
        if any(f["code"] == "physics.cloud-outside-view" for f in shot["findings"]):
            firing.add(shot["index"])
    assert firing == expected and 0 < len(firing) < len(doc["shots"])
    assert doc["codes"]["physics.cloud-outside-view"]["shots"] == sorted(firing)
