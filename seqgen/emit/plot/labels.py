"""Where the labels of an image panel go: each beside its own cloud, none over another, over the panel's edge or
(where it can be helped) over a cloud's centre; a label that has to move away gets a leader line to its cloud.

Plain geometry in display pixels, no matplotlib: `place_labels` takes the anchors (the clouds' centres), the
labels' sizes, the frame (the panel) and the clouds' cores, and gives one `Spot` per label. The choice is a
bounded branch-and-bound over a fixed list of candidate spots, in a fixed order: the same input gives the same
spots (the picture's bytes depend on it)."""

from __future__ import annotations

import math
from dataclasses import dataclass

GAP_PT = 4.0  # between a cloud's centre mark and a label beside it
PAD_PT = 2.0  # kept free around each label (the halo) and inside the panel's edge
MARK_PT = 3.5  # half-size of a cloud's centre mark (the "+", 7 pt) a label should not cover
LEADER_PT = 10.0  # a label farther than this from its cloud's centre gets a leader line
MAX_CHECKS = 200_000  # bound on the search: enough for a dozen labels, deterministic when it stops early

# costs (dimensionless): a label beside its cloud costs its side's preference; nearer another cloud's centre
# than its own, over a cloud's core or away with a leader costs more; over a centre mark only when unavoidable
_SIDES = ((0, 1, 0.0), (0, -1, 0.0), (1, 0, 0.15), (-1, 0, 0.15), (1, 1, 0.3), (-1, 1, 0.3), (1, -1, 0.3),
          (-1, -1, 0.3))
AMBIGUOUS, OVER_CORE, OVER_OWN_CORE, AWAY, OVER_MARK, CROSSING, NEAR_GRID, UNDER = 3.0, 1.0, 0.4, 1.0, 20.0, 0.5, 0.35, 2.0


@dataclass(frozen=True)
class Box:
    x0: float
    y0: float
    x1: float
    y1: float

    def overlaps(self, o: "Box") -> bool:
        return self.x0 < o.x1 and o.x0 < self.x1 and self.y0 < o.y1 and o.y0 < self.y1

    def area(self) -> float:
        return max(0.0, self.x1 - self.x0) * max(0.0, self.y1 - self.y0)

    def common(self, o: "Box") -> float:
        return Box(max(self.x0, o.x0), max(self.y0, o.y0), min(self.x1, o.x1), min(self.y1, o.y1)).area()

    def distance(self, x: float, y: float) -> float:
        return math.hypot(max(self.x0 - x, 0.0, x - self.x1), max(self.y0 - y, 0.0, y - self.y1))

    def crossed(self, a, b) -> bool:
        """Does the segment a-b pass through the box (Liang-Barsky clipping)?"""
        t0, t1 = 0.0, 1.0
        dx, dy = b[0] - a[0], b[1] - a[1]
        for p, q in ((-dx, a[0] - self.x0), (dx, self.x1 - a[0]), (-dy, a[1] - self.y0), (dy, self.y1 - a[1])):
            if p == 0:
                if q < 0:
                    return False
                continue
            t = q / p
            if p < 0:
                t0 = max(t0, t)
            else:
                t1 = min(t1, t)
            if t0 > t1:
                return False
        return True


@dataclass(frozen=True)
class Spot:
    """A label's place: its centre (display pixels), whether a leader line joins it to its cloud, its cost."""
    x: float
    y: float
    leader: bool
    cost: float
    box: Box


def _segments_cross(a, b, c, d) -> bool:
    def side(p, q, r):
        return (q[0] - p[0]) * (r[1] - p[1]) - (q[1] - p[1]) * (r[0] - p[0])
    return side(a, b, c) * side(a, b, d) < 0 and side(c, d, a) * side(c, d, b) < 0


def _candidates(i, anchors, sizes, frame, cores, px):
    """Label i's candidate spots, cheapest first: beside its cloud on each side, then a grid over the frame."""
    ax, ay = anchors[i]
    w, h = sizes[i]
    gap, mark, lead = GAP_PT * px, MARK_PT * px, LEADER_PT * px
    marks = [Box(x - mark, y - mark, x + mark, y + mark) for x, y in anchors]
    spots = []

    def add(cx, cy, base):
        box = Box(cx - w / 2, cy - h / 2, cx + w / 2, cy + h / 2)
        if box.x0 < frame.x0 or box.x1 > frame.x1 or box.y0 < frame.y0 or box.y1 > frame.y1:
            return
        own = box.distance(ax, ay)
        cost = (base or 0.0) + sum(OVER_MARK for m in marks if m.overlaps(box))
        if any(box.distance(x, y) < own - 1e-9 for k, (x, y) in enumerate(anchors) if k != i):
            cost += AMBIGUOUS
        for k, core in enumerate(cores):
            if core.area() > 0:
                cost += (OVER_OWN_CORE if k == i else OVER_CORE) * box.common(core) / box.area()
        leader = own > lead
        if leader:
            cost += AWAY + own / max(frame.x1 - frame.x0, frame.y1 - frame.y0)
        elif base is None:  # a grid spot that happens to be beside the cloud: after the sides proper
            cost += NEAR_GRID
        spots.append(Spot(cx, cy, leader, cost, box))

    for sx, sy, base in _SIDES:
        add(ax + sx * (gap + w / 2), ay + sy * (gap + h / 2), base)
    nx = max(1, int((frame.x1 - frame.x0 - w) // max(w / 4, 1.0)))
    ny = max(1, int((frame.y1 - frame.y0 - h) // max(h / 3, 1.0)))
    for j in range(ny + 1):
        for k in range(nx + 1):
            add(frame.x0 + w / 2 + k * (frame.x1 - frame.x0 - w) / nx,
                frame.y0 + h / 2 + j * (frame.y1 - frame.y0 - h) / ny, None)
    order = sorted(range(len(spots)), key=lambda n: (round(spots[n].cost, 9), n))
    return [spots[n] for n in order]


def _fits(spot, i, chosen, anchors, pad):
    """Can label i take `spot` beside the labels already placed (chosen: [(label, spot)])? The extra cost of
    leaders crossing or running under a label, or None when the labels would overlap."""
    grown = Box(spot.box.x0 - pad, spot.box.y0 - pad, spot.box.x1 + pad, spot.box.y1 + pad)
    extra = 0.0
    for k, other in chosen:
        if grown.overlaps(other.box):
            return None
        if spot.leader and other.box.crossed((spot.x, spot.y), anchors[i]):
            extra += UNDER
        if other.leader and spot.box.crossed((other.x, other.y), anchors[k]):
            extra += UNDER
        if spot.leader and other.leader and _segments_cross((spot.x, spot.y), anchors[i], (other.x, other.y),
                                                            anchors[k]):
            extra += CROSSING
    return extra


def place_labels(anchors, sizes, frame: Box, cores, px_per_pt: float) -> list[Spot | None]:
    """One Spot per label: anchors [(x, y)] and sizes [(w, h)] in display pixels (y up), frame the panel, cores
    one Box per cloud (the part a label should rather not hide). None for a label that fits nowhere in the frame."""
    n = len(anchors)
    pad = PAD_PT * px_per_pt
    inner = Box(frame.x0 + pad, frame.y0 + pad, frame.x1 - pad, frame.y1 - pad)
    cands = [_candidates(i, anchors, sizes, inner, cores, px_per_pt) for i in range(n)]
    # the most constrained labels first (fewest spots), then in their given order
    order = sorted(range(n), key=lambda i: (len(cands[i]), i))
    floor = [0.0] * (n + 1)  # least cost of the labels still to place, for the bound
    for pos in range(n - 1, -1, -1):
        i = order[pos]
        floor[pos] = floor[pos + 1] + (cands[i][0].cost if cands[i] else 0.0)
    # greedy first (each label in turn its cheapest spot clear of those placed): a bound for the search, and
    # the answer should the search stop before finding a better one
    chosen, total = [], 0.0
    for i in order:
        fit = None
        for s in cands[i]:
            extra = _fits(s, i, chosen, anchors, pad)
            if extra is not None:
                fit, total = s, total + s.cost + extra
                break
        if fit is None and cands[i]:  # fits nowhere clear of the others: its cheapest spot all the same
            fit, total = cands[i][0], math.inf
        if fit is not None:
            chosen.append((i, fit))
    best: list = [total, chosen]
    checks = [0]

    def search(pos, chosen, cost):
        if pos == n:
            if cost < best[0] - 1e-12:
                best[0], best[1] = cost, list(chosen)
            return
        i = order[pos]
        if not cands[i]:
            search(pos + 1, chosen, cost)
            return
        for spot in cands[i]:
            if checks[0] >= MAX_CHECKS or cost + spot.cost + floor[pos + 1] >= best[0] - 1e-12:
                return
            checks[0] += 1
            extra = _fits(spot, i, chosen, anchors, pad)
            if extra is None:
                continue
            chosen.append((i, spot))
            search(pos + 1, chosen, cost + spot.cost + extra)
            chosen.pop()

    search(0, [], 0.0)
    spots: list[Spot | None] = [None] * n
    for i, spot in best[1]:
        spots[i] = spot
    return spots
