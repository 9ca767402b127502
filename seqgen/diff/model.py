"""Types of the diff: one `Change` per difference, a `Version` per input, the `DiffReport`.

A change belongs to one level: "preflight" (findings introduced / resolved / changed),
"output" (compiled channel tables), "resolved" (params, blocks, timing,
writes) or "rig" (calibration, limits, latency, geometry). `old` and `new` are
short display strings; `data` holds numbers (SI units, output units) for tools.
"""

from __future__ import annotations

from dataclasses import dataclass, field

LEVELS = ("preflight", "output", "resolved", "rig")
LEVEL_TITLES = {
    "preflight": "preflight (findings)",
    "output": "outputs (compiled channel tables)",
    "resolved": "resolved timeline (params, blocks, timing, writes)",
    "rig": "rig (devices, wiring, channels, codes, calibration, limits, latency, geometry)",
}

TIME_TOL_S = 1e-9  # below any tick of a <= 1 GHz timebase
REL_TOL = 1e-9


@dataclass(frozen=True)
class Change:
    level: str
    kind: str
    subject: str
    message: str
    old: str | None = None
    new: str | None = None
    weight: float = 0.0  # larger = more consequential (sort order only)
    data: dict = field(default_factory=dict, compare=False, hash=False)

    def to_dict(self) -> dict:
        return {"level": self.level, "kind": self.kind, "subject": self.subject, "message": self.message,
                "old": self.old, "new": self.new, "data": self.data}


@dataclass(frozen=True)
class Column:
    """One output column of a device table, with what the diff needs to judge it."""

    name: str
    device: str
    kind: str  # digital | analog | synth
    unit: str
    output: object = None  # model.Output when the version came from a sequence file


@dataclass
class Version:
    """One side of a diff, whatever it was read from."""

    label: str  # as given (file path, REV:PATH, build folder)
    kind: str  # "file" | "git" | "build" | "scan-build"
    shot: object = None  # model.Shot
    compiled: object = None  # model.Compiled
    findings: list = field(default_factory=list)
    sources: object = None  # resolve.sources.Sources
    manifest: dict | None = None
    tables: tuple = ()  # model.DeviceTable
    columns: dict = field(default_factory=dict)  # output name -> Column
    devices: dict = field(default_factory=dict)  # device -> {"tick_s", "output_model"}
    params: dict = field(default_factory=dict)  # name -> (value SI, unit text, text as written)
    duration_s: float | None = None
    text: str | None = None  # the main file's text (sequence inputs)
    scan: object = None  # scan.plan.ScanPlan when the sequence scans params (the shot is then the base shot)
    scan_invalid: bool = False  # the sequence scans params but the scan does not expand (see its findings)
    bounds: dict = field(default_factory=dict)  # param -> {"min"/"max": (text, value SI or None)} (sequence inputs)
    scan_build: dict | None = None  # a scan build folder: {"shots": [record per shot, run order], "folder", "tool"}

    @property
    def resolved(self) -> bool:
        return self.shot is not None

    def describe(self) -> dict:
        return {"input": self.label, "kind": self.kind, "resolved": self.resolved or self.kind in ("build", "scan-build"),
                "duration_s": self.duration_s}


@dataclass
class DiffReport:
    old: Version
    new: Version
    changes: list = field(default_factory=list)
    unchanged_findings: list = field(default_factory=list)  # Finding (new side)
    notes: list = field(default_factory=list)

    @property
    def identical(self) -> bool:
        return not self.changes

    @property
    def changed_findings(self) -> list:
        """The findings of both versions whose message, fix, severity or acceptance differ (`Change`s)."""
        return [c for c in self.changes if c.kind == "finding-changed"]

    def by_level(self, level: str) -> list:
        return [c for c in self.changes if c.level == level]

    def find(self, level: str | None = None, kind: str | None = None, subject: str | None = None) -> list:
        return [c for c in self.changes if (level is None or c.level == level) and (kind is None or c.kind == kind)
                and (subject is None or c.subject == subject)]
