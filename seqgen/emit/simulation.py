"""The files of `seqgen simulate -o DIR`: simulation.json and a space-time density picture per component
(PNG and SVG), written atomically with deterministic bytes (no dates, fixed SVG ids), never over an existing
file without force."""

from __future__ import annotations

import json
import textwrap
from pathlib import Path

import numpy as np

from ..caution import CAUTION
from .plot.files import OutputExists, figure_bytes, write_atomic

COMPONENT_FILES = ("density_initial", "density_partner")


def density_figure(sim, component: int, title: str):
    """Figure: the density of one component (atoms per um: the wave function's density, normalised to one, times
    the atom number; its own colour scale, square-root stretch so that a faint
    transmitted or transferred part shows) against position along the path (um) and time after the push
    starts (ms), with the sheet's centre and the times it is on and off."""
    from matplotlib.colors import PowerNorm
    from matplotlib.figure import Figure

    c = sim.crossing
    inp = sim.setup.crossing
    dens = np.asarray(c.density[component], dtype=float) * sim.setup.atoms * 1e-6  # per m of one atom -> atoms per um
    top = float(dens.max()) if dens.size else 0.0
    fig = Figure(figsize=(7.0, 4.2), dpi=110)
    ax = fig.add_subplot(1, 1, 1)
    x_um = c.x_picture * 1e6
    t_ms = c.times * 1e3
    extent = (float(x_um[0]), float(x_um[-1]), float(t_ms[0]), float(t_ms[-1]))
    im = ax.imshow(dens if top > 0 else np.zeros_like(dens), origin="lower", aspect="auto", extent=extent,
                   cmap="viridis", norm=PowerNorm(0.5, vmin=0.0, vmax=top if top > 0 else 1.0),
                   interpolation="nearest")
    ax.axvline(inp.distance * 1e6, color="w", lw=0.8, ls="--")
    for t in (inp.on, inp.off):
        if extent[2] <= t * 1e3 <= extent[3]:
            ax.axhline(t * 1e3, color="w", lw=0.6, ls=":")
    ax.set_xlabel("position along the push path (um); dashed: sheet centre; dotted: sheet on, off")
    ax.set_ylabel("time after the push starts (ms)")
    ax.set_title(title, fontsize=9)
    bar = fig.colorbar(im, ax=ax)
    bar.set_label(f"atoms per um (of {sim.setup.atoms:.3g}; square-root scale)" + ("" if top > 0 else ": none"))
    fig.tight_layout(rect=(0, 0.07, 1, 1))
    fig.text(0.01, 0.01, "\n".join(textwrap.wrap("caution: " + CAUTION, 150)), fontsize=5.5, color="#444444",
             va="bottom")  # a picture leaves the report it came with: it carries the caution itself
    return fig


def output_files(out: str | Path) -> list[Path]:
    """The files `write_outputs` writes into `out`."""
    out = Path(out)
    files = [out / "simulation.json"]
    for name in COMPONENT_FILES:
        files += [out / f"{name}.png", out / f"{name}.svg"]
    return files


def write_outputs(out: str | Path, sim, doc: dict, titles, *, force: bool = False) -> list[Path]:
    """Write simulation.json (`doc`) and the density pictures of both components (titles: one per component)
    into the folder `out`; refuses (OutputExists) before writing anything when a file is there and not force."""
    files = output_files(out)
    if not force:
        there = [p for p in files if p.exists()]
        if there:
            raise OutputExists(f"{there[0]} exists; use --force to replace it")
    Path(out).mkdir(parents=True, exist_ok=True)
    written = [write_atomic(files[0], (json.dumps(doc, indent=2, sort_keys=True) + "\n").encode("utf-8"),
                            force=force)]
    for i, name in enumerate(COMPONENT_FILES):
        fig = density_figure(sim, i, titles[i])
        for fmt in ("png", "svg"):
            written.append(write_atomic(Path(out) / f"{name}.{fmt}", figure_bytes(fig, fmt, salt=name), force=force))
    return written
