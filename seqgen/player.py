"""The reference player: what a build folder makes the hardware put out, read from the folder alone.

It is the loader contract by example (README, "Build folder"): it reads `manifest.json` and each device's
table (`<device>.npz`, or `<device>.csv`), and nothing else of seqgen (numpy and json only; no compile stage),
so a lab's own loader can be checked against it. For each output:

* the codes, turned into output values by the column's code grid (`value = zero + code x lsb`; a column
  without bits, convention "none", uses the table's values), checked against the table's values;
* each row at tick k appears at k / timebase_hz plus the column's latency (rise when the physical value
  goes up, fall when it goes down; a row that changes nothing appears at once);
* a wired device (the device's `wiring` in the manifest; README "Wiring") runs off the edges its parent's
  table plays: a triggered device plays row k at (its start edge + start latency) + (k / timebase_hz -
  start_s), its rows before start_s being the values it is armed with; a stepped or clocked device plays its
  row i (i >= 1) at its i-th rising edge (+ step latency), and stays on its last row once the edges run out;
* between rows the device holds the value (`output_model: hold`) or interpolates linearly (`linear`);
* physical units through the inverse of the column's calibration (linear, or a monotone piecewise-cubic
  table with straight lines beyond its ends, inverted by bisection).

`play(build, times)` returns one `Waveform` per output at the times given (s from the start of the shot).
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass
from pathlib import Path

import numpy as np

__all__ = ["Waveform", "play", "read_build"]


@dataclass(frozen=True, eq=False)
class Waveform:
    """One output at the times asked: `output` in output units (V, Hz, fraction, 0/1), `physical` in the
    column's physical unit (SI). `appear_s`: when each row's value appears (s), `row_output` / `row_physical`
    the rows' values; `linear`: interpolated between rows, else held."""

    name: str
    device: str
    unit: str
    physical_unit: str
    times: np.ndarray
    output: np.ndarray
    physical: np.ndarray
    appear_s: np.ndarray
    row_output: np.ndarray
    row_physical: np.ndarray
    linear: bool


@dataclass(frozen=True, eq=False)
class _Table:
    ticks: np.ndarray
    values: np.ndarray
    codes: np.ndarray
    columns: tuple


def read_build(build) -> tuple[dict, dict]:
    """(manifest, {device: table}) of a build folder; each table file is checked against its sha256."""
    folder = Path(build)
    manifest = json.loads((folder / "manifest.json").read_text(encoding="utf-8"))
    tables = {}
    for dev, info in manifest["devices"].items():
        files = info["files"]
        kind = "npz" if "npz" in files else "csv"
        path = folder / files[kind]["path"]
        raw = path.read_bytes()
        if hashlib.sha256(raw).hexdigest() != files[kind]["sha256"]:
            raise ValueError(f"{path.name} does not match the sha256 in manifest.json")
        names = tuple(c["name"] for c in info["columns"])
        tables[dev] = _read_npz(path, names) if kind == "npz" else _read_csv(raw, names)
    return manifest, tables


def _read_npz(path: Path, names: tuple) -> _Table:
    with np.load(path, allow_pickle=False) as z:
        if tuple(z["columns"].tolist()) != names:
            raise ValueError(f"{path.name}: columns differ from manifest.json")
        values = z["values"]
        codes = z["codes"] if "codes" in z.files else np.zeros(values.shape, dtype=np.int64)
        return _Table(z["tick"].astype(np.int64), values.astype(float), codes.astype(np.int64), names)


def _read_csv(raw: bytes, names: tuple) -> _Table:
    lines = raw.decode("utf-8").splitlines()
    n = len(names)
    rows = [line.split(",") for line in lines[1:] if line]
    if len(lines[0].split(",")) != 2 + 2 * n or any(len(r) != 2 + 2 * n for r in rows):
        raise ValueError("csv table: expected tick, time_s, a value and a code column per output")
    ticks = np.array([int(r[0]) for r in rows], dtype=np.int64)
    values = np.array([[float(x) for x in r[2:2 + n]] for r in rows], dtype=float).reshape(len(rows), n)
    codes = np.array([[int(x) for x in r[2 + n:]] for r in rows], dtype=np.int64).reshape(len(rows), n)
    return _Table(ticks, values, codes, names)


# ----------------------------------------------------------------------------- calibration (numpy only)


def _pchip_slopes(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """End and interior slopes of the monotone piecewise cubic (Fritsch-Carlson conditions, SIAM J. Numer.
    Anal. 17, 238 (1980); the weighted harmonic mean and three-point ends of Fritsch-Butland, SIAM J. Sci.
    Stat. Comput. 5, 300 (1984)): the interpolant the rig's table calibrations use."""
    h = np.diff(x)
    m = np.diff(y) / h
    if len(x) == 2:
        return np.array([m[0], m[0]])
    d = np.zeros(len(x))
    w1, w2 = 2 * h[1:] + h[:-1], h[1:] + 2 * h[:-1]
    same = (np.sign(m[:-1]) == np.sign(m[1:])) & (m[:-1] != 0) & (m[1:] != 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        d[1:-1] = np.where(same, (w1 + w2) / (w1 / m[:-1] + w2 / m[1:]), 0.0)

    def end(h0, h1, m0, m1):
        e = ((2 * h0 + h1) * m0 - h0 * m1) / (h0 + h1)
        if np.sign(e) != np.sign(m0):
            return 0.0
        if np.sign(m0) != np.sign(m1) and abs(e) > 3 * abs(m0):
            return 3 * m0
        return e

    d[0] = end(h[0], h[1], m[0], m[1])
    d[-1] = end(h[-1], h[-2], m[-1], m[-2])
    return d


def _table_forward(phys: np.ndarray, xp: np.ndarray, yp: np.ndarray, d: np.ndarray) -> np.ndarray:
    """The table calibration: cubic Hermite pieces inside, straight lines with the end intervals' slopes
    beyond (xp ascending)."""
    x = np.asarray(phys, dtype=float)
    k = np.clip(np.searchsorted(xp, x, side="right") - 1, 0, len(xp) - 2)
    h = xp[k + 1] - xp[k]
    s = (np.clip(x, xp[0], xp[-1]) - xp[k]) / h
    h00, h10 = 2 * s ** 3 - 3 * s ** 2 + 1, s ** 3 - 2 * s ** 2 + s
    h01, h11 = -2 * s ** 3 + 3 * s ** 2, s ** 3 - s ** 2
    inside = h00 * yp[k] + h10 * h * d[k] + h01 * yp[k + 1] + h11 * h * d[k + 1]
    lo = yp[0] + (x - xp[0]) * (yp[1] - yp[0]) / (xp[1] - xp[0])
    hi = yp[-1] + (x - xp[-1]) * (yp[-1] - yp[-2]) / (xp[-1] - xp[-2])
    return np.where(x < xp[0], lo, np.where(x > xp[-1], hi, inside))


def to_physical(cal, values: np.ndarray) -> np.ndarray:
    """Output values -> physical values through a manifest column's `calibration` (None: unchanged)."""
    y = np.asarray(values, dtype=float)
    if cal is None:
        return y.copy()
    if cal["kind"] == "linear":
        return (y - cal["offset"]) / cal["slope"]
    xp, yp = np.asarray(cal["physical"], float), np.asarray(cal["output"], float)
    if xp[0] > xp[-1]:
        xp, yp = xp[::-1], yp[::-1]
    d = _pchip_slopes(xp, yp)
    rising = yp[-1] > yp[0]
    # bracket each value between the physical values where the output passes it, then bisect
    lo = np.full(y.shape, xp[0] - (xp[-1] - xp[0]))
    hi = np.full(y.shape, xp[-1] + (xp[-1] - xp[0]))
    slope_lo = (yp[1] - yp[0]) / (xp[1] - xp[0])
    slope_hi = (yp[-1] - yp[-2]) / (xp[-1] - xp[-2])
    below = (y < yp[0]) if rising else (y > yp[0])
    above = (y > yp[-1]) if rising else (y < yp[-1])
    lo, hi = np.where(below | above, lo, xp[0]), np.where(below | above, hi, xp[-1])
    for _ in range(80):  # halves the bracket each time: enough for a double
        mid = 0.5 * (lo + hi)
        up = _table_forward(mid, xp, yp, d) < y if rising else _table_forward(mid, xp, yp, d) > y
        lo, hi = np.where(up, mid, lo), np.where(up, hi, mid)
    x = 0.5 * (lo + hi)
    x = np.where(below, xp[0] + (y - yp[0]) / slope_lo, x)
    return np.where(above, xp[-1] + (y - yp[-1]) / slope_hi, x)


# ----------------------------------------------------------------------------- playing


def _column_values(col: dict, table: _Table, j: int) -> np.ndarray:
    """A column's output values from its codes (the values where the output has no code)."""
    code = col.get("code")
    values = table.values[:, j]
    if code is None or code["convention"] == "none":
        return values
    from_codes = code["zero"] + table.codes[:, j] * code["lsb"]
    scale = max(abs(code["zero"]), abs(code["zero"] + (2 ** code["bits"]) * code["lsb"]), 1.0)
    if np.any(np.abs(from_codes - values) > 1e-9 * scale + 1e-3 * code["lsb"]):
        raise ValueError(f"column {col['name']}: codes and values disagree")
    return from_codes


def _rising_edges(line: str, manifest: dict, tables: dict) -> np.ndarray:
    """When a digital line of the build goes high (s), its rise latency included; empty if no table has it."""
    for dev, info in manifest["devices"].items():
        for j, col in enumerate(info["columns"]):
            if col["name"] == line:
                table = tables[dev]
                v = _column_values(col, table, j) >= 0.5
                up = np.flatnonzero(v[1:] & ~v[:-1]) + 1
                rise = (col.get("latency_s") or {}).get("rise", 0.0)
                return table.ticks[up] / info["timebase_hz"] + rise
    return np.zeros(0)


def _commanded(dev: str, info: dict, manifest: dict, tables: dict) -> np.ndarray:
    """When each row of a device's table is commanded (s): its tick, or for a wired device, from the edges the
    parent plays (a start edge; one step or clock edge per row after the first)."""
    ticks = tables[dev].ticks / info["timebase_hz"]
    wiring = info.get("wiring") or {}
    if "start_on" in wiring and "start_s" in wiring:
        edges = _rising_edges(wiring["start_on"], manifest, tables)
        if len(edges):
            start = edges[0] + wiring.get("start_latency_s", 0.0)
            after = ticks >= wiring["start_s"] - 1e-12
            ticks = np.where(after, start + ticks - wiring["start_s"], ticks)
    line = wiring.get("step_on") or wiring.get("clock_on")
    if line:
        edges = _rising_edges(line, manifest, tables) + wiring.get("step_latency_s", 0.0)
        rows = ticks.copy()
        n = min(len(edges), len(rows) - 1)
        rows[1:n + 1] = edges[:n]
        rows[n + 1:] = np.inf  # no edge left: the device stays on its last stepped row
        ticks = rows
    return ticks


def play(build, times, outputs=None) -> dict:
    """{output name: Waveform} of a build folder at `times` (s; any shape is flattened); `outputs`: the names
    to play (default: every column)."""
    manifest, tables = read_build(build)
    t = np.atleast_1d(np.asarray(times, dtype=float)).reshape(-1)
    result = {}
    commanded = {dev: _commanded(dev, info, manifest, tables) for dev, info in manifest["devices"].items()}
    for dev, info in manifest["devices"].items():
        table = tables[dev]
        linear = info["output_model"] == "linear"
        for j, col in enumerate(info["columns"]):
            name = col["name"]
            if outputs is not None and name not in outputs:
                continue
            vals = _column_values(col, table, j)
            cal = col.get("calibration")
            phys = to_physical(cal, vals)
            lat = col.get("latency_s") or {"rise": 0.0, "fall": 0.0}
            step = np.r_[0.0, np.diff(phys)]
            delay = np.where(step > 0, lat["rise"], np.where(step < 0, lat["fall"], 0.0))
            # unequal rise and fall latencies cannot reorder rows: a row appears no earlier than the one before
            appear = np.maximum.accumulate(commanded[dev] + delay)
            if linear and len(appear) > 1:
                out_t = np.interp(t, appear, vals)
                phys_t = np.interp(t, appear, phys) if cal is None or cal["kind"] == "linear" \
                    else to_physical(cal, out_t)
            else:
                i = np.maximum(np.searchsorted(appear, t, side="right") - 1, 0)
                out_t, phys_t = vals[i], phys[i]
            result[name] = Waveform(name, dev, col["unit"], col.get("physical_unit", col["unit"]), t, out_t, phys_t,
                                    appear, vals, phys, linear)
    return result
