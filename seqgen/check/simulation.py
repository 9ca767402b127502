"""The finding of `seqgen simulate`: the time-dependent simulation of the barrier crossing against the stationary
prediction of the `physics.barrier-*` checks (`seqgen.predict.simulate`).

Not a rule of `RULES`: a simulation takes seconds to a minute, so `seqgen check` does not run it; the command
`seqgen simulate` calls `simulation_findings` with its result.
"""

from __future__ import annotations

from ..codes import BARRIER_SIMULATION_DISAGREES
from ..findings import make
from ..predict.simulate import ONE_D_LIMIT, TOLERANCE_ROTATION, TOLERANCE_ROTATION_ABS, TOLERANCE_T

REASON_TEXT = {
    "velocity_spread": ("the packet meets the sheet with other energies than the checks' velocity spread "
                        "(the stationary model over the simulated packet's own momenta changes T by {:+.3f}: "
                        "in-trap spread, 1D mean-field release, the guide's curvature along the path)"),
    "finite_barrier_time": ("{:.1%} of the atoms never meet the sheet before it is off (finite barrier time)"),
    "mean_field": ("the mean field during the crossing changes T by {:+.3f} against the stationary model over "
                   "the same packet"),
    "time_dependence": ("the sheet's switching and the finite packet change T by {:+.3f} against the stationary "
                        "model over the same packet"),
}


def reason_texts(reasons) -> list[str]:
    """The causes of a disagreement in words, one per (name, number) of `Simulation.reasons`."""
    return [REASON_TEXT[name].format(value) for name, value in reasons]


def _angle(a) -> str:
    return "none" if a is None else f"{a:.3g} rad"


def simulation_findings(shot, sim) -> list:
    """[physics.barrier-simulation-disagrees] when the simulation and the stationary model disagree beyond the
    tolerances of `seqgen.predict.simulate`, else []."""
    if not sim.disagrees:
        return []
    c, st, act = sim.crossing, sim.stationary, sim.setup.barrier
    why = reason_texts(sim.reasons) or ["no single cause stands out"]
    msg = (f"the time-dependent simulation transmits {c.transmitted:.3f} with a rotation of {_angle(c.rotation)}, "
           f"the stationary model {st.T:.3f} and {_angle(st.rotation)} (tolerance {TOLERANCE_T:g} in the fraction, "
           f"{TOLERANCE_ROTATION:.0%} and at least {TOLERANCE_ROTATION_ABS:g} rad in the angle): " + "; ".join(why))
    data = {"simulated_T": c.transmitted, "stationary_T": float(st.T), "reasons": ",".join(r[0] for r in sim.reasons)}
    hold = ("make the stationary picture hold: every atom across while the sheet is on, a lower density (fewer "
            "atoms, a weaker trap before the push)")
    if sim.one_d is not None and sim.one_d > ONE_D_LIMIT:  # the simulation's own mean field is overstated here
        msg += (f"; the peak mean field is {sim.one_d:.3g} hbar omega_perp, beyond the 1D regime, so the simulation "
                "overstates it and neither number is final")
        hint = hold + ", or a tighter guide (the 1D simulation then holds)"
    else:
        hint = "plan this shot with the simulated numbers (seqgen simulate FILE --json), or " + hold
    return [make(BARRIER_SIMULATION_DISAGREES, msg, act.pos, block=act.block, time_s=act.t0, data=data, hint=hint)]
