"""Read one side of a diff: a sequence file, `REV:PATH` from git, or a build folder.

A git revision is read with `git show REV:./PATH` and resolved as if it stood at
PATH in the working tree, so the relative `rig:` and `use:` paths of the old
text resolve against the working tree's rig and used files. A build folder is
read through its manifest and its `.npz` tables only, all through one handle on
the folder, so a build replaced meanwhile (`build --force`) is read whole: the
old one or the new one, never a mix (seqgen/emit/claim.py).
"""

from __future__ import annotations

import json
import re
import subprocess
from pathlib import Path

import numpy as np

from ..emit.claim import await_writer, read_whole
from ..findings import Finding
from ..model import DeviceTable
from ..resolve.units import display_unit
from .model import Column, Version

_REV = re.compile(r"^(?P<rev>[^:]*):(?P<path>.+)$")
_CANNOT_RUN = {"schema.file-missing", "schema.file-too-large"}


class DiffInputError(Exception):
    """An input cannot be read at all (the diff exits 2)."""


def load_version(spec: str, *, text: str | None = None, path: str | None = None, label: str | None = None) -> Version:
    """Read `spec` (file, folder or REV:PATH). With `text`, `spec` is ignored and the text is
    resolved as if it were the file at `path` (used by the git diff driver)."""
    if text is not None:
        return _sequence(path or spec, text, label or spec, "git")
    p = Path(spec)
    await_writer(p)  # a forced rebuild between its two renames (no atomic exchange here): wait for the new one
    if p.is_dir():
        return load_build(p, spec)
    if not p.exists():
        m = _REV.match(spec)
        if m and m.group("path") and not re.match(r"^[A-Za-z]:[\\/]", spec):
            rev, rpath = m.group("rev"), m.group("path")
            return _sequence(rpath, git_show(rev, rpath), spec, "git")
        raise DiffInputError(f"cannot read {spec}: no such file, build folder or git revision (REV:PATH)")
    return _sequence(spec, None, spec, "file")


def git_show(rev: str, path: str) -> str:
    """Text of PATH at revision REV (an empty REV means the index, as in `git show :PATH`)."""
    p = Path(path)
    folder = p.parent if str(p.parent) else Path(".")
    attempts = []
    if folder.is_dir():  # './NAME' from the file's folder: git reads it relative to that folder
        attempts.append((folder, f"{rev}:./{p.name}"))
    attempts.append((Path("."), f"{rev}:{path}"))  # else relative to the top of the repository
    last = ""
    for cwd, obj in attempts:
        try:
            proc = subprocess.run(["git", "show", obj], cwd=cwd, capture_output=True, timeout=60)
        except FileNotFoundError:
            raise DiffInputError("git is not installed (needed to read REV:PATH)") from None
        except subprocess.TimeoutExpired:
            raise DiffInputError(f"git show {obj} did not finish") from None
        if proc.returncode == 0:
            try:
                return proc.stdout.decode("utf-8")
            except UnicodeDecodeError:
                raise DiffInputError(f"{rev}:{path} is not UTF-8 text") from None
        last = proc.stderr.decode("utf-8", "replace").strip().splitlines()[0:1]
        last = last[0] if last else f"git show {obj} failed"
    raise DiffInputError(f"cannot read {rev}:{path} from git: {last}")


def _sequence(path: str, text: str | None, label: str, kind: str) -> Version:
    from ..load.yamlsrc import LoadError
    from ..pipeline import Result, preflight
    from ..resolve.sources import load_sources

    if text is None:
        try:
            text = Path(path).read_text(encoding="utf-8")
        except (OSError, UnicodeDecodeError):
            text = None
    try:
        src = load_sources(path, text=text, display=label) if text is not None else load_sources(path, display=label)
    except LoadError as exc:
        if exc.finding.code in _CANNOT_RUN and exc.finding.file == label:
            raise DiffInputError(exc.finding.message) from None
        res = Result(findings=[exc.finding])
    else:
        res = preflight(path, sources=src)
    v = Version(label, kind, res.shot, res.compiled, list(res.findings), res.sources, text=text)
    if res.shot is not None:
        rig = res.shot.rig
        v.params = {p.name: (p.value, display_unit(p.dims), p.text) for p in res.shot.params}
        v.devices = {d.name: {"tick_s": d.tick_s, "output_model": d.output_model} for d in rig.devices.values()}
        v.columns = {o.name: Column(o.name, o.device, o.kind, o.unit, o) for o in rig.outputs.values()}
        v.duration_s = res.shot.duration_s
        v.bounds = param_bounds(res.sources, res.shot)
        v.scan, scan_findings = _scan_plan(res.sources, res.shot)
        if scan_findings:  # a scan that does not expand: its findings are the version's too
            from ..findings import sort_findings

            v.findings = sort_findings(v.findings + list(scan_findings))
            v.scan_invalid = True
    if res.compiled is not None:
        v.tables = tuple(res.compiled.tables)
        v.duration_s = res.compiled.duration_s
    return v


def param_bounds(src, shot) -> dict:
    """Param name -> {"min"/"max": (text as written, value SI or None)}: the `min:` / `max:` of each param as the
    resolve stage reads them (used files first, then the main file; a later `min:` or `max:` replaces), read from
    the version's documents and evaluated with the shot's resolved params."""
    from ..resolve.expr import evaluate
    from ..resolve.units import Qty, parse_simple

    if src is None or shot is None:
        return {}
    raw: dict = {}
    for d in [d for d, *_ in src.used] + [src.main]:
        params = d.data.get("params") if isinstance(d.data, dict) else None
        for name, entry in (params.items() if isinstance(params, dict) else ()):
            if isinstance(entry, dict):
                for key in ("min", "max"):
                    if key in entry:
                        raw.setdefault(name, {})[key] = entry[key]
    env = {p.name: Qty(p.value, p.dims) for p in shot.params}
    out: dict = {}
    for name, spec in raw.items():
        if name not in env:
            continue
        for key, b in spec.items():
            value = None
            if isinstance(b, (int, float)) and not isinstance(b, bool):
                value = float(b)
            elif isinstance(b, str):
                try:
                    q = parse_simple(b.strip()) or evaluate(b, env)
                    value = float(q.value)
                except (ValueError, TypeError, ArithmeticError, RecursionError):  # ExprError, UnitError: ValueError
                    value = None
            out.setdefault(name, {})[key] = (str(b).strip(), value)
    return out


def _scan_plan(src, base_shot):
    """(the version's scan plan or None, the findings of a scan that does not expand)."""
    from ..scan.plan import expand, has_scans

    if src is None or not has_scans(src):
        return None, []
    plan, findings = expand(src, base_shot)
    return (plan, []) if plan is not None and not findings else (None, findings or [])


class _NoManifest(Exception):
    pass


def load_build(folder: Path, label: str) -> Version:
    """A build folder through its manifest and .npz tables, all read through one handle on the folder
    (seqgen.emit.claim.read_whole): a forced rebuild replacing it meanwhile is seen whole, old or new."""
    try:
        man, read = read_whole(folder, lambda open_file: _read_build(open_file, folder, label))
    except _NoManifest:
        if (folder / SCAN_JSON).is_file():
            return load_scan_build(folder, label)
        raise DiffInputError(f"{label} is a folder without manifest.json (not a seqgen build)") from None
    except OSError as exc:
        raise DiffInputError(f"cannot read build {label}: {exc}") from None
    v = Version(label, "build", manifest=man)
    tables = []
    for dev, info, (ticks, values, names, units) in read:
        try:
            kinds = {c["name"]: c.get("kind", "analog") for c in info.get("columns") or []}
            tick_s = 1.0 / float(info["timebase_hz"])
        except (KeyError, ValueError, TypeError, ZeroDivisionError) as exc:
            raise DiffInputError(f"cannot read the tables of build {label}: {exc}") from None
        tables.append(DeviceTable(dev, tick_s, ticks, names, values, units,
                                  tuple(kinds.get(n, "analog") for n in names)))
        v.devices[dev] = {"tick_s": tick_s, "output_model": info.get("output_model", "hold")}
        for n, u in zip(names, units):
            v.columns[n] = Column(n, dev, kinds.get(n, "analog"), u)
    v.tables = tuple(tables)
    v.duration_s = man.get("duration_s")
    v.params = {name: (float(p["value"]), p.get("unit", ""), str(p.get("text", p["value"])))
                for name, p in (man.get("params") or {}).items() if isinstance(p, dict) and "value" in p}
    v.findings = [_finding(d) for d in man.get("findings_list") or [] if isinstance(d, dict)]
    return v


def _read_build(open_file, folder: Path, label: str) -> tuple[dict, list]:
    """(the manifest, [(device, its manifest entry, (ticks, values, column names, units))]) of one build folder;
    every file through `open_file`. A missing folder file other than the manifest raises FileNotFoundError (so
    read_whole can tell a folder swapped out meanwhile); other trouble is a DiffInputError."""
    man_path = folder / "manifest.json"
    try:
        with open_file("manifest.json") as fh:
            man = json.loads(fh.read().decode("utf-8"))
    except FileNotFoundError:
        raise _NoManifest() from None
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise DiffInputError(f"cannot read {man_path}: {exc}") from None
    if not isinstance(man, dict) or man.get("format") != "seqgen-build":
        raise DiffInputError(f"{man_path} is not a seqgen build manifest")
    read = []
    try:
        for dev, info in sorted((man.get("devices") or {}).items()):
            npz = (info.get("files") or {}).get("npz", {}).get("path")
            if not npz:
                raise DiffInputError(f"{man_path}: device '{dev}' lists no .npz table")
            with open_file(npz) as fh, np.load(fh, allow_pickle=False) as z:
                ticks = np.asarray(z["tick"], dtype=np.int64)
                values = np.asarray(z["values"], dtype=float).reshape(len(ticks), -1)
                names = tuple(str(c) for c in z["columns"])
                units = tuple(str(u) for u in z["units"])
            read.append((dev, info, (ticks, values, names, units)))
    except (DiffInputError, FileNotFoundError):
        raise
    except (OSError, KeyError, ValueError, TypeError, AttributeError) as exc:
        raise DiffInputError(f"cannot read the tables of build {label}: {exc}") from None
    return man, read


SCAN_JSON = "scan.json"  # the scan manifest of a scan build folder (schemas/scan.schema.json)
_AXIS_KINDS = ("list", "linear", "log", "random")


def load_scan_build(folder: Path, label: str) -> Version:
    """A scan build folder through its scan.json: the scan (as a `ScanPlan` rebuilt from the recorded values) and
    one record per shot (param values, status, input and manifest hashes, finding counts). The shot folders
    themselves are not read (diff two of them for a shot's tables, params and findings)."""
    from ..findings import SourcePos
    from ..scan.plan import ScanAxis, ScanPlan
    from ..resolve.units import Qty, UnitError, dims_of

    path = folder / SCAN_JSON
    try:
        doc = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise DiffInputError(f"cannot read {path}: {exc}") from None
    if not isinstance(doc, dict) or doc.get("format") != "seqgen-scan":
        raise DiffInputError(f"{path} is not a seqgen scan manifest")
    try:
        desc = doc["scan"]
        axes, dims = [], {}
        for a in desc["params"]:
            name, unit = str(a["name"]), str(a["unit"])
            if a["kind"] not in _AXIS_KINDS:
                raise ValueError(f"scan kind {a['kind']!r} of '{name}'")
            dims[name] = dims_of(unit)
            axes.append(ScanAxis(name, tuple(Qty(float(x), dims[name]) for x in a["values"]),
                                 a.get("group"), a["kind"], SourcePos(str(path))))
        names = tuple(a.name for a in axes)
        shots = []
        for rec in doc["shots"]:
            values = {n: (float(rec["params"][n]["value"]), str(rec["params"][n].get("unit", ""))) for n in names}
            found = rec.get("findings") or {}
            shots.append({"index": int(rec["index"]), "written_index": int(rec["written_index"]), "params": values,
                          "status": str(rec["status"]), "build": rec.get("build"),
                          "input_sha256": rec.get("input_sha256"), "manifest_sha256": rec.get("manifest_sha256"),
                          "tables": {str(k): dict(t) for k, t in (rec.get("tables") or {}).items()},
                          "findings": {k: int(found.get(k, 0)) for k in ("error", "warning", "note", "accepted")}})
        shots.sort(key=lambda r: r["index"])
        if [r["index"] for r in shots] != list(range(len(shots))) or len(shots) != int(desc["shots"]):
            raise ValueError(f"{len(shots)} shot records for a scan of {desc['shots']} shots")
        plan = ScanPlan(tuple(axes), names,
                        tuple(tuple(Qty(r["params"][n][0], dims[n]) for n in names) for r in shots),
                        tuple(r["written_index"] for r in shots), str(desc["combine"]),
                        tuple(str(n) for n in desc["nest"]), str(desc["order"]),
                        None if desc.get("seed") is None else int(desc["seed"]))
    except (KeyError, TypeError, ValueError, AttributeError, UnitError) as exc:
        raise DiffInputError(f"cannot read the scan of {label} ({path}): {exc.__class__.__name__}: {exc}") from None
    v = Version(label, "scan-build", scan=plan)
    v.scan_build = {"shots": shots, "folder": folder, "tool": (doc.get("tool") or {}).get("version"),
                    "sequence": doc.get("sequence")}
    return v


def first_shot_folder(folder: Path) -> str:
    shots = sorted(p.name for p in Path(folder).glob("shot_*") if p.is_dir())
    return str(Path(folder) / shots[0]) if shots else str(Path(folder) / "shot_0000")


def _finding(d: dict) -> Finding:
    keys = ("code", "severity", "message", "file", "line", "column", "block", "time_s", "hint", "accepted")
    kw = {k: d[k] for k in keys if k in d and d[k] is not None}
    kw.setdefault("code", "?")
    kw.setdefault("severity", "error")
    kw.setdefault("message", "")
    if d.get("accepted"):
        kw["accept_reason"] = d.get("accept_reason", "")
    return Finding(**kw)
