"""A barrier sheet splits the cloud it meets: where the transmitted and reflected parts of every internal-state
component are at an image.

The model (stated assumptions): a component whose centre is at a barrier's sheet (within its waist along the
path, every sign case alike, moving towards it) when the pushed cloud's centre arrives there
(`barrier.analyse(...).passage.centre_arrival`), while the sheet is on, splits at that moment into a
transmitted part (fraction T of it, `analyse(...).T`, moving on: the straight flight) and a reflected part
(fraction 1 - T), whose velocity component along the sheet's normal n (the push's direction) is reversed from
then on: specular reflection off a thin sheet, v -> v - 2 (v . n) n, so that at a later time t it is
x = d - v_n (t - t_hit) along n, the sheet at d. Both parts keep the cloud's size; every later force (a
Stern-Gerlach separation), the fall and the free flight act on both as on the whole. Several sheets split in
turn (a reflected part that no longer reaches the next sheet is not split again). A push whose sense is unknown
is not split (the sign cases would differ). The in-barrier drive of a modulated sheet moves an unknown, small
part of the transmitted atoms to its partner state; `states.populations` marks that state as possibly
populated without a fraction, so here the transmitted part stays in its state (nothing counted twice).
Reflection from a thin barrier: one-dimensional stationary scattering, the reflected wave carrying momentum
-hbar k along the normal (Quantum Mechanics: Non-Relativistic Theory, 3rd ed., Pergamon (1977), section 25);
free flight and fall as in `pushes`."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .barrier import analyse
from .cache import per_shot_cache
from .pushes import Components, components_at, confinement_bound, gather, motion_at
from .species import G_N, release_before, species
from .states import barriers, populations, state_at

TRANSMITTED, REFLECTED = "transmitted", "reflected"


@dataclass(frozen=True)
class SheetHit:
    """A barrier sheet the pushed cloud's centre meets while it is on: the barrier action, block, time (s, the
    centre's arrival), normal (unit vector along the push), distance (m, the sheet along the normal from the
    atoms' start), reach (m: the sheet's waist along the path), T (transmitted fraction)."""

    act: object
    block: str
    time: float
    normal: tuple
    distance: float
    reach: float
    T: float


def sheet_hits(shot, before: float) -> tuple:
    """The SheetHit of every barrier whose sheet is on when the pushed cloud's centre arrives, before `before`,
    in time order."""
    out = []
    for act in barriers(shot):
        rep = analyse(shot, act)
        if rep is None or not rep.incident.known_direction or rep.passage.below:
            continue  # a push of unknown sense, or a cloud that falls under the sheet, is not split
        t_hit = rep.passage.push_t0 + rep.passage.centre_arrival
        if not (math.isfinite(t_hit) and act.t0 <= t_hit <= act.t1 and t_hit < before):
            continue
        n = np.asarray(rep.incident.direction, dtype=float)
        n = n / np.linalg.norm(n)
        out.append(SheetHit(act, act.block, float(t_hit), tuple(float(x) for x in n), rep.passage.distance,
                            rep.waist_y, rep.T))
    return tuple(sorted(out, key=lambda h: h.time))


def _fall(t_rel, t):
    """(displacement, velocity) of the fall since the release at t_rel, at t (none before the release)."""
    if t_rel is None or t <= t_rel:
        return np.zeros(3), np.zeros(3)
    dt = t - t_rel
    return np.array([0.0, 0.0, -0.5 * G_N * dt * dt]), np.array([0.0, 0.0, -G_N * dt])


def _bounded_shift(shot, t, cases, shift, refl):
    """The reflections' displacement `shift`, kept within the bound `pushes` puts on a push whose atoms an
    optical trap (a guide) still holds: a reflected part oscillates in the same trap with the same speed, so
    along each sheet's normal it is no farther from the start than v / omega_min + v (t - release) either."""
    for hit, _ in refl:
        rep = analyse(shot, hit.act)  # the normal is the push's direction, the speed the incident one
        bound = confinement_bound(shot, species(shot), rep.incident.push, t, rep.speed)
        if bound is None:
            continue
        n = np.asarray(hit.normal)
        along = (cases + shift) @ n  # (n_cases,)
        worst = float(np.max(np.abs(along)))
        if worst > bound:
            excess = np.sign(along) * np.maximum(np.abs(along) - bound, 0.0)
            shift = shift - float(excess[int(np.argmax(np.abs(along)))]) * n
    return shift


@per_shot_cache(lambda shot, img: ("split-components", img.index, img.t0))
def split_components(shot, img) -> Components | None:
    """`pushes.components_at`, every component a barrier sheet met split into its transmitted and reflected
    parts (see the module's doc); the same Components when no sheet is met. None without a species."""
    if species(shot) is None:
        return None
    hits = sheet_hits(shot, img.t0)
    if not hits:
        return components_at(shot, img)
    pop = populations(shot, img.t0)
    paths = pop.paths if pop is not None else [(1.0, ((-math.inf, None),))]
    rel = release_before(shot, img.t0)  # the release the image's cloud falls from, as in `cloud`
    t_rel = rel.t0 if rel is not None else None
    # a branch: (path index, fraction of the path, reflections ((hit, velocity change (3,)), ...), split)
    branches = [(k, 1.0, (), ()) for k in range(len(paths))]
    for hit in hits:
        at = motion_at(shot, hit.time, paths)
        fall_x, fall_v = _fall(t_rel, hit.time)
        n = np.asarray(hit.normal)
        new = []
        for k, share, refl, split in branches:
            pos = at.cases[:, k, :] + fall_x + sum((dv * (hit.time - h.time) for h, dv in refl), np.zeros(3))
            vel = at.speeds[:, k, :] + fall_v + sum((dv for _, dv in refl), np.zeros(3))
            along, v_n = pos @ n, vel @ n
            meets = (np.all(np.abs(along - hit.distance) <= hit.reach) and np.all(v_n > 0)
                     and np.allclose(v_n, v_n[0], rtol=1e-9, atol=0))
            if not meets:
                new.append((k, share, refl, split))
                continue
            for side, part, more in ((TRANSMITTED, hit.T, ()), (REFLECTED, 1.0 - hit.T, ((hit, -2.0 * float(v_n[0]) * n),))):
                if share * part * paths[k][0] > 1e-12:
                    new.append((k, share * part, refl + more, split + ((side, hit.block),)))
        branches = new
    end = motion_at(shot, img.t0, paths)
    rows = []
    for k, share, refl, split in branches:
        f, ch = paths[k]
        shift = sum((dv * (img.t0 - h.time) for h, dv in refl), np.zeros(3))
        shift = _bounded_shift(shot, img.t0, end.cases[:, k, :], shift, refl)
        kicks = sum((dv for _, dv in refl), np.zeros(3))
        slots = end.slots[k] + tuple((f"reflection off barrier '{h.block}'", True, dv * (img.t0 - h.time), None)
                                     for h, dv in refl)
        rows.append(dict(state=state_at(ch, img.t0), fraction=f * share, displacements=end.cases[:, k, :] + shift,
                         parts=slots, velocities=end.speeds[:, k, :] + kicks, split=split))
    return gather(shot, rows, pop, end)
