"""The labels of the predicted-image panels (`seqgen plot --images`, seqgen/emit/plot/images.py and labels.py):
each part's label beside its own cloud, no two overlapping, none over the panel's edge or a cloud's centre, a
leader line ending at its own part's centre where a label moved away, the same bytes each time.

The parts' centres are checked by hand first: a thin sheet reflects specularly, so a state's reflected and
transmitted parts sit symmetrically about the sheet's plane (x_r + x_t = 2 d) at the same height; after the guide
is released the parts fall freely, 1/2 g t^2 with g from scipy.constants. Extents are the matplotlib text
artists' window extents on an Agg canvas."""

from __future__ import annotations

import itertools
from dataclasses import replace

import numpy as np
import pytest
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.text import Text
from scipy import constants as sc

import seqgen
from seqgen.emit.plot.files import figure_bytes
from seqgen.emit.plot.labels import Box, place_labels
from seqgen.predict.images import predicted_images

SHEET_X = 0.3e-3  # both rigs: the sheet's position along the guide (x)


def _edit(path, old, new):
    text = path.read_text(encoding="utf-8")
    assert text.count(old) == 1, old
    path.write_text(text.replace(old, new), encoding="utf-8")


def _labels(pred):
    """The figure of one image, its drawn part labels and the renderer."""
    fig = seqgen.images_figure([(None, (pred,))])
    renderer = FigureCanvasAgg(fig).get_renderer()
    fig.draw(renderer)
    ax = next(a for a in fig.axes if a.images)
    anns = [t for t in ax.texts if t.get_gid() == "part-label"]
    return fig, ax, anns, renderer


def _check_layout(pred):
    fig, ax, anns, renderer = _labels(pred)
    assert len(anns) == len(pred.components)
    boxes = [Text.get_window_extent(a, renderer) for a in anns]  # the text alone, without its leader
    frame = ax.get_window_extent(renderer)
    centres = [tuple(ax.transData.transform((c.centre[0] * 1e6, c.centre[1] * 1e6))) for c in pred.components]
    for a, b in itertools.combinations(boxes, 2):
        assert not a.overlaps(b), (a, b)
    for box in boxes:
        assert frame.x0 <= box.x0 and box.x1 <= frame.x1 and frame.y0 <= box.y0 and box.y1 <= frame.y1
        assert not any(box.contains(x, y) for x, y in centres)  # no label over a cloud's centre
    for ann, box, comp, (cx, cy) in zip(anns, boxes, pred.components, centres):
        text = ann.get_text().splitlines()
        side = comp.split[-1][0]
        assert text[0] == f"|{comp.state[0]},{comp.state[1]}> {side}" and text[1] == f"{comp.atoms:.2g} atoms"
        assert ann.xy == pytest.approx((comp.centre[0] * 1e6, comp.centre[1] * 1e6))  # anchored at its own part
        if ann.arrow_patch is not None:  # the leader line ends at its own part's centre
            end = ann.arrow_patch.get_path().vertices[-1]
            assert tuple(end) == pytest.approx((cx, cy), abs=0.5)
        else:  # beside its cloud: nearer its own part's centre than any other part's
            def gap(x, y):
                return np.hypot(max(box.x0 - x, 0, x - box.x1), max(box.y0 - y, 0, y - box.y1))
            assert all(gap(cx, cy) <= gap(x, y) + 1e-6 for x, y in centres)
    return fig, anns


def test_four_close_parts_are_labelled_beside_their_own_clouds(project):
    demo = project / "sequences" / "na23_barrier_scatter.yaml"
    _edit(demo, "gradient: 14 G/cm, duration: 2 ms}", "gradient: 6 G/cm, duration: 2 ms}")  # the stripes closer
    res = seqgen.preflight(demo, overrides={"tof": "6 ms"})
    (pred,) = predicted_images(res.shot)
    parts = {(c.state, c.split[-1][0]): c.centre for c in pred.components}
    assert len(parts) == 4
    for state in ((1, -1), (2, -2)):
        (xr, yr), (xt, yt) = parts[state, "reflected"], parts[state, "transmitted"]
        assert xr + xt == pytest.approx(2 * SHEET_X, abs=2e-6)  # mirror images in the sheet (no camera offset)
        assert yr == pytest.approx(yt, abs=1e-7)
    # close: the states' stripes under 0.25 mm apart, the parts under 0.6 mm
    assert abs(parts[(2, -2), "reflected"][1] - parts[(1, -1), "reflected"][1]) < 0.25e-3
    _, anns = _check_layout(pred)
    # the |2,-2> stripe is the upper one here: its labels above the |1,-1> ones
    by = {a.get_text().splitlines()[0]: a.xyann[1] + a.xy[1] for a in anns}
    assert min(by["|2,-2> reflected"], by["|2,-2> transmitted"]) > max(by["|1,-1> reflected"],
                                                                        by["|1,-1> transmitted"])
    # eight parts (the four, relabelled as four states) crowded within 8 um of each other: labels move away,
    # leaders end at their own parts
    mid = np.mean([c.centre for c in pred.components], axis=0)
    states = ((1, -1), (1, 0), (2, -2), (2, -1))
    crowded = replace(pred, components=tuple(
        replace(pred.components[k % 2], state=states[k // 2],
                centre=(mid[0] + 8e-6 * np.cos(k * np.pi / 4), mid[1] + 8e-6 * np.sin(k * np.pi / 4)))
        for k in range(8)))
    _, anns = _check_layout(crowded)
    assert any(a.arrow_patch is not None for a in anns)


def test_split_parts_fall_freely_and_their_labels_point_at_them(project):
    good = project / "sequences" / "good" / "na23_split_parts_in_view.yaml"
    res = seqgen.preflight(good)
    (pred,) = predicted_images(res.shot)
    # the rig's camera is centred 0.8 mm along the guide and 0.4 mm below the atoms; the image 4 ms after the
    # guide's release: a free fall of g t^2 / 2
    centre_x, centre_z, fall = 0.8e-3, -0.4e-3, 0.5 * sc.g * 4e-3 ** 2
    parts = {c.split[-1][0]: c.centre for c in pred.components}
    for _, y in parts.values():
        assert y == pytest.approx(-fall - centre_z, abs=2e-6)
    assert parts["reflected"][0] + parts["transmitted"][0] == pytest.approx(2 * (SHEET_X - centre_x), abs=2e-6)
    _check_layout(pred)


def test_the_same_parts_give_the_same_bytes(project):
    demo = project / "sequences" / "na23_barrier_scatter.yaml"
    _edit(demo, "gradient: 14 G/cm, duration: 2 ms}", "gradient: 6 G/cm, duration: 2 ms}")
    res = seqgen.preflight(demo, overrides={"tof": "6 ms"})
    a = figure_bytes(seqgen.images_figure([(None, tuple(predicted_images(res.shot)))]), "png")
    b = figure_bytes(seqgen.images_figure([(None, tuple(predicted_images(res.shot)))]), "png")
    assert a == b


def test_labels_of_clouds_on_one_spot_move_apart_with_leaders():
    # four parts at one place (two states not separated, each split): every label finds its own spot
    anchors, sizes = [(150.0, 100.0)] * 4, [(90.0, 28.0)] * 4
    frame = Box(0.0, 0.0, 300.0, 200.0)
    spots = place_labels(anchors, sizes, frame, [Box(140, 95, 160, 105)] * 4, 1.5)
    assert all(s is not None for s in spots)
    for a, b in itertools.combinations(spots, 2):
        assert not a.box.overlaps(b.box)
    for s in spots:
        assert frame.x0 <= s.box.x0 and s.box.x1 <= frame.x1 and frame.y0 <= s.box.y0 and s.box.y1 <= frame.y1
        assert s.box.distance(150.0, 100.0) > 0  # the shared centre stays visible
    assert place_labels(anchors, sizes, frame, [Box(140, 95, 160, 105)] * 4, 1.5) == spots  # deterministic
