"""Timeline and diff pictures: content, not pixels.

The figures returned by seqgen.emit.plot are inspected as matplotlib objects:
axes labels (one lane per output), x-limits, where the finding markers sit,
what the step curves hold. Expected values come from outside the plotting
code: the times and values written in the YAML below, the demo rig file's
calibration, bits and latencies (read here with PyYAML), the SI prefixes
(SI Brochure, 9th ed., 2019), standard gravity g_n = 9.80665 m/s^2 (exact, 3rd
CGPM 1901; SI Brochure) and the harmonic trap frequency of a Gaussian beam,
omega = sqrt(4 U0 / (m w0^2)), so omega scales as sqrt(P) (Adv. At. Mol. Opt.
Phys. 42, 95 (2000)).
"""

from __future__ import annotations

import fnmatch
import json
import math
import shutil
from pathlib import Path

import numpy as np
import pytest
import yaml

from seqgen.cli import main
from seqgen.emit import plot
from seqgen.pipeline import preflight

from .conftest import SEQUENCES
from seqgen.codes import ALL, Code

def _code(slug):
    """The catalogue's code, or a stand-in of a made-up slug (severity error, as an unknown code had)."""
    return ALL.get(slug) or Code(slug, "error", stage="test")


RIG = SEQUENCES / "rigs" / "na23_demo_rig.yaml"
DEMO = SEQUENCES / "na23_barrier_scatter.yaml"


def _rig_yaml():
    return yaml.safe_load(RIG.read_text(encoding="utf-8"))


def _wiring_lines(rig) -> set:
    """The lines the rig file's wiring names (start: {on}, advance: {per_edge}, clock: {line}); PyYAML reads the
    key `on` as YAML 1.1's true."""
    keys = (("start", "on"), ("advance", "per_edge"), ("clock", "line"))
    return {d[k].get(sub, d[k].get(True)) for d in rig["devices"].values() for k, sub in keys
            if isinstance(d.get(k), dict)}


def _write(tmp_path: Path, name: str, text: str) -> Path:
    if not (tmp_path / "rig.yaml").exists():
        shutil.copy(RIG, tmp_path / "rig.yaml")
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


SMALL = """seqgen: 1
rig: rig.yaml
blocks:
  - name: first
    at: 5 ms
    actions:
      - set: {channel: guide_power, value: 0.2 W}
      - hold: {duration: 10 ms}
      - set: {channel: guide_power, value: 0 W}
  - name: second
    at: 20 ms
    actions:
      - set: {channel: probe_shutter, value: 1}
      - hold: {duration: 5 ms}
      - set: {channel: probe_shutter, value: 0}
      - set: {channel: kick_current, value: KICK}
      - hold: {duration: 2 ms}
      - set: {channel: kick_current, value: 0 A}
"""


def _small(tmp_path, name="small.yaml", kick="10 A", guide_at="5 ms"):
    return _write(tmp_path, name, SMALL.replace("KICK", kick).replace("at: 5 ms", f"at: {guide_at}"))


def _lanes(fig):
    return {ax.get_label()[5:]: ax for ax in fig.axes if ax.get_label().startswith("lane:")}


def _by_label(fig, label):
    return [ax for ax in fig.axes if ax.get_label() == label]


def _line(ax, gid):
    hits = [ln for ln in ax.get_lines() if ln.get_gid() == gid]
    assert hits, f"no line {gid} in {ax.get_label()}: {[ln.get_gid() for ln in ax.get_lines()]}"
    return hits[0]


def _texts(ax):
    return [t.get_text() for t in ax.texts]


@pytest.fixture(scope="module")
def demo():
    res = preflight(DEMO)
    assert res.shot is not None and res.compiled is not None
    return res


@pytest.fixture(scope="module")
def demo_fig(demo):
    return plot.timeline_figure(demo.shot, demo.compiled, demo.findings, all_lanes=True)


# --- lanes ------------------------------------------------------------------------------------------------------


def test_one_lane_per_output_grouped_by_device(demo, demo_fig):
    rig = _rig_yaml()
    lanes = _lanes(demo_fig)
    # every channel of the rig file has a lane; synth channels one per part (frequency, amplitude)
    for name, spec in rig["channels"].items():
        if spec["kind"] == "synth":
            expected = {f"{name}.freq", f"{name}.amp"} | ({f"{name}.phase"} if "phase" in spec else set())
            assert expected <= set(lanes), (name, sorted(lanes))
        else:
            assert name in lanes
    # each lane's visible label names its output
    for name, ax in lanes.items():
        assert any(t.get_text().split(" [")[0].removesuffix(" (wiring)") == name for t in ax.texts), \
                (name, _texts(ax))
    # lanes are grouped under their device's header, in the rig file's device order
    order = [ax.get_label() for ax in demo_fig.axes if ax.get_label().startswith(("device:", "lane:"))]
    headers = [x[7:] for x in order if x.startswith("device:") and x != "device:physics"]
    assert headers == [d for d in rig["devices"] if any(c["device"] == d for c in rig["channels"].values())]
    current = None
    for label in order:
        if label.startswith("device:"):
            current = label[7:]
        else:
            assert rig["channels"][label[5:].split(".")[0]]["device"] == current, label


def test_physical_units_with_output_unit_on_a_secondary_axis(tmp_path):
    res = preflight(_small(tmp_path))
    fig = plot.timeline_figure(res.shot, res.compiled, res.findings)
    ax = _lanes(fig)["guide_power"]
    # 0.2 W reads 200 mW (SI prefixes, SI Brochure); the lane label carries the display unit
    assert any(t.get_text() == "guide_power [mW]" for t in ax.texts)
    table = _line(ax, "table:guide_power")
    y = np.asarray(table.get_ydata(), float)
    rig = _rig_yaml()["channels"]["guide_power"]
    lsb_v = 10.0 / 2 ** rig["output"]["bits"]  # range [0 V, 10 V] in the rig file (IEEE Std 1658-2011: 2^N LSB)
    slope = 5.0  # V/W, the rig file's linear calibration
    assert np.max(y) == pytest.approx(200.0, abs=lsb_v / slope * 1e3)
    # the secondary axis maps the display unit to the output unit with the rig's calibration: 200 mW -> 1 V
    sec = [c for c in ax.child_axes if c.get_label() == "output-unit:guide_power"]
    assert sec and sec[0].get_ylabel() == "V"
    fwd = sec[0]._functions[0]
    assert float(fwd(200.0)) == pytest.approx(0.2 * slope)


def test_step_curve_shows_latency_compensation_and_intended_curve_does_not(tmp_path):
    res = preflight(_small(tmp_path))
    fig = plot.timeline_figure(res.shot, res.compiled, res.findings, t_from=0.0, t_to=0.03)
    ax = _lanes(fig)["probe_shutter"]
    rise = 3.2e-3  # the rig file: probe_shutter latency rise 3.2 ms
    table = _line(ax, "table:probe_shutter")
    t, v = np.asarray(table.get_xdata(), float), np.asarray(table.get_ydata(), float)
    first_on = t[np.argmax(v > 0.5)]
    assert first_on == pytest.approx(0.020 - rise, abs=1e-7)  # commanded early by the latency
    intended = _line(ax, "intended:probe_shutter")
    ti, vi = np.asarray(intended.get_xdata(), float), np.asarray(intended.get_ydata(), float)
    assert ti[np.argmax(vi > 0.5)] == pytest.approx(0.020, abs=1e-9)  # the YAML's `at: 20 ms`


def test_zoom_window_sets_x_limits_and_time_unit(demo):
    t0, t1 = plot.parse_time("2.70 s"), plot.parse_time("2.74 s")
    fig = plot.timeline_figure(demo.shot, demo.compiled, demo.findings, t_from=t0, t_to=t1, physics=False)
    for ax in fig.axes:
        assert ax.get_xlim() == pytest.approx((2.70, 2.74), abs=1e-12)
    bottom = fig.axes[-1]
    assert bottom.get_xlabel() == "time [ms]"  # a 40 ms window reads in ms
    fmt = bottom.xaxis.get_major_formatter()
    assert fmt(2.705, 0) == "2705"


@pytest.mark.parametrize("t0,t1,label,probe,expected", [
    (0.0, 2.5, "time [s]", 1.25, "1.25"),
    (0.0, 0.05, "time [ms]", 0.025, "25"),
    (0.0, 0.0005, "time [us]", 0.00025, "250"),
    # 200 us late in a 2.7 s shot: count from a round offset so labels stay short
    (2.7372, 2.7374, "time - 2.737 s [us]", 2.73725, "250"),
])
def test_time_tick_labels_use_si_prefixes(tmp_path, t0, t1, label, probe, expected):
    # SI prefixes m = 1e-3, u (micro) = 1e-6 (SI Brochure, 9th ed., 2019)
    res = preflight(_small(tmp_path))
    fig = plot.timeline_figure(res.shot, res.compiled, (), t_from=t0, t_to=t1, physics=False, intended=False,
                               channels=["guide_power"])
    ax = fig.axes[-1]
    assert ax.get_xlabel() == label
    assert ax.xaxis.get_major_formatter()(probe, 0) == expected


def test_channel_subset_with_glob_patterns(demo):
    pats = ["cross_*", "mw"]
    fig = plot.timeline_figure(demo.shot, demo.compiled, demo.findings, channels=pats, physics=False)
    rig = _rig_yaml()
    # fnmatch semantics (Python documentation): 'cross_*' matches both crossed-trap channels; a channel name
    # selects all of a synth's parts
    expected = {c for c in rig["channels"] if fnmatch.fnmatchcase(c, "cross_*")} | {"mw.freq", "mw.amp"}
    assert set(_lanes(fig)) == expected
    with pytest.raises(plot.PlotError, match="matches no channel"):
        plot.timeline_figure(demo.shot, demo.compiled, (), channels=["no_such_*"])


def test_block_spans_are_labelled(tmp_path):
    res = preflight(_small(tmp_path))
    fig = plot.timeline_figure(res.shot, res.compiled, (), physics=False)
    (strip,) = _by_label(fig, "blocks")
    assert {"first", "second"} <= set(_texts(strip))
    # the bars span the blocks' times from the YAML: first 5 ms .. 15 ms, second 20 ms .. 27 ms
    spans = {(round(p.get_extents().x0, 9), round(p.get_extents().x1, 9))
             for coll in strip.collections for p in coll.get_paths()}
    assert (0.005, 0.015) in spans and (0.020, 0.027) in spans


# --- findings -------------------------------------------------------------------------------------------------


def test_findings_marked_at_their_time_with_their_severity():
    path = SEQUENCES / "faults" / "overlap.yaml"  # a set at 20 ms inside a ramp from 0 to 50 ms
    res = preflight(path)
    fig = plot.timeline_figure(res.shot, res.compiled, res.findings)
    (strip,) = _by_label(fig, "findings")
    markers = {ln.get_gid(): ln for ln in strip.get_lines() if (ln.get_gid() or "").startswith("finding:")}
    timed = [f for f in res.findings if f.time_s is not None]
    assert timed
    for f in timed:
        ln = markers[f"finding:{f.severity}:{f.code}"]
        assert float(ln.get_xdata()[0]) == pytest.approx(f.time_s)
        assert ln.get_marker() == plot.SEVERITY_STYLE[f.severity][1]
    overlap = markers["finding:error:timing.overlap"]
    assert float(overlap.get_xdata()[0]) == pytest.approx(0.020)  # `at: 20 ms` in the fault file
    assert "timing.overlap" in _texts(strip)


def test_many_findings_at_one_time_share_a_label_but_keep_their_markers(tmp_path):
    from seqgen.findings import make

    res = preflight(_small(tmp_path))
    fs = [make(_code("timing.overlap"), f"test {k}", None, time_s=0.010) for k in range(9)]
    fig = plot.timeline_figure(res.shot, res.compiled, fs, physics=False)
    (strip,) = _by_label(fig, "findings")
    marks = [ln for ln in strip.get_lines() if (ln.get_gid() or "").startswith("finding:")]
    assert len(marks) == 9 and all(float(m.get_xdata()[0]) == pytest.approx(0.010) for m in marks)
    assert any(t.startswith("9 findings") for t in _texts(strip))


# --- physics panels ---------------------------------------------------------------------------------------------


def test_physics_panels_follow_the_trap_ramp_and_the_image(demo, demo_fig):
    (depth,) = _by_label(demo_fig, "physics:trap-depth")
    (freq,) = _by_label(demo_fig, "physics:trap-frequencies")
    # the evaporation ramp runs from 201 ms (load_dipole at 1 ms holds 200 ms) for 2.4 s (na23_prep.yaml)
    line = depth.get_lines()[0]
    t = np.asarray(line.get_xdata(), float)
    assert t[0] == pytest.approx(0.201) and t[-1] == pytest.approx(2.601)
    d = np.asarray(line.get_ydata(), float)
    assert np.all(np.diff(d) < 0)  # the power only decreases, so does the depth
    # harmonic frequency of a Gaussian-beam trap goes as sqrt(P) (Adv. At. Mol. Opt. Phys. 42, 95 (2000)):
    # 3.2 W -> 0.3 W gives a ratio sqrt(0.3 / 3.2); gravity sag shifts it a little (3 %)
    f = np.asarray(freq.get_lines()[0].get_ydata(), float)
    assert f[-1] / f[0] == pytest.approx(math.sqrt(0.30 / 3.2), rel=0.03)
    # the cloud at the image: centre fallen g_n tof^2 / 2 (g_n exact, SI Brochure); the image starts 14 ms
    # (param tof) + 100 us (the hold after opening the shutter) after the release
    (cloud,) = _by_label(demo_fig, "physics:cloud")
    tof = 14e-3 + 100e-6
    centre = [ln for ln in cloud.get_lines() if ln.get_marker() == "o"][0]
    assert float(centre.get_ydata()[0]) == pytest.approx(-0.5 * 9.80665 * tof ** 2 * 1e3, rel=1e-6)
    notes = _by_label(demo_fig, "physics:notes")
    assert notes and notes[0].get_lines()


def test_no_physics_panels_without_a_sample(tmp_path):
    res = preflight(_small(tmp_path))
    fig = plot.timeline_figure(res.shot, res.compiled, ())
    assert not [ax for ax in fig.axes if ax.get_label().startswith("physics:")]


# --- sixty channels -------------------------------------------------------------------------------------------


def _big(tmp_path, n=60):
    lines = ["seqgen_rig: 1", "name: sixty", "devices:", "  ao: {timebase: 1 MHz, min_interval: 2 us}",
             "  dio: {timebase: 10 MHz, min_interval: 200 ns}", "channels:"]
    seq = ["seqgen: 1", "rig: big_rig.yaml", "blocks:"]
    for k in range(n):
        name = f"ttl_line_{k:02d}" if k >= 40 else f"analog_output_{k:02d}"
        if k >= 40:
            lines.append(f"  {name}: {{device: dio, kind: digital, safe: 0}}")
            act = f"      - pulse: {{channel: {name}, value: 1, duration: 1 ms}}"
        else:
            lines.append(f"  {name}: {{device: ao, kind: analog, output: {{unit: V, range: [0 V, 10 V], bits: 16}}, safe: 0 V}}")
            act = f"      - set: {{channel: {name}, value: {1 + k % 9} V}}\n      - hold: {{duration: 1 ms}}\n" \
                  f"      - set: {{channel: {name}, value: 0 V}}"
        seq += [f"  - name: step_{k:02d}", f"    at: {2 * k + 1} ms", "    actions:", act]
    (tmp_path / "big_rig.yaml").write_text("\n".join(lines) + "\n", encoding="utf-8")
    p = tmp_path / "big.yaml"
    p.write_text("\n".join(seq) + "\n", encoding="utf-8")
    return p


def test_sixty_channels_labels_do_not_overlap(tmp_path):
    res = preflight(_big(tmp_path))
    assert res.shot is not None, [str(f) for f in res.findings]
    fig = plot.timeline_figure(res.shot, res.compiled, res.findings)
    lanes = _lanes(fig)
    assert len(lanes) == 60
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    canvas = FigureCanvasAgg(fig)
    canvas.draw()  # tick labels exist once drawn
    renderer = canvas.get_renderer()
    boxes = []
    for ax in lanes.values():
        boxes += [t.get_window_extent(renderer) for t in ax.texts]
        lo, hi = ax.get_ylim()
        boxes += [t.get_window_extent(renderer) for loc, t in zip(ax.get_yticks(), ax.get_yticklabels())
                  if t.get_text() and lo <= loc <= hi]  # ticks outside the limits are not drawn
    overlaps = [(i, j) for i in range(len(boxes)) for j in range(i + 1, len(boxes)) if boxes[i].overlaps(boxes[j])]
    assert not overlaps, f"{len(overlaps)} overlapping labels"
    # the figure grows with the lanes instead of squeezing them
    small = plot.timeline_figure(res.shot, res.compiled, (), channels=["analog_output_0*"])
    assert fig.get_figheight() > 4 * small.get_figheight()


# --- diff -------------------------------------------------------------------------------------------------------


def test_diff_windows_from_the_two_tables(tmp_path):
    old = preflight(_small(tmp_path, "old.yaml"))
    new = preflight(_small(tmp_path, "new.yaml", kick="12 A", guide_at="7 ms"))
    w = plot.diff_windows(old.shot, old.compiled, new.shot, new.compiled)
    # from the YAML: guide_power on 5..15 ms before, 7..17 ms after: differs 5..7 ms and 15..17 ms;
    # kick_current 10 A -> 12 A while on: block 'second' at 20 ms, after the 5 ms shutter hold, for 2 ms
    assert set(w) == {"guide_power", "kick_current"}
    assert w["guide_power"] == [pytest.approx((0.005, 0.007)), pytest.approx((0.015, 0.017))]
    assert w["kick_current"] == [pytest.approx((0.025, 0.027))]
    assert plot.diff_windows(old.shot, old.compiled, old.shot, old.compiled) == {}

    fig = plot.diff_figure(old.shot, old.compiled, new.shot, new.compiled)
    lanes = _lanes(fig)
    assert any(t.get_text().endswith("*") for t in lanes["guide_power"].texts)
    assert not any(t.get_text().endswith("*") for t in lanes["probe_shutter"].texts)
    for gid in ("old:kick_current", "new:kick_current"):
        _line(lanes["kick_current"], gid)
    (strip,) = _by_label(fig, "diff")
    assert len(strip.collections[0].get_paths()) == 3


# --- writing ----------------------------------------------------------------------------------------------------


def test_parse_time():
    assert plot.parse_time("2.6 s") == pytest.approx(2.6)
    assert plot.parse_time("150 ms") == pytest.approx(0.15)
    assert plot.parse_time("20 us") == pytest.approx(20e-6)
    for bad in ("2.6", "3 V", "soon"):
        with pytest.raises(plot.PlotError):
            plot.parse_time(bad)


def test_decimation_keeps_every_extreme():
    rng = np.random.default_rng(7)
    t = np.sort(rng.uniform(0, 1, 200_000))
    v = rng.normal(size=t.size)
    td, vd = plot.decimate(t, v, 0.0, 1.0, nbins=500)
    assert len(td) <= 4 * 500 + 2
    bins = np.floor(t * 500).astype(int)
    for b in (0, 123, 499):
        sel = bins == b
        inside = (td >= t[sel][0]) & (td <= t[sel][-1])
        assert vd[inside].max() == v[sel].max() and vd[inside].min() == v[sel].min()


def test_saving_is_deterministic_atomic_and_refuses_to_overwrite(tmp_path):
    res = preflight(_small(tmp_path))
    lanes = ["guide_power", "probe_shutter"]
    for ext in ("svg", "png", "pdf"):
        fig = plot.timeline_figure(res.shot, res.compiled, res.findings, channels=lanes)
        a = plot.save_figure(fig, tmp_path / f"a.{ext}")
        again = plot.timeline_figure(res.shot, res.compiled, res.findings, channels=lanes)
        b = plot.save_figure(again, tmp_path / f"b.{ext}")
        assert a.read_bytes() == b.read_bytes(), ext
        with pytest.raises(plot.OutputExists):
            plot.save_figure(fig, a)
        plot.save_figure(fig, a, force=True)
    assert (tmp_path / "a.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (RFC 2083)
    assert (tmp_path / "a.pdf").read_bytes()[:5] == b"%PDF-"  # ISO 32000 header
    assert not list(tmp_path.glob(".*.tmp"))
    with pytest.raises(plot.PlotError):
        plot.format_of(tmp_path / "x.gif")


def test_cli_plot(tmp_path, capsys):
    seq = _small(tmp_path)
    out = tmp_path / "t.png"
    assert main(["plot", str(seq), "-o", str(out), "--from", "0 ms", "--to", "30 ms", "--channels", "guide_*,kick*"]) == 0
    assert out.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert "2 lanes" in capsys.readouterr().out
    assert main(["plot", str(seq), "-o", str(out)]) == 2  # exists, no --force
    assert "--force" in capsys.readouterr().err
    assert main(["plot", str(seq), "-o", str(out), "--from", "30", "--force"]) == 2  # no unit
    assert "no unit" in capsys.readouterr().err
    new = _small(tmp_path, "new.yaml", kick="12 A")
    assert main(["plot", str(seq), str(new), "-o", str(tmp_path / "d.svg"), "--json"]) == 0
    text = capsys.readouterr().out
    assert '"kick_current"' in text and (tmp_path / "d.svg").read_text(encoding="utf-8").lstrip().startswith("<?xml")
    # a sequence with error findings still gets its picture, and exit code 1
    assert main(["plot", str(SEQUENCES / "faults" / "overlap.yaml"), "-o", str(tmp_path / "f.png")]) == 1
    assert (tmp_path / "f.png").exists()


# --- scans: which shot a picture shows ----------------------------------------------------------------------------
# Expected values: the scan values written in the YAML below (read back with PyYAML) in written order, which is
# the run order without `order: shuffled` (README "Parameter scans"), and the geometry of the drawn texts.


def _scanned_small(tmp_path, name="scanned.yaml", values="[3 ms, 8 ms]"):
    text = SMALL.replace("KICK", "10 A").replace("blocks:\n", f"params:\n  g_at: {{value: 5 ms, scan: {values}}}\nblocks:\n", 1)
    return _write(tmp_path, name, text.replace("at: 5 ms", "at: g_at"))


def _captured(monkeypatch):
    figs = []
    real = plot.save_figure

    def keep(fig, path, **kw):
        figs.append(fig)
        return real(fig, path, **kw)

    monkeypatch.setattr(plot, "save_figure", keep)
    return figs


def _first_rise(fig, output="guide_power"):
    line = _line(_lanes(fig)[output], f"intended:{output}")
    t, v = np.asarray(line.get_xdata(), float), np.asarray(line.get_ydata(), float)
    return float(t[np.argmax(v > 0)])


def test_plot_shot_n_draws_that_shot_and_says_so(tmp_path, capsys, monkeypatch):
    figs = _captured(monkeypatch)
    seq = _scanned_small(tmp_path)
    written = yaml.safe_load(seq.read_text(encoding="utf-8"))["params"]["g_at"]["scan"]
    for n, text in enumerate(written):
        assert main(["plot", str(seq), "-o", str(tmp_path / f"s{n}.png"), "--shot", str(n), "--no-physics"]) == 0
        fig = figs[-1]
        sub = fig.seqgen_title["subtitle"]
        assert len(sub) == 1 and sub[0].startswith(f"shot {n} of the {len(written)} shots of the scan")
        assert f"g_at = {text}" in sub[0]
        assert _first_rise(fig) == pytest.approx(float(text.split()[0]) * 1e-3, abs=1e-6)
        assert f"g_at = {text}" in capsys.readouterr().out
    # without --shot: the base shot, every scanned param at its value: (5 ms), named as such in the title
    assert main(["plot", str(seq), "-o", str(tmp_path / "base.png"), "--no-physics", "--json"]) == 0
    sub = figs[-1].seqgen_title["subtitle"]
    assert sub[0].startswith(f"base shot of a scan of {len(written)} shots") and "g_at = 5 ms" in sub[0]
    assert f"--shot 0..{len(written) - 1}" in sub[0]
    assert _first_rise(figs[-1]) == pytest.approx(5e-3, abs=1e-6)
    out = json.loads(capsys.readouterr().out)
    assert out["scan"][0]["base"] and out["scan"][0]["params"]["g_at"]["value"] == pytest.approx(5e-3)
    # a sequence without scans keeps its one-line title
    assert main(["plot", str(_small(tmp_path)), "-o", str(tmp_path / "plain.png"), "--no-physics"]) == 0
    assert figs[-1].seqgen_title["subtitle"] == [] and "scan" not in capsys.readouterr().out


def test_diff_of_two_scanned_versions_names_both_shots(tmp_path, capsys, monkeypatch):
    figs = _captured(monkeypatch)
    old = _scanned_small(tmp_path, "old.yaml")
    new = _scanned_small(tmp_path, "new.yaml", values="[3 ms, 9 ms]")
    assert main(["plot", str(old), str(new), "-o", str(tmp_path / "d.png"), "--shot", "1"]) == 0
    sub = figs[-1].seqgen_title["subtitle"]
    assert sub[0].startswith(f"old ({old}): shot 1 of the 2 shots") and "g_at = 8 ms" in sub[0]
    assert sub[1].startswith(f"new ({new}): shot 1 of the 2 shots") and "g_at = 9 ms" in sub[1]
    assert figs[-1].seqgen_info["differs"]  # 8 ms against 9 ms: the guide pulse moved


def test_subtitle_lines_do_not_overlap_the_title_or_the_legend(tmp_path):
    res = preflight(_small(tmp_path))
    sub = "first line: shot 3 of the 10 shots of the scan (run order): a = 1 ms\nsecond line: " + "b = 2 ms, " * 30
    fig = plot.timeline_figure(res.shot, res.compiled, res.findings, channels=["guide_power"], physics=False,
                               subtitle=sub)
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    canvas = FigureCanvasAgg(fig)
    canvas.draw()
    r = canvas.get_renderer()
    lines = fig.seqgen_title["subtitle"]
    assert len(lines) == 3  # the long second line wraps
    texts = {t.get_text(): t.get_window_extent(r) for t in fig.texts}
    boxes = [texts[fig.seqgen_title["title"]]] + [texts[ln] for ln in lines] + [fig.legends[0].get_window_extent(r)]
    for a, b in zip(boxes, boxes[1:]):  # top to bottom, each one below the previous (display y grows upwards)
        assert b.y1 <= a.y0 + 0.5, (a, b)
    top_axes = min(ax.get_window_extent(r).y1 for ax in fig.axes if ax.get_label() == "blocks")
    assert boxes[-1].y0 > top_axes


# --- pictures a new user misreads ------------------------------------------------------------------------------
# Expected values: the rig file's latencies, ranges, bits and calibrations (read with PyYAML), the times written in
# the YAML above, rounding to the nearest DAC code with ties to the higher code (README "Timing rules"), and plain
# geometry of the drawn artists (bounding boxes from the Agg renderer).


def _rendered(fig):
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    canvas = FigureCanvasAgg(fig)
    canvas.draw()
    return canvas.get_renderer()


def _seconds(text):
    """'3.2 ms' -> 0.0032 (SI prefixes, SI Brochure, 9th ed., 2019)."""
    value, unit = text.split()
    return float(value) * {"s": 1.0, "ms": 1e-3, "us": 1e-6, "ns": 1e-9}[unit]


def test_a_latency_lane_says_its_table_is_the_command_sent_early(tmp_path):
    res = preflight(_small(tmp_path))
    fig = plot.timeline_figure(res.shot, res.compiled, res.findings, t_from=0.0, t_to=0.03, all_lanes=True)
    rig = _rig_yaml()["channels"]
    lat = rig["probe_shutter"]["latency"]  # {rise: 3.2 ms, fall: 2.1 ms}
    lanes = _lanes(fig)
    notes = [a.get_text() for a in lanes["probe_shutter"].texts if a.get_gid() == "lane-note"]
    assert notes == [f"command {lat['rise']} early on, {lat['fall']} early off (latency)"]
    # the table's edges are the commands, each earlier by the rig's latency than the YAML's time (when it acts)
    t, v = (np.asarray(x, float) for x in _line(lanes["probe_shutter"], "table:probe_shutter").get_data())
    edges = t[1:][np.diff(v) != 0]
    assert edges == pytest.approx([0.020 - _seconds(lat["rise"]), 0.025 - _seconds(lat["fall"])], abs=1e-7)
    # a latency far below one point of the window (cross_a_power: 500 ns in a 30 ms window) gets no note
    assert _seconds(rig["cross_a_power"]["latency"]) < 0.03 / (8 * 72)
    assert not [a for a in lanes["cross_a_power"].texts if a.get_gid() == "lane-note"]
    labels = [t.get_text() for t in fig.legends[0].get_texts()]
    assert any("command" in x and "early" in x for x in labels) and any("when the output acts" in x for x in labels)
    # the note sits in the left margin, clear of the lane label and of the y tick labels
    r = _rendered(fig)
    ax = lanes["probe_shutter"]
    boxes = [t.get_window_extent(r) for t in ax.texts] + \
        [t.get_window_extent(r) for t in ax.get_yticklabels() if t.get_text()]
    assert not [(i, j) for i in range(len(boxes)) for j in range(i + 1, len(boxes)) if boxes[i].overlaps(boxes[j])]
    assert min(b.x0 for b in boxes) >= 0


def test_a_flat_lane_gets_a_round_tick(demo):
    fig = plot.timeline_figure(demo.shot, demo.compiled, demo.findings, t_from=2.70, t_to=2.746, physics=False)
    ax = _lanes(fig)["cross_a_power"]  # ramped to 0 W before 2.70 s (load_guide), untouched after
    spec = _rig_yaml()["channels"]["cross_a_power"]
    lo_v, hi_v = (float(x.split()[0]) for x in spec["output"]["range"])  # [-10 V, 10 V], 16 bits
    lsb = (hi_v - lo_v) / 2 ** spec["output"]["bits"]  # IEEE Std 1658-2011: 2^N LSB span the range
    # 0 V is half the range, 2^15 LSB above -10 V: a code of its own (0x8000 in offset binary), so the table
    # holds 0 exactly
    assert (0.0 - lo_v) / lsb == 2 ** 15
    y = np.asarray(_line(ax, "table:cross_a_power").get_ydata(), float)
    assert len(y) and np.all(y == 0.0)
    # ... but the lane reads a round 0 (mW) and 0 (V), not "0.0763" and "0.0001526"
    assert list(ax.yaxis.get_major_locator()()) == [0.0]
    (sec,) = [c for c in ax.child_axes if c.get_label() == "output-unit:cross_a_power"]
    assert list(sec.yaxis.get_major_locator()()) == [0.0]
    # every analog lane's tick labels are round: at most two significant digits (common practice, no source)
    r = _rendered(fig)
    for name, lane in _lanes(fig).items():
        if demo.shot.rig.outputs[name].kind == "digital":
            continue
        lo, hi = lane.get_ylim()
        for axis in [lane] + [c for c in lane.child_axes]:
            for loc, lab in zip(axis.get_yticks(), axis.get_yticklabels()):
                text = lab.get_text().replace("\u2212", "-")
                if text and lo <= (loc if axis is lane else lo) <= hi:
                    digits = text.lstrip("-").replace(".", "").lstrip("0")
                    assert len(digits.rstrip("0")) <= 2, (name, text)
    assert r is not None


def test_outputs_the_sequence_never_writes_are_named_not_drawn(tmp_path, capsys):
    res = preflight(_small(tmp_path))
    rig = _rig_yaml()
    every = [f"{c}.{part}" for c, spec in rig["channels"].items() if spec["kind"] == "synth"
             for part in ("freq", "amp") + (("phase",) if "phase" in spec else ())]
    every += [c for c, spec in rig["channels"].items() if spec["kind"] != "synth"]
    # the only channels SMALL writes, and the rig's wiring lines, which carry generated edges
    written = {"guide_power", "probe_shutter", "kick_current"} | _wiring_lines(rig)
    fig = plot.timeline_figure(res.shot, res.compiled, res.findings, physics=False)
    assert set(_lanes(fig)) == written
    (line,) = _by_label(fig, "not-written")
    text = " ".join(_texts(line))
    assert text.startswith("not written") and "--all-lanes" in text
    assert set(fig.seqgen_info["not_written"]) == set(every) - written
    for name in set(every) - written:
        assert name in text
    full = plot.timeline_figure(res.shot, res.compiled, res.findings, physics=False, all_lanes=True)
    assert set(_lanes(full)) == set(every) and not _by_label(full, "not-written")
    # the CLI: left out by default, drawn with --all-lanes
    out = tmp_path / "t.svg"
    assert main(["plot", str(_small(tmp_path)), "-o", str(out), "--json"]) == 0
    info = json.loads(capsys.readouterr().out)
    assert set(info["lanes"]) == written and set(info["not_written"]) == set(every) - written
    assert main(["plot", str(_small(tmp_path)), "-o", str(out), "--json", "--force", "--all-lanes"]) == 0
    info = json.loads(capsys.readouterr().out)
    assert set(info["lanes"]) == set(every) and info["not_written"] == []
    # a diff leaves out what neither version writes
    new = preflight(_small(tmp_path, "new.yaml", kick="12 A"))
    d = plot.diff_figure(res.shot, res.compiled, new.shot, new.compiled)
    assert set(_lanes(d)) == written and _by_label(d, "not-written")


def test_a_dense_final_part_gets_a_zoom_hint(demo, tmp_path):
    blocks = demo.shot.blocks
    end = demo.shot.duration_s
    late = [b for b in blocks if b.start_s >= 0.95 * end]  # the rule: over half the blocks in the last 5 %
    assert 2 * len(late) > len(blocks)
    first = min(b.start_s for b in late)  # kick: after load_guide (2.606 s + 80 ms + 20 ms) = 2.706 s
    assert first == pytest.approx(2.706, abs=1e-9)
    fig = plot.timeline_figure(demo.shot, demo.compiled, demo.findings, physics=False)
    hint = fig.seqgen_title["subtitle"][-1]
    assert hint.startswith(f"most blocks ({len(late)} of {len(blocks)}) fall in 2.7 s")
    assert "--from '2.7 s'" in hint  # 2.706 s rounded down to the 10 ms step of a 40 ms run
    assert fig.seqgen_info["dense_window"][0] == pytest.approx(2.70)
    # zoomed in, the blocks are apart: no hint; SMALL spreads its two blocks over the shot: no hint
    zoom = plot.timeline_figure(demo.shot, demo.compiled, (), t_from=2.70, t_to=end, physics=False)
    assert zoom.seqgen_info["hint"] is None
    res = preflight(_small(tmp_path))
    assert plot.timeline_figure(res.shot, res.compiled, ()).seqgen_info["hint"] is None


def _overlapping_labels(ax, renderer, gid_prefix):
    """Pairs (label, marker or label) whose boxes overlap, where the marker belongs to another item."""
    texts = [t for t in ax.texts if t.get_text()]
    marks = [ln for ln in ax.get_lines() if (ln.get_gid() or "").startswith(gid_prefix)]
    tb = [t.get_window_extent(renderer) for t in texts]
    bad = [(texts[i].get_text(), texts[j].get_text()) for i in range(len(tb)) for j in range(i + 1, len(tb))
           if tb[i].overlaps(tb[j])]
    for t, box in zip(texts, tb):
        for ln in marks:
            mb = ln.get_window_extent(renderer)
            if box.overlaps(mb):
                bad.append((t.get_text(), ln.get_gid()))
    return bad


def test_finding_labels_overlap_neither_labels_nor_other_markers_in_a_diff(tmp_path):
    from seqgen.findings import make

    old = preflight(_small(tmp_path, "old.yaml"))
    new = preflight(_small(tmp_path, "new.yaml", kick="12 A", guide_at="7 ms"))
    codes = ["timing.overlap", "hardware.slew-rate", "safety.hard-limit", "hardware.min-pulse", "timing.sub-tick"]
    times = [0.0050, 0.0056, 0.0062, 0.0100, 0.0106, 0.0150, 0.0200, 0.0203, 0.0206, 0.0265, 0.0268]
    fs = [make(_code(codes[k % len(codes)]), f"test {k}", None, time_s=t) for k, t in enumerate(times)]
    # a long chain of close findings shares one label; one more finding just after the chain ends
    chain = [make(_code("hardware.slew-rate"), f"chain {k}", None, time_s=0.002 + 3e-4 * k) for k in range(60)]
    chain.append(make(_code("timing.overlap"), "after the chain", None, time_s=0.002 + 3e-4 * 59 + 1.2e-3))
    for fs, t_from, t_to in ((fs, None, None), (fs, 0.004, 0.03), (chain, 0.0, 0.03)):
        fig = plot.diff_figure(old.shot, old.compiled, new.shot, new.compiled, findings=fs, t_from=t_from, t_to=t_to)
        r = _rendered(fig)
        (strip,) = _by_label(fig, "findings")
        # a label's box never covers another label or any marker (its own marker sits beside it)
        assert not _overlapping_labels(strip, r, "finding:"), (t_from, t_to)
        marks = [ln for ln in strip.get_lines() if (ln.get_gid() or "").startswith("finding:")]
        assert len(marks) == len(fs)  # every finding keeps its marker


def test_cloud_text_clears_the_trajectory_and_the_markers(demo, demo_fig):
    r = _rendered(demo_fig)
    for fig in (demo_fig, plot.timeline_figure(demo.shot, demo.compiled, demo.findings, t_from=2.70, t_to=2.7463)):
        r = _rendered(fig)
        (cloud,) = _by_label(fig, "physics:cloud")
        (text,) = [t for t in cloud.texts if t.get_gid() == "cloud-text"]
        box = text.get_window_extent(r)
        for ln in cloud.get_lines():
            xy = cloud.transData.transform(np.column_stack([ln.get_xdata(), ln.get_ydata()]).astype(float))
            inside = (xy[:, 0] >= box.x0) & (xy[:, 0] <= box.x1) & (xy[:, 1] >= box.y0 - 3) & (xy[:, 1] <= box.y1 + 3)
            assert not np.any(inside), ln
        # the state labels of the components stay clear of it too
        for t in cloud.texts:
            if t is not text:
                assert not t.get_window_extent(r).overlaps(box)


def test_default_picture_with_notes_and_left_out_lanes_is_deterministic(tmp_path):
    res = preflight(_small(tmp_path))
    a = plot.figure_bytes(plot.timeline_figure(res.shot, res.compiled, res.findings, t_from=0.0, t_to=0.03), "svg")
    b = plot.figure_bytes(plot.timeline_figure(res.shot, res.compiled, res.findings, t_from=0.0, t_to=0.03), "svg")
    assert a == b
    # matplotlib writes each text as an SVG comment beside its glyph paths: the note and the left-out line are drawn
    assert b"command 3.2 ms early on" in a and b"not written (at the safe value all shot" in a
