"""Command line: seqgen check | build | show | diff | plot | simulate | explain.

Exit codes: 0 no error findings, 1 error findings, 2 the command could not
run (usage, unreadable file, output folder exists without --force, another
seqgen process is writing the same output).
"""

from __future__ import annotations

import json
import os
import sys
import threading
from pathlib import Path

from .cli_args import build_parser
from .caution import CAUTION
from .findings import format_text, summary
from .textfmt import fmt_si

EXIT_OK, EXIT_FINDINGS, EXIT_CANNOT_RUN = 0, 1, 2
_CANNOT_RUN_CODES = {"schema.file-missing", "schema.file-too-large"}


def _caution() -> str:
    return "caution: " + CAUTION


def _report(res, args, out=None, choice=None, caution: bool = True) -> int:
    """Print the findings of one shot; `choice` (seqgen.show.ShotChoice): which shot of a scan it is;
    `caution`: end with the safety caution (False when the caller prints more and the caution after it)."""
    out = out or sys.stdout  # looked up per call, so redirection (and tests) see the output
    fmt = _format(args)
    if fmt == "sarif":
        from .emit.sarif import to_sarif_json

        out.write(to_sarif_json(res.findings, sources=res.sources.hashes if res.sources else None))
    elif fmt == "json":
        doc = {"file": args.file, "summary": summary(res.findings), "findings": [f.to_dict() for f in res.findings],
               "caution": CAUTION}
        if choice is not None:
            doc["scan"] = choice.to_json()
        out.write(json.dumps(doc, indent=2, sort_keys=True) + "\n")
    else:
        if choice is not None:
            out.write(f"{args.file}: {choice.caption()}\n")
        for f in res.findings:
            out.write(format_text(f) + "\n")
        s = summary(res.findings)
        out.write(f"{args.file}: {s['error']} error(s), {s['warning']} warning(s), {s['note']} note(s)"
                  + (f", {s['accepted']} accepted" if s["accepted"] else "") + "\n")
        if caution:
            out.write(_caution() + "\n")
    return _exit_code(res, args.file)


def _format(args) -> str:
    """--format text|json|sarif; --json is a synonym of --format json."""
    return getattr(args, "format", None) or ("json" if getattr(args, "json", False) else "text")


def _exit_code(res, file) -> int:
    if res.shot is None and any(f.code in _CANNOT_RUN_CODES and f.file in (file, str(file)) for f in res.findings):
        return EXIT_CANNOT_RUN
    return EXIT_OK if res.ok else EXIT_FINDINGS


def _cannot_run(exc) -> int:
    """Say on stderr why the command could not run; its exit code (2)."""
    print(f"seqgen: {exc}", file=sys.stderr)
    return EXIT_CANNOT_RUN


def _writing(what: str, action, refused: tuple = ()):
    """Run `action()`, which writes `what`: (None, its result), or (EXIT_CANNOT_RUN, None) after one line on
    stderr: a refusal (one of the `refused` exceptions, e.g. the output exists without --force) in its own
    words, an OSError (a full disk, a read-only folder) as 'cannot write WHAT: reason'."""
    try:
        return None, action()
    except refused as exc:
        return _cannot_run(exc), None
    except OSError as exc:
        return _cannot_run(f"cannot write {what}: {exc.strerror or exc}"), None


def cmd_check(args) -> int:
    from .pipeline import preflight

    if getattr(args, "watch", False):
        return _watch(args)
    report = getattr(args, "report", None)
    if report and Path(report).exists() and not args.force:
        return _cannot_run(f"{report} exists; use --force to replace it")
    loaded = _load(args.file)
    src, failed = loaded
    if getattr(args, "shot", None) is not None:  # one shot of a scan, preflighted like a file without scans
        if _is_rig_file(src):
            return _cannot_run(f"--shot {args.shot}: {args.file} is a rig file, which has no shots (leave out --shot)")
        try:
            res, choice, _ = _preflight_shot(args.file, args.shot, loaded)
        except _ShotRefused as exc:
            return _cannot_run(exc)
        code = _report(res, args, choice=choice, caution=not report)
        if report:
            wrote = _write_check_report(report, res, args, choice=choice)
            code = code if wrote == EXIT_OK else wrote
        return code
    if _is_rig_file(src):  # a rig file: checked as a rig on its own
        return _check_rig_file(src, args, report)
    scan = _plan_scan(args.file, src)
    if scan is not None and scan.is_scan:
        code = _scan_run(scan, args, build=False, caution=not report)
        if report:  # the scan's plan, shots and per-code summary, then the base shot in detail
            from .show import shot_choice

            base = preflight(args.file, sources=src)
            choice = shot_choice(scan.plan, None, base.shot) if scan.plan is not None else None
            wrote = _write_check_report(report, base, args, scan=scan, choice=choice)
            code = code if wrote == EXIT_OK else wrote
        return code
    res = failed if failed is not None else preflight(args.file, sources=src)
    code = _report(res, args, caution=not report)
    if report:
        wrote = _write_check_report(report, res, args)
        code = code if wrote == EXIT_OK else wrote
    return code


def _is_rig_file(src) -> bool:
    from .resolve.sources import is_rig_document

    return src is not None and is_rig_document(src.main)


def _watch(args) -> int:
    """check FILE --watch: the findings of the base shot, then after every change of the sequence, a file it uses
    or its rig, the findings that appeared (+) and those that went away (-); Ctrl-C ends it."""
    from .findings import format_text, summary
    from .pipeline import preflight
    from .watch import watch

    from .findings import has_errors

    print(_caution())
    last: tuple = ()
    try:
        for change in watch(args.file, lambda p: preflight(p).findings, max_checks=args.watch_checks):
            last = change.findings
            if change.first:
                for f in change.findings:
                    print(format_text(f))
            else:
                print(f"-- {args.file} changed: {len(change.new)} new, {len(change.resolved)} resolved")
                for f in change.new:
                    print("+ " + format_text(f).replace("\n", "\n  "))
                for f in change.resolved:
                    print("- " + format_text(f).splitlines()[0])
            counts = summary(change.findings)
            print(f"{args.file}: {counts.get('error', 0)} error(s), {counts.get('warning', 0)} warning(s), "
                  f"{counts.get('note', 0)} note(s); watching for changes (Ctrl-C to stop)", flush=True)
    except KeyboardInterrupt:
        pass
    print(_caution())
    return EXIT_FINDINGS if has_errors(last) else EXIT_OK  # as a plain check of the last state


def _check_rig_file(src, args, report) -> int:
    """check of a rig file (seqgen_rig: 1): its schema and rig-builder findings, reported as a sequence's are."""
    from .findings import has_errors, sort_findings
    from .pipeline import Result
    from .resolve.sources import check_rig_document

    res = Result(findings=sort_findings(check_rig_document(src.main)), sources=src)
    _report(res, args, caution=not report)
    code = EXIT_FINDINGS if has_errors(res.findings) else EXIT_OK
    if report:
        wrote = _write_check_report(report, res, args)
        code = code if wrote == EXIT_OK else wrote
    return code


def _write_check_report(path, res, args, scan=None, choice=None) -> int:
    """check --report FILE: the self-contained HTML preflight report (seqgen/emit/report.py); `scan`: the run
    scan (seqgen.scan.plan.Scan) whose plan, shots and per-code summary head it; `choice`: which shot `res` is."""
    from .emit.claim import OutputBusy
    from .emit.report import OutputExists, write_report

    failed, _ = _writing(f"the report to {path}", lambda: write_report(path, res, args.file, force=args.force,
                                                                        scan=scan, choice=choice),
                         (OutputExists, OutputBusy))
    if failed:
        if _format(args) == "text":  # the report was refused: the caution still closes the output
            print(_caution())
        return failed
    text = _format(args) == "text"
    print(f"report written to {path}", file=sys.stdout if text else sys.stderr)
    if text:
        print(_caution())  # the safety caution comes last
    return EXIT_OK


def cmd_plot(args) -> int:
    """plot FILE [NEW] -o OUT: the timeline of one sequence, or two versions overlaid with their differences."""
    from .emit.claim import OutputBusy
    from .emit.plot import OutputExists, PlotError, diff_figure, format_of, parse_channels, parse_time, \
        save_figure, timeline_figure
    from .findings import has_errors

    if args.images:
        return _plot_images(args)
    try:
        if len(args.files) not in (1, 2):
            raise PlotError("plot takes one sequence file, or two (OLD NEW) to overlay them")
        format_of(args.output)
        t_from = parse_time(args.t_from) if args.t_from is not None else None
        t_to = parse_time(args.t_to) if args.t_to is not None else None
    except PlotError as exc:
        return _cannot_run(exc)
    if Path(args.output).exists() and not args.force:
        return _cannot_run(f"{args.output} exists; use --force to replace it")
    try:  # each file's base shot, or its shot N of the scan (--shot N)
        picked = [_preflight_shot(f, args.shot) for f in args.files]
    except _ShotRefused as exc:
        return _cannot_run(exc)
    results = [r for r, _, _ in picked]
    choices = [c for _, c, _ in picked]
    captions = [_scan_caption(c, scan) for _, c, scan in picked]
    for f, res in zip(args.files, results):
        if res.shot is None:  # nothing to draw: show why
            args.file = f
            code = _report(res, args)
            print(f"seqgen: no picture: {f} could not be resolved", file=sys.stderr)
            return code if code == EXIT_CANNOT_RUN else EXIT_FINDINGS

    def draw():
        channels = parse_channels(args.channels)
        if len(results) == 1:
            res = results[0]
            fig = timeline_figure(res.shot, res.compiled, res.findings, t_from=t_from, t_to=t_to, channels=channels,
                                  physics=not args.no_physics, subtitle=captions[0], all_lanes=args.all_lanes)
        else:
            old, new = results
            sub = "\n".join(f"{which} ({f}): {c}" for which, f, c in zip(("old", "new"), args.files, captions) if c)
            fig = diff_figure(old.shot, old.compiled, new.shot, new.compiled, old_label=args.files[0],
                              new_label=args.files[1], t_from=t_from, t_to=t_to, channels=channels,
                              findings=new.findings, subtitle=sub or None, all_lanes=args.all_lanes)
        save_figure(fig, args.output, force=args.force)
        return fig

    failed, fig = _writing(str(args.output), draw, (PlotError, OutputExists, OutputBusy))
    if failed:
        return failed
    info = fig.seqgen_info
    errors = any(has_errors(r.findings) for r in results)
    if args.json:
        out = {"output": str(args.output), "files": list(args.files), "window_s": list(info["window"]),
               "lanes": list(info["lanes"]), "not_written": list(info.get("not_written", ())),
               "summary": [summary(r.findings) for r in results], "caution": CAUTION}
        if "differs" in info:
            out["differs"] = {k: [list(w) for w in v] for k, v in info["differs"].items()}
        if any(choices):
            out["scan"] = [c.to_json() if c is not None else None for c in choices]
        print(json.dumps(out, indent=2, sort_keys=True))
    else:
        t0, t1 = info["window"]
        print(f"wrote {args.output}: {len(info['lanes'])} lanes, {fmt_si(t0, 's')} to {fmt_si(t1, 's')}"
              + (f"; {len(info['differs'])} output(s) differ" if "differs" in info else ""))
        for f, c in zip(args.files, captions):
            if c:
                print(f"  {f}: {c}")
        if info.get("not_written"):
            print(f"  not written (no lane; --all-lanes draws them): {', '.join(info['not_written'])}")
        if info.get("hint"):
            print(f"  {info['hint']}")
        for r in results:
            s = summary(r.findings)
            if s["error"]:
                print(f"  {r.shot.file}: {s['error']} error finding(s) (run 'seqgen check' for details)")
        print(_caution())
    return EXIT_FINDINGS if errors else EXIT_OK


def _plot_images(args) -> int:
    """plot FILE --images: the predicted absorption images (seqgen/images_cmd.py)."""
    from .images_cmd import plot_images

    return plot_images(args, pick=_preflight_shot, refused=_ShotRefused, report=_report, writing=_writing,
                       cannot_run=_cannot_run)


def _load(file):
    """(the file's loaded and validated sources, None), or (None, the Result that says why it does not load)."""
    from .load.yamlsrc import LoadError
    from .pipeline import Result
    from .resolve.sources import load_sources

    try:
        return load_sources(file), None
    except LoadError as exc:
        return None, Result(findings=[exc.finding])


def _plan_scan(file, src):
    """The scan of loaded, valid sources that scan a param (seqgen/scan/plan.py), else None: such a file goes
    straight to the pipeline's preflight (a file with schema errors too, whose findings say why)."""
    from .findings import has_errors
    from .scan.plan import has_scans, plan_scan

    if src is None or has_errors(src.findings) or not has_scans(src):
        return None
    return plan_scan(file, sources=src)


class _ShotRefused(Exception):
    """--shot N cannot be honoured (the file scans no param, or has no shot N): one line, exit 2."""


def _preflight_shot(file, n: int | None, loaded=None):
    """(Result, ShotChoice or None, Scan or None) of the shot that show / plot / check --shot look at.

    With n None the base shot (each scanned param at its value:); else shot n of the file's scan, in run order
    (the index of `seqgen check --json` and scan.json), resolved with that shot's values. `loaded`: the file's
    `_load` when done already. The choice is None (and so is the Scan) for a file without scans. A file that
    does not load, validate or expand gets a Result without a shot and with the findings that say why. Raises
    _ShotRefused for an n the file has no shot for."""
    from .findings import has_errors
    from .pipeline import Result, preflight
    from .show import shot_choice

    src, failed = loaded if loaded is not None else _load(file)
    if failed is not None:  # a file that does not load: its finding
        return failed, None, None
    scan = _plan_scan(file, src)
    if scan is None:  # no scan (or sources with errors): the pipeline's preflight
        if n is not None and not has_errors(src.findings):
            raise _ShotRefused(f"--shot {n}: {file} scans no param, so it has only its one shot (leave out --shot)")
        return preflight(file, sources=src), None, None
    if n is None:
        res = preflight(file, sources=src)
        return res, (shot_choice(scan.plan, None, res.shot) if scan.plan is not None else None), scan
    if scan.plan is None:
        if scan.findings:  # the scan cannot be expanded: why
            return Result(findings=list(scan.findings), sources=src), None, scan
        return preflight(file, sources=src), None, scan  # the base values do not resolve: why
    count = len(scan.plan)
    if not 0 <= n < count:
        raise _ShotRefused(f"--shot {n}: {file} has {count} shot(s), numbered 0 to {count - 1} in run order "
                           "(as in 'seqgen check --json')")
    res = preflight(file, sources=scan.sources, overrides=scan.plan.overrides(n))
    return res, shot_choice(scan.plan, n), scan


def _scan_caption(choice, scan) -> str | None:
    """The line show and plot print (and plot puts under its title) about the scan, or None: no scan."""
    if choice is not None:
        return choice.caption()
    if scan is not None and scan.is_scan and scan.plan is None:
        return ("base shot (each scanned param at its written value); the scan cannot be expanded into shots: "
                "run 'seqgen check' for why")
    return None


def _scan_run(scan, args, *, build: bool, caution: bool = True) -> int:
    """check / build of a scanned sequence: every shot, then a per-code summary of param ranges; `caution`:
    end with the safety caution (False when the caller prints more and the caution after it)."""
    from .emit.build import BuildExists, OutputBusy
    from .scan.run import ClusterUnavailable, run_scan
    from .scan.summary import report_text, scan_json
    from .findings import has_errors

    if scan.plan is None or has_errors(scan.findings):  # the scan itself cannot be expanded
        if _format(args) == "sarif":
            from .emit.sarif import scan_to_sarif_json

            sys.stdout.write(scan_to_sarif_json(scan))
        elif args.json:
            print(json.dumps({**scan_json(scan), "caution": CAUTION}, indent=2, sort_keys=True))
        else:
            for f in scan.findings:
                print(format_text(f))
            s = summary(scan.findings)
            print(f"{args.file}: {s['error']} error(s), {s['warning']} warning(s), {s['note']} note(s)")
            if build:
                print("build not written: fix the errors above")
            if caution:
                print(_caution())
        return EXIT_FINDINGS
    from .emit.writers import WriterError

    failed, _ = _writing(f"the scan to {args.output}" if build else "the scan", lambda: run_scan(
        scan, out=args.output if build else None, force=getattr(args, "force", False), jobs=args.jobs,
        cluster=args.cluster, progress=sys.stderr.isatty() and not args.json,
        tables=getattr(args, "tables", None) if build else None),
        (BuildExists, OutputBusy, ClusterUnavailable, WriterError))
    if failed:
        return failed
    if _format(args) == "sarif":
        from .emit.sarif import scan_to_sarif_json

        sys.stdout.write(scan_to_sarif_json(scan))
    elif args.json:
        print(json.dumps({**scan_json(scan), "caution": CAUTION}, indent=2, sort_keys=True))
    else:
        print(report_text(scan, built=build))
        if caution:
            print(_caution())
    return EXIT_OK if scan.ok else EXIT_FINDINGS


def cmd_build(args) -> int:
    from .emit.build import BuildExists, OutputBusy, write_build
    from .emit.writers import WriterError, select_writers
    from .pipeline import preflight

    try:  # --tables: an unknown writer, or one whose library is missing, is refused before anything runs
        writers = select_writers(args.tables)
    except WriterError as exc:
        return _cannot_run(exc)
    src, failed = _load(args.file)
    scan = _plan_scan(args.file, src)
    if scan is not None and scan.is_scan:
        return _scan_run(scan, args, build=True)
    res = failed if failed is not None else preflight(args.file, sources=src)
    if not res.ok or res.compiled is None:
        code = _report(res, args)
        if res.ok:  # a fragment: nothing to build on its own
            print("nothing to build: a fragment is built as part of the sequences that use it")
            return EXIT_CANNOT_RUN
        if not args.json:
            print("build not written: fix the errors above (or accept them in the sequence file with a reason)")
        return code
    failed, out = _writing(f"build to {args.output}", lambda: write_build(args.output, res.shot, res.compiled,
                                                                           res.findings, force=args.force,
                                                                           writers=writers),
                           (BuildExists, OutputBusy, WriterError))
    if failed:
        return failed
    s = summary(res.findings)
    if args.json:
        print(json.dumps({"build": str(out), "summary": s, "devices": {t.device: int(len(t.ticks)) for t in res.compiled.tables},
                          "duration_s": res.compiled.duration_s, "caution": CAUTION}, indent=2, sort_keys=True))
        return EXIT_OK
    for f in res.findings:
        print(format_text(f))
    print(f"built {out}/ from {args.file}: duration {fmt_si(res.compiled.duration_s, 's')}")
    for t in res.compiled.tables:
        print(f"  {t.device:<14} {len(t.ticks):>8} rows  {len(t.columns):>3} outputs")
    print(f"  findings: {s['error']} error(s), {s['warning']} warning(s), {s['note']} note(s)"
          + (f", {s['accepted']} accepted" if s["accepted"] else ""))
    print(_caution())
    return EXIT_OK


def cmd_show(args) -> int:
    from .show import physics_rows, timeline_rows

    try:  # the base shot, or shot N of the scan (--shot N)
        res, choice, scan = _preflight_shot(args.file, getattr(args, "shot", None))
    except _ShotRefused as exc:
        return _cannot_run(exc)
    if res.shot is None:
        return _report(res, args)
    caption = _scan_caption(choice, scan)
    rows = timeline_rows(res.shot, res.compiled)
    prows = physics_rows(res.shot) if args.physics else []
    if args.json:
        doc = {"timeline": rows, "physics": prows, "findings": [f.to_dict() for f in res.findings],
               "caution": CAUTION}
        if choice is not None:
            doc["scan"] = choice.to_json()
        print(json.dumps(doc, indent=2, sort_keys=True))
        return _exit_code(res, args.file)
    if caption:
        print(f"{args.file}: {caption}")
    cols = ("block", "start", "end", "output", "action", "values", "rows")
    widths = [max(len(c), *(len(str(r[c])) for r in rows)) if rows else len(c) for c in cols]
    print("  ".join(c.ljust(w) for c, w in zip(cols, widths)))
    for r in rows:
        print("  ".join(str(r[c]).ljust(w) for c, w in zip(cols, widths)))
    for p in prows:
        print(f"{p['block']}: {p['kind']}: " + "; ".join(p["items"]))
    s = summary(res.findings)
    print(f"{len(rows)} writes, duration {fmt_si(res.shot.duration_s, 's')}; "
          f"{s['error']} error(s), {s['warning']} warning(s), {s['note']} note(s) (run 'seqgen check' for details)")
    print(_caution())
    return _exit_code(res, args.file)


def cmd_simulate(args) -> int:
    """The push-and-barrier stage of the base shot (or shot N) simulated in time (seqgen/simulation.py)."""
    from .simulation import command, refuse

    try:
        res, choice, _ = _preflight_shot(args.file, args.shot)
    except _ShotRefused as exc:
        return refuse(args, sys.stdout, str(exc))
    if res.shot is None:  # nothing to simulate: the findings that say why
        return _report(res, args) or EXIT_CANNOT_RUN
    return command(res, choice, args)


def cmd_explain(args) -> int:
    from .codes import ALL, close_codes, explain, summary_line

    if args.code in (None, "all"):
        for code in sorted(ALL):
            print(f"{code:<36} {ALL[code].severity:<8} {summary_line(code)}")
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
        if args.json:  # a tool reading stdout still gets a document, as from check and build
            print(json.dumps({"error": str(exc), "caution": CAUTION}, indent=2, sort_keys=True))
        return _cannot_run(exc)
    sys.stdout.write(to_json(rep) + "\n" if args.json else to_text(rep) + _caution() + "\n")
    return EXIT_OK if rep.identical else EXIT_FINDINGS


def cmd_language_server(args) -> int:
    from .lsp import INSTALL

    try:
        from .lsp.server import main as serve
    except ImportError as exc:  # the optional extra is not installed
        if (exc.name or "").split(".")[0] not in ("pygls", "lsprotocol"):
            raise
        print(f"seqgen language-server needs pygls, which is not installed: {INSTALL}", file=sys.stderr)
        return EXIT_CANNOT_RUN
    return serve()


COMMANDS = {"check": cmd_check, "build": cmd_build, "show": cmd_show, "diff": cmd_diff, "plot": cmd_plot,
            "simulate": cmd_simulate, "explain": cmd_explain, "language-server": cmd_language_server}


def main(argv=None) -> int:
    args = build_parser().parse_args(argv)
    if getattr(args, "json", False) and getattr(args, "format", None) not in (None, "json"):
        return _cannot_run(f"--json and --format {args.format} ask for two output formats; give one of them "
                           "(--json is --format json)")
    if getattr(args, "format", None) == "json":
        args.json = True  # --format json is --json
    allow_before = os.environ.get("SEQGEN_ALLOW_OUTSIDE")
    if getattr(args, "allow_outside_root", False):  # seen by every loader, scan workers included
        os.environ["SEQGEN_ALLOW_OUTSIDE"] = "1"
    try:
        return COMMANDS[args.verb](args)
    except KeyboardInterrupt:
        return 130
    except ModuleNotFoundError as exc:  # a broken install (e.g. run outside its environment), not bad input
        return _cannot_run(f"a package seqgen needs is missing ({exc}); run seqgen from the environment it was "
                           "installed in, or install it there: pip install -e .")
    except BrokenPipeError:
        return EXIT_OK
    finally:
        if allow_before is None:
            os.environ.pop("SEQGEN_ALLOW_OUTSIDE", None)
        else:
            os.environ["SEQGEN_ALLOW_OUTSIDE"] = allow_before


def run() -> None:
    """The `seqgen` command: main, then out of the process without tearing the interpreter down (freeing the
    modules and arrays of a check costs about 0.1 s, after all its work is done). Only when nothing can be
    lost that way: the output flushed, no other thread or child process running (seqgen registers no exit
    handlers and closes every file it writes); otherwise the usual exit."""
    code = main()
    try:
        sys.stdout.flush()
        sys.stderr.flush()
    except (OSError, ValueError):  # a closed pipe or stream: the usual exit reports it as Python does
        sys.exit(code)
    children = "multiprocessing" in sys.modules and sys.modules["multiprocessing"].active_children()
    if not isinstance(code, int) or threading.active_count() > 1 or children:
        sys.exit(code)
    os._exit(code)


if __name__ == "__main__":  # pragma: no cover
    run()
