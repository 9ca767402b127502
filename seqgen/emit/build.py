"""Write a build folder atomically and deterministically.

Layout: `manifest.json` plus, per device, `<device>.npz` (always) and
`<device>.csv` (unless the table is larger than the CSV row limit). Files are
written into a temporary sibling folder which is renamed into place only when
complete, so an interrupted build leaves either the old build or the new one.
An existing build is replaced only with `force=True`. No time stamps, host
names or absolute paths enter the files: the same input gives the same bytes.
"""

from __future__ import annotations

import errno
import hashlib
import json
import os
import shutil
import tempfile
import zipfile
from pathlib import Path

import numpy as np

from .. import __version__
from ..findings import Finding, summary
from ..model import Compiled, DeviceTable, Shot
from ..resolve.units import display_unit

FORMAT_VERSION = 1
CSV_ROW_LIMIT = 1_000_000
_ZIP_DATE = (1980, 1, 1, 0, 0, 0)


class BuildExists(Exception):
    pass


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


def table_arrays(table: DeviceTable) -> dict:
    return {
        "tick": table.ticks.astype(np.int64, copy=False),
        "time_s": table.ticks * table.tick_s,
        "values": table.values.astype(np.float64, copy=False),
        "columns": np.array(table.columns, dtype="U"),
        "units": np.array(table.units, dtype="U"),
    }


def write_csv(path: Path, table: DeviceTable) -> None:
    """CSV: tick, time_s, one column per output (digital as 0/1, others %.10g)."""
    header = ",".join(["tick", "time_s"] + [f"{c} [{u}]" if u else c for c, u in zip(table.columns, table.units)])
    fmt = ["%d", "%.12g"] + ["%d" if k == "digital" else "%.10g" for k in table.kinds]
    data = np.column_stack([table.ticks.astype(np.float64), table.ticks * table.tick_s, table.values])
    with open(path, "w", encoding="utf-8", newline="\n") as fh:
        fh.write(header + "\n")
        np.savetxt(fh, data, fmt=fmt, delimiter=",")


def file_sha256(path: Path) -> str:
    """sha256 of a file, read in 1 MiB chunks."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def manifest(shot: Shot, compiled: Compiled, findings: list[Finding], files: dict) -> dict:
    devices = {}
    for t in compiled.tables:
        dev = shot.rig.devices[t.device]
        devices[t.device] = {
            "timebase_hz": dev.timebase_hz,
            "output_model": dev.output_model,
            "rows": int(len(t.ticks)),
            "duration_s": float(t.ticks[-1] * t.tick_s) if len(t.ticks) else 0.0,
            "columns": [{"name": c, "unit": u, "kind": k} for c, u, k in zip(t.columns, t.units, t.kinds)],
            "files": files.get(t.device, {}),
        }
    return {
        "format": "seqgen-build",
        "format_version": FORMAT_VERSION,
        "tool": {"name": "seqgen", "version": __version__},
        "sequence": shot.file,
        "rig": {"name": shot.rig.name, "file": shot.rig.file, "sha256": shot.rig.sha256},
        "sources": {k: v for k, v in sorted(shot.sources.items())},
        "params": {p.name: {"value": p.value, "unit": display_unit(p.dims), "text": p.text} for p in shot.params},
        "duration_s": compiled.duration_s,
        "devices": devices,
        "findings": summary(findings),
        "findings_list": [f.to_dict() for f in findings],
    }


def write_build(out_dir: str | Path, shot: Shot, compiled: Compiled, findings: list[Finding], *, force: bool = False,
                csv_row_limit: int = CSV_ROW_LIMIT, _crash_after: int | None = None) -> Path:
    """Write the build; `_crash_after` (tests only) raises after that many table files."""
    out = Path(out_dir)
    if out.exists() and not force:
        raise BuildExists(f"{out} exists; use --force to replace it")
    out.parent.mkdir(parents=True, exist_ok=True)
    tmp = Path(tempfile.mkdtemp(prefix=f".{out.name}.tmp-", dir=out.parent))
    try:
        files: dict = {}
        written = 0
        for t in compiled.tables:
            entry = {}
            npz = tmp / f"{t.device}.npz"
            write_npz(npz, table_arrays(t))
            entry["npz"] = {"path": npz.name, "sha256": file_sha256(npz)}
            written += 1
            if _crash_after is not None and written > _crash_after:
                raise RuntimeError("simulated crash during build")
            if len(t.ticks) <= csv_row_limit:
                csv = tmp / f"{t.device}.csv"
                write_csv(csv, t)
                entry["csv"] = {"path": csv.name, "sha256": file_sha256(csv)}
            files[t.device] = entry
        man = manifest(shot, compiled, findings, files)
        (tmp / "manifest.json").write_text(json.dumps(man, indent=2, sort_keys=True) + "\n", encoding="utf-8")
        for f in tmp.iterdir():
            with open(f, "rb") as fh:
                os.fsync(fh.fileno())
        _swap_into_place(tmp, out)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    return out


_RENAME_EXCHANGE = 2  # renameat2(2) flag, Linux 3.15 and later


def _exchange(a: Path, b: Path) -> bool:
    """Swap two paths in one atomic step (renameat2 RENAME_EXCHANGE); False where unsupported."""
    try:
        import ctypes

        libc = ctypes.CDLL(None, use_errno=True)
        fn = libc.renameat2
    except (OSError, AttributeError):
        return False
    at_fdcwd = -100
    rc = fn(at_fdcwd, os.fsencode(str(a)), at_fdcwd, os.fsencode(str(b)), ctypes.c_uint(_RENAME_EXCHANGE))
    if rc == 0:
        return True
    err = ctypes.get_errno()
    if err in (errno.ENOSYS, errno.EINVAL, errno.ENOTSUP, errno.EOPNOTSUPP):  # kernel or file system without it
        return False
    raise OSError(err, os.strerror(err), str(b))


def _swap_into_place(tmp: Path, out: Path) -> None:
    if out.exists() and out.is_dir() and not out.is_symlink() and _exchange(tmp, out):
        # the new build and the previous one traded places at once: at every instant `out` is one of them
        shutil.rmtree(tmp, ignore_errors=True)
        os.chmod(out, 0o755)
        return
    if out.exists():
        # fallback (no atomic exchange): a kill between the two renames leaves the previous build in .NAME.old-*
        old = Path(tempfile.mkdtemp(prefix=f".{out.name}.old-", dir=out.parent))
        old.rmdir()
        os.rename(out, old)
        try:
            os.rename(tmp, out)
        except BaseException:
            os.rename(old, out)
            raise
        shutil.rmtree(old, ignore_errors=True)
    else:
        os.rename(tmp, out)
    os.chmod(out, 0o755)
