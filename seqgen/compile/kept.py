"""Sampled ramps kept on disk between runs: a fresh process reads a long ramp's rows instead of sampling it again.

Sampling a ramp of a million device ticks (an evaporation of seconds on a 1 us card) takes tens of
milliseconds, because every tick is checked against the curve; a check run on every save of a file would pay it
each time for ramps that did not change. The rows are stored by `seqgen.physics.stored` under a key that holds
every input of the sampling, each float to the last bit, and the code that samples (`stored.code_stamp`), so
a changed ramp, output, device or seqgen never reads old rows. Only ramps of at least MIN_TICKS ticks and at
most MAX_ROWS rows are kept (shorter ones sample faster than a file is read; a ramp of more rows, e.g. a sweep
with a row per tick, would make a file of megabytes); the folder keeps at most MAX_FILES of them (the
demo's evaporation ramps take about 190 kB each: tens of MB at most).
"""

from __future__ import annotations

import base64
import zlib

import numpy as np

from ..physics import stored

FOLDER = "ramps"
MIN_TICKS = 50_000
MAX_ROWS = 50_000  # about 0.6 MB of file at most
MAX_FILES = 256


def key(parts: tuple, k0: int, k1: int) -> str | None:
    """The disk key of a sampling with these inputs, or None when it is too short to keep or an input cannot be
    written exactly."""
    if k1 - k0 < MIN_TICKS:
        return None
    text = stored.exact(parts)
    return None if text is None else f"ramp|{stored.code_stamp()}|{text}"


def _pack(a: np.ndarray) -> str:
    return base64.b64encode(zlib.compress(np.ascontiguousarray(a).tobytes(), 1)).decode("ascii")


def _unpack(text: str, dtype) -> np.ndarray:
    return np.frombuffer(zlib.decompress(base64.b64decode(text.encode("ascii"))), dtype=dtype).copy()


def read(disk_key: str):
    """(ticks, values, largest error, limited) stored under `disk_key`, or None."""
    doc = stored.read(FOLDER, disk_key)
    try:
        ticks = _unpack(doc["ticks"], np.int64)
        values = _unpack(doc["values"], np.float64)
        err, limited = float(doc["err"]), bool(doc["limited"])
    except (TypeError, KeyError, ValueError, zlib.error):  # missing, or not a file of ours
        return None
    if len(ticks) != len(values) or len(ticks) == 0:
        return None
    return ticks, values, err, limited


def write(disk_key: str, value) -> None:
    ticks, values, err, limited = value
    if len(ticks) > MAX_ROWS:
        return
    stored.write(FOLDER, disk_key, {"ticks": _pack(np.asarray(ticks, np.int64)),
                                    "values": _pack(np.asarray(values, np.float64)),
                                    "err": float(err), "limited": bool(limited)}, keep=MAX_FILES)
