"""Table writers: the file formats a build writes for each device table.

A writer is any object with
    name      its key under the device's `files` in manifest.json (and `tables` in scan.json): a lower-case word
    suffix    the file suffix: the file is `<device><suffix>`, e.g. ".npz"
    write(table, path)   writes the `DeviceTable` to `path`; the bytes depend only on the table (no time
              stamps, no host names, no absolute paths), so the same input gives the same build
and, optionally, `max_rows` (int or None): tables with more rows are not written in this format.

Writers are found through the entry-point group `seqgen.writers` (pyproject.toml,
`[project.entry-points."seqgen.writers"]`), each naming a writer object. The two built-in writers (npz, csv)
are always there, so a checkout that was never installed builds the same folder. `write_build` may also be
given an explicit tuple of writers; `select_writers("npz,hdf5")` picks them by name (`seqgen build --tables`),
among them the bundled HDF5 writer (seqgen/emit/hdf5.py, one file per build), chosen by name only. Scan builds
store their tables with `compact_writers` (npz deflated, csv gzipped).

A writer that raises, writes no file, or writes other bytes when asked twice is refused with a `WriterError`
naming it; the build folder is then left as it was (the build is written into a temporary folder).
"""

from __future__ import annotations

import difflib
import gzip
import hashlib
import itertools
import os
import re
import zipfile
from dataclasses import dataclass, replace
from functools import lru_cache
from pathlib import Path
from typing import Callable, Iterable, Protocol, runtime_checkable

import numpy as np

from ..model import DeviceTable
from .hdf5 import HDF5, INSTALL_HINT, h5py_available

ENTRY_POINT_GROUP = "seqgen.writers"
CSV_ROW_LIMIT = 1_000_000
CSV_CHUNK = 4096  # rows formatted at a time
_ZIP_DATE = (1980, 1, 1, 0, 0, 0)
NAME_PATTERN = re.compile(r"[a-z][a-z0-9_]{0,31}")  # also in schemas/manifest.schema.json and scan.schema.json
SUFFIX_PATTERN = re.compile(r"\.[A-Za-z0-9][A-Za-z0-9._-]{0,31}")


class WriterError(Exception):
    """A table writer is broken (raised, wrote no file, wrote other bytes twice) or not a writer at all."""


@runtime_checkable
class TableWriter(Protocol):
    name: str
    suffix: str

    def write(self, table: DeviceTable, path: Path) -> None: ...


@dataclass(frozen=True)
class Writer:
    """A table writer made of a function (the built-in ones are; a plugin may use it too)."""

    name: str
    suffix: str
    write: Callable[[DeviceTable, Path], None]
    max_rows: int | None = None


# ----------------------------------------------------------------------------- the built-in formats


def write_npz(path: Path, arrays: dict) -> None:
    """An .npz readable by numpy.load, with fixed zip time stamps (deterministic).

    Arrays are streamed into the archive, so writing needs no extra copy of a table.
    """
    with zipfile.ZipFile(path, "w", compression=zipfile.ZIP_STORED) as zf:
        for name, arr in arrays.items():
            info = zipfile.ZipInfo(f"{name}.npy", date_time=_ZIP_DATE)
            info.external_attr = 0o644 << 16
            with zf.open(info, "w", force_zip64=True) as fh:
                np.lib.format.write_array(fh, np.ascontiguousarray(arr), allow_pickle=False)


def table_codes(table: DeviceTable) -> np.ndarray:
    """The table's integer codes (int64, rows x columns); a table compiled without them gets zeros."""
    if table.codes is None:
        return np.zeros(np.shape(table.values), dtype=np.int64)
    return np.asarray(table.codes).astype(np.int64, copy=False)


def table_arrays(table: DeviceTable) -> dict:
    return {
        "tick": table.ticks.astype(np.int64, copy=False),
        "time_s": table.ticks * table.tick_s,
        "values": table.values.astype(np.float64, copy=False),
        "codes": table_codes(table),
        "columns": np.array(table.columns, dtype="U"),
        "units": np.array(table.units, dtype="U"),
    }


def write_csv(path: Path, table: DeviceTable) -> None:
    """CSV: tick, time_s, one column per output (digital as 0/1, others %.10g), then one code column per
    output (`<column> [code]`, the integer the hardware takes)."""
    header = ",".join(["tick", "time_s"] + [f"{c} [{u}]" if u else c for c, u in zip(table.columns, table.units)]
                      + [f"{c} [code]" for c in table.columns])
    fmt = ["%d", "%.12g"] + ["%d" if k == "digital" else "%.10g" for k in table.kinds] + ["%d"] * len(table.columns)
    row = ",".join(fmt) + "\n"
    times = table.ticks * table.tick_s
    codes = table_codes(table)
    with open(path, "w", encoding="utf-8", newline="\n") as fh:
        fh.write(header + "\n")
        # one %-format per chunk of rows: the same text as formatting row by row, several times faster;
        # ticks and codes stay Python ints (exact beyond 2^53)
        for a in range(0, len(table.ticks), CSV_CHUNK):
            b = a + CSV_CHUNK
            cols = [table.ticks[a:b].tolist(), times[a:b].tolist(), *table.values[a:b].T.tolist(),
                    *codes[a:b].T.tolist()]
            fh.write((row * len(cols[0])) % tuple(itertools.chain.from_iterable(zip(*cols))))


def _npz_table(table: DeviceTable, path: Path) -> None:
    write_npz(path, table_arrays(table))  # looked up at call time, so tests can stand in for write_npz


def _csv_table(table: DeviceTable, path: Path) -> None:
    write_csv(path, table)


NPZ = Writer("npz", ".npz", _npz_table)
CSV = Writer("csv", ".csv", _csv_table, max_rows=CSV_ROW_LIMIT)
BUILTIN = (NPZ, CSV)
_TESTED = (_npz_table, _csv_table)  # their determinism is tested, so a build does not write them twice


# ----------------------------------------------------------------------------- compact forms (scan builds)


def _npz_compressed_table(table: DeviceTable, path: Path) -> None:
    """The npz arrays, deflated (fixed level and zip time stamps: deterministic bytes); numpy.load reads it."""
    with zipfile.ZipFile(path, "w", compression=zipfile.ZIP_DEFLATED, compresslevel=6) as zf:
        for name, arr in table_arrays(table).items():
            info = zipfile.ZipInfo(f"{name}.npy", date_time=_ZIP_DATE)
            info.external_attr = 0o644 << 16
            info.compress_type = zipfile.ZIP_DEFLATED
            with zf.open(info, "w", force_zip64=True) as fh:
                np.lib.format.write_array(fh, np.ascontiguousarray(arr), allow_pickle=False)


def _csv_gz_table(table: DeviceTable, path: Path) -> None:
    """The csv text, gzipped without a file name or time stamp (mtime 0): deterministic bytes."""
    part = path.with_name(f".{path.name}.csv")
    try:
        write_csv(part, table)
        with open(part, "rb") as src, open(path, "wb") as raw, \
                gzip.GzipFile(filename="", mode="wb", fileobj=raw, mtime=0, compresslevel=6) as gz:
            for chunk in iter(lambda: src.read(1 << 20), b""):
                gz.write(chunk)
    finally:
        if part.exists():
            os.unlink(part)


NPZ_COMPRESSED = Writer("npz", ".npz", _npz_compressed_table)
CSV_GZ = Writer("csv", ".csv.gz", _csv_gz_table, max_rows=CSV_ROW_LIMIT)
_TESTED += (_npz_compressed_table, _csv_gz_table)
_COMPACT = {"npz": NPZ_COMPRESSED, "csv": CSV_GZ}


def compact_writers(writers: tuple) -> tuple:
    """The writers a scan build stores its tables with: the built-in npz and csv writers compressed (npz
    deflated, csv gzipped as .csv.gz); every other writer as it is (HDF5 compresses its datasets itself)."""
    out = []
    for w in writers:
        builtin = isinstance(w, Writer) and any(w.write is b.write for b in BUILTIN)
        out.append(replace(_COMPACT[w.name], max_rows=w.max_rows) if builtin else w)
    return tuple(out)


# ----------------------------------------------------------------------------- finding and checking writers


def check_writers(writers: Iterable) -> tuple:
    """The writers as a tuple, after checking each has a valid name, suffix and write, all names and suffixes
    distinct; else WriterError."""
    out = tuple(writers)
    if not out:
        raise WriterError("no table writer given: a build needs at least one")
    names, suffixes = set(), set()
    for w in out:
        label = repr(getattr(w, "name", w))
        if is_build_file_writer(w):
            pass
        elif not isinstance(w, TableWriter) or not callable(w.write):
            raise WriterError(f"table writer {label} is not a writer: it needs a name, a suffix and write(table, "
                              "path) (see seqgen/emit/writers.py)")
        if not isinstance(w.name, str) or not NAME_PATTERN.fullmatch(w.name):
            raise WriterError(f"table writer {label}: its name must be a lower-case word ({NAME_PATTERN.pattern})")
        if not isinstance(w.suffix, str) or not SUFFIX_PATTERN.fullmatch(w.suffix) or w.suffix == ".json":
            raise WriterError(f"table writer {label}: suffix {w.suffix!r} is not a file suffix like '.npz' "
                              "(.json is the manifest's)")
        limit = getattr(w, "max_rows", None)
        if limit is not None and (isinstance(limit, bool) or not isinstance(limit, int) or limit < 0):
            raise WriterError(f"table writer {label}: max_rows must be a whole number >= 0 or None")
        if w.name in names or w.suffix.lower() in suffixes:
            raise WriterError(f"two table writers share the name {w.name!r} or the suffix {w.suffix!r}")
        names.add(w.name)
        suffixes.add(w.suffix.lower())
    return out


def is_build_file_writer(w) -> bool:
    """A writer of one file per build holding every table (the HDF5 writer): `write_tables(tables,
    manifest_text, path)` and a file `stem`, instead of `write(table, path)`."""
    return callable(getattr(w, "write_tables", None)) and isinstance(getattr(w, "stem", None), str)


def declared_entry_points() -> tuple:
    """The entry points of the group `seqgen.writers` of the installed distributions."""
    # the one place seqgen imports by name: entry points are how an installed package offers a writer
    from importlib.metadata import entry_points

    return tuple(entry_points(group=ENTRY_POINT_GROUP))


def load_writers(entry_points: Iterable) -> tuple:
    """The built-in writers, then the writer each entry point names (sorted by entry-point name); an entry
    point naming a built-in writer adds nothing. A writer that fails to load is a WriterError."""
    out = list(BUILTIN)
    for ep in sorted(entry_points, key=lambda e: (e.name, e.value)):
        try:
            w = ep.load()
        except Exception as exc:  # any error inside a plugin's module: say which entry point
            raise WriterError(f"table writer entry point {ep.name} = {ep.value} (group {ENTRY_POINT_GROUP}) "
                              f"does not load: {type(exc).__name__}: {exc}") from exc
        if any(w is b for b in out):
            continue
        try:
            check_writers((w,))
        except WriterError as exc:
            raise WriterError(f"{exc} (entry point {ep.name} = {ep.value}, group {ENTRY_POINT_GROUP})") from None
        out.append(w)
    return check_writers(out)


@lru_cache(maxsize=1)
def available_writers() -> tuple:
    """The writers a build uses by default: the built-in ones and every installed `seqgen.writers` entry point
    (looked up once per process)."""
    return load_writers(declared_entry_points())


OPTIONAL = {HDF5.name: HDF5}  # bundled, chosen by name only (their library is an optional extra)


def writer_names() -> tuple:
    """Every name `--tables` accepts: the available writers and the bundled optional ones."""
    return tuple(sorted({w.name for w in available_writers()} | set(OPTIONAL)))


def select_writers(names) -> tuple:
    """The writers called `names` (a comma-separated text like "npz,hdf5", or an iterable of names), in that
    order; None: the default set (`available_writers`). An unknown name, or HDF5 without h5py, is a WriterError
    that says what to write or install."""
    if names is None:
        return available_writers()
    wanted = [n.strip() for n in (names.split(",") if isinstance(names, str) else names)]
    wanted = list(dict.fromkeys(n for n in wanted if n))
    if not wanted:
        raise WriterError(f"--tables names no table writer; give one or more of {', '.join(writer_names())}")
    known = {w.name: w for w in available_writers()}
    out = []
    for n in wanted:
        w = known.get(n) or OPTIONAL.get(n)
        if w is None:
            close = difflib.get_close_matches(n.lower(), writer_names(), n=3, cutoff=0.5)
            raise WriterError(f"unknown table writer {n!r} (--tables)"
                              + (f"; did you mean {' or '.join(close)}?" if close else ".")
                              + f" Known: {', '.join(writer_names())} (a package adds more through the entry-point "
                              f"group {ENTRY_POINT_GROUP})")
        if w is HDF5 and not h5py_available():
            raise WriterError(f"table writer 'hdf5' needs the h5py package, which is not installed: {INSTALL_HINT}")
        out.append(w)
    return check_writers(out)


def with_row_limit(writers: tuple, name: str, limit: int | None) -> tuple:
    """`writers` with the writer called `name` (a `Writer`) limited to `limit` rows."""
    return tuple(replace(w, max_rows=limit) if isinstance(w, Writer) and w.name == name else w for w in writers)


def file_sha256(path: Path) -> str:
    """sha256 of a file, read in 1 MiB chunks."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def writes_table(writer, table: DeviceTable) -> bool:
    limit = getattr(writer, "max_rows", None)
    return limit is None or len(table.ticks) <= limit


def run_writer(writer, table: DeviceTable, path: Path) -> str:
    """Write `table` to `path` with `writer`; the file's sha256.

    A writer not built in writes the table a second time, to another name in the same folder, and the two must
    be the same bytes (this catches random bytes, the file's own path and fine time stamps in the file).
    An OSError (a full disk) passes unchanged; any other error is a WriterError naming the writer.
    """
    sha = _write_once(writer, table, path)
    if not any(getattr(writer, "write", None) is f for f in _TESTED):
        again = path.with_name(f".again.{path.name}")
        try:
            if _write_once(writer, table, again) != sha:
                raise WriterError(f"table writer {writer.name!r} wrote different bytes for the same table "
                                  f"({table.device}) twice: its output must depend on the table only (no time "
                                  "stamps, random numbers or paths)")
        finally:
            if again.exists():
                os.unlink(again)
    return sha


def run_build_file_writer(writer, tables, manifest_text: str, path: Path) -> str:
    """Write every table of a build into one file with a build-file writer (HDF5); the file's sha256.
    Errors as for run_writer."""
    try:
        writer.write_tables(tuple(tables), manifest_text, path)
    except OSError:
        raise
    except Exception as exc:  # a bug in the writer or its library: say whose
        raise WriterError(f"table writer {writer.name!r} failed: {type(exc).__name__}: {exc}") from exc
    if path.is_symlink() or not path.is_file():
        raise WriterError(f"table writer {writer.name!r} wrote no file {path.name}")
    return file_sha256(path)


def _write_once(writer, table: DeviceTable, path: Path) -> str:
    try:
        writer.write(table, path)
    except OSError:
        raise
    except Exception as exc:  # a plugin's bug: say whose
        raise WriterError(f"table writer {writer.name!r} failed on device {table.device}: "
                          f"{type(exc).__name__}: {exc}") from exc
    if path.is_symlink() or not path.is_file():
        raise WriterError(f"table writer {writer.name!r} wrote no file {path.name} for device {table.device}")
    return file_sha256(path)
