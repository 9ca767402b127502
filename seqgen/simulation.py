"""`seqgen simulate FILE`: the push-and-barrier stage simulated in time (`seqgen.predict.simulate`), printed as
text or JSON beside the stationary prediction of the barrier checks, with the finding when the two disagree;
`-o DIR` also writes simulation.json and a space-time density picture per component (`seqgen.emit.simulation`).
"""

from __future__ import annotations

import json
import math
import sys
from pathlib import Path

import numpy as np

from .caution import CAUTION
from .check.simulation import reason_texts, simulation_findings
from .findings import format_text
from .predict.simulate import (TOLERANCE_ROTATION, TOLERANCE_ROTATION_ABS, TOLERANCE_T, NoSimulation, missed_sheet,
                               simulate)
from .textfmt import fmt_energy, fmt_length, fmt_pct, fmt_state, fmt_time, fmt_vec

WHY = {
    "no_sample": "the sequence has no sample (species, state, atoms): nothing to simulate",
    "no_barrier": "the sequence has no barrier action: nothing to simulate (seqgen simulate follows a push onto a "
                  "barrier)",
    "no_push": "no push sends atoms onto the barrier (none before it, one away from it, or one without a usable "
               "speed): nothing to simulate",
    "no_prediction": "the barrier has no stationary prediction (its beam has no waist, or the push no speed)",
    "not_condensed": "the sample is a thermal cloud, not a condensate (a condensate says `condensed: true` in its "
                     "sample): the Gross-Pitaevskii simulation follows a condensate's wave function",
    "no_trap": "there is no trap before the push (no trap beams on, no sample.trap_frequencies): the initial "
               "ground state is undefined",
    "too_large": "the crossing needs {0} grid points and {1} time steps (a far sheet, a long flight or fast atoms): "
                 "beyond what seqgen simulates (2^18 points, 1e9 points x steps); bring the sheet closer or "
                 "shorten the barrier",
}
REASON_NAMES = {"velocity_spread": "incident energies", "finite_barrier_time": "finite barrier time",
                "mean_field": "mean field", "time_dependence": "time dependence"}
TIME_ROWS = 12  # rows of the time course in the text output


def _num(x):
    """A float for JSON (None for None or non-finite)."""
    return float(x) if x is not None and math.isfinite(float(x)) else None


def _rel_change(a, b):
    return None if a is None or b is None else abs(a - b)


def to_json(sim, file: str, findings, choice=None) -> dict:
    """The simulation as one JSON object (see README "Simulating the barrier crossing")."""
    s, c, st, pk, num = sim.setup, sim.crossing, sim.stationary, sim.packet, sim.crossing.numerics
    inp = s.crossing
    doc = {
        "file": file,
        "barrier": {"block": s.barrier.block, "line": s.barrier.pos.line, "push_block": s.push.block,
                    "state": list(s.state), "partner": list(s.partner) if s.partner else None},
        "model": {"equation": "1D two-component Gross-Pitaevskii, Strang split-step Fourier",
                  "direction": list(s.direction), "atoms": s.atoms, "interactions": s.interactions,
                  "interactions_requested": s.requested,
                  "omega_perp_rad_s": _num(s.omega_perp), "scattering_length_m": _num(s.scattering_length),
                  "g1d_j_m": _num(s.g1d), "mu_1d_peak_j": _num(c.mu_1d_peak),
                  "mu_1d_over_hbar_omega_perp": _num(sim.one_d),
                  "omega_before_rad_s": inp.omega_before, "sheet_distance_m": inp.distance, "waist_y_m": inp.waist_y,
                  "sheet_on_s": inp.on, "sheet_off_s": inp.off, "v0_j": s.v0, "rabi_peak_rad_s": s.rabi,
                  "held": list(s.held)},
        "numerics": {"points": num.n, "dx_m": num.dx, "x_min_m": num.x_min, "x_max_m": num.x_max, "dt_s": num.dt,
                     "steps": num.steps, "t_end_s": inp.t_end, "absorber_width_m": num.absorber_width,
                     "absorbed_left": c.absorbed_left, "absorbed_right": c.absorbed_right,
                     "norm_error": c.norm_error, "seconds": round(c.seconds, 1)},
        "simulated": {"transmitted": c.transmitted, "transmitted_at_sheet_off": at_sheet_off(sim),
                      "reflected": c.reflected, "missed_sheet": missed_sheet(s, c),
                      "still_approaching": c.late,
                      "bloch": list(c.bloch) if c.bloch else None, "rotation_rad": _num(c.rotation),
                      "precession_rad": _num(c.precession), "alignment_rad": _num(c.alignment)},
        "time_course": {"t_s": [float(t) for t in c.times], "transmitted": [float(v) for v in c.transmitted_t],
                        "reflected": [float(v) for v in c.reflected_t],
                        "precession_rad": [_num(v) for v in c.precession_t],
                        "alignment_rad": [_num(v) for v in c.alignment_t]},
        "stationary": {"transmitted": float(st.T), "rotation_rad": _num(st.rotation),
                       "precession_rad": _num(st.precession), "alignment_rad": _num(st.alignment),
                       "velocity_rms_m_s": float(st.sigma_v), "speed_m_s": float(st.speed)},
        "stationary_over_simulated_packet": {"transmitted": pk.T, "rotation_rad": _num(pk.rotation),
                                             "precession_rad": _num(pk.precession),
                                             "alignment_rad": _num(pk.alignment), "at_s": c.packet_time},
        "comparison": {"disagrees": sim.disagrees, "tolerance_transmitted": TOLERANCE_T,
                       "tolerance_rotation_relative": TOLERANCE_ROTATION,
                       "tolerance_rotation_rad": TOLERANCE_ROTATION_ABS,
                       "reasons": [{"name": n, "value": v} for n, v in sim.reasons],
                       "explained": reason_texts(sim.reasons)},
        "findings": [f.to_dict() for f in findings],
        "caution": CAUTION,
    }
    if sim.fine is not None:
        f = sim.fine
        doc["convergence"] = {"half_dx_and_dt": {"transmitted": f.transmitted, "rotation_rad": _num(f.rotation)},
                              "transmitted_change": abs(f.transmitted - c.transmitted),
                              "rotation_change_rad": _num(_rel_change(f.rotation, c.rotation)),
                              "seconds": round(f.seconds, 1)}
    if choice is not None:
        doc["scan"] = choice.to_json()
    return doc


def _angle(a) -> str:
    return "-" if a is None or not math.isfinite(a) else f"{a:.4g}"


def text_lines(sim, file: str, findings, choice=None) -> list[str]:
    """The simulation in words and a table (see README)."""
    s, c, st, pk, num = sim.setup, sim.crossing, sim.stationary, sim.packet, sim.crossing.numerics
    inp = s.crossing
    out = []
    if choice is not None:
        out.append(f"{file}: {choice.caption()}")
    partner = f" coupled to {fmt_state(*s.partner)}" if s.partner and s.rabi else " (no drive)"
    out.append(f"{file}: barrier '{s.barrier.block}' (line {s.barrier.pos.line}) after push '{s.push.block}': "
               f"{s.atoms:.3g} atoms in {fmt_state(*s.state)}{partner}, along {fmt_vec(s.direction)}, sheet "
               f"{fmt_length(inp.distance)} away, on {fmt_time(inp.on)} to {fmt_time(inp.off)} after the push starts")
    if s.interactions:
        regime = ("within the 1D regime" if sim.one_d is not None and sim.one_d < 1 else
                  "beyond the 1D regime: the atoms fill more than the guide's transverse ground state, so the 1D "
                  "mean field overstates the true one")
        out.append(f"model: 1D two-component Gross-Pitaevskii, g1D = 2 hbar omega_perp a = {s.g1d:.3g} J m "
                   f"(omega_perp = 2 pi x {s.omega_perp / (2 * math.pi):.4g} Hz, "
                   f"a = {s.scattering_length * 1e9:.4g} nm); "
                   f"initial state the ground state of the trap before the push (2 pi x "
                   f"{inp.omega_before / (2 * math.pi):.4g} Hz along the path), peak mean field "
                   f"{fmt_energy(c.mu_1d_peak)} = {sim.one_d:.3g} hbar omega_perp ({regime})")
    else:
        off = ("interactions off" if not s.requested else "interactions off: no guide across the path or no "
               "scattering length of the state to reduce them to 1D")
        out.append(f"model: 1D two-component Schroedinger equation ({off}), initial state the ground "
                   f"state of the trap before the push (2 pi x {inp.omega_before / (2 * math.pi):.4g} Hz along the "
                   "path)")
    out.append(f"grid: {num.n} points, dx = {fmt_length(num.dx)}, {fmt_length(num.x_min)} to {fmt_length(num.x_max)}, "
               f"absorbing edges {fmt_length(num.absorber_width)} wide at both ends (took {fmt_pct(c.absorbed_left)} "
               f"back, {fmt_pct(c.absorbed_right)} forward); dt = {fmt_time(num.dt)}, {num.steps} steps to "
               f"{fmt_time(inp.t_end)}; norm kept to {c.norm_error:.1g}; {c.seconds:.1f} s")
    rows = [("", "simulated", "stationary (checks)", "stationary (simulated packet)"),
            ("transmitted", f"{c.transmitted:.4f}", f"{st.T:.4f}", f"{pk.T:.4f}"),
            ("rotation (rad)", _angle(c.rotation), _angle(st.rotation), _angle(pk.rotation)),
            ("precession (rad)", _angle(c.precession), _angle(st.precession), _angle(pk.precession)),
            ("alignment (rad)", _angle(c.alignment), _angle(st.alignment), _angle(pk.alignment))]
    widths = [max(len(r[i]) for r in rows) for i in range(4)]
    out += ["  " + "  ".join(v.ljust(w) for v, w in zip(r, widths)).rstrip() for r in rows]
    missed = missed_sheet(s, c)
    off = at_sheet_off(sim)
    if off is not None and abs(off - c.transmitted) > 5e-4:
        out.append(f"transmitted when the sheet goes off ({fmt_time(inp.off)} after the push starts): {off:.4f}; the "
                   f"other {c.transmitted - off:+.4f} crossed after it was off (read at the end of the run, "
                   f"{fmt_time(inp.t_end)})")
    out.append(f"transmitted against the checks: {c.transmitted - st.T:+.4f} = {pk.T - st.T:+.4f} from the energies "
               f"the packet meets the sheet with (stationary model over the simulated packet, read at "
               f"{fmt_time(c.packet_time)}) {c.transmitted - pk.T:+.4f} in the crossing itself "
               f"({'mean field, ' if s.interactions else ''}{fmt_pct(missed)} never met the sheet while it was on)")
    if sim.fine is not None:
        f = sim.fine
        rot = _rel_change(f.rotation, c.rotation)
        out.append(f"convergence (half dx and half dt): transmitted changes by {abs(f.transmitted - c.transmitted):.2g}"
                   + (f", rotation by {rot:.2g} rad" if rot is not None else "") + f" ({f.seconds:.1f} s)")
    verdict = "disagrees with" if sim.disagrees else "agrees with"
    out.append(f"the simulation {verdict} the stationary model (tolerance {TOLERANCE_T:g} in the fraction, "
               f"{TOLERANCE_ROTATION:.0%} and {TOLERANCE_ROTATION_ABS:g} rad in the angle)"
               + ((": " if sim.disagrees else "; noted: ") + "; ".join(reason_texts(sim.reasons))
                  if sim.reasons else ""))
    out.append("time course (ms after the push starts; near side: the atoms not beyond the sheet, reflected or not yet "
               "arrived; spin of the transmitted atoms):")
    out.append("  t (ms)    transmitted  near side  precession  alignment")
    n = len(c.times)
    for i in sorted({int(round(j * (n - 1) / (TIME_ROWS - 1))) for j in range(TIME_ROWS)}):
        out.append(f"  {c.times[i] * 1e3:8.3f}  {c.transmitted_t[i]:11.4f}  {c.reflected_t[i]:9.4f}  "
                   f"{_angle(c.precession_t[i]):>10}  {_angle(c.alignment_t[i]):>9}")
    out += [format_text(f) for f in findings]
    return out


def at_sheet_off(sim) -> float | None:
    """The transmitted fraction when the sheet goes off (the time course read there), or None outside the run."""
    c, inp = sim.crossing, sim.setup.crossing
    times = np.asarray(c.times, dtype=float)
    if not len(times) or not times[0] <= inp.off <= times[-1]:
        return None
    return float(np.interp(inp.off, times, np.asarray(c.transmitted_t, dtype=float)))


def titles(sim) -> tuple:
    s = sim.setup
    base = f"barrier '{s.barrier.block}', interactions {'on' if s.interactions else 'off'}"
    part = fmt_state(*s.partner) if s.partner else "partner"
    return (f"{fmt_state(*s.state)} (initial state): {base}", f"{part} (coupled by the sheet): {base}")


def refuse(args, out, text: str, findings=(), code: int = 2, doc_extra: dict | None = None) -> int:
    """Say why nothing was simulated: on stderr as one line (with the findings that say why, as `check`
    prints them), or as a JSON object with `--json`; the caution either way."""
    if args.json:
        doc = {"file": str(args.file), "simulated": None, "refused": text,
               "findings": [f.to_dict() for f in findings], "caution": CAUTION, **(doc_extra or {})}
        out.write(json.dumps(doc, indent=2, sort_keys=True) + "\n")
        return code
    for f in findings:
        out.write(format_text(f) + "\n")
    print(f"seqgen: {args.file}: {text}", file=sys.stderr)
    out.write("caution: " + CAUTION + "\n")
    return code


def command(res, choice, args, out=None) -> int:
    """Run `seqgen simulate` on the preflighted shot `res.shot`; print; write -o DIR. Exit code: 0 simulated,
    1 the shot has error findings (not simulated: what it would play is not what the sequence means), 2 nothing
    to simulate or the output cannot be written."""
    from .emit.plot.files import OutputExists

    out = out or sys.stdout
    errors = [f for f in res.findings if f.severity == "error" and not f.accepted]  # what has_errors counts
    if errors:
        return refuse(args, out, f"{len(errors)} error finding(s) in this shot: fix them (or accept them with a "
                       "reason) before simulating it, as for a build", errors, code=1)
    if args.output and Path(args.output).exists() and not Path(args.output).is_dir():
        return refuse(args, out, f"{args.output} is a file: give a folder for the simulation's files")
    if args.output and not args.force:  # refused before seconds of simulation, not after
        from .emit.simulation import output_files

        there = [p for p in output_files(args.output) if p.exists()]
        if there:
            return refuse(args, out, f"{there[0]} exists; use --force to replace it")
    interactions = getattr(args, "interactions", "on") != "off"
    sim = simulate(res.shot, interactions=interactions, convergence=not getattr(args, "no_convergence", False))
    if isinstance(sim, NoSimulation):
        where = ""
        if sim.barrier is not None:
            where = f" (barrier '{sim.barrier.block}', line {sim.barrier.pos.line})"
        return refuse(args, out, f"{WHY[sim.reason].format(*sim.size)}{where}", doc_extra={"reason": sim.reason})
    findings = simulation_findings(res.shot, sim)
    doc = to_json(sim, str(args.file), findings, choice)
    if args.output:
        from .emit.simulation import write_outputs

        try:
            write_outputs(args.output, sim, doc, titles(sim), force=args.force)
        except OutputExists as exc:
            return refuse(args, out, str(exc))
        except OSError as exc:
            return refuse(args, out, f"cannot write {args.output}: {exc.strerror or exc}")
    if args.json:
        out.write(json.dumps(doc, indent=2, sort_keys=True) + "\n")
    else:
        for line in text_lines(sim, str(args.file), findings, choice):
            out.write(line + "\n")
        if args.output:
            out.write(f"wrote {args.output}: simulation.json, density pictures (PNG, SVG) per component\n")
        out.write("caution: " + CAUTION + "\n")
    return 0
