"""What a run scan found: per finding code, the shots and the param ranges where it fires; text and JSON.

    summarize(scan)      # [CodeSummary]: "for hold <= 3 ms; quiet from 4 ms", "in every shot", ...
    report_text(scan)    # the compact text of `seqgen check` / `build` of a scanned sequence
    scan_json(scan)      # the same as JSON-ready data (`--json`)
    scan_summary(scan)   # ScanSummary: the same, and its HTML in a notebook (`_repr_html_`)
"""

from __future__ import annotations

from dataclasses import dataclass

from ..findings import SEVERITIES, Finding, format_text, summary
from ..resolve.units import Qty, format_qty
from ..textfmt import fmt_si
from .plan import Scan, ScanPlan, ShotResult, scan_description, shot_head, values_text
from .store import SCAN_MANIFEST


@dataclass(frozen=True)
class CodeSummary:
    code: str
    severity: str
    shots: tuple  # indices of the shots where it fires
    accepted: int  # how many of those findings are accepted
    where: str  # "for hold <= 3 ms; quiet from 4 ms", "in every shot", ...
    first: Finding


def summarize(scan: Scan) -> list[CodeSummary]:
    """For each finding code: the shots where it fires and the param ranges that bound them."""
    plan, shots = scan.plan, scan.shots
    by_code: dict = {}
    for r in shots:
        for f in r.findings:
            by_code.setdefault(f.code, {}).setdefault(r.index, []).append(f)
    out = []
    rank = {s: i for i, s in enumerate(SEVERITIES)}
    for code, hits in by_code.items():
        idx = tuple(sorted(hits))
        fs = [f for i in idx for f in hits[i]]
        sev = min((f.severity for f in fs), key=lambda s: rank.get(s, 9))
        out.append(CodeSummary(code, sev, idx, sum(f.accepted for f in fs), describe_where(plan, shots, set(idx)),
                               hits[idx[0]][0]))
    out.sort(key=lambda c: (rank.get(c.severity, 9), c.code))
    return out


def describe_where(plan: ScanPlan, shots: list, firing: set) -> str:
    n = len(shots)
    if len(firing) == n:
        return "in every shot"
    axes = []
    for k, name in enumerate(plan.names):
        vals = sorted({r.values[k].value for r in shots})
        by_val: dict = {}
        for r in shots:
            by_val.setdefault(r.values[k].value, set()).add(r.index in firing)
        explains = all(len(s) == 1 for s in by_val.values())
        fire_vals = {v for v, s in by_val.items() if True in s}
        axes.append((name, plan.axis(name).values[0].dims, vals, fire_vals, explains))
    single = [a for a in axes if a[4]]
    if single:
        parts = [_runs_text(name, dims, vals, fv, quiet=len(single) == 1) for name, dims, vals, fv, _ in single]
        return "for " + " and ".join(parts)
    # a box: the firing shots are exactly those whose every value lies in its projection
    in_box = {r.index for r in shots
              if all(r.values[k].value in a[3] for k, a in enumerate(axes))}
    if in_box == firing:
        parts = [_runs_text(name, dims, vals, fv, quiet=False) for name, dims, vals, fv, _ in axes if fv != set(vals)]
        return "for " + " and ".join(parts)
    listed = sorted(firing)
    more = f", ... ({len(listed) - 8} more)" if len(listed) > 8 else ""
    return "in shots " + ", ".join(map(str, listed[:8])) + more + " (no single param range; see --json)"


def _runs_text(name: str, dims, vals: list, fire: set, quiet: bool) -> str:
    def fmt(v):
        return format_qty(Qty(v, dims))

    runs, cur = [], []
    for v in vals:
        if v in fire:
            cur.append(v)
        elif cur:
            runs.append(cur)
            cur = []
    if cur:
        runs.append(cur)
    if len(runs) == 1:
        r = runs[0]
        lo_i, hi_i = vals.index(r[0]), vals.index(r[-1])
        if lo_i == 0 and hi_i == len(vals) - 1:
            return f"every {name}"
        if lo_i == 0:
            return f"{name} <= {fmt(r[-1])}" + (f"; quiet from {fmt(vals[hi_i + 1])}" if quiet else "")
        if hi_i == len(vals) - 1:
            return f"{name} >= {fmt(r[0])}" + (f"; quiet up to {fmt(vals[lo_i - 1])}" if quiet else "")
    texts = [f"{name} = {fmt(r[0])}" if len(r) == 1 else f"{fmt(r[0])} <= {name} <= {fmt(r[-1])}" for r in runs]
    return "(" + " or ".join(texts) + ")" if len(texts) > 1 else texts[0]


def shot_json(plan: ScanPlan, r: ShotResult) -> dict:
    """One shot of the `seqgen check --json` report of a scan."""
    return {
        **shot_head(plan, r),
        "ok": r.ok,
        "build": r.folder,
        "reused": r.reused,
        "summary": summary(r.findings),
        "findings": [f.to_dict() for f in r.findings],
    }


def scan_json(scan: Scan) -> dict:
    """The whole scan as JSON-ready data (per-shot results, per-code summary)."""
    doc = {"file": scan.file, "findings": [f.to_dict() for f in scan.findings]}
    if scan.plan is None:
        return doc
    doc["scan"] = scan_description(scan.plan)
    doc["summary"] = {"shots": len(scan.shots), "pass": sum(r.ok for r in scan.shots),
                      "fail": sum(not r.ok for r in scan.shots)}
    doc["codes"] = {c.code: {"severity": c.severity, "shots": list(c.shots), "accepted": c.accepted, "where": c.where}
                    for c in summarize(scan)}
    doc["shots"] = [shot_json(scan.plan, r) for r in scan.shots]
    if scan.out is not None:
        doc["build"] = str(scan.out)
        doc["stats"] = {k: v for k, v in scan.stats.items() if k != "seconds"}
    return doc


def totals(scan: Scan) -> dict:
    """Finding counts over every shot (and the scan-level findings)."""
    fs = list(scan.findings) + [f for r in scan.shots for f in r.findings]
    return summary(fs)


def fmt_duration(seconds: float) -> str:
    return fmt_si(seconds, "s")


def report_text(scan: Scan, *, built: bool = False) -> str:
    """Compact text summary of a run scan: one entry per finding code with the param ranges where it fires."""
    n = len(scan.plan)
    lines = [f"{scan.file}: scan of {n} shot{'s' if n != 1 else ''}: {scan.plan.describe()}"]
    for c in summarize(scan):
        acc = f", {c.accepted} accepted" if c.accepted else ""
        count = (f"in all {len(scan.shots)} shots" if len(c.shots) == len(scan.shots)
                 else f"{len(c.shots)} of {len(scan.shots)} shots, {c.where}")
        lines.append(f"  {c.code} ({c.severity}{acc}): {count}")
        r = scan.shots[c.shots[0]]
        lines.append(f"    first in shot {r.index} ({values_text(scan.plan.names, r.values)}):")
        lines.extend("      " + ln for ln in format_text(c.first).splitlines())
    good = sum(r.ok for r in scan.shots)
    t = totals(scan)
    if built and scan.out is not None:
        st = scan.stats
        if st.get("kept_previous"):
            lines.append(f"no shot could be built (every shot has errors): {scan.out}/ is left as it was")
        else:
            lines.append(f"built {st['built'] + st['reused']} of {len(scan.shots)} shots into {scan.out}/ "
                         f"({st['built']} written, {st['reused']} kept unchanged); scan manifest "
                         f"{scan.out / SCAN_MANIFEST}")
        if st["failed"]:
            lines.append(f"  {st['failed']} shot(s) not built: fix their errors (or accept them with a reason)")
    lines.append(f"{scan.file}: {good} of {len(scan.shots)} shots pass; over all shots {t['error']} error(s), "
                 f"{t['warning']} warning(s), {t['note']} note(s)" + (f", {t['accepted']} accepted" if t["accepted"] else ""))
    return "\n".join(lines)


@dataclass(frozen=True)
class ScanSummary:
    """What a run scan found, for a notebook: Jupyter shows it as the per-code table and one row per shot."""

    file: str
    description: str
    shots: int
    passing: int
    totals: dict
    codes: tuple  # CodeSummary, in report order
    rows: tuple  # (index, param values text, ok, finding counts) per shot
    text: str  # what `seqgen check` prints for the scan

    def _repr_html_(self) -> str:
        from ..emit.notebook import scan_html

        codes = [(c.code, c.severity, f"{len(c.shots)} of {self.shots}", c.where) for c in self.codes]
        return scan_html(self.file, self.description, self.totals, self.shots, self.passing, codes, self.rows)


def scan_summary(scan: Scan) -> ScanSummary:
    """The summary of a run scan (`seqgen.run_scan(seqgen.plan_scan(file))`); a scan that could not be expanded
    into shots summarises its own findings."""
    if scan.plan is None:
        counts = summary(scan.findings)
        text = "\n".join([f"{scan.file}: the scan cannot be expanded into shots"] +
                          [format_text(f) for f in scan.findings])
        return ScanSummary(scan.file, "not expanded", 0, 0, counts, (), (), text)
    rows = tuple((r.index, values_text(scan.plan.names, r.values), r.ok, summary(r.findings)) for r in scan.shots)
    return ScanSummary(scan.file, scan.plan.describe(), len(scan.shots), sum(r.ok for r in scan.shots), totals(scan),
                       tuple(summarize(scan)), rows, report_text(scan) if scan.shots else "")
