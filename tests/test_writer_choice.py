"""Table writers chosen by name (`seqgen build --tables`), the bundled HDF5 writer, and a writer offered by a
really installed distribution through its entry point (README "Build folder", DEVELOPERS "How to add a writer").

The sequence here carries no sample (no physics checks), so a build costs well under a second.
"""

import hashlib
import json
import os
import subprocess
import sys
import time
from types import SimpleNamespace

import numpy as np
import pytest

from seqgen.cli import main
from seqgen.emit.writers import WriterError, select_writers

from .conftest import ROOT, SEQUENCES

h5py = pytest.importorskip("h5py")  # the test extras install it (pyproject.toml, `.[test]`)

RIG = (SEQUENCES / "rigs" / "na23_demo_rig.yaml").resolve()
SEQ = f"""seqgen: 1
rig: {RIG}
blocks:
  - name: a
    at: 0 s
    actions:
      - ramp: {{channel: guide_power, to: 0.5 W, over: 10 ms}}
      - set: {{channel: probe_shutter, value: 1, at: 20 ms}}
      - set: {{channel: probe_shutter, value: 0, at: 25 ms}}
      - ramp: {{channel: guide_power, to: 0 W, over: 10 ms, at: 30 ms}}
"""


@pytest.fixture
def seq(tmp_path, monkeypatch):
    monkeypatch.setenv("SEQGEN_ALLOW_OUTSIDE", "1")  # the file names the repository's rig by absolute path
    p = tmp_path / "s.yaml"
    p.write_text(SEQ, encoding="utf-8")
    return p


def _manifest(folder):
    return json.loads((folder / "manifest.json").read_text(encoding="utf-8"))


def _sha(path):
    return hashlib.sha256(path.read_bytes()).hexdigest()


def test_tables_chooses_the_writers_by_name(seq, tmp_path, capsys):
    out = tmp_path / "b"
    assert main(["build", str(seq), "-o", str(out), "--tables", "npz"]) == 0
    man = _manifest(out)
    assert {k for info in man["devices"].values() for k in info["files"]} == {"npz"}
    assert sorted(p.name for p in out.iterdir()) == sorted([f"{d}.npz" for d in man["devices"]] + ["manifest.json"])


@pytest.mark.parametrize("names, close", [("hfd5", "hdf5"), ("npz,cvs", "csv"), ("nzp", "npz")])
def test_an_unknown_writer_is_refused_with_did_you_mean_and_nothing_is_written(seq, tmp_path, capsys, names, close):
    out = tmp_path / "b"
    assert main(["build", str(seq), "-o", str(out), "--tables", names]) == 2
    err = capsys.readouterr().err
    assert f"did you mean {close}?" in err and "Traceback" not in err and len(err.strip().splitlines()) == 1
    assert not out.exists()
    with pytest.raises(WriterError):
        select_writers(",")


def test_the_hdf5_file_holds_the_npz_tables_exactly_and_its_bytes_are_the_same_on_rebuild(seq, tmp_path):
    a, b = tmp_path / "a", tmp_path / "b"
    assert main(["build", str(seq), "-o", str(a), "--tables", "npz,csv,hdf5"]) == 0
    time.sleep(1.1)  # HDF5 object times have a resolution of one second: a stamp would now differ
    assert main(["build", str(seq), "-o", str(b), "--tables", "hdf5,npz,csv"]) == 0
    assert _sha(a / "tables.h5") == _sha(b / "tables.h5")
    assert (a / "manifest.json").read_bytes() == (b / "manifest.json").read_bytes()
    man = _manifest(a)
    with h5py.File(a / "tables.h5", "r") as f:
        inner = json.loads(f.attrs["manifest"])
        assert sorted(f.keys()) == sorted(man["devices"])
        for dev, info in man["devices"].items():
            assert info["files"]["hdf5"] == {"path": "tables.h5", "sha256": _sha(a / "tables.h5")}
            # the root's manifest is manifest.json without the HDF5 file's own entries
            assert inner["devices"][dev]["files"] == {k: v for k, v in info["files"].items() if k != "hdf5"}
            g = f[dev]
            with np.load(a / info["files"]["npz"]["path"]) as z:
                np.testing.assert_array_equal(g["ticks"][()], z["tick"])
                np.testing.assert_array_equal(g["time"][()], z["time_s"])
                np.testing.assert_array_equal(g["values"][()], z["values"])
                assert g["ticks"].dtype == np.int64 and g["values"].dtype == np.float64
                assert [str(c) for c in g.attrs["columns"]] == [str(c) for c in z["columns"]]
                assert [str(u) for u in g.attrs["units"]] == [str(u) for u in z["units"]]
                assert ("codes" in g) == ("codes" in z.files)
                if "codes" in g:
                    np.testing.assert_array_equal(g["codes"][()], z["codes"])
    assert {k: v for k, v in inner.items() if k != "devices"} == {k: v for k, v in man.items() if k != "devices"}


def test_the_hdf5_writer_writes_dac_codes_when_a_table_has_them(tmp_path):
    from seqgen.emit.hdf5 import write_tables

    codes = np.array([[0, 65535], [32768, 1]], dtype=np.int64)
    table = SimpleNamespace(device="dev", tick_s=1e-6, ticks=np.array([0, 10]), columns=("a", "b"),
                            units=("V", "W"), kinds=("analog", "analog"), values=np.array([[0.0, 1.0], [2.0, 3.0]]),
                            codes=codes)
    write_tables((table, SimpleNamespace(**{**vars(table), "device": "other", "codes": None})), "{}",
                 tmp_path / "t.h5")
    with h5py.File(tmp_path / "t.h5", "r") as f:
        np.testing.assert_array_equal(f["dev/codes"][()], codes)
        assert "codes" not in f["other"]
        np.testing.assert_array_equal(f["dev/time"][()], np.array([0, 10]) * 1e-6)


def _run(args, path_first, cwd):
    env = {**os.environ, "PYTHONPATH": os.pathsep.join([str(path_first), str(ROOT)]), "SEQGEN_ALLOW_OUTSIDE": "1"}
    return subprocess.run([sys.executable, "-m", "seqgen", *args], cwd=cwd, env=env, capture_output=True,
                          text=True, timeout=300)


def test_hdf5_without_h5py_says_how_to_install_it(seq, tmp_path):
    # an h5py that cannot be imported stands first on the path of a fresh interpreter
    shadow = tmp_path / "shadow" / "h5py"
    shadow.mkdir(parents=True)
    (shadow / "__init__.py").write_text("raise ImportError('h5py is not installed here')\n", encoding="utf-8")
    r = _run(["build", str(seq), "-o", str(tmp_path / "b"), "--tables", "npz,hdf5"], shadow.parent, tmp_path)
    assert r.returncode == 2, r.stderr
    assert "pip install 'seqgen[hdf5]'" in r.stderr and "Traceback" not in r.stderr
    assert not (tmp_path / "b").exists()


PLUGIN = '''
from pathlib import Path


class TickLines:
    """One line per row: the tick."""
    name = "ticklines"
    suffix = ".ticks.txt"

    def write(self, table, path):
        Path(path).write_text("".join(f"{t}\\n" for t in table.ticks.tolist()), encoding="ascii")


WRITER = TickLines()
'''


def _install_plugin(site):
    """A real installed distribution (as pip leaves it): the module and its .dist-info with entry_points.txt."""
    (site / "seqgen_ticklines.py").write_text(PLUGIN, encoding="utf-8")
    info = site / "seqgen_ticklines-0.1.dist-info"
    info.mkdir(parents=True)
    (info / "METADATA").write_text("Metadata-Version: 2.1\nName: seqgen-ticklines\nVersion: 0.1\n", encoding="utf-8")
    (info / "entry_points.txt").write_text("[seqgen.writers]\nticklines = seqgen_ticklines:WRITER\n",
                                           encoding="utf-8")
    (info / "RECORD").write_text("", encoding="utf-8")


def test_a_writer_of_an_installed_distribution_is_found_by_its_entry_point(seq, tmp_path):
    site = tmp_path / "site"
    site.mkdir()
    _install_plugin(site)
    for args, want in ((["--tables", "ticklines,npz"], {"ticklines", "npz"}), ([], {"ticklines", "npz", "csv"})):
        out = tmp_path / f"b{len(args)}"
        r = _run(["build", str(seq), "-o", str(out), *args], site, tmp_path)
        assert r.returncode == 0, r.stderr
        man = _manifest(out)
        for dev, info in man["devices"].items():
            assert set(info["files"]) == want
            entry = info["files"]["ticklines"]
            assert entry["path"] == f"{dev}.ticks.txt" and entry["sha256"] == _sha(out / entry["path"])
            with np.load(out / info["files"]["npz"]["path"]) as z:
                assert (out / entry["path"]).read_text() == "".join(f"{t}\n" for t in z["tick"].tolist())
    # without the distribution on the path the name is unknown
    r = _run(["build", str(seq), "-o", str(tmp_path / "c"), "--tables", "ticklines"], tmp_path / "empty", tmp_path)
    assert r.returncode == 2 and "unknown table writer 'ticklines'" in r.stderr
