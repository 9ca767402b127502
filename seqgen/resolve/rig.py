"""Rig file -> `Rig`: devices, outputs with calibrations and limits, geometry."""

from __future__ import annotations

import difflib
import math

from ..calibration import is_monotonic
from ..findings import Finding, make
from ..textfmt import fmt_freq
from ..load.yamlsrc import Document
from ..model import Beam, Calibration, Coil, Device, Drive, ImagingSetup, Output, Rig
from .order import DepGraph
from .quantities import Bad, quantity
from .units import dims_of, display_unit
from ..codes import (BAD_RIG, CALIBRATION_NOT_MONOTONIC, UNKNOWN_NAME, UNKNOWN_UNIT, VERSION, WIRING_BAD, WIRING_CYCLE,
                     WIRING_LINE_SHARED)

SYNTH_PARTS = (("freq", "frequency", "Hz"), ("amp", "amplitude", ""), ("phase", "phase", "rad"))


def build_rig(doc: Document) -> tuple[Rig | None, list[Finding]]:
    findings: list[Finding] = []
    data = doc.data
    if data.get("seqgen_rig") != 1:
        findings.append(make(VERSION, f"unsupported rig format version {data.get('seqgen_rig')!r}",
                             doc.pos(("seqgen_rig",)), hint="this seqgen reads 'seqgen_rig: 1'"))
        return None, findings

    def q(path, expect, **kw):
        node = data
        for p in path:
            node = node[p]
        try:
            return quantity(node, expect, doc, path, {}, **kw)
        except Bad as bad:
            findings.append(bad.finding)
            return None

    def opt(path, expect, **kw):
        node = data
        for p in path[:-1]:
            node = node.get(p, {})
        return q(path, expect, **kw) if path[-1] in node else None

    devices = {}
    for name, d in data["devices"].items():
        tb = q(("devices", name, "timebase"), "Hz", positive=True)
        mi = opt(("devices", name, "min_interval"), "s", positive=True)
        if tb is None:
            continue
        min_ticks = max(1, round(mi * tb)) if mi else 1
        trig = {key: opt(("devices", name, key), "s", nonnegative=True) or 0.0 for key in _TRIGGER_KEYS}
        devices[name] = Device(name, tb, min_ticks, d.get("memory_depth"), d.get("output_model", "hold"),
                               doc.pos(("devices", name)), min_trigger_period_s=trig["min_trigger_period"],
                               min_trigger_pulse_s=trig["min_trigger_pulse"], trigger_jitter_s=trig["trigger_jitter"],
                               trigger_pos=tuple((k, doc.pos(("devices", name, k))) for k in _TRIGGER_KEYS if k in d))

    outputs: dict[str, Output] = {}
    channels: dict[str, tuple] = {}
    for name, c in data["channels"].items():
        base = ("channels", name)
        pos = doc.pos(base)
        if c["device"] not in devices:
            if c["device"] not in data["devices"]:
                close = difflib.get_close_matches(c["device"], list(data["devices"]), n=1)
                findings.append(make(BAD_RIG, f"channel '{name}' is on unknown device '{c['device']}'",
                                     doc.pos(base + ("device",)), hint=f"did you mean '{close[0]}'?" if close else "add the device"))
            continue
        common = _common(c, base, q, opt, doc, findings)
        if common is None:
            continue
        if c["kind"] == "synth":
            names = []
            for short, key, unit in SYNTH_PARTS:
                spec = c.get(key)
                if spec is None:
                    continue
                rng = _range(spec, base + (key,), unit, q, doc, findings)
                if rng is None:
                    continue
                oname = f"{name}.{short}"
                words = _synth_words(c, spec, base, key, short, rng, q, doc, findings)
                outputs[oname] = Output(oname, name, c["device"], "synth", unit, rng[0], rng[1], spec.get("bits"),
                                        safe=0.0 if short != "freq" else rng[0], phys_unit=unit, phys_dims=dims_of(unit),
                                        pos=pos, **words, **{k: v for k, v in common.items() if k not in ("calibration",)})
                names.append(oname)
            if not names:
                findings.append(make(BAD_RIG, f"synth channel '{name}' declares none of frequency/amplitude/phase",
                                     pos, hint="add e.g. 'frequency: {range: [0 Hz, 400 MHz], bits: 32}'"))
            channels[name] = tuple(names)
            continue
        if c["kind"] == "digital":
            lo, hi, bits, unit = 0.0, 1.0, 1, ""
        else:
            spec = c.get("output")
            if spec is None:
                findings.append(make(BAD_RIG, f"analog channel '{name}' needs 'output: {{unit, range, bits}}'", pos,
                                     hint="add 'output: {unit: V, range: [-10 V, 10 V], bits: 16}'"))
                continue
            unit = spec.get("unit", "V")
            rng = _range(spec, base + ("output",), unit, q, doc, findings)
            if rng is None:
                continue
            lo, hi = rng
            bits = spec.get("bits")
            # the channel's own convention, else its device's, else the default for the range (Output.code_convention)
            common["code"] = spec.get("code") or (data["devices"].get(c["device"]) or {}).get("code")
        if "reference_clock" in c:
            findings.append(make(BAD_RIG, f"{c['kind']} channel '{name}' has a reference_clock: only a synth's "
                                 "frequency word counts one", doc.pos(base + ("reference_clock",)),
                                 hint="remove reference_clock (it belongs on a synth channel)"))
        cal = common.pop("calibration")
        # physical values are SI inside; keep the SI display unit (W, not the mW of the calibration text)
        phys_unit = display_unit(cal.dims) if cal else unit
        fit = {"units": (cal.quantity,)} if cal else {"units": (unit,)}  # the fix for a value without a unit
        safe_raw = c.get("safe", 0)
        safe = 0.0
        if "safe" in c:
            s = q(base + ("safe",), phys_unit, **fit)
            safe = s if s is not None else 0.0
        elif c["kind"] == "analog" and cal is None:
            safe = min(max(0.0, lo), hi)
        del safe_raw
        outputs[name] = Output(name, name, c["device"], c["kind"], unit, lo, hi, bits, safe, phys_unit,
                               dims_of(phys_unit) if phys_unit else dims_of(""), calibration=cal, pos=pos, **common)
        hl = c.get("hard_limit")
        if hl:
            hmin = opt(base + ("hard_limit", "min"), phys_unit, **fit)
            hmax = opt(base + ("hard_limit", "max"), phys_unit, **fit)
            outputs[name] = _replace(outputs[name], hard_min=hmin, hard_max=hmax)
        channels[name] = (name,)

    def ref(kind, owner, key, value, path):
        # a channel written under channels: but refused (bad device, calibration, range) has its finding already
        if value not in channels and value not in (data.get("channels") or {}):
            close = difflib.get_close_matches(value, list(channels), n=1)
            findings.append(make(UNKNOWN_NAME, f"{kind} '{owner}' names unknown channel '{value}'", doc.pos(path),
                                 hint=f"did you mean '{close[0]}'?" if close else "define the channel under channels:"))

    beams = {}
    for name, b in (data.get("beams") or {}).items():
        base = ("beams", name)
        ref("beam", name, "power_channel", b["power_channel"], base + ("power_channel",))
        if b.get("shutter") is not None:
            ref("beam", name, "shutter", b["shutter"], base + ("shutter",))
        wl = q(base + ("wavelength",), "m", positive=True)
        if wl is None:
            continue
        beams[name] = Beam(name, wl, b["power_channel"], opt(base + ("waist",), "m", positive=True),
                           opt(base + ("waist_y",), "m", positive=True),
                           _direction(b.get("direction"), base + ("direction",), doc, findings, (1.0, 0.0, 0.0)),
                           _vector(b.get("position", (0, 0, 0)), base + ("position",), doc, findings) or (0.0, 0.0, 0.0),
                           b.get("role", "other"), doc.pos(base), _shutter(b.get("shutter"), base, outputs, doc, findings))
    coils = {}
    for name, c in (data.get("coils") or {}).items():
        base = ("coils", name)
        ref("coil", name, "current_channel", c["current_channel"], base + ("current_channel",))
        coils[name] = Coil(name, c["current_channel"], opt(base + ("gradient_per_amp",), "T/m/A"),
                           opt(base + ("bias_per_amp",), "T/A"), opt(base + ("curvature_per_amp",), "T/m^2/A"),
                           _direction(c.get("axis"), base + ("axis",), doc, findings, (0.0, 0.0, 1.0)),
                           opt(base + ("max_current",), "A", positive=True),
                           opt(base + ("continuous_current",), "A", positive=True), opt(base + ("i2t_limit",), "A^2*s", positive=True),
                           opt(base + ("i2t_window",), "s", positive=True), doc.pos(base),
                           _direction(c.get("field_grows_along"), base + ("field_grows_along",), doc, findings))
    drives = {}
    for name, d in (data.get("drives") or {}).items():
        base = ("drives", name)
        ref("drive", name, "channel", d["channel"], base + ("channel",))
        out = outputs.get(f"{d['channel']}.amp") or outputs.get(d["channel"])
        if out is not None and out.kind != "synth" and out.phys_dims != dims_of(""):
            # the drive's amplitude is a fraction of full scale: a power or voltage line would play '1' as 1 W
            findings.append(make(BAD_RIG, f"drive '{name}' is on channel '{d['channel']}', whose values are in "
                                 f"{out.phys_unit}: a drive's channel sets its amplitude as a fraction of full scale",
                                 doc.pos(base + ("channel",)),
                                 hint="put the drive on a synth channel (frequency and amplitude), or on an output "
                                      "calibrated as a fraction (no unit)"))
        r = q(base + ("rabi_per_amplitude",), "Hz", positive=True)
        if r is not None:
            drives[name] = Drive(name, d["channel"], r, d.get("kind", "microwave"),
                                 opt(base + ("light_shift",), "Hz") or 0.0, doc.pos(base),
                                 **_coupling_keys(d, base, doc, findings))
    imaging = {}
    for name, im in (data.get("imaging") or {}).items():
        base = ("imaging", name)
        if im.get("camera_channel"):
            ref("imaging setup", name, "camera_channel", im["camera_channel"], base + ("camera_channel",))
        if im.get("probe_beam") and im["probe_beam"] not in (data.get("beams") or {}):
            findings.append(make(UNKNOWN_NAME, f"imaging setup '{name}' names unknown beam '{im['probe_beam']}'",
                                 doc.pos(base + ("probe_beam",))))
        imaging[name] = ImagingSetup(name, im.get("probe_beam"), im.get("camera_channel"), opt(base + ("pixel_size",), "m", positive=True),
                                     _magnification(im, base, doc, findings), opt(base + ("field_of_view",), "m", positive=True),
                                     opt(base + ("depth_of_field",), "m", positive=True), _vector(im.get("center", (0, 0, 0)), base + ("center",), doc, findings) or (0.0, 0.0, 0.0),
                                     opt(base + ("aperture_radius",), "m", positive=True), doc.pos(base),
                                     **_image_keys(im, base, opt, doc, findings))
    devices = _wiring(data, devices, outputs, q, doc, findings)
    fields = data.get("fields") or {}
    bias = opt(("fields", "bias"), "T") if "bias" in fields else None
    rep = opt(("repetition_period",), "s", positive=True)
    rig = Rig(data.get("name", doc.file), doc.file, doc.text_sha256, devices, outputs, channels, beams, coils, drives,
              imaging, bias, rep)
    return rig, findings


_TRIGGER_KEYS = ("min_trigger_period", "min_trigger_pulse", "trigger_jitter")
_WIRING_KEYS = (("start", "on", "free"), ("advance", "per_edge", "timebase"), ("clock", "line", "internal"))


def _wiring(data, devices, outputs, q, doc, findings) -> dict:
    """Devices with their wiring (start / advance / clock) read and checked: each line a digital output of another
    device, no line wiring two things, no loop. A device whose wiring is refused stays free-running."""
    wired = {}
    users: dict[str, tuple] = {}  # line -> (device, key) of its first use
    for name, dev in devices.items():
        raw = data["devices"][name]
        kw = {}
        for key, sub, default in _WIRING_KEYS:
            spec = raw.get(key, default)
            if not isinstance(spec, dict):
                continue
            path = ("devices", name, key, sub)
            line = spec[sub]
            out = outputs.get(line)
            if out is None or out.kind != "digital" or out.device == name:
                why = ("is no channel of the rig" if out is None and line not in (data.get("channels") or {}) else
                       "could not be read" if out is None else
                       f"is {'an ' if out.kind == 'analog' else 'a '}{out.kind} channel, not a digital line"
                       if out.kind != "digital" else f"is a line of '{name}' itself")
                close = difflib.get_close_matches(line, [o.name for o in outputs.values()
                                                         if o.kind == "digital" and o.device != name], n=1)
                findings.append(make(WIRING_BAD, f"device '{name}' {key}: line '{line}' {why}", doc.pos(path),
                                     hint=f"name a digital channel of another device, e.g. '{close[0]}'" if close else
                                     "add a digital channel on another device for it and name it here"))
                continue
            if line in users:
                other = users[line]
                findings.append(make(WIRING_LINE_SHARED, f"line '{line}' wires both '{other[0]}' ({other[1]}) and "
                                     f"'{name}' ({key})", doc.pos(path),
                                     hint=f"add a digital channel for '{name}' {key} and name it here"))
                continue
            users[line] = (name, key)
            kw["wiring_pos"] = doc.pos(path)
            if key == "start":
                kw["start_on"] = line
                if "latency" in spec:
                    kw["start_latency_s"] = q(("devices", name, key, "latency"), "s", nonnegative=True) or 0.0
            elif key == "advance":
                kw["step_on"] = line
                if "latency" in spec:
                    kw["step_latency_s"] = q(("devices", name, key, "latency"), "s", nonnegative=True) or 0.0
            else:
                rate = q(("devices", name, key, "max_rate"), "Hz", positive=True)
                takes = dev.timebase_hz / dev.min_interval_ticks
                if rate is None:
                    continue
                if rate > takes * (1 + 1e-9):
                    findings.append(make(WIRING_BAD, f"device '{name}' clock max_rate {rate:.6g} Hz is faster than the "
                                         f"device takes: one row per min_interval, {takes:.6g} Hz",
                                         doc.pos(("devices", name, key, "max_rate")),
                                         hint=f"write '{takes:.6g} Hz' (or less) as max_rate"))
                    continue
                kw["clock_on"], kw["clock_max_hz"] = line, rate
        if kw.get("step_on") and kw.get("clock_on"):
            findings.append(make(WIRING_BAD, f"device '{name}' is both stepped per edge and externally clocked",
                                 doc.pos(("devices", name, "clock")), hint="keep one of advance: and clock:"))
            kw.pop("clock_on")
        wired[name] = _replace(dev, **kw) if kw else dev
    return _acyclic(wired, outputs, doc, findings)


def _acyclic(devices, outputs, doc, findings) -> dict:
    """The devices with the wiring of any loop's devices removed (and a finding per loop)."""
    graph = DepGraph()
    for d in devices.values():
        for line in (d.start_on, d.step_on, d.clock_on):
            if line:
                graph.add_edge(outputs[line].device, d.name)
    loops = graph.simple_cycles()  # networkx loads only for a rig wired in a loop
    if not loops:
        return devices
    out = dict(devices)
    for loop in sorted(loops, key=sorted):
        first = sorted(loop)[0]
        start = loop.index(first)  # told from its first name: networkx's listing depends on the hash seed
        loop = loop[start:] + loop[:start]
        chain = " -> ".join(loop + [loop[0]])
        findings.append(make(WIRING_CYCLE, f"the devices' wiring forms a loop: {chain}", devices[first].wiring_pos,
                             hint=f"make '{first}' free-running: remove its start/advance/clock wiring"))
        for name in loop:
            out[name] = _replace(out[name], start_on=None, step_on=None, clock_on=None)
    return out


def _synth_words(c, spec, base, key, short, rng, q, doc, findings) -> dict:
    """A synth part's code keywords: its words are unsigned (straight binary); the frequency word counts
    reference_clock / 2^bits from 0 Hz when the channel states its reference clock."""
    out = {}
    if spec.get("code") not in (None, "straight_binary"):
        findings.append(make(BAD_RIG, f"synth '{base[-1]}' {key} word is unsigned: code '{spec['code']}' does not "
                             "apply", doc.pos(base + (key, "code")), hint="remove code: (synth words are straight binary)"))
    if short != "freq" or "reference_clock" not in c:
        return out
    clock = q(base + ("reference_clock",), "Hz", positive=True)
    if clock is None:
        return out
    if not spec.get("bits"):
        findings.append(make(BAD_RIG, f"synth '{base[-1]}' states a reference_clock but no frequency bits",
                             doc.pos(base + ("reference_clock",)), hint="add bits: to frequency (e.g. bits: 32)"))
        return out
    if rng[0] < 0 or rng[1] > clock:
        findings.append(make(BAD_RIG, f"synth '{base[-1]}' frequency range [{fmt_freq(rng[0], 9)}, {fmt_freq(rng[1], 9)}] "
                             f"does not fit its word: 0 Hz to the reference clock {fmt_freq(clock, 9)}",
                             doc.pos(base + (key, "range")), hint="keep the frequency range within [0 Hz, reference_clock]"))
        return out
    out["reference_clock_hz"] = clock
    return out


def _vector(raw, path, doc, findings):
    """Three finite floats from the rig file, or None (with a finding) when a number does not fit a float."""
    try:
        v = tuple(float(x) for x in raw)
    except (OverflowError, TypeError, ValueError):
        v = ()
    if len(v) != 3 or not all(math.isfinite(x) for x in v):
        findings.append(make(BAD_RIG, f"{path[-1]} {_short(raw)} is not three finite numbers", doc.pos(path),
                             hint="give three ordinary numbers, e.g. [1, 0, 0]"))
        return None
    return v


def _a(word: str) -> str:
    return ("an " if word[:1] in "aeiou" else "a ") + word


def _shutter(name, base, outputs, doc, findings):
    """A beam's shutter channel: a digital output (an unknown name has its finding from `ref` already)."""
    if name is None or name not in outputs:
        return None
    if outputs[name].kind != "digital":
        findings.append(make(BAD_RIG, f"beam '{base[-1]}' has shutter '{name}', {_a(outputs[name].kind)} channel, not a digital one: a "
                             "shutter is open or closed", doc.pos(base + ("shutter",)),
                             hint="name the digital channel that opens the shutter (open at 1)"))
        return None
    return name


def _direction(raw, path, doc, findings, default=None):
    """A unit 3-vector from the rig file; `default` when absent (a zero or unusable vector is a finding)."""
    if raw is None:
        return default
    v = _vector(raw, path, doc, findings)
    if v is None:
        return default
    big = max(abs(x) for x in v)
    if big == 0:
        findings.append(make(BAD_RIG, f"{path[-1]} {_short(raw)} is not a direction (all zero)", doc.pos(path),
                             hint="give three numbers, not all zero, e.g. [1, 0, 0]"))
        return default
    v = tuple(x / big for x in v)  # scaled first: the norm of [1e200, 1e200, 0] must not overflow
    n = math.sqrt(sum(x * x for x in v))
    return tuple(x / n for x in v)


def _coupling_keys(d, base, doc, findings) -> dict:
    """A drive's `polarisation` ("sigma+", "sigma-", "pi", or a unit vector relative to the bias axis) and
    `calibrated_on` (((F, mF), (F, mF))), as Drive keywords; absent keys stay out (today's calibration)."""
    out = {}
    pol = d.get("polarisation")
    if isinstance(pol, str):
        out["polarisation"] = pol
    elif pol is not None:
        vec = _direction(pol, base + ("polarisation",), doc, findings)
        if vec is not None:
            out["polarisation"] = vec
    cal = d.get("calibrated_on")
    if cal is not None:
        out["calibrated_on"] = tuple((int(cal[k]["F"]), int(cal[k]["mF"])) for k in ("from", "to"))
    return out


def _image_keys(im, base, opt, doc, findings) -> dict:
    """The optional keys of an imaging setup that predicted images read, as ImagingSetup keywords; a number out
    of its range is a finding at its key and left out (the default holds)."""
    out = {}
    dist = opt(base + ("lens_distance",), "m", positive=True)
    if dist is not None:
        out["lens_distance_m"] = dist
    for key, lo, hi, open_lo, what in (("numerical_aperture", 0.0, 1.0, True, "a numerical aperture, e.g. 0.1"),
                                       ("saturation_parameter", 0.0, math.inf, False, "I / I_sat, e.g. 0.5"),
                                       ("saturation_factor", 0.0, math.inf, True, "alpha, e.g. 1.0"),
                                       ("quantum_efficiency", 0.0, 1.0, True, "a fraction, e.g. 0.7"),
                                       ("imaged_F", 0.0, math.inf, False, "a ground hyperfine level, e.g. 2")):
        if key not in im:
            continue
        raw = im[key]
        try:
            x = float(raw) if not isinstance(raw, bool) else math.nan
        except (OverflowError, TypeError, ValueError):
            x = math.nan
        if not math.isfinite(x) or x < lo or (open_lo and x == lo) or x > hi or (key == "imaged_F" and x != int(x)):
            findings.append(make(BAD_RIG, f"{key} {_short(raw)} is out of range", doc.pos(base + (key,)),
                                 hint=f"give {what}"))
            continue
        out[key] = int(x) if key == "imaged_F" else x
    return out


def _magnification(im, base, doc, findings) -> float:
    try:
        m = float(im.get("magnification", 1.0))
    except (OverflowError, TypeError, ValueError):
        m = math.nan
    if not (math.isfinite(m) and m > 0):
        findings.append(make(BAD_RIG, f"magnification {_short(im.get('magnification'))} is not a positive number",
                             doc.pos(base + ("magnification",)), hint="give the imaging magnification, e.g. 2.0"))
        return 1.0
    return m


def _short(raw) -> str:
    text = repr(list(raw)) if isinstance(raw, (list, tuple)) else repr(raw)
    return text if len(text) <= 60 else text[:57] + "..."


def _replace(o, **kw):
    from dataclasses import replace

    return replace(o, **kw)


def _range(spec, path, unit, q, doc, findings):
    lo = q(path + ("range", 0), unit)  # a range's fix takes the unit the other ranges are written in
    hi = q(path + ("range", 1), unit)
    if lo is None or hi is None:
        return None
    if not lo < hi:
        findings.append(make(BAD_RIG, f"range [{lo:g}, {hi:g}] is empty or reversed", doc.pos(path + ("range",)),
                             hint="write the range low end first"))
        return None
    return lo, hi


def _common(c, base, q, opt, doc, findings):
    out = {}
    lat = c.get("latency")
    if isinstance(lat, dict):
        out["latency_rise_s"] = opt(base + ("latency", "rise"), "s", nonnegative=True) or 0.0
        out["latency_fall_s"] = opt(base + ("latency", "fall"), "s", nonnegative=True) or 0.0
    elif lat is not None:
        v = q(base + ("latency",), "s", nonnegative=True) or 0.0
        out["latency_rise_s"] = out["latency_fall_s"] = v
    out["jitter_s"] = opt(base + ("jitter",), "s", nonnegative=True) or 0.0
    out["min_pulse_s"] = opt(base + ("min_pulse",), "s", nonnegative=True) or 0.0
    if c.get("kind") == "synth":
        out["settling_s"] = opt(base + ("settling",), "s", nonnegative=True) or 0.0
    cal = None
    calspec = c.get("calibration")
    phys = None
    if calspec:
        phys = calspec["quantity"]
        try:
            pdims = dims_of(phys)
        except Exception:
            findings.append(make(UNKNOWN_UNIT, f"unknown calibration quantity unit '{phys}'", doc.pos(base + ("calibration", "quantity"))))
            return None
        out_unit = (c.get("output") or {}).get("unit", "V")
        if "table" in calspec:
            pts = calspec["table"]
            xs, ys = [], []
            for i in range(len(pts)):
                x = q(base + ("calibration", "table", i, 0), phys, units=(phys,))
                y = q(base + ("calibration", "table", i, 1), out_unit, units=(out_unit,))
                if x is None or y is None:
                    return None
                xs.append(x)
                ys.append(y)
            if not (is_monotonic(xs) and is_monotonic(ys)):
                findings.append(make(CALIBRATION_NOT_MONOTONIC, "calibration table is not strictly monotonic",
                                     doc.pos(base + ("calibration", "table")),
                                     hint="each row must increase (or each decrease) in both columns"))
                return None
            cal = Calibration(phys, pdims, "table", table_phys=tuple(xs), table_out=tuple(ys))
        elif "linear" in calspec:
            slope = q(base + ("calibration", "linear", "slope"), f"{out_unit}/({phys})", units=(f"{out_unit}/{phys}",))
            off = opt(base + ("calibration", "linear", "offset"), out_unit) or 0.0
            if slope is None:
                return None
            if slope == 0:
                findings.append(make(BAD_RIG, "calibration slope is zero", doc.pos(base + ("calibration", "linear", "slope"))))
                return None
            cal = Calibration(phys, pdims, "linear", slope, off)
        else:
            findings.append(make(BAD_RIG, "calibration needs 'linear:' or 'table:'", doc.pos(base + ("calibration",))))
            return None
    out["calibration"] = cal
    unit_for_phys = phys or (c.get("output") or {}).get("unit", "")
    if "max_slew" in c:
        out["max_slew"] = q(base + ("max_slew",), f"({unit_for_phys})/s" if unit_for_phys else "1/s", positive=True)
    if "tolerance" in c:
        out["tolerance"] = q(base + ("tolerance",), (c.get("output") or {}).get("unit", ""), positive=True)
    return out
