"""Write a build folder atomically and deterministically.

Layout: `manifest.json` plus, per device, `<device>.npz` (always) and
`<device>.csv` (unless the table is larger than the CSV row limit). Files are
written into a temporary sibling folder which is renamed into place only when
complete, so an interrupted build leaves either the old build or the new one.
The temporary folder is `.NAME.tmp/<pid>-<random>/` beside the output `NAME`
(one staging folder per output, so finding leftovers never lists a parent that
holds thousands of scan shots); the writer holds an exclusive lock on it while
it writes. A build killed mid-write leaves its temporary folder behind: the
next build of the same output removes it once its writer's process is gone and
nobody holds its lock (`remove_stale_temporaries`).
An existing build is replaced only with `force=True`. No time stamps, host
names or absolute paths enter the files: the same input gives the same bytes.
"""

from __future__ import annotations

import errno
import hashlib
import itertools
import json
import os
import re
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
_CSV_CHUNK = 4096  # rows formatted at a time
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
    row = ",".join(fmt) + "\n"
    times = table.ticks * table.tick_s
    with open(path, "w", encoding="utf-8", newline="\n") as fh:
        fh.write(header + "\n")
        # one %-format per chunk of rows: the same text as formatting row by row, several times faster;
        # ticks stay Python ints (exact beyond 2^53)
        for a in range(0, len(table.ticks), _CSV_CHUNK):
            b = a + _CSV_CHUNK
            cols = [table.ticks[a:b].tolist(), times[a:b].tolist(), *table.values[a:b].T.tolist()]
            fh.write((row * len(cols[0])) % tuple(itertools.chain.from_iterable(zip(*cols))))


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
    remove_stale_temporaries(out)
    tmp = _new_temporary(out)
    lock = _hold_lock(tmp)
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
    finally:
        if lock is not None:
            os.close(lock)
        _drop_staging(out)
    return out


# ----------------------------------------------------------------------------- temporary folders

_TEMP_NAME = re.compile(r"(\d{1,10})-[a-z0-9_]{8}")  # tempfile.mkdtemp(prefix="<pid>-"): 8 characters follow


def staging_folder(out: Path) -> Path:
    """Where the temporary folders of builds of `out` live: `.NAME.tmp/` beside it."""
    return out.parent / f".{out.name}.tmp"


def _new_temporary(out: Path) -> Path:
    """A fresh `.NAME.tmp/<pid>-<random>/` folder (the staging folder is created as needed)."""
    staging = staging_folder(out)
    try:
        for _ in range(8):
            if staging.is_symlink() or (staging.exists() and not staging.is_dir()):
                raise FileExistsError(errno.EEXIST, f"{staging.name} is in the way of the temporary folder "
                                      "(not a folder); remove it", str(staging))
            staging.mkdir(exist_ok=True)
            try:
                return Path(tempfile.mkdtemp(prefix=f"{os.getpid()}-", dir=staging))
            except FileNotFoundError:  # another build of this output removed the empty staging folder just now
                continue
        raise OSError(errno.EAGAIN, "the staging folder keeps vanishing (another build of the same output?)",
                      str(staging))
    except BaseException:
        _drop_staging(out)
        raise


def _hold_lock(folder: Path) -> int | None:
    """An exclusive flock(2) on the folder for as long as this build writes it; the kernel drops it when the
    process dies, however it dies. None where locks are not available (the pid in the name still protects it)."""
    try:
        import fcntl

        fd = os.open(folder, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0))
    except (ImportError, OSError):
        return None
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except OSError:
        os.close(fd)
        return None
    return fd


def _drop_staging(out: Path) -> None:
    """Remove the staging folder when it is empty (another build may still be using it: then it stays)."""
    try:
        os.rmdir(staging_folder(out))
    except OSError:
        pass


def _pid_alive(pid: int) -> bool:
    """True unless the process surely does not exist (conservative: a reused pid counts as alive)."""
    if pid <= 0:
        return True
    try:
        os.kill(pid, 0)  # signal 0: existence check only (POSIX kill(2))
    except ProcessLookupError:
        return False
    except (OSError, OverflowError):  # EPERM: it exists, owned by someone else; a number too large: not ours
        return True
    return True


def remove_stale_temporaries(out: str | Path) -> list[Path]:
    """Remove the temporary folders that killed builds of `out` left behind; return the ones removed.

    Only `.NAME.tmp/<pid>-<random>` folders of this output are candidates (no other
    name, no symbolic link), and one is removed only when the process named by its
    pid is gone and no one holds its lock (a writer on another machine sharing the
    folder holds its lock; a pid reused since counts as alive and the folder stays).
    """
    staging = staging_folder(Path(out))
    removed: list[Path] = []
    try:
        if staging.is_symlink() or not staging.is_dir():
            return removed
        entries = list(os.scandir(staging))
    except OSError:
        return removed
    for entry in entries:
        m = _TEMP_NAME.fullmatch(entry.name)
        try:
            if not m or entry.is_symlink() or not entry.is_dir(follow_symlinks=False):
                continue
        except OSError:
            continue
        if _pid_alive(int(m.group(1))):
            continue
        path = Path(entry.path)
        fd = _try_lock(path)
        if fd is None:  # a live writer holds it, or it cannot be told
            continue
        try:
            shutil.rmtree(path, ignore_errors=True)
        finally:
            os.close(fd)
        if not path.exists():
            removed.append(path)
    return removed


def _try_lock(folder: Path) -> int | None:
    """An fd holding the folder's lock when nobody else holds it; None when someone does (or it cannot be told)."""
    try:
        fd = os.open(folder, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0) | getattr(os, "O_NOFOLLOW", 0))
    except OSError:
        return None
    try:
        import fcntl
    except ImportError:  # no flock on this platform: the dead pid alone decides
        return fd
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except OSError:  # EWOULDBLOCK: held by a live writer; anything else: cannot tell, keep it
        os.close(fd)
        return None
    return fd


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
