"""`seqgen plot FILE --images -o OUT`: the predicted absorption image of every `image` action
(seqgen/predict/images.py), drawn (.png, .svg, .pdf) or saved as arrays (.npz); a scanned sequence without
--shot gives one row of images per shot. The command line (seqgen/cli.py) passes in its shot picker and its
output helpers, so this module needs nothing of it."""

from __future__ import annotations

import json
import sys
from pathlib import Path

from .caution import CAUTION
from .textfmt import fmt_si

EXIT_OK, EXIT_FINDINGS, EXIT_CANNOT_RUN = 0, 1, 2
IMAGE_ROWS = 50  # a scan: at most this many shots, one row each
FORMATS = ("png", "svg", "pdf", "npz")


def plot_images(args, *, pick, refused, report, writing, cannot_run) -> int:
    """Run `plot --images`. pick(file, n) -> (Result, ShotChoice or None, Scan or None) raises `refused` for a
    shot the file does not have; report(res, args) prints findings; writing(what, action, refused) runs a
    write; cannot_run(message) says why on stderr and gives exit code 2."""
    from .emit.claim import OutputBusy
    from .emit.plot import OutputExists, PlotError, figure_bytes, write_atomic
    from .emit.plot.images import images_figure, images_npz, why_text
    from .findings import has_errors
    from .predict.images import predicted_images

    out = Path(args.output)
    fmt = out.suffix.lower().lstrip(".")
    if len(args.files) != 1:
        return cannot_run("plot --images takes one sequence file")
    if fmt not in FORMATS:
        return cannot_run(f"'{out}': give a file ending in .png, .svg, .pdf (a picture) or .npz (the arrays)")
    if out.exists() and not args.force:
        return cannot_run(f"{out} exists; use --force to replace it")
    if args.noise_seed is not None and args.noise_seed < 0:
        return cannot_run(f"--noise-seed {args.noise_seed}: give a whole number 0 or above (the same seed, the same "
                          "noise)")
    file = args.files[0]
    try:
        res, choice, scan = pick(file, args.shot)
    except refused as exc:
        return cannot_run(exc)
    if res.shot is None:  # nothing to predict: show why
        args.file = file
        code = report(res, args)
        print(f"seqgen: no picture: {file} could not be resolved", file=sys.stderr)
        return code if code == EXIT_CANNOT_RUN else EXIT_FINDINGS
    shots = len(scan.plan) if scan is not None and scan.plan is not None and scan.is_scan else 0
    results = [(choice.caption() if choice is not None and args.shot is not None else None, res)]
    if args.shot is None and shots:  # one row per shot, in run order
        results = []
        for n in range(min(shots, IMAGE_ROWS)):
            r, c, _ = pick(file, n)
            results.append((c.caption() if c is not None else f"shot {n}", r))
    rows = [(label, predicted_images(r.shot, args.noise_seed) if r.shot is not None else ()) for label, r in results]
    if not any(imgs for _, imgs in rows):
        return cannot_run(f"{file} has no `image` action: no picture to predict (plot without --images draws the "
                          "timeline)")

    def write():
        if fmt == "npz":
            return write_atomic(out, images_npz(rows), force=args.force)
        fig = images_figure(rows, title=f"Predicted absorption images: {file}")
        return write_atomic(out, figure_bytes(fig, fmt), force=args.force)

    failed, _ = writing(str(out), write, (PlotError, OutputExists, OutputBusy))
    if failed:
        return failed
    code = EXIT_FINDINGS if any(has_errors(r.findings) for _, r in results) else EXIT_OK
    if getattr(args, "json", False):
        doc = {"output": str(out), "file": file, "caution": CAUTION,
               "images": [{"row": label, "block": img.block, "time_s": img.time_s, "setup": img.setup,
                           "peak_od": img.peak_od if img.od is not None else None, "why": img.why,
                           "saturation": img.saturation, "saturation_at_atoms": img.saturation_at_atoms,
                           "atoms_from_od": img.atoms_from_od, "pixel_m": img.pixel,
                           "components": [{"state": list(c.state) if c.state else None, "atoms": c.atoms,
                                           "imaged": c.imaged, "split": [list(p) for p in c.split]}
                                          for c in img.components]}
                          for label, imgs in rows for img in imgs]}
        print(json.dumps(doc, indent=2, sort_keys=True))
        return code
    count = sum(len(imgs) for _, imgs in rows)
    more = f" (the first {IMAGE_ROWS} of {shots} shots)" if args.shot is None and shots > IMAGE_ROWS else ""
    print(f"wrote {out}: {count} predicted image(s) in {len(rows)} row(s){more}")
    for label, imgs in rows:
        for img in imgs:
            what = (f"peak OD {img.peak_od:.3g}, I/I_sat {img.saturation_at_atoms:.3g} at the atoms, atoms from the "
                    f"OD {img.atoms_from_od:.4g}" if img.od is not None else f"no predicted image: {why_text(img.why)}")
            print(f"  {label + ': ' if label else ''}{img.block} at {fmt_si(img.time_s, 's')}: {what}")
    print("caution: " + CAUTION)
    return code
