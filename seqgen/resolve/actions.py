"""Actions lowered to channel segments: the table of actions and the lowering context.

Each action kind of a block (`set:`, `ramp:`, ..., `magnetic_hold:`) has one plain
lowering function in `ACTIONS`, called as `lower(ctx, spec, t0, path) -> end time`
with the action's mapping `spec`, its start `t0` (s, relative to the block start)
and its document path. A lowering writes channel segments through the context
(`ctx.seg` / `ctx.pulse` / `ctx.ramp`, values in SI) and, for a physics-level
action, records what the physics checks read with `record_phys`. A problem raises
`Bad` with its finding; the block's other actions are still lowered.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

from ..codes import BAD_SAMPLE, BAD_VALUE, MISSING_KEY, NON_FINITE, UNKNOWN_CHANNEL, UNKNOWN_NAME
from ..findings import make
from ..load.yamlsrc import Document
from .quantities import Bad, Env, close_hint, quantity, to_qty


@dataclass(frozen=True, slots=True)
class LowerCtx:
    """What the lowerings of one block share: the rig, the resolved params, the block's document and name,
    and the lists they append to (channel segments and physics actions, times relative to the block start)."""

    rig: object  # model.Rig
    env: Env
    doc: Document
    block: str
    segments: list
    phys: list

    def q(self, spec, key, path, unit, **kw):
        return quantity(spec[key], unit, self.doc, path + (key,), self.env, **kw)

    def output_for(self, channel, path, dims_hint=None):
        rig = self.rig
        if channel in rig.outputs:
            return rig.outputs[channel]
        if channel in rig.channels:
            parts = rig.channels[channel]
            if dims_hint is not None:
                for p in parts:
                    if rig.outputs[p].phys_dims == dims_hint:
                        return rig.outputs[p]
            return rig.outputs[parts[0]]
        raise Bad(make(UNKNOWN_CHANNEL, f"unknown channel '{channel}'", self.doc.pos(path),
                       block=self.block, hint=close_hint(channel, list(rig.channels) + list(rig.outputs))))

    def value(self, out, raw, path, what):
        """A channel value in the output's physical unit (digital: 0/1)."""
        if out.kind == "digital":
            if isinstance(raw, bool):
                return 1.0 if raw else 0.0
            q = to_qty(raw, self.doc, path, self.env)
            return q.value
        return quantity(raw, out.phys_unit, self.doc, path, self.env, what=what, **fit_of(out))

    def seg(self, out, kind, t0, t1, v0, v1, action, path, **kw):
        self.segments.append(dict(output=out.name, kind=kind, t0=t0, t1=t1, v0=v0, v1=v1, block=self.block,
                                  action=action, pos=self.doc.pos(path), **kw))

    def pulse(self, out, t0, dur, value, back_to, action, path):
        self.seg(out, "set", t0, t0, None, value, action, path)
        self.seg(out, "set", t0 + dur, t0 + dur, None, back_to, action + ":end", path)

    def ramp(self, out, spec, t0, path, action, v_from, v_to, dur):
        tau = self.q(spec, "tau", path, "s") if "tau" in spec else None
        if spec.get("shape") == "exponential" and not tau:
            raise Bad(make(MISSING_KEY, "an exponential ramp needs 'tau:'", self.doc.pos(path), block=self.block,
                           hint="add 'tau: <time constant>'"))
        tol = None
        if "tolerance" in spec:
            tol = quantity(spec["tolerance"], out.unit, self.doc, path + ("tolerance",), self.env, positive=True)
            if tol < 1e-9 * (out.hi - out.lo):  # finer than any DAC resolves: the sampler could never meet it
                raise Bad(make(BAD_VALUE, f"tolerance {tol:.3g} {out.unit} is below a billionth of the output "
                               f"range of '{out.name}'", self.doc.pos(path + ("tolerance",)), block=self.block,
                               hint="give at least half an LSB of the channel"))
        if spec.get("shape") == "table":
            _check_shape_table(self, spec.get("table"), path + ("table",))
        self.seg(out, "ramp", t0, t0 + dur, v_from, v_to, action, path, shape=spec.get("shape", "linear"), tau_s=tau,
                 table=tuple(map(tuple, spec["table"])) if spec.get("table") else None, tolerance=tol)


def fit_of(out) -> dict:
    """What a fix for a value of output `out` written without a unit goes by: the calibration's unit (the one
    its limits are written in) and its hard limits, or, uncalibrated, the output's range."""
    if out.kind == "digital":
        return {}
    if out.calibration is None:
        return {"span": (out.lo, out.hi)}
    fit = {"units": (out.calibration.quantity,)}
    if out.hard_min is not None or out.hard_max is not None:
        fit["span"] = (-math.inf if out.hard_min is None else out.hard_min,
                       math.inf if out.hard_max is None else out.hard_max)
    return fit


def _beam_fit(ctx, beam) -> dict:
    out = ctx.rig.outputs.get(beam.power_channel)
    return fit_of(out) if out is not None else {}


def _freq_fit(ctx, channel) -> dict:
    out = ctx.rig.outputs.get(f"{channel}.freq")  # a synth's frequency: its range tells the unit meant
    return fit_of(out) if out is not None else {}


def _check_shape_table(ctx, table, path):
    """A ramp's shape table: [progress s, fraction f] pairs, finite, s from 0 to 1 strictly increasing."""
    if not table:
        raise Bad(make(MISSING_KEY, "a table-shaped ramp needs 'table:'", ctx.doc.pos(path), block=ctx.block,
                       hint="add 'table: [[0, 0], [0.5, 0.8], [1, 1]]' (progress, fraction)"))
    s = [row[0] for row in table]
    if not all(isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x) for row in table for x in row):
        raise Bad(make(NON_FINITE, "shape table entries must be finite numbers", ctx.doc.pos(path), block=ctx.block,
                       hint="replace .nan / .inf entries with numbers"))
    if s[0] != 0 or s[-1] != 1 or any(b <= a for a, b in zip(s, s[1:])):
        raise Bad(make(BAD_VALUE, "shape table progress must run from 0 to 1, strictly increasing",
                       ctx.doc.pos(path), block=ctx.block, hint="first column: 0, ..., 1 in increasing order"))


# ----------------------------------------------------------------------------- channel actions

def lower_set(ctx, spec, t0, path):
    out = ctx.output_for(spec["channel"], path + ("channel",), _dims_of_raw(ctx, spec.get("value"), path))
    ctx.seg(out, "set", t0, t0, None, ctx.value(out, spec["value"], path + ("value",), "value"), "set", path)
    return t0


def _dims_of_raw(ctx, raw, path):
    try:
        return to_qty(raw, ctx.doc, path, ctx.env).dims if raw is not None else None
    except Bad:
        return None


def lower_ramp(ctx, spec, t0, path, action="ramp"):
    out = ctx.output_for(spec["channel"], path + ("channel",), _dims_of_raw(ctx, spec.get("to"), path))
    dur = ctx.q(spec, "over", path, "s", positive=True)
    v_to = ctx.value(out, spec["to"], path + ("to",), "to")
    v_from = ctx.value(out, spec["from"], path + ("from",), "from") if "from" in spec else None
    ctx.ramp(out, spec, t0, path, action, v_from, v_to, dur)
    return t0 + dur


def lower_sweep(ctx, spec, t0, path):
    ch = spec["channel"]
    if ch in ctx.rig.channels and f"{ch}.freq" in ctx.rig.outputs:
        spec = dict(spec, channel=f"{ch}.freq")
    return lower_ramp(ctx, spec, t0, path, "sweep")


def lower_pulse(ctx, spec, t0, path):
    out = ctx.output_for(spec["channel"], path + ("channel",), _dims_of_raw(ctx, spec.get("value"), path))
    dur = ctx.q(spec, "duration", path, "s", positive=True)
    if "value" in spec:
        value = ctx.value(out, spec["value"], path + ("value",), "value")
    elif out.kind == "digital":
        value = 1.0
    else:
        raise Bad(make(MISSING_KEY, "an analog pulse needs 'value:'", ctx.doc.pos(path), block=ctx.block,
                       hint="add 'value: <level during the pulse>'"))
    back = ctx.value(out, spec["back_to"], path + ("back_to",), "back_to") if "back_to" in spec else None
    ctx.pulse(out, t0, dur, value, back, "pulse", path)
    return t0 + dur


def lower_hold(ctx, spec, t0, path):
    return t0 + ctx.q(spec, "duration", path, "s", positive=True)


def lower_trigger(ctx, spec, t0, path):
    out = ctx.output_for(spec["channel"], path + ("channel",))
    width = ctx.q(spec, "width", path, "s", positive=True) if "width" in spec else max(out.min_pulse_s, 10e-6)
    ctx.pulse(out, t0, width, 1.0, None, "trigger", path)
    return t0


# ----------------------------------------------------------------------------- physics-level actions

def named(ctx, table, kind, name, path):
    """The rig entry `name` of `table` (beams, coils, drives, imaging setups); Bad with 'did you mean' if none."""
    if name not in table:
        raise Bad(make(UNKNOWN_NAME, f"unknown {kind} '{name}'", ctx.doc.pos(path), block=ctx.block,
                       hint=close_hint(name, table)))
    return table[name]


def record_phys(ctx, kind, t0, t1, path, **args):
    """Record a physics-level action (a `PhysAction` once placed) for the physics checks."""
    ctx.phys.append(dict(kind=kind, t0=t0, t1=t1, args=args, pos=ctx.doc.pos(path)))


def lower_trap_ramp(ctx, spec, t0, path):
    beam = named(ctx, ctx.rig.beams, "beam", spec["beam"], path + ("beam",))
    out = ctx.output_for(beam.power_channel, path + ("beam",))
    dur = ctx.q(spec, "over", path, "s", positive=True)
    v_to = ctx.q(spec, "to", path, out.phys_unit or "W", nonnegative=True, **fit_of(out))
    v_from = ctx.q(spec, "from", path, out.phys_unit or "W", nonnegative=True, **fit_of(out)) if "from" in spec else None
    ctx.ramp(out, spec, t0, path, "trap_ramp", v_from, v_to, dur)
    record_phys(ctx, "trap_ramp", t0, t0 + dur, path, beam=beam.name, output=out.name, to=v_to, start=v_from,
          shape=spec.get("shape", "linear"))
    return t0 + dur


def lower_release(ctx, spec, t0, path):
    beams = spec.get("beams") or []
    coils = spec.get("coils") or []
    if not beams and not coils:
        beams = [n for n, b in ctx.rig.beams.items() if b.role == "trap"]
    for i, name in enumerate(beams):
        beam = named(ctx, ctx.rig.beams, "beam", name, path + ("beams", i))
        ctx.seg(ctx.output_for(beam.power_channel, path), "set", t0, t0, None, 0.0, "release", path)
    for i, name in enumerate(coils):
        coil = named(ctx, ctx.rig.coils, "coil", name, path + ("coils", i))
        ctx.seg(ctx.output_for(coil.current_channel, path), "set", t0, t0, None, 0.0, "release", path)
    record_phys(ctx, "release", t0, t0, path, beams=tuple(beams), coils=tuple(coils))
    return t0


def _coil_current(ctx, coil, gradient, path):
    if not coil.gradient_per_amp:
        raise Bad(make(UNKNOWN_NAME, f"coil '{coil.name}' has no gradient_per_amp in the rig", ctx.doc.pos(path),
                       block=ctx.block, hint="add 'gradient_per_amp: <G/cm per A>' to the coil"))
    return gradient / coil.gradient_per_amp


def lower_push(ctx, spec, t0, path):
    dur = ctx.q(spec, "duration", path, "s", positive=True)
    args = dict(duration=dur)
    if "coil" in spec:
        coil = named(ctx, ctx.rig.coils, "coil", spec["coil"], path + ("coil",))
        if "gradient" not in spec:
            raise Bad(make(MISSING_KEY, "a magnetic push needs 'gradient:'", ctx.doc.pos(path), block=ctx.block))
        grad = ctx.q(spec, "gradient", path, "T/m")
        out = ctx.output_for(coil.current_channel, path + ("coil",))
        ctx.pulse(out, t0, dur, _coil_current(ctx, coil, grad, path + ("gradient",)), 0.0, "push", path)
        args.update(coil=coil.name, gradient=grad)
    elif "beam" in spec:
        beam = named(ctx, ctx.rig.beams, "beam", spec["beam"], path + ("beam",))
        if "power" not in spec:
            raise Bad(make(MISSING_KEY, "an optical push needs 'power:'", ctx.doc.pos(path), block=ctx.block,
                           hint="add 'power: <beam power>'"))
        power = ctx.q(spec, "power", path, "W", positive=True, **_beam_fit(ctx, beam))
        out = ctx.output_for(beam.power_channel, path + ("beam",))
        ctx.pulse(out, t0, dur, 1.0 if out.kind == "digital" else power, 0.0, "push", path)  # on/off: on
        args.update(beam=beam.name, power=power)
    else:
        raise Bad(make(MISSING_KEY, "a push needs 'coil:' (magnetic) or 'beam:' (optical)", ctx.doc.pos(path),
                       block=ctx.block))
    if "expect_velocity" in spec:
        args["expect_velocity"] = ctx.q(spec, "expect_velocity", path, "m/s")
    if "tolerance" in spec:
        args["tolerance"] = ctx.q(spec, "tolerance", path, "")
    if "target_distance" in spec:
        args["target_distance"] = ctx.q(spec, "target_distance", path, "m", positive=True)
    record_phys(ctx, "push", t0, t0 + dur, path, **args)
    return t0 + dur


def lower_barrier(ctx, spec, t0, path):
    beam = named(ctx, ctx.rig.beams, "beam", spec["beam"], path + ("beam",))
    dur = ctx.q(spec, "duration", path, "s", positive=True)
    power = ctx.q(spec, "power", path, "W", positive=True, **_beam_fit(ctx, beam))
    out = ctx.output_for(beam.power_channel, path + ("beam",))
    ctx.pulse(out, t0, dur, 1.0 if out.kind == "digital" else power, 0.0, "barrier", path)  # on/off: on
    args = dict(beam=beam.name, power=power, duration=dur, expect=spec.get("expect", "any"))
    if "position" in spec:
        args["position"] = ctx.q(spec, "position", path, "m")
    mod = spec.get("modulation")
    if mod:
        mpath = path + ("modulation",)
        if "frequency" in mod:
            args["mod_frequency"] = ctx.q(mod, "frequency", mpath, "Hz", positive=True,
                                          **_freq_fit(ctx, mod.get("channel")))
        if "depth" in mod:
            args["mod_depth"] = ctx.q(mod, "depth", mpath, "")
        if mod.get("channel"):
            mch = mod["channel"]
            fout = ctx.output_for(f"{mch}.freq" if f"{mch}.freq" in ctx.rig.outputs else mch, mpath + ("channel",))
            args["mod_channel"] = fout.name
            if "mod_frequency" in args and fout.phys_unit == "Hz":
                ctx.seg(fout, "set", t0, t0, None, args["mod_frequency"], "barrier", mpath)
            amp = f"{mch}.amp"
            if amp in ctx.rig.outputs:
                ctx.pulse(ctx.rig.outputs[amp], t0, dur, args.get("mod_depth", 1.0), 0.0, "barrier", mpath)
        if mod.get("transition"):
            args["transition"] = tuple((t["F"], t["mF"]) for t in mod["transition"])
    record_phys(ctx, "barrier", t0, t0 + dur, path, **args)
    return t0 + dur


def lower_clock_pulse(ctx, spec, t0, path):
    drive = named(ctx, ctx.rig.drives, "drive", spec["drive"], path + ("drive",))
    dur = ctx.q(spec, "duration", path, "s", positive=True)
    amp = ctx.q(spec, "amplitude", path, "") if "amplitude" in spec else 1.0
    ch = drive.channel
    amp_out = ctx.rig.outputs.get(f"{ch}.amp") or ctx.output_for(ch, path + ("drive",))
    envelope = spec.get("envelope", "square")
    args = dict(drive=drive.name, duration=dur, amplitude=amp, envelope=envelope)
    if "angle" in spec:
        args["angle"] = ctx.q(spec, "angle", path, "")
    if "frequency" in spec:
        args["frequency"] = ctx.q(spec, "frequency", path, "Hz", positive=True, **_freq_fit(ctx, ch))
        fout = ctx.rig.outputs.get(f"{ch}.freq")
        if fout is not None:
            # written a settling time ahead, so the pulse plays the new frequency from its first tick
            tf = t0 - fout.settling_s
            ctx.seg(fout, "set", tf, tf, None, args["frequency"], "clock_pulse", path + ("frequency",))
    if "detuning" in spec:
        args["detuning"] = ctx.q(spec, "detuning", path, "Hz")
    if spec.get("transition"):
        args["transition"] = tuple((t["F"], t["mF"]) for t in spec["transition"])
    if envelope == "square":
        ctx.pulse(amp_out, t0, dur, amp, 0.0, "clock_pulse", path)
    else:
        ctx.seg(amp_out, "ramp", t0, t0 + dur, 0.0, amp, "clock_pulse", path, shape=envelope)
        ctx.seg(amp_out, "set", t0 + dur, t0 + dur, None, 0.0, "clock_pulse:end", path)
    record_phys(ctx, "clock_pulse", t0, t0 + dur, path, **args)
    return t0 + dur


def lower_separate(ctx, spec, t0, path):
    coil = named(ctx, ctx.rig.coils, "coil", spec["coil"], path + ("coil",))
    dur = ctx.q(spec, "duration", path, "s", positive=True)
    grad = ctx.q(spec, "gradient", path, "T/m")
    out = ctx.output_for(coil.current_channel, path + ("coil",))
    ctx.pulse(out, t0, dur, _coil_current(ctx, coil, grad, path + ("gradient",)), 0.0, "separate", path)
    record_phys(ctx, "separate", t0, t0 + dur, path, coil=coil.name, gradient=grad, duration=dur)
    return t0 + dur


def lower_image(ctx, spec, t0, path):
    setup = named(ctx, ctx.rig.imaging, "imaging setup", spec["setup"], path + ("setup",))
    dur = ctx.q(spec, "duration", path, "s", positive=True)
    args = dict(setup=setup.name, duration=dur)
    if setup.probe_beam:
        beam = ctx.rig.beams[setup.probe_beam]
        out = ctx.output_for(beam.power_channel, path)
        power = ctx.q(spec, "probe_power", path, out.phys_unit or "W", positive=True, **fit_of(out)) \
            if "probe_power" in spec else (
            1.0 if out.kind == "digital" else None)
        if power is None:
            raise Bad(make(MISSING_KEY, "imaging needs 'probe_power:' for an analog probe channel", ctx.doc.pos(path),
                           block=ctx.block))
        ctx.pulse(out, t0, dur, power, 0.0, "image", path)
        args["probe_power"] = power
    exposure = ctx.q(spec, "exposure", path, "s", positive=True) if "exposure" in spec else dur
    args["exposure"] = exposure
    if setup.camera_channel:
        cam = ctx.output_for(setup.camera_channel, path)
        ctx.pulse(cam, t0, exposure, 1.0, 0.0, "image", path)
    if "detuning" in spec:
        args["detuning"] = ctx.q(spec, "detuning", path, "Hz")
    record_phys(ctx, "image", t0, t0 + max(dur, exposure), path, **args)
    return t0 + max(dur, exposure)


def lower_magnetic_hold(ctx, spec, t0, path):
    """Hold the sample in a magnetic trap: each coil of `currents` goes to its current (at once, or ramped
    over `ramp_on`) and stays there for `duration`; the coils stay on afterwards (turn them off with
    `release: {coils: [...]}`). The physics checks read the trap from every coil's current at the hold start."""
    dur = ctx.q(spec, "duration", path, "s", positive=True)
    ramp_on = ctx.q(spec, "ramp_on", path, "s", positive=True) if "ramp_on" in spec else 0.0
    cpath = path + ("currents",)
    currents = []
    if ramp_on and "tolerance" in spec:  # each coil's ramp checks it in its own output unit: report it here
        for name in spec["currents"]:
            coil = ctx.rig.coils.get(str(name))
            out = ctx.rig.outputs.get(coil.current_channel) if coil is not None else None
            if out is not None:
                quantity(spec["tolerance"], out.unit, ctx.doc, path + ("tolerance",), ctx.env, positive=True,
                         what=f"tolerance of the ramp_on ramp of '{out.name}'")
    for name, raw in spec["currents"].items():
        name = str(name)
        coil = named(ctx, ctx.rig.coils, "coil", name, cpath + (name,))
        out = ctx.output_for(coil.current_channel, cpath + (name,))
        amps = quantity(raw, "A", ctx.doc, cpath + (name,), ctx.env, what=f"current of coil '{name}'")
        if ramp_on:
            ramp = {"shape": spec.get("shape", "linear")}
            if "tolerance" in spec:  # of the ramp_on ramp, in the output unit, as a ramp's tolerance:
                ramp["tolerance"] = spec["tolerance"]
            ctx.ramp(out, ramp, t0, cpath + (name,), "magnetic_hold", None, amps, ramp_on)
        else:
            ctx.seg(out, "set", t0, t0, None, amps, "magnetic_hold", cpath + (name,))
        currents.append((coil.name, amps))
    args = dict(currents=tuple(currents), duration=dur, ramp_on=ramp_on)
    st = spec.get("state")
    if st:
        if abs(st["mF"]) > st["F"]:
            raise Bad(make(BAD_SAMPLE, f"state F={st['F']}, mF={st['mF']} is impossible (|mF| > F)",
                           ctx.doc.pos(path + ("state",)), block=ctx.block, hint="mF runs from -F to F"))
        args["state"] = (int(st["F"]), int(st["mF"]))
    record_phys(ctx, "magnetic_hold", t0, t0 + ramp_on + dur, path, **args)
    return t0 + ramp_on + dur


# ----------------------------------------------------------------------------- the table

# action kind (the key of an action in a block's `actions:`) -> its lowering
ACTIONS = {"set": lower_set, "ramp": lower_ramp, "sweep": lower_sweep, "pulse": lower_pulse, "hold": lower_hold,
          "trigger": lower_trigger, "trap_ramp": lower_trap_ramp, "release": lower_release, "push": lower_push,
          "barrier": lower_barrier, "clock_pulse": lower_clock_pulse, "separate": lower_separate, "image": lower_image,
          "magnetic_hold": lower_magnetic_hold}
ACTION_KINDS = tuple(ACTIONS)


def lower_block(b, doc, path, rig, env, findings):
    """(duration, segments relative to block start, physics actions) for one block."""
    ctx = LowerCtx(rig, env, doc, b["name"], [], [])
    cursor = 0.0
    end = 0.0
    for i, item in enumerate(b.get("actions") or []):
        (kind, spec), = item.items()
        apath = path + ("actions", i, kind)
        try:
            start = ctx.q(spec, "at", apath, "s", nonnegative=True) if "at" in spec else cursor
            stop = ACTIONS[kind](ctx, spec, start, apath)
        except Bad as bad:
            f = bad.finding
            if f.block is None:
                f = replace(f, block=b["name"])
            findings.append(f)
            continue
        cursor = stop
        end = max(end, stop)
    return end, ctx.segments, ctx.phys
