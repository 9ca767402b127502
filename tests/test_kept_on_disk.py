"""What a run keeps on disk for the next (pint's unit answers, long sampled ramps) never changes a result: a
second run reads them and gives the same units, findings and table bytes as a run without any cache; a file
cut short is computed again. Structural only (which libraries a process loaded, which files exist): the times
are printed by tests/benchmarks/bench_start.py."""

import json
import math
import os
import shutil
import subprocess
import sys
from pathlib import Path

from scipy import constants as sc

ROOT = Path(__file__).resolve().parents[1]


def _fresh(code: str, cache) -> dict:
    done = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True, timeout=180,
                          env=dict(os.environ, PYTHONPATH=str(ROOT), XDG_CACHE_HOME=str(cache)))
    assert done.returncode == 0, done.stderr
    return json.loads(done.stdout.splitlines()[-1])


_UNITS = """
import json, sys
from seqgen.resolve import units
words = ["G/cm", "mW", "uK", "kHz", "eV", "ms", "mG", "G/cm^2", "um/s", "MHz/s"]
si = {w: units.unit_factor(w) for w in words}
print(json.dumps({"si": si, "pint": "pint" in sys.modules}))"""

# 1 G = 1e-4 T (CGS-Gaussian unit of magnetic flux density; SI Brochure, 8th ed. (2006), Table 9, from memory);
# the rest are SI prefixes and scipy.constants' electronvolt
_GAUSS_T = 1e-4
_EXPECTED = {  # unit: (SI factor, exponents of m, kg, s, A, K, mol, cd)
    "G/cm": (_GAUSS_T / 1e-2, (-1, 1, -2, -1, 0, 0, 0)), "G/cm^2": (_GAUSS_T / 1e-4, (-2, 1, -2, -1, 0, 0, 0)),
    "mG": (_GAUSS_T * 1e-3, (0, 1, -2, -1, 0, 0, 0)), "mW": (1e-3, (2, 1, -3, 0, 0, 0, 0)),
    "uK": (1e-6, (0, 0, 0, 0, 1, 0, 0)), "kHz": (1e3, (0, 0, -1, 0, 0, 0, 0)),
    "eV": (sc.eV, (2, 1, -2, 0, 0, 0, 0)), "ms": (1e-3, (0, 0, 1, 0, 0, 0, 0)),
    "um/s": (1e-6, (1, 0, -1, 0, 0, 0, 0)), "MHz/s": (1e6, (0, 0, -2, 0, 0, 0, 0))}


def _assert_si(si: dict) -> None:
    assert set(si) == set(_EXPECTED)
    for word, (factor, dims) in _EXPECTED.items():
        assert math.isclose(si[word][0], factor, rel_tol=1e-12), word
        assert tuple(si[word][1]) == dims, word


def test_unit_answers_are_pints_then_read_without_pint(tmp_path):
    first = _fresh(_UNITS, tmp_path)
    assert first["pint"]  # nothing kept yet: pint answers
    files = list((tmp_path / "seqgen" / "units").glob("answers-*.json"))
    assert len(files) == 1 and not list(files[0].parent.glob(".tmp-*"))
    second = _fresh(_UNITS, tmp_path)
    assert not second["pint"]  # every answer read from the file
    _assert_si(first["si"])
    assert second["si"] == first["si"]  # to the last bit


def test_spoilt_or_unwritable_unit_answers_are_asked_of_pint_again(tmp_path):
    _fresh(_UNITS, tmp_path)
    (path,) = (tmp_path / "seqgen" / "units").glob("answers-*.json")
    path.write_text(path.read_text()[:57])  # cut short, as a crash without the atomic rename would leave it
    res = _fresh(_UNITS, tmp_path)
    assert res["pint"]
    _assert_si(res["si"])
    assert set(json.loads(path.read_text())) >= set(_EXPECTED)  # written whole again
    blocker = tmp_path / "a-file"
    blocker.write_text("not a folder")
    res = _fresh(_UNITS, blocker)
    assert res["pint"]
    _assert_si(res["si"])


def test_a_new_unit_is_added_to_the_answers_kept(tmp_path):
    _fresh(_UNITS, tmp_path)
    res = _fresh("""
import json, sys
from seqgen.resolve import units
print(json.dumps({"si": units.unit_factor("mA/us"), "pint": "pint" in sys.modules}))""", tmp_path)
    assert res["pint"] and math.isclose(res["si"][0], 1e-3 / 1e-6, rel_tol=1e-12)
    (path,) = (tmp_path / "seqgen" / "units").glob("answers-*.json")
    assert "mA/us" in json.loads(path.read_text()) and "G/cm" in json.loads(path.read_text())


_BUILD = """
import contextlib, hashlib, io, json, sys
from pathlib import Path
from seqgen.cli import main
out = io.StringIO()
with contextlib.redirect_stdout(out):
    code = main(["build", "sequences/na23_thermometry.yaml", "-o", OUT])
digest = {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in sorted(Path(OUT).rglob("*")) if p.is_file()}
print(json.dumps({"code": code, "tables": digest}))"""


def _build(cache, out: Path) -> dict:
    res = _fresh(f"OUT = {str(out)!r}\n" + _BUILD, cache)
    assert res["code"] == 0
    return res["tables"]


def test_ramps_read_from_disk_give_the_same_table_bytes(tmp_path):
    nowhere = tmp_path / "a-file"
    nowhere.write_text("not a folder")
    computed = _build(nowhere, tmp_path / "b0")  # no cache at all
    cache = tmp_path / "cache"
    first = _build(cache, tmp_path / "b1")
    ramps = cache / "seqgen" / "ramps"
    stamps = {p: p.stat().st_mtime_ns for p in ramps.iterdir()}
    assert len(stamps) == 2 and all(p.suffix == ".json" for p in stamps)  # the two long evaporation ramps
    second = _build(cache, tmp_path / "b2")
    assert {p: p.stat().st_mtime_ns for p in ramps.iterdir()} == stamps  # read, not sampled again
    assert computed == first == second and len(computed) >= 3
    for p in stamps:  # cut short
        p.write_bytes(p.read_bytes()[:100])
    assert _build(cache, tmp_path / "b3") == computed


def test_a_changed_ramp_is_sampled_anew(tmp_path):
    text = (ROOT / "sequences" / "na23_thermometry.yaml").read_text()
    cache = tmp_path / "cache"
    _build(cache, tmp_path / "b1")
    before = set((cache / "seqgen" / "ramps").iterdir())
    project = tmp_path / "project"  # the demo's rig and common file beside an edited copy of it
    for part in ("rigs", "common"):
        shutil.copytree(ROOT / "sequences" / part, project / part)
    edited = text.replace("evap_end: 0.9 W", "evap_end: 0.8 W")
    assert edited != text
    changed = project / "changed.yaml"
    changed.write_text(edited)
    res = _fresh(f"""
import contextlib, io, json
from seqgen.cli import main
with contextlib.redirect_stdout(io.StringIO()):
    code = main(["check", {str(changed)!r}])
print(json.dumps({{"code": code}}))""", cache)
    assert res["code"] == 0
    after = set((cache / "seqgen" / "ramps").iterdir())
    assert before < after  # the changed ramp stored beside the old one, not read in its place


_CHECK_LOADS = """
import contextlib, io, json, sys
from seqgen.cli import main
out = io.StringIO()
with contextlib.redirect_stdout(out):
    code = main(["check", "--json", "sequences/na23_thermometry.yaml"])
heavy = ("pint", "scipy.optimize", "scipy.linalg", "scipy.interpolate", "dask")
print(json.dumps({"code": code, "report": json.loads(out.getvalue()), "loaded": [m for m in heavy if m in sys.modules]}))"""


def test_a_second_check_reads_what_the_first_computed(tmp_path):
    first = _fresh(_CHECK_LOADS, tmp_path)
    second = _fresh(_CHECK_LOADS, tmp_path)
    assert first["code"] == second["code"] == 0
    assert {"pint", "scipy.optimize"} <= set(first["loaded"])  # units parsed and traps minimised
    assert second["loaded"] == []  # every unit, trap and long ramp read from the cache folder
    assert first["report"] == second["report"]


def test_a_cache_file_under_another_name_is_not_read(tmp_path):
    # each stored file names its own key: a file copied over another key's name counts as missing, so the
    # check computes that value again and reports as without a cache
    nowhere = tmp_path / "a-file"
    nowhere.write_text("not a folder")
    computed = _fresh(_CHECK_LOADS, nowhere)["report"]
    cache = tmp_path / "cache"
    _fresh(_CHECK_LOADS, cache)
    traps = sorted((cache / "seqgen" / "held-traps").glob("*.json"))
    assert len(traps) >= 2
    first = traps[0].read_bytes()
    for p in traps[1:]:  # every file now holds the first one's value
        p.write_bytes(first)
    assert _fresh(_CHECK_LOADS, cache)["report"] == computed
