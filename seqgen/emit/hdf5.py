"""The HDF5 writer: one file per build (`tables.h5`), one group per device.

Each group `/<device>` holds the datasets `ticks` (int64), `time` (float64, s), `values` (float64, rows x
columns, output units) and `codes` (int64 DAC codes, rows x columns) when the table carries them; the group's
attributes give `columns`, `units`, `kinds` and `tick_s`. The root's attribute `manifest` is the build's
manifest.json text as it stands before this file is listed in it (a file cannot hold its own hash).

The bytes depend on the tables only: no object modification times (track_times=False), creation order tracked
(track_order=True, so names never depend on hashing), a fixed file format (libver fixed) and gzip with a fixed
level. h5py is an optional extra: `pip install 'seqgen[hdf5]'`.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

INSTALL_HINT = "pip install 'seqgen[hdf5]'  (or: pip install h5py)"
FILE_STEM = "tables"  # the file is tables.h5 in the build folder
_LIBVER = ("v110", "v110")  # fixed file format: the same bytes with any newer library
_GZIP_LEVEL = 4


def h5py_available() -> bool:
    try:
        import h5py  # noqa: F401  (optional extra: only asked whether it is there)
    except ImportError:
        return False
    return True


def _text(items) -> np.ndarray:
    return np.array([str(s).encode("utf-8") for s in items], dtype=object)


def write_tables(tables, manifest_text: str, path: Path) -> None:
    """All device tables of one build into one HDF5 file at `path`."""
    import h5py  # optional extra, looked up only when an HDF5 file is written

    utf8 = h5py.string_dtype("utf-8")
    with h5py.File(path, "w", libver=_LIBVER, track_order=True) as f:
        f.attrs.create("manifest", manifest_text, dtype=utf8)
        f.attrs.create("format", "seqgen-tables", dtype=utf8)
        for t in sorted(tables, key=lambda t: t.device):
            g = f.create_group(t.device, track_order=True)
            g.attrs.create("columns", _text(t.columns), dtype=utf8)
            g.attrs.create("units", _text(t.units), dtype=utf8)
            g.attrs.create("kinds", _text(t.kinds), dtype=utf8)
            g.attrs.create("tick_s", float(t.tick_s))
            ticks = np.ascontiguousarray(t.ticks, dtype=np.int64)
            arrays = {"ticks": ticks, "time": ticks * t.tick_s,
                      "values": np.ascontiguousarray(t.values, dtype=np.float64).reshape(len(ticks), -1)}
            codes = getattr(t, "codes", None)
            if codes is not None:
                arrays["codes"] = np.ascontiguousarray(codes, dtype=np.int64).reshape(len(ticks), -1)
            for name, arr in arrays.items():
                # an empty dataset cannot be chunked; any other is gzipped in chunks of its natural shape
                opts = {"compression": "gzip", "compression_opts": _GZIP_LEVEL, "shuffle": True} if arr.size else {}
                g.create_dataset(name, data=arr, track_times=False, **opts)


@dataclass(frozen=True)
class BuildFileWriter:
    """A writer of one file holding every table of a build (`<stem><suffix>` in the build folder)."""

    name: str
    suffix: str
    write_tables: object  # (tables, manifest_text, path) -> None
    stem: str = FILE_STEM


HDF5 = BuildFileWriter("hdf5", ".h5", write_tables)
