"""Stage 4: preflight rules (timing, hardware, safety, physics).

`RULES` is the explicit tuple of rules a preflight runs, in order; a caller
may pass another tuple (`preflight(..., rules=...)`). `run_timeline_checks`
runs the rules that read a resolved shot, `run_table_checks` the ones that
need the compiled tables; `apply_accepts` marks findings the sequence accepts.
"""

from __future__ import annotations

from dataclasses import replace

from ..caution import CAUTION  # noqa: F401  (re-exported for the command line)
from ..codes import CHECK_CRASHED
from ..findings import Finding, make
from . import (hardware, physics_barrier, physics_imaging, physics_magnetic, physics_pushes, physics_states,
               physics_traps, safety, shutters, timing, wiring)
from .rules import STAGES, Rule, rule

__all__ = ["RULES", "STAGES", "Rule", "rule", "run_timeline_checks", "run_table_checks", "apply_accepts"]

RULES: tuple[Rule, ...] = (
    hardware.output_range, hardware.outside_calibration, hardware.hard_limits, hardware.pulse_width,
    hardware.synth_settling, hardware.slew_rate, hardware.memory_depth, hardware.row_spacing, hardware.finer_than_resolution,
    wiring.line_written, wiring.before_start, wiring.edges_too_close, wiring.trigger_pulse,
    wiring.trigger_period, wiring.clock_grid,
    safety.left_on, safety.coil_current, safety.coil_heating,
    timing.overlapping_writes, timing.sub_tick_timing, timing.ramp_faster_than_device,
    timing.latency_reorders_edges, timing.edges_within_jitter,
    physics_traps.repulsive_trap_beam, physics_traps.trap_lost, physics_traps.nonadiabatic_ramp, physics_traps.shallow_trap,
    physics_traps.trap_heating,
    physics_traps.cloud_outside_view, physics_traps.cloud_out_of_focus, physics_traps.cloud_clipped,
    physics_traps.condensate_as_thermal,
    physics_states.pulse_angle, physics_states.pulse_detuned, physics_states.sweep_not_adiabatic,
    physics_states.modulation_off_resonance, physics_states.modulation_unreachable,
    physics_states.transition_forbidden,
    physics_states.transition_unpopulated, physics_pushes.push_velocity, physics_pushes.push_away_from_barrier,
    physics_pushes.push_no_force, physics_pushes.push_too_late, physics_pushes.equal_moments,
    physics_pushes.components_overlap, physics_pushes.components_separated, physics_pushes.parts_overlap, physics_imaging.probe_off_resonance,
    physics_imaging.probe_doppler, physics_imaging.nothing_imaged,
    physics_imaging.imaging_blur, physics_imaging.exposure_too_short, shutters.beam_shuttered,
    physics_barrier.barrier_transmission, physics_barrier.cloud_overlaps_barrier, physics_barrier.barrier_not_reached,
    physics_barrier.barrier_too_short,
    physics_barrier.barrier_too_late, physics_barrier.barrier_no_signal, physics_barrier.not_tunnelling,
    physics_barrier.barrier_rotation, physics_barrier.drive_too_strong, physics_barrier.rotation_unresolvable,
    physics_magnetic.state_not_trappable, physics_magnetic.magnetic_trap_lost, physics_magnetic.majorana_loss,
)


def _run(rules, stages: tuple[str, ...], *args) -> list[Finding]:
    out: list[Finding] = []
    for stage in stages:
        for r in rules:
            if r.stage != stage:
                continue
            try:
                out.extend(r(*args))
            except Exception as exc:  # a bug in one rule must not hide the others
                out.append(make(CHECK_CRASHED, f"check {r.code} failed: {type(exc).__name__}: {exc}",
                                hint="report this; meanwhile the other checks' results stand"))
    return out


def run_timeline_checks(shot, rules: tuple[Rule, ...] = RULES) -> list[Finding]:
    return _run(rules, ("timeline", "physics"), shot)


def run_table_checks(shot, compiled, rules: tuple[Rule, ...] = RULES) -> list[Finding]:
    return _run(rules, ("tables",), shot, compiled)


def apply_accepts(findings: list[Finding], accepts) -> list[Finding]:
    out = []
    for f in findings:
        for a in accepts:
            if a.code == f.code and (a.block is None or a.block == f.block):
                f = replace(f, accepted=True, accept_reason=a.reason)
                break
        out.append(f)
    return out
