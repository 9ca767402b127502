"""Fuzzing the pipeline: every input gives a preflight (and build) or findings, never a traceback.

Oracle (common practice, no source): a fuzzer's outcome is acceptable when the
program either succeeds or reports the problem through its documented channel.
Here that is: `load_sources` may raise only `LoadError` (carrying a finding); every
later stage returns findings; a check or the compiler raising anything is a crash.
The stages are the pipeline's own (`load_sources`, `resolve`, then
`pipeline.preflight_resolved` with a rules tuple); a check that crashes shows as
`schema.check-crashed`, which the oracle counts as a crash, so it fails the test
instead of hiding in a finding.

Two generators:
- structured random sequences, built from the vocabulary of
  schemas/sequence.schema.json (every action kind and property it declares) and the
  names of the demo rig, with hostile values mixed in (NaN, infinities, zero and
  negative durations, 1e30 s, huge integers, expressions that overflow or divide by
  zero, names that do not exist);
- random byte mutations (flips, deletions, duplications, insertions of YAML
  syntax, truncation) of the demo sequences, the rig and the fault corpus.

CI runs 620 examples in total (a hypothesis profile, derandomized so CI is
reproducible). A longer run: SEQGEN_FUZZ_EXAMPLES=20000 pytest tests/test_fuzz.py
(the examples are shared out over the tests in the same proportions; random seeds).
Samples with a barrier action (whose scattering analysis takes seconds) skip the
physics stage in the main structured test; `test_fuzz_physics_actions` runs the
physics stage on a few such samples.
"""

from __future__ import annotations

import json
import math
import os
import sys
import tempfile
from functools import lru_cache
from pathlib import Path

import numpy as np
import pytest
import yaml
from hypothesis import HealthCheck, Phase, assume, given, settings
from hypothesis import strategies as st

from seqgen.emit.build import write_build
from seqgen.emit.sarif import to_sarif
from seqgen.findings import SEVERITIES, has_errors
from seqgen.load.yamlsrc import LoadError, load_file
from seqgen.check import RULES
from seqgen.codes import ALL as CODES
from seqgen.pipeline import preflight_resolved, resolve
from seqgen.resolve.sources import load_sources

from .conftest import ROOT, SEQUENCES


_CI_COUNTS = {"structured": 260, "mutated": 280, "rig": 60, "physics": 4}  # 604 examples in CI
_TOTAL = int(os.environ.get("SEQGEN_FUZZ_EXAMPLES", "0") or 0)
_LONG = _TOTAL > 0

# no example database and no explain phase: the fuzzers write nothing into the work tree
_PHASES = (Phase.explicit, Phase.generate, Phase.target, Phase.shrink)
settings.register_profile("seqgen-fuzz-ci", deadline=None, derandomize=True, database=None, print_blob=True,
                          phases=_PHASES, suppress_health_check=list(HealthCheck))
settings.register_profile("seqgen-fuzz-long", deadline=None, derandomize=False, database=None, print_blob=True,
                          phases=_PHASES, suppress_health_check=list(HealthCheck))
_PROFILE = settings.get_profile("seqgen-fuzz-long" if _LONG else "seqgen-fuzz-ci")


def _examples(kind: str) -> int:
    n = _CI_COUNTS[kind]
    return max(n, _TOTAL * n // sum(_CI_COUNTS.values())) if _LONG else n


def _fuzz(kind: str):
    return settings(parent=_PROFILE, max_examples=_examples(kind))


SCHEMA = json.loads((ROOT / "schemas" / "sequence.schema.json").read_text(encoding="utf-8"))
RIG_FILE = SEQUENCES / "rigs" / "na23_demo_rig.yaml"
RIG = load_file(RIG_FILE).data
DEMOS = sorted(SEQUENCES.glob("*.yaml")) + sorted((SEQUENCES / "common").glob("*.yaml"))
FAULTS = sorted((SEQUENCES / "faults").glob("*.yaml"))
ANCHOR = SEQUENCES / "fuzz_sample.yaml"  # never written: only its folder matters (rig: rigs/..., use: common/...)

# ----------------------------------------------------------------------------- the oracle

STATS = {"examples": 0, "load_error": 0, "findings_only": 0, "resolved": 0, "built": 0}


def _finding_ok(f) -> None:
    assert f.code in CODES, f"undeclared finding code {f.code}"
    assert f.severity in SEVERITIES
    assert isinstance(f.message, str) and f.message
    assert isinstance(f.line, int) and f.line >= 0 and isinstance(f.column, int) and f.column >= 0
    assert f.code != "schema.check-crashed", f.message


def _heavy(shot) -> bool:
    return any(a.kind == "barrier" for a in shot.phys)


LIGHT_RULES = tuple(r for r in RULES if r.stage != "physics")  # for heavy samples: no physics stage


def run_pipeline(text: str | None, path: Path, display: str, *, physics: bool = True, build: bool = False) -> str:
    """Every stage on one input; returns the outcome; raises (fails the test) on a crash."""
    STATS["examples"] += 1
    try:
        src = load_sources(path, text=text, display=display)
    except LoadError as exc:
        _finding_ok(exc.finding)
        STATS["load_error"] += 1
        return "load-error"
    shot, rf = resolve(src)
    rules = RULES if physics or shot is None or not _heavy(shot) else LIGHT_RULES
    res = preflight_resolved(src, shot, rf, rules=rules)
    findings = res.findings
    for f in findings:
        _finding_ok(f)
    if shot is None:
        assert findings, "nothing resolved, yet no finding says why"
        STATS["findings_only"] += 1
        return "findings"
    STATS["resolved"] += 1
    compiled = res.compiled
    for t in compiled.tables:
        ticks = np.asarray(t.ticks)
        assert ticks.dtype == np.int64 and len(ticks) >= 1 and ticks[0] == 0
        assert np.all(np.diff(ticks) > 0)
        assert np.asarray(t.values).shape == (len(ticks), len(t.columns))
        assert np.all(np.isfinite(t.values))
    json.dumps(to_sarif(findings, sources=src.hashes), allow_nan=False)
    if build and not has_errors(findings):
        with tempfile.TemporaryDirectory() as tmp:
            out = write_build(Path(tmp) / "b", shot, compiled, findings)
            assert (out / "manifest.json").is_file()
        STATS["built"] += 1
    return "resolved"


# ----------------------------------------------------------------------------- structured sequences

def _pick(good, bad, h: bool, bad_share: int = 6):
    """A good value; in a hostile sample (h), one draw in `bad_share` is a hostile one."""
    if not h:
        return st.sampled_from(good)
    return st.integers(0, bad_share - 1).flatmap(lambda i: st.sampled_from(bad if i == 0 else good))


_BAD_TIMES = ["0 s", "-1 ms", ".nan", ".inf", "-.inf", "1e30 s", "1e400 ms", "t1 / 0", "t1 ** 99", "abc", 5, 0, -3,
              "5 W", "1" * 400 + " ms", "9" * 5000, "10**10**10 s", "(1).__class__", "__import__('os')", "[1 ms]",
              "1 ms ms", "1e-300 s", "", "1e9 s", "exp(1000) * 1 s", "log(0) * 1 s", "nope + 1 ms"]
_TIMES = ["20 us", "100 us", "1 ms", "2 ms", "5 ms", "t1", "2 * t1", "t1 + 1 ms", "sqrt(t1 * t1)", "max(t1, 2 ms)",
          "50 ms", "1.5 ms"]
_BAD_VALUES = ["-1 W", "1e30 W", ".nan", "1 s", "9" * 400, "nope", "1e9 V", -5, "5 W / 0", "1 W + 1 s"]
_POWERS = ["0 W", "10 mW", "0.5 W", "1 W", "0.43 mW", "40 uW", "p1", "0.3 * p1"]
_UNITLESS = ["0.2", "1", "0", "pi/2", "pi", "0.05", 0.5, 1]
_BAD_UNITLESS = ["-1", "1e9", ".nan", "1 s", "pi/0"]
_GOOD = {
    "time": _TIMES, "power": _POWERS, "unitless": _UNITLESS,
    "frequency": ["1.769946 GHz", "1.77 GHz", "5 kHz", "1.5 GHz", "100 Hz", "20 Hz"],
    "gradient": ["8 G/cm", "12 G/cm", "4 G/cm", "0.1 T/m"], "length": ["300 um", "0 m", "10 um"],
    "velocity": ["19 mm/s", "5 mm/s"], "tolerance": ["1 mV", "0.5 mV", "0.01"],
    "temperature": ["80 nK", "1.1 uK", "400 nK"],
}
_BAD = {"time": _BAD_TIMES, "power": _BAD_VALUES, "unitless": _BAD_UNITLESS,
        "frequency": ["0 Hz", "-1 MHz", "1e20 Hz", ".nan", "1 s"], "gradient": ["-4 G/cm", "1e9 G/cm", "1 W", ".nan"],
        "length": ["-1 mm", "1e20 m", "1 s"], "velocity": ["0 m/s", "1e10 m/s", "1 s"],
        "tolerance": ["0 V", "-1 V", "1e-300 V", "1 s", ".nan"], "temperature": ["0 K", "-1 K", "1e30 K", ".nan"]}
_KIND_OF = {"at": "time", "over": "time", "duration": "time", "tau": "time", "width": "time", "exposure": "time",
            "power": "power", "probe_power": "power", "to": "power", "from": "power", "value": "power",
            "back_to": "power", "frequency": "frequency", "detuning": "frequency", "gradient": "gradient",
            "position": "length", "target_distance": "length", "expect_velocity": "velocity", "angle": "unitless",
            "depth": "unitless", "amplitude": "unitless", "tolerance": "tolerance", "temperature": "temperature",
            "trap_frequencies": "frequency"}


def _quantity(name: str, h: bool):
    kind = _KIND_OF.get(name, "time")
    return _pick(_GOOD[kind], _BAD[kind], h)


def _split(q: str):
    number, _, unit = str(q).partition(" ")
    return float(number), unit


def _channel_values(ch: str) -> list:
    """Values that fit a channel of the demo rig: 0/1 for digital lines, within range for the others."""
    spec = RIG["channels"].get(ch.split(".")[0], {})
    kind = spec.get("kind")
    if kind == "digital":
        return [0, 1]
    if kind == "synth":
        return ["0.5", "1", "0"] if ch.endswith(".amp") else ["1.77 GHz", "1.5 GHz", "2 GHz"]
    if kind == "analog":
        unit = (spec.get("calibration") or {}).get("quantity") or spec["output"]["unit"]
        top = (spec.get("hard_limit") or {}).get("max") or spec["output"]["range"][1]
        value, top_unit = _split(top)
        return [f"0 {top_unit}", f"{0.3 * value:g} {top_unit}", f"{0.9 * value:g} {top_unit}"] if top_unit == unit or \
            top_unit else [f"0 {unit}"]
    return ["1 V"]


_CHANNELS = sorted(RIG["channels"]) + ["mw.freq", "mw.amp"]
_BAD_CHANNELS = ["nope", "cross_a_pwr", "mw.phase", ""]
_NAMES = {"beam": sorted(RIG["beams"]), "coil": sorted(RIG["coils"]), "drive": sorted(RIG["drives"]),
          "setup": sorted(RIG["imaging"]), "channel": _CHANNELS}
_BLOCKS = ["a", "b", "c", "load", "image"]


def _ref(defn: dict) -> dict:
    while "$ref" in defn:
        defn = SCHEMA["$defs"][defn["$ref"].rsplit("/", 1)[-1]]
    return defn


def _value(name: str, defn: dict, h: bool):
    if defn.get("$ref", "").endswith("/quantity"):
        return _quantity(name, h)
    defn = _ref(defn)
    if "enum" in defn:
        return _pick(list(defn["enum"]), ["bogus"], h)
    kind = defn.get("type")
    if name in _NAMES:
        return _pick(_NAMES[name], _BAD_CHANNELS if name == "channel" else ["nope"], h)
    if name in ("beams", "coils"):
        return st.lists(_pick(_NAMES[name[:-1]], ["nope"], h), max_size=3)
    if name == "transition":
        state = st.fixed_dictionaries({"F": st.integers(1, 2), "mF": st.integers(-2, 2)})
        return st.lists(state, min_size=2, max_size=2) if not h else st.lists(state, max_size=3)
    if name == "table":
        pair = st.tuples(st.sampled_from([0, 0.25, 0.5, 1, 1.5, -1, math.nan]),
                         st.sampled_from([0, 0.2, 0.8, 1, math.inf])).map(list)
        return _pick([[[0, 0], [0.5, 0.8], [1, 1]], [[0, 0], [1, 1]]], [[]], h, 4).flatmap(
            lambda t: st.just(t) if t else st.lists(pair, max_size=5))
    if kind == "object":
        return _object(defn, h)
    if kind == "array":
        lo = 0 if h else defn.get("minItems", 0)
        return st.lists(_value(name, defn.get("items", {}), h), min_size=lo, max_size=defn.get("maxItems", max(lo, 3)))
    if kind == "integer":
        return st.integers(-3, 3)
    if kind == "number":
        return _pick([0.5, 1, 100], [0, 1e30, -1, math.nan], h)
    if kind == "boolean":
        return st.booleans()
    return st.sampled_from(["x", "", "note"])


def _object(defn: dict, h: bool, skip=()):
    defn = _ref(defn)
    props = {k: v for k, v in defn.get("properties", {}).items() if k not in skip}
    required = set(defn.get("required", ()))
    return st.fixed_dictionaries({k: _value(k, v, h) for k, v in props.items() if k in required},
                                 optional={k: _value(k, v, h) for k, v in props.items() if k not in required})


@st.composite
def _action_of(draw, kind: str, h: bool):
    spec = draw(_object(SCHEMA["$defs"][kind], h, skip=("note",) if draw(st.integers(0, 3)) else ()))
    ch = spec.get("channel")
    if isinstance(ch, str) and (not h or draw(st.integers(0, 5))):  # mostly values that fit the channel
        for key in ("value", "to", "from", "back_to"):
            if key in spec:
                spec[key] = draw(st.sampled_from(_channel_values(ch)))
    if kind == "ramp" and spec.get("shape") == "exponential" and "tau" not in spec and draw(st.integers(0, 3)):
        spec["tau"] = "1 ms"
    if kind == "push" and "coil" not in spec and "beam" not in spec and (not h or draw(st.integers(0, 3))):
        spec.update(coil="kick_coil", gradient="8 G/cm")
    if not h:  # a clean sample: what a careful author would add
        spec.pop("tolerance", None)
        if kind == "pulse" and "value" not in spec and isinstance(ch, str):
            spec["value"] = _channel_values(ch)[-1]
        if kind == "image":
            spec.setdefault("probe_power", "40 uW")
        if kind == "push":
            spec.setdefault("gradient" if "coil" in spec else "power", "8 G/cm" if "coil" in spec else "0.5 W")
    return {kind: spec}


@lru_cache(maxsize=None)
def _action_kinds() -> tuple:
    return tuple(_ref(SCHEMA["$defs"]["block"])["properties"]["actions"]["items"]["properties"])


def _action(h: bool, kinds=None):
    return st.sampled_from(kinds or _action_kinds()).flatmap(lambda k: _action_of(k, h))


def _anchor(first: bool, h: bool):
    off = _pick(["", " + 5 ms", " + 1 ms", " + t1", " - 1 ms"], [" + .nan", " + + 1 ms", " + 1e30 s", " - 1 s"], h)
    target = _pick(_BLOCKS, ["nope"], h)
    good = [st.just({"at": "10 ms"})] if first else [st.just({}), st.tuples(target, off).map(
        lambda x: {"after": x[0] + x[1]}), st.tuples(target, off).map(lambda x: {"with": x[0] + x[1]})]
    bad = [st.just({}), _quantity("at", h).map(lambda t: {"at": t}),
           st.tuples(target, _quantity("at", h)).map(lambda x: {"after": x[0], "at": x[1]})]  # two anchors
    if not h:
        return st.one_of(*good)
    return st.integers(0, 5).flatmap(lambda i: st.one_of(*(bad if i == 0 else good)))


def _block(actions, first: bool, h: bool):
    return st.tuples(st.sampled_from(_BLOCKS), _anchor(first, h), st.lists(actions, min_size=1, max_size=4)).map(
        lambda x: {"name": x[0], **x[1], "actions": x[2]})


def _clean_names(blocks: list) -> list:
    """Unique block names, anchors only on earlier blocks (a clean sample has no anchor mistakes)."""
    out = []
    for i, b in enumerate(blocks):
        b = dict(b, name=_BLOCKS[i])
        for key in ("after", "with"):
            if key in b:
                target, sep, off = b[key].partition(" ")
                b[key] = (_BLOCKS[i - 1] if target not in _BLOCKS[:i] else target) + (sep + off if sep else "")
        out.append(b)
    return out


def _rare(strategy, h: bool, share: int = 6):
    """In a hostile sample, the strategy's value one draw in `share`, else (and always in a clean one) nothing."""
    if not h:
        return st.just(None)
    return st.integers(0, share - 1).flatmap(lambda i: strategy if i == 0 else st.just(None))


def _sequence(h: bool, kinds=None):
    """A sequence from the schema's vocabulary: clean (h false: values that fit, names that exist) or hostile."""
    actions = _action(h, kinds)
    params = st.fixed_dictionaries({"t1": _pick(["1 ms", "2 ms", "0.5 ms"], _BAD_TIMES, h),
                                    "p1": _pick(["0.5 W", "1 W"], _BAD_VALUES, h)},
                                   optional={"n": _pick(["t1 + 1 ms", "2 * p1", "3"], ["n", "x / 0"], h),
                                             "x": st.fixed_dictionaries({"value": _quantity("at", h)})})
    sample = _object(SCHEMA["properties"]["sample"], h).map(
        lambda s: dict(s, species=s.get("species") if s.get("species") in ("Na23", "Rb87", "Xx1") else "Na23"))
    accept = st.lists(st.fixed_dictionaries({"code": st.sampled_from(sorted(CODES)[:30] + ["x.y"]),
                                             "reason": st.just("fuzz")},
                                            optional={"block": st.sampled_from(_BLOCKS)}), min_size=1, max_size=2)
    use = st.lists(st.fixed_dictionaries({"file": _pick(["common/na23_prep.yaml"], [
        "common/nope.yaml", "../../../../outside.yaml", "/etc/hostname", "fuzz_sample.yaml", "common"], h, 3)},
        optional={"params": st.just({"evap_time": "0.2 s"}), "blocks": st.just(["load_dipole"])}),
        min_size=1, max_size=2)
    blocks = st.tuples(_block(actions, True, h), st.lists(_block(actions, False, h), max_size=3)).map(
        lambda x: [x[0]] + x[1])
    if not h:
        blocks = blocks.map(_clean_names)
        sample = sample.map(lambda s: dict(s, state={"F": 1, "mF": -1}) if "state" in s else s)
    top = st.fixed_dictionaries({
        "seqgen": _pick([1], [2, "1", 0, None], h, 12),
        "rig": _pick(["rigs/na23_demo_rig.yaml"], ["rigs/missing.yaml", "common/na23_prep.yaml", "", "rigs"], h, 12),
        "params": params, "sample": sample if not h else _rare(sample, h, 2), "accept": _rare(accept, h),
        "use": _rare(use, h), "limits": _rare(_object(SCHEMA["properties"]["limits"], h), h),
        "end": _rare(_object(SCHEMA["properties"]["end"], h), h), "blcoks": _rare(st.just([]), h, 20)})
    return st.tuples(top, blocks).map(lambda x: {**{k: v for k, v in x[0].items() if v is not None}, "blocks": x[1]})


def _dump(doc) -> str:
    return yaml.safe_dump(doc, sort_keys=False, allow_unicode=True, width=1000)


@_fuzz("structured")
@given(st.booleans().flatmap(_sequence))
def test_fuzz_structured_sequences(doc):
    run_pipeline(_dump(doc), ANCHOR, "fuzz_sample.yaml", physics=False, build=True)


@_fuzz("physics")
@given(_sequence(False, ("barrier", "push", "trap_ramp", "clock_pulse", "image", "release")))
def test_fuzz_physics_actions(doc):
    run_pipeline(_dump(doc), ANCHOR, "fuzz_sample.yaml", physics=True)


# ----------------------------------------------------------------------------- byte mutations

_TOKENS = [b":", b": ", b"-", b"- ", b"[", b"]", b"{", b"}", b"&a ", b"*a", b"!!python/object:os.system ", b"\t",
           b"\x00", b"1e999", b".nan", b"'", b'"', b"\n", b"\n  ", b"#", b"---\n", b"<<: *a", b"\xff\xfe", b"\xc3",
           b"9" * 500, b" ms", b" W", b"**", b"/ 0", b"__import__('os')", b"|", b">", b"?", b"%YAML 1.1\n", b"\r\n"]


def _mutations():
    op = st.sampled_from(["flip", "delete", "duplicate", "insert", "token", "truncate", "swap_lines"])
    return st.lists(st.tuples(op, st.floats(0, 1), st.floats(0, 1), st.integers(0, 255), st.sampled_from(_TOKENS)),
                    min_size=1, max_size=4)


def _mutate(data: bytes, muts) -> bytes:
    for op, a, b, byte, token in muts:
        n = len(data)
        i = min(int(a * n), max(n - 1, 0))
        j = min(n, i + 1 + int(b * 40))
        if op == "flip" and n:
            data = data[:i] + bytes([data[i] ^ (1 << (byte % 8))]) + data[i + 1:]
        elif op == "delete":
            data = data[:i] + data[j:]
        elif op == "duplicate":
            data = data[:j] + data[i:j] + data[j:]
        elif op == "insert":
            data = data[:i] + bytes([byte]) + data[i:]
        elif op == "token":
            data = data[:i] + token + data[i:]
        elif op == "truncate":
            data = data[:i]
        elif op == "swap_lines":
            lines = data.split(b"\n")
            if len(lines) > 2:
                x, y = int(a * (len(lines) - 1)), int(b * (len(lines) - 1))
                lines[x], lines[y] = lines[y], lines[x]
                data = b"\n".join(lines)
    return data


def _run_bytes(data: bytes, path: Path) -> str:
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError:
        text = None
    if text is not None:
        return run_pipeline(text, path, path.name, physics=False)
    with tempfile.TemporaryDirectory() as tmp:  # not UTF-8: through the file reader, which must say so
        p = Path(tmp) / path.name
        p.write_bytes(data)
        outcome = run_pipeline(None, p, p.name, physics=False)
        assert outcome == "load-error"
        return outcome


@_fuzz("mutated")
@given(st.sampled_from(DEMOS + FAULTS), _mutations())
def test_fuzz_mutated_files(path, muts):
    data = _mutate(path.read_bytes(), muts)
    assume(len(data) < 200_000)
    _run_bytes(data, path)


@_fuzz("rig")
@given(_mutations())
def test_fuzz_mutated_rig(muts):
    rig = _mutate(RIG_FILE.read_bytes(), muts)
    with tempfile.TemporaryDirectory() as tmp:
        (Path(tmp) / "rig.yaml").write_bytes(rig)
        seq = Path(tmp) / "seq.yaml"
        # a small sequence touching analog, digital and synth channels and a physics action
        seq.write_text("seqgen: 1\nrig: rig.yaml\nblocks:\n  - name: a\n    at: 4 ms\n    actions:\n"
                       "      - set: {channel: probe_shutter, value: 1}\n"
                       "      - ramp: {channel: cross_b_power, to: 1 W, over: 2 ms, shape: smooth}\n"
                       "      - sweep: {channel: mw, to: 1.77 GHz, over: 1 ms}\n"
                       "      - push: {coil: kick_coil, gradient: 8 G/cm, duration: 1 ms}\n"
                       "      - set: {channel: probe_shutter, value: 0}\n", encoding="utf-8")
        run_pipeline(None, seq, "seq.yaml", physics=True)


@pytest.fixture(scope="module", autouse=True)
def _report_stats():
    yield
    # one line for the CI log: how many examples ran and how they ended
    sys.__stderr__.write(f"\nseqgen fuzz: {STATS}\n")
