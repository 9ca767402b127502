"""Command line: seqgen check | build | show | diff | explain.

Exit codes: 0 no error findings, 1 error findings, 2 the command could not
run (usage, unreadable file, output folder exists without --force).
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from . import __version__
from .findings import format_text, summary, to_json
from .resolve.units import format_value

EXIT_OK, EXIT_FINDINGS, EXIT_CANNOT_RUN = 0, 1, 2
_CANNOT_RUN_CODES = {"schema.file-missing", "schema.file-too-large"}


def _caution() -> str:
    from .check import CAUTION

    return "caution: " + CAUTION


def _report(res, args, out=None) -> int:
    out = out or sys.stdout  # looked up per call, so redirection (and tests) see the output
    if getattr(args, "json", False):
        out.write(json.dumps({"file": args.file, "summary": summary(res.findings),
                              "findings": [f.to_dict() for f in res.findings]}, indent=2, sort_keys=True) + "\n")
    else:
        for f in res.findings:
            out.write(format_text(f) + "\n")
        s = summary(res.findings)
        out.write(f"{args.file}: {s['error']} error(s), {s['warning']} warning(s), {s['note']} note(s)"
                  + (f", {s['accepted']} accepted" if s["accepted"] else "") + "\n")
        out.write(_caution() + "\n")
    return _exit_code(res, args.file)


def _exit_code(res, file) -> int:
    if res.shot is None and any(f.code in _CANNOT_RUN_CODES and f.file in (file, str(file)) for f in res.findings):
        return EXIT_CANNOT_RUN
    return EXIT_OK if res.ok else EXIT_FINDINGS


def cmd_check(args) -> int:
    from .pipeline import preflight

    scan = _plan_scan(args)
    if scan.is_scan:
        return _scan_run(scan, args, build=False)
    res = preflight(args.file, sources=scan.sources)
    return _report(res, args)


def _plan_scan(args):
    """The scan plan of a file that scans params (parsed and validated once); see seqgen/batch.py."""
    from .batch import plan_scan

    return plan_scan(args.file)


def _scan_run(scan, args, *, build: bool) -> int:
    """check / build of a scanned sequence: every shot, then a per-code summary of param ranges."""
    from .batch import BuildExists, ClusterUnavailable, report_text, run_scan, scan_json
    from .findings import has_errors

    if scan.plan is None or has_errors(scan.findings):  # the scan itself cannot be expanded
        if args.json:
            print(json.dumps(scan_json(scan), indent=2, sort_keys=True))
        else:
            for f in scan.findings:
                print(format_text(f))
            s = summary(scan.findings)
            print(f"{args.file}: {s['error']} error(s), {s['warning']} warning(s), {s['note']} note(s)")
            if build:
                print("build not written: fix the errors above")
            print(_caution())
        return EXIT_FINDINGS
    try:
        run_scan(scan, out=args.output if build else None, force=getattr(args, "force", False), jobs=args.jobs,
                 cluster=args.cluster, progress=sys.stderr.isatty() and not args.json)
    except (BuildExists, ClusterUnavailable) as exc:
        print(f"seqgen: {exc}", file=sys.stderr)
        return EXIT_CANNOT_RUN
    except OSError as exc:
        print(f"seqgen: cannot write the scan to {args.output}: {exc.strerror or exc}", file=sys.stderr)
        return EXIT_CANNOT_RUN
    if args.json:
        print(json.dumps(scan_json(scan), indent=2, sort_keys=True))
    else:
        print(report_text(scan, built=build))
        print(_caution())
    return EXIT_OK if scan.ok else EXIT_FINDINGS


def cmd_build(args) -> int:
    from .emit.build import BuildExists, write_build
    from .pipeline import preflight

    scan = _plan_scan(args)
    if scan.is_scan:
        return _scan_run(scan, args, build=True)
    res = preflight(args.file, sources=scan.sources)
    if not res.ok or res.compiled is None:
        code = _report(res, args)
        if res.ok:  # a fragment: nothing to build on its own
            print("nothing to build: a fragment is built as part of the sequences that use it")
            return EXIT_CANNOT_RUN
        if not args.json:
            print("build not written: fix the errors above (or accept them in the sequence file with a reason)")
        return code
    try:
        out = write_build(args.output, res.shot, res.compiled, res.findings, force=args.force)
    except BuildExists as exc:
        print(f"seqgen: {exc}", file=sys.stderr)
        return EXIT_CANNOT_RUN
    except OSError as exc:
        print(f"seqgen: cannot write build to {args.output}: {exc.strerror or exc}", file=sys.stderr)
        return EXIT_CANNOT_RUN
    s = summary(res.findings)
    if args.json:
        print(json.dumps({"build": str(out), "summary": s, "devices": {t.device: int(len(t.ticks)) for t in res.compiled.tables},
                          "duration_s": res.compiled.duration_s}, indent=2, sort_keys=True))
        return EXIT_OK
    for f in res.findings:
        print(format_text(f))
    print(f"built {out}/ from {args.file}: duration {format_value(res.compiled.duration_s, 's')}")
    for t in res.compiled.tables:
        print(f"  {t.device:<14} {len(t.ticks):>8} rows  {len(t.columns):>3} outputs")
    print(f"  findings: {s['error']} error(s), {s['warning']} warning(s), {s['note']} note(s)"
          + (f", {s['accepted']} accepted" if s["accepted"] else ""))
    print(_caution())
    return EXIT_OK


def cmd_show(args) -> int:
    from .pipeline import preflight
    from .show import physics_rows, timeline_rows

    res = preflight(args.file)
    if res.shot is None:
        return _report(res, args)
    rows = timeline_rows(res.shot, res.compiled)
    prows = physics_rows(res.shot) if args.physics else []
    if args.json:
        print(json.dumps({"timeline": rows, "physics": prows, "findings": [f.to_dict() for f in res.findings]},
                         indent=2, sort_keys=True))
        return _exit_code(res, args.file)
    cols = ("block", "start", "end", "output", "action", "values", "rows")
    widths = [max(len(c), *(len(str(r[c])) for r in rows)) if rows else len(c) for c in cols]
    print("  ".join(c.ljust(w) for c, w in zip(cols, widths)))
    for r in rows:
        print("  ".join(str(r[c]).ljust(w) for c, w in zip(cols, widths)))
    for p in prows:
        print(f"{p['block']}: {p['kind']}: " + "; ".join(p["items"]))
    s = summary(res.findings)
    print(f"{len(rows)} writes, duration {format_value(res.shot.duration_s, 's')}; "
          f"{s['error']} error(s), {s['warning']} warning(s), {s['note']} note(s) (run 'seqgen check' for details)")
    return _exit_code(res, args.file)


def cmd_explain(args) -> int:
    from . import batch  # noqa: F401  (declares the scan codes)
    from .registry import CODES, _load_all, close_codes, explain

    if args.code in (None, "all"):
        _load_all()
        for code in sorted(CODES):
            info = CODES[code]
            print(f"{code:<36} {info.severity:<8} {info.doc.splitlines()[0] if info.doc else ''}")
        return EXIT_OK
    text = explain(args.code)
    if text is None:
        close = close_codes(args.code)
        print(f"seqgen: unknown finding code '{args.code}'" + (f"; did you mean {', '.join(close)}?" if close else ""),
              file=sys.stderr)
        return EXIT_CANNOT_RUN
    print(text)
    return EXIT_OK


def cmd_diff(args) -> int:
    from .diff import DiffInputError, diff_paths, to_json, to_text
    from .diff.gitdriver import git_external_diff

    if args.git:
        return git_external_diff(args.inputs, as_json=args.json)
    if len(args.inputs) != 2:
        print("seqgen: diff needs two inputs: OLD NEW (files, REV:PATH or build folders)", file=sys.stderr)
        return EXIT_CANNOT_RUN
    try:
        rep = diff_paths(*args.inputs)
    except DiffInputError as exc:
        print(f"seqgen: {exc}", file=sys.stderr)
        return EXIT_CANNOT_RUN
    sys.stdout.write(to_json(rep) + "\n" if args.json else to_text(rep))
    return EXIT_OK if rep.identical else EXIT_FINDINGS


def _scan_options(p) -> None:
    p.add_argument("--jobs", type=int, default=None, metavar="N",
                   help="scanned sequences: worker processes (default: every core)")
    p.add_argument("--cluster", default=None, metavar="ADDRESS",
                   help="scanned sequences: run the shots on a dask.distributed scheduler, e.g. tcp://host:8786")


def build_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(prog="seqgen", description="Author, preflight, compile and diff cold-atom run sequences.")
    p.add_argument("--version", action="version", version=f"seqgen {__version__}")
    sub = p.add_subparsers(dest="verb", required=True, metavar="VERB")

    c = sub.add_parser("check", help="preflight a sequence: schema, timing, hardware, safety, physics")
    c.add_argument("file", help="sequence file (.yaml)")
    c.add_argument("--json", action="store_true", help="findings as JSON")
    _scan_options(c)
    c.set_defaults(func=cmd_check)

    b = sub.add_parser("build", help="preflight and compile a sequence into a build folder")
    b.add_argument("file", help="sequence file (.yaml)")
    b.add_argument("-o", "--output", required=True, help="build folder to write")
    b.add_argument("--force", action="store_true", help="replace an existing build folder")
    b.add_argument("--json", action="store_true", help="summary as JSON")
    _scan_options(b)
    b.set_defaults(func=cmd_build)

    s = sub.add_parser("show", help="print the resolved timeline")
    s.add_argument("file", help="sequence file (.yaml)")
    s.add_argument("--physics", action="store_true", help="also list the physics predictions per stage")
    s.add_argument("--json", action="store_true", help="timeline as JSON")
    s.set_defaults(func=cmd_show)

    d = sub.add_parser("diff", help="semantic diff of two versions: findings, outputs, timeline, rig")
    d.add_argument("inputs", nargs="+", metavar="OLD NEW",
                   help="two sequence files, git revisions REV:PATH, or build folders")
    d.add_argument("--json", action="store_true", help="the diff as JSON (schemas/diff.schema.json)")
    d.add_argument("--git", action="store_true",
                   help="run as git's external diff driver (git passes PATH OLD-FILE OLD-HEX OLD-MODE NEW-FILE ...)")
    d.set_defaults(func=cmd_diff)

    e = sub.add_parser("explain", help="explain a finding code (or 'all' to list them)")
    e.add_argument("code", nargs="?", help="finding code, e.g. timing.overlap")
    e.set_defaults(func=cmd_explain)
    return p


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return args.func(args)
    except KeyboardInterrupt:
        return 130
    except BrokenPipeError:
        return EXIT_OK


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
