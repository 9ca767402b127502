"""Findings as a SARIF 2.1.0 log, so code-review tools can show them inline.

SARIF (Static Analysis Results Interchange Format) is the OASIS standard
"Static Analysis Results Interchange Format (SARIF) Version 2.1.0" (2020). One
run holds one result per finding and one rule (`reportingDescriptor`) per
finding code seen, described from the registry (`seqgen explain`). Severities
map one to one onto SARIF levels (error, warning, note); an accepted finding
is kept as a result with an in-source suppression carrying the acceptance's
reason. Relative file names are given against the `SRCROOT` base (the folder
seqgen ran in, usually the repository root); nothing machine- or time-
dependent enters the log, so the same findings give the same bytes. The run's
properties carry the safety caution (`caution`).
"""

from __future__ import annotations

import hashlib
import json
import math
from pathlib import PurePosixPath, PureWindowsPath
from typing import Iterable, Mapping
from urllib.parse import quote

from ..version import __version__
from ..caution import CAUTION
from ..findings import Finding

SARIF_VERSION = "2.1.0"
SARIF_SCHEMA_URI = "https://docs.oasis-open.org/sarif/sarif/v2.1.0/errata01/os/schemas/sarif-schema-2.1.0.json"
SRCROOT = "SRCROOT"
_LEVEL = {"error": "error", "warning": "warning", "note": "note"}


def _uri(path: str) -> tuple[str, str | None]:
    """(uri, uriBaseId) of a display path: relative paths against SRCROOT, absolute ones as file URIs."""
    if PureWindowsPath(path).drive:  # C:\... on a Windows machine
        return "file:///" + quote(PureWindowsPath(path).as_posix(), safe="/:"), None
    p = PurePosixPath(path.replace("\\", "/"))
    if p.is_absolute():
        return "file://" + quote(str(p), safe="/"), None
    return quote(str(p), safe="/"), SRCROOT


def _rule(code: str) -> dict:
    from ..codes import lookup

    info = lookup(code)
    if info is None:  # a code no module declared (should not happen): still a valid rule
        return {"id": code, "shortDescription": {"text": code}}
    lines = info.doc.splitlines() if info.doc else [code]
    first = lines[0].strip() or code
    return {
        "id": code,
        "name": code,
        "shortDescription": {"text": first},
        "fullDescription": {"text": info.doc or first},
        "help": {"text": f"{info.doc}\n\nSource: {info.source}\nRun 'seqgen explain {code}' for this text."},
        "defaultConfiguration": {"level": _LEVEL.get(info.severity, "warning")},
        "properties": {"source": info.source, "stage": info.stage, "family": code.split(".", 1)[0]},
    }


def _plain(v):
    """JSON-safe value: non-finite floats (which JSON cannot hold) become text."""
    if isinstance(v, bool) or v is None or isinstance(v, (int, str)):
        return v
    if isinstance(v, (list, tuple)):
        return [_plain(x) for x in v]
    try:
        x = float(v)
    except (TypeError, ValueError):
        return str(v)
    return x if math.isfinite(x) else str(x)


def _fingerprint(f: Finding) -> str:
    # stable across runs and line moves: code, file, block and message (not the line number)
    key = "\x1f".join([f.code, f.file, f.block or "", f.message])
    return hashlib.sha256(key.encode("utf-8")).hexdigest()[:32]


def _result(f: Finding, rule_index: int) -> dict:
    text = f.message
    if f.block:
        text = f"[{f.block}] {text}"
    if f.hint:
        text += f" Fix: {f.hint}"
    res: dict = {
        "ruleId": f.code,
        "ruleIndex": rule_index,
        "level": _LEVEL.get(f.severity, "warning"),
        "message": {"text": text},
        "partialFingerprints": {"seqgenFinding/v1": _fingerprint(f)},
    }
    if f.file:
        uri, base = _uri(f.file)
        loc: dict = {"uri": uri}
        if base:
            loc["uriBaseId"] = base
        phys: dict = {"artifactLocation": loc}
        if f.line > 0:
            region = {"startLine": int(f.line)}
            if f.column > 0:
                region["startColumn"] = int(f.column)
            phys["region"] = region
        res["locations"] = [{"physicalLocation": phys}]
    props: dict = {"severity": f.severity}
    if f.block:
        props["block"] = f.block
    if f.time_s is not None:
        props["time_s"] = _plain(f.time_s)
    if f.hint:
        props["hint"] = f.hint
    if f.data:
        props["data"] = {str(k): _plain(v) for k, v in f.data}
    res["properties"] = props
    if f.accepted:
        res["suppressions"] = [{"kind": "inSource",
                                "justification": f.accept_reason or "accepted in the sequence file"}]
    return res


def to_sarif(findings: Iterable[Finding], *, sources: Mapping[str, str] | None = None) -> dict:
    """A SARIF 2.1.0 log (as a dict) of `findings`; `sources`: display path -> sha256 of each input file."""
    findings = list(findings)
    codes = sorted({f.code for f in findings})
    index = {c: i for i, c in enumerate(codes)}
    run: dict = {
        "tool": {"driver": {
            "name": "seqgen",
            "version": __version__,
            "semanticVersion": __version__,
            "rules": [_rule(c) for c in codes],
        }},
        "columnKind": "unicodeCodePoints",
        "results": [_result(f, index[f.code]) for f in findings],
        "properties": {"caution": CAUTION},  # SARIF 3.8: a property bag; code-review tools show it with the run
    }
    if sources:
        arts = []
        for path in sorted(sources):
            uri, base = _uri(path)
            loc = {"uri": uri}
            if base:
                loc["uriBaseId"] = base
            arts.append({"location": loc, "hashes": {"sha-256": sources[path]}})
        run["artifacts"] = arts
    return {"$schema": SARIF_SCHEMA_URI, "version": SARIF_VERSION, "runs": [run]}


def to_sarif_json(findings: Iterable[Finding], *, sources: Mapping[str, str] | None = None) -> str:
    return json.dumps(to_sarif(findings, sources=sources), indent=2, sort_keys=True, allow_nan=False) + "\n"


def scan_to_sarif(scan) -> dict:
    """One SARIF log for a scanned sequence (`seqgen.scan.plan.Scan` after `run_scan`).

    A finding that several shots raise at one place is one result; its message
    says in which shots it fires and its properties list them (`shots`).
    """
    from dataclasses import replace

    from ..findings import sort_findings

    shots = list(getattr(scan, "shots", None) or [])
    groups: dict = {}  # insertion-ordered: first occurrence decides the message kept
    for f in scan.findings:
        groups.setdefault(("scan", f.code, f.severity, f.file, f.line, f.column, f.block, f.accepted, f.message),
                          (f, []))
    for r in shots:
        for f in r.findings:
            key = ("shot", f.code, f.severity, f.file, f.line, f.column, f.block, f.accepted)
            groups.setdefault(key, (f, []))[1].append(r.index)
    merged = []
    for key, (f, idx) in groups.items():
        if key[0] == "shot":
            idx = sorted(set(idx))
            where = "in every shot" if len(idx) == len(shots) else \
                f"in shot{'s' if len(idx) > 1 else ''} {', '.join(map(str, idx))} of {len(shots)}"
            f = replace(f, message=f"{f.message} ({where})", data=tuple(f.data) + (("shots", idx),))
        merged.append(f)
    src = getattr(scan, "sources", None)
    return to_sarif(sort_findings(merged), sources=src.hashes if src is not None else None)


def scan_to_sarif_json(scan) -> str:
    return json.dumps(scan_to_sarif(scan), indent=2, sort_keys=True, allow_nan=False) + "\n"
