"""A command loads only the libraries it needs (structural: which modules a fresh process holds, never how long
it took; the times are printed by tests/benchmarks/bench_start.py), and pint's disk cache of its unit definitions
never changes a unit: cached, spoilt or unwritable, the values are those of the SI."""

import json
import math
import os
import subprocess
import sys
from pathlib import Path

from scipy import constants as sc

ROOT = Path(__file__).resolve().parents[1]
HEAVY = ("numpy", "scipy", "pint", "matplotlib", "networkx", "jsonschema", "yaml", "dask", "scipy.interpolate",
         "scipy.integrate", "scipy.ndimage")


def _fresh(code: str, **env) -> dict:
    """Run `code` in a fresh interpreter from the repository root; the JSON it prints last."""
    done = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True, timeout=120,
                          env=dict(os.environ, PYTHONPATH=str(ROOT), **env))
    assert done.returncode == 0, done.stderr
    return json.loads(done.stdout.splitlines()[-1])


def _after_cli(*argv: str, **env) -> dict:
    """Run `seqgen ARGV` through the command line's main in a fresh process (with `env` added to the
    environment): its exit code, what it printed and which of the heavy libraries were loaded at the end."""
    return _fresh(f"""
import contextlib, io, json, sys
from seqgen.cli import main
out = io.StringIO()
with contextlib.redirect_stdout(out):
    code = main({list(argv)!r})
print(json.dumps({{"code": code, "out": out.getvalue(),
                  "loaded": [m for m in {HEAVY!r} if m in sys.modules]}}))""", **env)


def test_explain_loads_only_the_code_catalogue():
    res = _after_cli("explain", "physics.shallow-trap")
    assert res["code"] == 0 and res["out"].startswith("physics.shallow-trap")
    assert res["loaded"] == []


def test_import_seqgen_loads_no_library():
    assert _fresh("import json, sys, seqgen; print(json.dumps([m for m in %r if m in sys.modules]))" % (HEAVY,)) == []


def test_check_does_not_load_the_plotting_library():
    res = _after_cli("check", "sequences/na23_thermometry.yaml")
    assert res["code"] == 0 and "0 error(s)" in res["out"]
    assert "matplotlib" not in res["loaded"]


def test_units_module_loads_pint_on_first_parse_only(tmp_path):
    res = _fresh("""
import json, sys
from seqgen.resolve import units
before = "pint" in sys.modules
units.unit_factor("ms")
print(json.dumps([before, "pint" in sys.modules]))""", XDG_CACHE_HOME=str(tmp_path))  # no answer kept yet
    assert res == [False, True]


# 1 G = 1e-4 T (CGS-Gaussian unit of magnetic flux density; SI Brochure, 8th ed. (2006), Table 9, from memory)
_GAUSS_T = 1e-4
_PROBE = """
import json
from seqgen.resolve import units
words = ["G/cm", "mW", "uK", "kHz", "eV", "ms", "mG", "G/cm^2"]
print(json.dumps({"folder": str(units._ureg().cache_folder), "si": {w: units.unit_factor(w) for w in words}}))"""


def _expect_si(si: dict) -> None:
    expected = {  # unit: (SI factor, exponents of m, kg, s, A, K, mol, cd)
        "G/cm": (_GAUSS_T / 1e-2, (-1, 1, -2, -1, 0, 0, 0)), "G/cm^2": (_GAUSS_T / 1e-4, (-2, 1, -2, -1, 0, 0, 0)),
        "mG": (_GAUSS_T * 1e-3, (0, 1, -2, -1, 0, 0, 0)), "mW": (1e-3, (2, 1, -3, 0, 0, 0, 0)),
        "uK": (1e-6, (0, 0, 0, 0, 1, 0, 0)), "kHz": (1e3, (0, 0, -1, 0, 0, 0, 0)),
        "eV": (sc.eV, (2, 1, -2, 0, 0, 0, 0)), "ms": (1e-3, (0, 0, 1, 0, 0, 0, 0))}
    assert set(si) == set(expected)
    for word, (factor, dims) in expected.items():
        assert math.isclose(si[word][0], factor, rel_tol=1e-12), word
        assert tuple(si[word][1]) == dims, word


def test_pint_cache_is_filled_then_read_and_gives_the_same_units(tmp_path):
    first = _fresh(_PROBE, XDG_CACHE_HOME=str(tmp_path))
    folder = Path(first["folder"])
    assert folder.parent == tmp_path / "seqgen" and list(folder.glob("*.pickle"))
    stamps = {p: p.stat().st_mtime_ns for p in folder.iterdir()}
    second = _fresh(_PROBE, XDG_CACHE_HOME=str(tmp_path))
    assert {p: p.stat().st_mtime_ns for p in folder.iterdir()} == stamps  # read, not written again
    _expect_si(first["si"])
    assert second["si"] == first["si"]


def test_a_spoilt_cache_is_built_anew(tmp_path):
    folder = Path(_fresh(_PROBE, XDG_CACHE_HOME=str(tmp_path))["folder"])
    for p in folder.glob("*.pickle"):  # as a run killed while writing them leaves them
        p.write_bytes(p.read_bytes()[:64])
    res = _fresh(_PROBE, XDG_CACHE_HOME=str(tmp_path))
    _expect_si(res["si"])
    assert res["folder"] == "None"  # this run went without; the spoilt files are gone for the next one
    assert not list(folder.glob("*.pickle"))
    again = _fresh(_PROBE, XDG_CACHE_HOME=str(tmp_path))
    assert again["folder"] == str(folder) and again["si"] == res["si"]


def test_no_cache_where_the_folder_cannot_be_made(tmp_path):
    blocker = tmp_path / "a-file"
    blocker.write_text("not a folder")
    res = _fresh(_PROBE, XDG_CACHE_HOME=str(blocker))
    assert res["folder"] == "None"
    _expect_si(res["si"])


def test_check_of_an_acyclic_file_does_not_load_networkx():
    res = _after_cli("check", "sequences/na23_thermometry.yaml")
    assert res["code"] == 0 and "networkx" not in res["loaded"]


def _random_graphs(count: int):
    """(nodes added first, edges in insertion order) of small random directed graphs, self-loops and repeated
    edges included, about half of them cyclic."""
    import random

    rng = random.Random(17)
    for _ in range(count):
        n = rng.randint(1, 9)
        first = rng.sample(range(n), rng.randint(0, n))
        edges = [(rng.randrange(n + 2), rng.randrange(n + 2)) for _ in range(rng.randint(0, 2 * n))]
        yield first, edges


def test_dependency_order_and_cycles_are_those_of_networkx():
    import networkx as nx

    from seqgen.resolve.order import DepGraph

    cyclic = 0
    for first, edges in _random_graphs(600):
        ours, theirs = DepGraph(), nx.DiGraph()
        for node in first:
            ours.add_node(node)
            theirs.add_node(node)
        for u, v in edges:
            ours.add_edge(u, v)
            theirs.add_edge(u, v)
        try:
            expected = list(nx.topological_sort(theirs))
        except nx.NetworkXUnfeasible:
            expected = None
        assert ours.order() == expected
        assert ours.simple_cycles() == list(nx.simple_cycles(theirs))
        if expected is None:
            cyclic += 1
            assert ours.find_cycle() == [u for u, _ in nx.find_cycle(theirs)]
    assert 100 < cyclic < 500


_CHECK_JSON = """
import contextlib, io, json, sys
from seqgen.cli import main
out = io.StringIO()
with contextlib.redirect_stdout(out):  # trap depths and frequencies in words, and findings of trap rules
    main(["show", "--physics", "sequences/na23_thermometry.yaml"])
    main(["check", "--json", "sequences/faults/trap_lost.yaml"])
    main(["check", "--json", "sequences/faults/shallow_trap.yaml"])
print(json.dumps({"report": out.getvalue()}))"""

_SPECIES = """
import json, sys
from seqgen.physics import atoms
sp = atoms.get_species("Na23")
print(json.dumps({"repr": repr(sp), "jsonschema": "jsonschema" in sys.modules}))"""


def test_trap_minimisations_read_from_disk_give_the_same_findings(tmp_path):
    nowhere = tmp_path / "a-file"
    nowhere.write_text("not a folder")
    computed = _fresh(_CHECK_JSON, XDG_CACHE_HOME=str(nowhere))["report"]  # no cache at all
    first = _fresh(_CHECK_JSON, XDG_CACHE_HOME=str(tmp_path))["report"]
    folder = tmp_path / "seqgen" / "held-traps"
    stamps = {p: p.stat().st_mtime_ns for p in folder.iterdir()}
    assert stamps and all(p.suffix == ".json" for p in stamps)  # no temporary file left behind
    second = _fresh(_CHECK_JSON, XDG_CACHE_HOME=str(tmp_path))["report"]
    assert {p: p.stat().st_mtime_ns for p in folder.iterdir()} == stamps  # read, not computed again
    assert "trap frequencies" in computed and "physics.trap-lost" in computed and "physics.shallow-trap" in computed
    assert computed == first == second
    for p in stamps:  # cut short, as by a crash of a writer without the atomic rename
        p.write_bytes(p.read_bytes()[:40])
    assert _fresh(_CHECK_JSON, XDG_CACHE_HOME=str(tmp_path))["report"] == computed


def test_atom_data_checked_once_per_content(tmp_path):
    first = _fresh(_SPECIES, XDG_CACHE_HOME=str(tmp_path))
    folder = tmp_path / "seqgen" / "checked-data"
    stamps = {p: p.stat().st_mtime_ns for p in folder.glob("*.json")}
    second = _fresh(_SPECIES, XDG_CACHE_HOME=str(tmp_path))
    assert stamps and {p: p.stat().st_mtime_ns for p in folder.glob("*.json")} == stamps  # read, not checked again
    assert not first["jsonschema"] and not second["jsonschema"]  # right data: checked without the library
    assert first["repr"] == second["repr"]


def test_a_cache_folder_keeps_its_newest_files_only(tmp_path):
    from seqgen.physics import stored

    for k in range(10):
        path = tmp_path / f"{k:02d}.json"
        path.write_text(json.dumps({"value": k}))
        os.utime(path, ns=(k * 10**9, k * 10**9))
    stored.prune(tmp_path, keep=8)
    assert sorted(p.name for p in tmp_path.iterdir()) == [f"{k:02d}.json" for k in range(4, 10)]
    stored.prune(tmp_path, keep=8)  # under the limit: nothing removed
    assert len(list(tmp_path.iterdir())) == 6


def test_the_command_leaves_with_its_whole_output_and_exit_code():
    """`python -m seqgen` ends without the interpreter's teardown: what it printed must all arrive, and its exit
    code be the command's."""
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    run = [sys.executable, "-m", "seqgen"]
    done = subprocess.run(run + ["check", "--json", "sequences/faults/trap_lost.yaml"], cwd=ROOT, env=env,
                          capture_output=True, text=True, timeout=120)
    assert done.returncode == 1 and json.loads(done.stdout)["summary"]["error"] >= 1
    listing = subprocess.run(run + ["explain", "all"], cwd=ROOT, env=env, capture_output=True, text=True, timeout=120)
    from seqgen.codes import ALL

    assert listing.returncode == 0 and len(listing.stdout) > 4096  # more than one pipe buffer, all of it
    assert all(code in listing.stdout for code in ALL)
    usage = subprocess.run(run + ["no-such-verb"], cwd=ROOT, env=env, capture_output=True, text=True, timeout=120)
    assert usage.returncode == 2 and "invalid choice" in usage.stderr


def test_check_and_build_do_not_load_scipy_interpolate(tmp_path):
    # the calibration tables and ramp shape tables use seqgen.interp's numpy cubic; scipy.interpolate alone
    # costs more start-up time than a whole check
    res = _after_cli("check", "sequences/na23_thermometry.yaml")
    assert res["code"] == 0 and "0 error(s)" in res["out"]
    assert "scipy.interpolate" not in res["loaded"]
    res = _after_cli("build", "sequences/na23_thermometry.yaml", "-o", str(tmp_path / "build"))
    assert res["code"] == 0 and (tmp_path / "build" / "manifest.json").is_file()
    assert "scipy.interpolate" not in res["loaded"]


def test_check_of_a_valid_file_does_not_load_jsonschema(tmp_path):
    # the compiled schema check says "valid" for the demo, its rig and (nothing stored yet) the atom data
    for _ in range(2):  # the atom data checked, then their stored answer read
        res = _after_cli("check", "sequences/na23_thermometry.yaml", XDG_CACHE_HOME=str(tmp_path))
        assert res["code"] == 0 and "0 error(s)" in res["out"]
        assert "jsonschema" not in res["loaded"]


def test_a_schema_finding_is_still_worded_by_jsonschema():
    # the fault file's header names its finding; jsonschema walks the invalid file for the words
    path = "sequences/faults/unknown_key.yaml"
    code, line = (ROOT / path).read_text(encoding="utf-8").splitlines()[0].split("expect:")[1].split("@")
    res = _after_cli("check", path)
    assert res["code"] == 1 and "jsonschema" in res["loaded"]
    assert f"{path}:{int(line)}:1: error: {code.strip()}: unknown key 'blcoks' in top level" in res["out"]
    assert "did you mean 'blocks'?" in res["out"]  # the schema's top-level key
