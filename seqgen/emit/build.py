"""Write a build folder atomically and deterministically.

Layout: `manifest.json` plus, per device, one file per table writer
(seqgen/emit/writers.py): by default `<device>.npz` (always) and `<device>.csv`
(unless the table is larger than the CSV row limit). Files are
written into a temporary sibling folder which is renamed into place only when
complete, so an interrupted build leaves either the old build or the new one.
The temporary folder is `.NAME.tmp/<pid>-<random>/` beside the output `NAME`
(one staging folder per output, so finding leftovers never lists a parent that
holds thousands of scan shots); the writer holds an exclusive lock on it while
it writes. A build killed mid-write leaves its temporary folder behind: the
next build of the same output removes it once its writer's process is gone and
nobody holds its lock (`remove_stale_temporaries`).
An existing build is replaced only with `force=True`, and only one process
writes an output at a time: the check-then-write holds the claim on it
(seqgen/emit/claim.py; another writer is refused, or with force waits for it).
The swap is one atomic exchange (renameat2) where the kernel has it, so a
reader sees the old build or the new one, never a mix. No time stamps, host
names or absolute paths enter the files: the same input gives the same bytes.
"""

from __future__ import annotations

import errno
import json
import os
import re
import shutil
import tempfile
from pathlib import Path

from ..version import __version__
from ..caution import CAUTION
from ..findings import Finding, summary
from ..model import Compiled, Shot
from ..resolve.units import display_unit
from .claim import OutputBusy, claimed  # noqa: F401  (OutputBusy re-exported for callers of write_build)
from .writers import CSV_ROW_LIMIT, WriterError, available_writers, check_writers, is_build_file_writer, \
    run_build_file_writer, run_writer, with_row_limit, writes_table

FORMAT_VERSION = 1


class BuildExists(Exception):
    pass


def manifest(shot: Shot, compiled: Compiled, findings: list[Finding], files: dict) -> dict:
    devices = {}
    for t in compiled.tables:
        dev = shot.rig.devices[t.device]
        devices[t.device] = {
            "timebase_hz": dev.timebase_hz,
            "output_model": dev.output_model,
            "rows": int(len(t.ticks)),
            "duration_s": float(t.ticks[-1] * t.tick_s) if len(t.ticks) else 0.0,
            "columns": [_column(shot.rig.outputs.get(c), c, u, k) for c, u, k in zip(t.columns, t.units, t.kinds)],
            "files": files.get(t.device, {}),
        }
        wiring = _wiring(dev, compiled)
        if wiring:  # a free-running device (the default) has none: unwired rigs keep their manifests
            devices[t.device]["wiring"] = wiring
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
        "caution": CAUTION,
    }


def _wiring(dev, compiled) -> dict:
    """How a wired device runs (README "Wiring"): its table keeps the shot's ticks; a triggered one starts at
    start_s (its rows before that are what it is armed with), a stepped or clocked one moves one row per edge."""
    out = {}
    if dev.start_on:
        out["start_on"] = dev.start_on
        out["start_latency_s"] = dev.start_latency_s
        if dev.name in compiled.starts:
            out["start_s"] = compiled.starts[dev.name]
    if dev.step_on:
        out["step_on"] = dev.step_on
        out["step_latency_s"] = dev.step_latency_s
    if dev.clock_on:
        out["clock_on"] = dev.clock_on
        out["clock_max_hz"] = dev.clock_max_hz
    if out:
        for key, value in (("min_trigger_period_s", dev.min_trigger_period_s),
                           ("min_trigger_pulse_s", dev.min_trigger_pulse_s), ("trigger_jitter_s", dev.trigger_jitter_s)):
            if value:
                out[key] = value
    return out


def _column(out, name: str, unit: str, kind: str) -> dict:
    """A table column in the manifest: what a loader needs to send it and to read it back in physical units
    (the code convention, the channel's latency and calibration); see README, "Build folder"."""
    col = {"name": name, "unit": unit, "kind": kind}
    if out is None:
        return col
    digital = out.kind == "digital"
    col["code"] = {"convention": out.code_convention, "bits": 1 if digital else int(out.bits or 0),
                   "lsb": 1.0 if digital else out.lsb, "zero": out.code_zero}
    col["range"] = [out.lo, out.hi]
    col["latency_s"] = {"rise": out.latency_rise_s, "fall": out.latency_fall_s}
    col["physical_unit"] = out.phys_unit
    cal = out.calibration
    if cal is None:
        col["calibration"] = None
    elif cal.kind == "linear":
        col["calibration"] = {"kind": "linear", "slope": cal.slope, "offset": cal.offset}
    else:
        col["calibration"] = {"kind": "table", "physical": list(cal.table_phys), "output": list(cal.table_out)}
    return col


def write_build(out_dir: str | Path, shot: Shot, compiled: Compiled, findings: list[Finding], *, force: bool = False,
                csv_row_limit: int = CSV_ROW_LIMIT, writers: tuple | None = None, claim: bool = True,
                store=None) -> Path:
    """Write the build: per device table one file per writer (default: the built-in npz and csv writers and
    every installed `seqgen.writers` entry point, see seqgen/emit/writers.py), then manifest.json.

    `csv_row_limit`: larger tables get no .csv. A broken writer raises WriterError and leaves `out_dir` as it was.
    The whole check-then-write runs under the exclusive claim on `out_dir` (seqgen/emit/claim.py): another
    process holding it raises OutputBusy, or with `force` is waited for (bounded) and then replaced. `claim=False`:
    the caller holds a claim that covers `out_dir` (a scan build's, for its shot folders).
    `store`: where the table files go instead of the build folder (a scan build's shared tables, seqgen/scan/
    tables.py): called as store(written_file, sha256, suffix) once a file is written, it moves the file and returns
    its manifest entry ({"path": relative to the build folder, "sha256"}).
    """
    out = Path(out_dir)
    writers = with_row_limit(check_writers(available_writers() if writers is None else writers), "csv",
                             csv_row_limit)
    if out.exists() and not force:  # the quick answer; asked again under the claim
        raise BuildExists(f"{out} exists; use --force to replace it")
    if not claim:
        return _write_claimed(out, shot, compiled, findings, force, writers, store)
    out.parent.mkdir(parents=True, exist_ok=True)
    with claimed(out, wait=force):  # of two processes writing `out` at once, one writes; OutputBusy for the other
        return _write_claimed(out, shot, compiled, findings, force, writers, store)


def _write_claimed(out: Path, shot: Shot, compiled: Compiled, findings: list[Finding], force: bool,
                   writers: tuple, store=None) -> Path:
    """The check-then-write of a build, run while this process holds the claim on `out`."""
    if out.exists() and not force:
        raise BuildExists(f"{out} exists; use --force to replace it")
    out.parent.mkdir(parents=True, exist_ok=True)
    remove_stale_temporaries(out)
    tmp = _new_temporary(out)
    lock = _hold_lock(tmp)
    try:
        def listed(path: Path, sha: str, suffix: str) -> dict:
            return {"path": path.name, "sha256": sha} if store is None else store(path, sha, suffix)

        files: dict = {}
        for t in compiled.tables:
            entry = {}
            for w in writers:
                if not is_build_file_writer(w) and writes_table(w, t):
                    path = tmp / f"{t.device}{w.suffix}"
                    entry[w.name] = listed(path, run_writer(w, t, path), w.suffix)
            files[t.device] = entry
        man = manifest(shot, compiled, findings, files)
        for w in writers:  # one file for every table (HDF5): it holds the manifest as it stands without it
            if is_build_file_writer(w):
                path = tmp / f"{w.stem}{w.suffix}"
                text = json.dumps(man, indent=2, sort_keys=True) + "\n"
                entry = listed(path, run_build_file_writer(w, compiled.tables, text, path), w.suffix)
                for t in compiled.tables:
                    files[t.device][w.name] = dict(entry)
        _only_listed(tmp, files, {w.name for w in writers if is_build_file_writer(w)})
        man = manifest(shot, compiled, findings, files)
        (tmp / "manifest.json").write_text(json.dumps(man, indent=2, sort_keys=True) + "\n", encoding="utf-8")
        for f in tmp.iterdir():
            with open(f, "rb") as fh:
                os.fsync(fh.fileno())
        _swap_into_place(tmp, out)
    except BaseException as exc:
        shutil.rmtree(tmp, ignore_errors=True)
        if isinstance(exc, WriterError):
            raise WriterError(f"{exc}; {out} was not written (a build already there is left as it was)") from exc
        raise
    finally:
        if lock is not None:
            os.close(lock)
        _drop_staging(out)
    return out


def _only_listed(tmp: Path, files: dict, whole: set = frozenset()) -> None:
    """Every file in the build is listed in its manifest: a writer that left others behind is refused (two
    devices whose file names collide are caught here too)."""
    # a file of a build-file writer (`whole`: HDF5) is listed under every device; shared tables live outside
    local = [(w, e["path"]) for entry in files.values() for w, e in entry.items() if "/" not in e["path"]]
    listed = [p for w, p in local if w not in whole] + sorted({p for w, p in local if w in whole})
    extra = sorted({p.name for p in tmp.iterdir()} - set(listed))
    if extra or len(set(listed)) != len(listed):
        raise WriterError("the table writers left files the manifest would not list: "
                          + (", ".join(extra) if extra else "two tables share a file name"))


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
