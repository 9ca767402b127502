"""The command line's arguments: `build_parser()` describes every verb and option of `seqgen` (the handlers
are in seqgen/cli.py, chosen by the verb)."""

from __future__ import annotations

import argparse

from .version import __version__


def _scan_options(p) -> None:
    p.add_argument("--jobs", type=int, default=None, metavar="N",
                   help="scanned sequences: worker processes (default: every core)")
    p.add_argument("--cluster", default=None, metavar="ADDRESS",
                   help="scanned sequences: run the shots on a dask.distributed scheduler, e.g. tcp://host:8786")


def _shot_option(p, text: str) -> None:
    p.add_argument("--shot", type=int, default=None, metavar="N", help=text)


def _allow_outside_option(parser) -> None:
    parser.add_argument("--allow-outside-root", action="store_true",
                        help="let use: and rig: name files outside the project root (same as SEQGEN_ALLOW_OUTSIDE=1)")


def build_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(prog="seqgen", description="Author, preflight, compile and diff cold-atom run sequences.")
    p.add_argument("--version", action="version", version=f"seqgen {__version__}")
    sub = p.add_subparsers(dest="verb", required=True, metavar="VERB")

    c = sub.add_parser("check", help="preflight a sequence: schema, timing, hardware, safety, physics")
    c.add_argument("file", help="sequence file (.yaml)")
    c.add_argument("--json", action="store_true", help="findings as JSON (same as --format json)")
    c.add_argument("--format", choices=("text", "json", "sarif"), default=None,
                   help="output format: text (default), json, or sarif (SARIF 2.1.0 for code-review tools)")
    _allow_outside_option(c)
    c.add_argument("--report", metavar="FILE", default=None,
                   help="also write a self-contained HTML preflight report (findings, physics notes, timeline)")
    c.add_argument("--force", action="store_true", help="replace an existing --report file")
    c.add_argument("--watch", action="store_true",
                   help="check again whenever the file, a file it uses or its rig changes, and print the findings "
                        "that appeared (+) and went away (-); the base shot of a scan; Ctrl-C stops")
    c.add_argument("--watch-checks", type=int, default=None, metavar="N", help="with --watch: stop after N checks")
    _shot_option(c, "preflight only shot N of the scan (run order, as in --json), like a file without scans")
    _scan_options(c)

    b = sub.add_parser("build", help="preflight and compile a sequence into a build folder")
    b.add_argument("file", help="sequence file (.yaml)")
    b.add_argument("-o", "--output", required=True, help="build folder to write")
    b.add_argument("--force", action="store_true", help="replace an existing build folder (after waiting, at most 60 s, "
                   "for another seqgen process writing it)")
    b.add_argument("--json", action="store_true", help="summary as JSON")
    b.add_argument("--tables", default=None, metavar="NAMES",
                   help="table writers by name, comma separated, e.g. npz,csv,hdf5 (default: npz, csv and every "
                   "installed seqgen.writers entry point; hdf5 needs pip install 'seqgen[hdf5]')")
    _allow_outside_option(b)
    _scan_options(b)

    s = sub.add_parser("show", help="print the resolved timeline")
    s.add_argument("file", help="sequence file (.yaml)")
    s.add_argument("--physics", action="store_true", help="also list the physics predictions per stage")
    s.add_argument("--json", action="store_true", help="timeline as JSON")
    _shot_option(s, "show shot N of the scan (run order, as in 'seqgen check --json'); default: the base shot")
    _allow_outside_option(s)

    d = sub.add_parser("diff", help="semantic diff of two versions: findings, outputs, timeline, rig")
    d.add_argument("inputs", nargs="+", metavar="OLD NEW",
                   help="two sequence files, git revisions REV:PATH, or build folders")
    d.add_argument("--json", action="store_true", help="the diff as JSON (schemas/diff.schema.json)")
    d.add_argument("--git", action="store_true",
                   help="run as git's external diff driver (git passes PATH OLD-FILE OLD-HEX OLD-MODE NEW-FILE ...)")
    _allow_outside_option(d)

    g = sub.add_parser("plot", help="draw the timeline (PNG, SVG or PDF); two files: overlay and mark differences")
    g.add_argument("files", nargs="+", metavar="FILE", help="sequence file, or OLD NEW to overlay two versions")
    g.add_argument("-o", "--output", required=True, help="picture to write: .png, .svg or .pdf")
    g.add_argument("--from", dest="t_from", default=None, metavar="TIME", help="start of the window, e.g. '2.6 s'")
    g.add_argument("--to", dest="t_to", default=None, metavar="TIME", help="end of the window, e.g. '2.75 s'")
    g.add_argument("--channels", default=None, metavar="A,B",
                   help="only these outputs (comma separated; glob patterns like 'cross_*'; channel or device names)")
    g.add_argument("--no-physics", action="store_true", help="leave out the physics panels")
    g.add_argument("--all-lanes", action="store_true",
                   help="also draw outputs the sequence never writes (by default only named under the lanes)")
    g.add_argument("--images", action="store_true",
                   help="draw the predicted absorption image of each image action instead (a scan: one row per shot); "
                        "-o FILE.npz writes the optical-depth arrays")
    g.add_argument("--noise-seed", type=int, default=None, metavar="SEED",
                   help="with --images: add photon shot noise, drawn reproducibly from SEED")
    g.add_argument("--force", action="store_true", help="replace an existing picture")
    g.add_argument("--json", action="store_true", help="what was drawn, as JSON")
    _shot_option(g, "draw shot N of the scan (run order, as in 'seqgen check --json'); default: the base shot")
    _allow_outside_option(g)

    m = sub.add_parser("simulate", help="simulate the push onto a barrier in time (1D two-component "
                       "Gross-Pitaevskii) beside the stationary prediction")
    m.add_argument("file")
    m.add_argument("-o", "--output", default=None, metavar="DIR",
                   help="also write DIR/simulation.json and space-time density pictures (PNG, SVG)")
    m.add_argument("--force", action="store_true", help="replace the files in DIR")
    m.add_argument("--json", action="store_true", help="print JSON")
    m.add_argument("--interactions", choices=("on", "off"), default="on",
                   help="the mean field (default on); off: single atoms, to compare with the stationary model")
    m.add_argument("--no-convergence", action="store_true",
                   help="skip the second run at half dx and half dt (the convergence estimate)")
    _shot_option(m, "simulate shot N of the scan (run order, as in 'seqgen check --json'); default: the base shot")
    _allow_outside_option(m)

    e = sub.add_parser("explain", help="explain a finding code (or 'all' to list them)")
    e.add_argument("code", nargs="?", help="finding code, e.g. timing.overlap")

    sub.add_parser("language-server", help="serve diagnostics and code actions to an editor "
                   "(Language Server Protocol over stdio; needs pip install 'seqgen[lsp]')")
    return p
