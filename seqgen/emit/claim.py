"""One writer per output: an exclusive claim on an output path, and whole reads of a build folder.

Every writer of an output (a build folder, a scan build folder, a picture of
`plot -o`, the report of `check --report`) holds the claim on it from its
"is it there?" check to the moment the new output is in place:

    with claimed(out, wait=force):       # raises OutputBusy when another process holds it
        if out.exists() and not force: ...refuse...
        ...write beside it, swap it in...

The claim is a flock(2) on the lock file `.NAME.lock` beside the output `NAME`;
the kernel drops it when the process dies, however it dies, so a killed writer
never blocks the next one (its lock file is reused, no clean-up by hand). The
holder writes its pid, host, command and start time into the file, so a
refused writer can name it. Without `wait` a held claim is refused at once;
with `wait` (`--force`) the writer waits for it, at most `wait_seconds()`
(60 s; `SEQGEN_LOCK_WAIT` sets another bound), saying so once on stderr. The
holder removes the lock file when it is done (while still holding the lock;
a writer that opened the removed file notices and opens the new one), so a
finished output has nothing beside it.

Where locks are not available (no fcntl, or a file system that refuses
flock) this says so once on stderr and writers go on without a claim, as
before: two of them may then both write.

Readers: `read_whole` opens every file of a build folder through one handle
on the folder, so a forced rebuild that swaps the folder meanwhile cannot mix
two builds (the reader sees the folder it opened, or starts again on the one
now in place); `await_writer` waits while the one moment without any folder
(a swap on a file system without an atomic exchange) passes.

Imports nothing else of seqgen.
"""

from __future__ import annotations

import errno
import json
import os
import socket
import sys
import time
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import Callable, Iterator, TypeVar

DEFAULT_WAIT_S = 60.0
_POLL_S = (0.02, 0.25)  # first and longest pause between two tries of a held lock
_UNSUPPORTED = {errno.ENOLCK, errno.EOPNOTSUPP, errno.ENOTSUP, errno.ENOSYS, errno.EINVAL}

T = TypeVar("T")


class OutputBusy(Exception):
    """Another process holds the claim on the output (refused: exit 2)."""


@dataclass(frozen=True)
class Claim:
    out: Path
    lock: Path
    fd: int | None  # None: written without a claim (locks not available here)


def lock_path(out: str | Path) -> Path:
    """The lock file of an output: `.NAME.lock` beside `NAME`."""
    out = Path(out)
    return out.parent / f".{out.name}.lock"


def wait_seconds() -> float:
    """How long a `--force` writer waits for another writer: SEQGEN_LOCK_WAIT seconds, else 60."""
    try:
        return max(0.0, float(os.environ.get("SEQGEN_LOCK_WAIT", DEFAULT_WAIT_S)))
    except ValueError:
        return DEFAULT_WAIT_S


# ----------------------------------------------------------------------------- taking and releasing a claim

_HELD: set[int] = set()  # fds of the claims this process holds
_WARNED = [False]


def _fcntl():
    try:
        import fcntl
    except ImportError:  # not a POSIX platform
        return None
    return fcntl


def _say_unlocked(out: Path, why: str) -> None:
    if not _WARNED[0]:
        _WARNED[0] = True
        print(f"seqgen: cannot lock {out} ({why}): two seqgen processes writing the same output at once are not "
              "kept apart here", file=sys.stderr)


def _command() -> str:
    argv = list(sys.argv)
    if argv and Path(argv[0]).name in ("__main__.py", "seqgen"):
        argv[0] = "seqgen"
    text = " ".join(argv)
    return text if len(text) <= 300 else text[:297] + "..."


def _holder_text(fd: int) -> str:
    """Who holds the lock, from what it wrote into the file ('' when it has not written yet)."""
    try:
        info = json.loads(os.pread(fd, 4096, 0).decode("utf-8", "replace"))
        return (f"pid {int(info['pid'])} on {info['host']}, since {info['since']}: {info['command']}")
    except (OSError, ValueError, KeyError, TypeError):
        return ""


def _describe(fd: int) -> str:
    for _ in range(5):  # the holder writes its name just after taking the lock
        text = _holder_text(fd)
        if text:
            return text
        time.sleep(0.02)
    return "a process that has not named itself yet"


def _same_file(fd: int, path: Path, follow: bool = False) -> bool:
    try:
        a, b = os.fstat(fd), os.stat(path, follow_symlinks=follow)
    except OSError:
        return False
    return (a.st_dev, a.st_ino) == (b.st_dev, b.st_ino)


def claim(out: str | Path, *, wait: bool = False, wait_s: float | None = None) -> Claim:
    """Take the exclusive claim on `out` (creating the lock file beside it; its folder must exist).

    Raises OutputBusy when another process holds it (with `wait`: still holds it after `wait_s`, default
    `wait_seconds()`); OSError when the lock file cannot be created (a read-only folder: the output could not be
    written either)."""
    out = Path(out)
    lock = lock_path(out)
    fcntl = _fcntl()
    if fcntl is None:
        _say_unlocked(out, "no file locks on this platform")
        return Claim(out, lock, None)
    limit = wait_seconds() if wait_s is None else wait_s
    deadline = time.monotonic() + limit
    pause, said = _POLL_S[0], False
    while True:
        fd = os.open(lock, os.O_RDWR | os.O_CREAT | getattr(os, "O_NOFOLLOW", 0) | getattr(os, "O_CLOEXEC", 0), 0o644)
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            holder = _describe(fd)
            os.close(fd)
            if not wait:
                raise OutputBusy(f"{out} is being written by another seqgen process ({holder}); it was left to "
                                 "that one: wait for it to finish, or use --force to wait and then replace its "
                                 "output") from None
            if time.monotonic() >= deadline:
                raise OutputBusy(f"{out} is still being written by another seqgen process ({holder}) after "
                                 f"{limit:g} s; nothing was written, try again once it is done") from None
            if not said:
                said = True
                print(f"seqgen: {out} is being written by another seqgen process ({holder}); waiting for it "
                      f"(at most {limit:g} s), then replacing its output",
                      file=sys.stderr)
            time.sleep(pause)
            pause = min(pause * 2, _POLL_S[1])
            continue
        except OSError as exc:
            os.close(fd)
            if exc.errno in _UNSUPPORTED:  # a file system without flock (some network mounts)
                _say_unlocked(out, f"the file system does not lock: {exc.strerror}")
                try:
                    os.unlink(lock)  # nothing left beside the output, as before
                except OSError:
                    pass
                return Claim(out, lock, None)
            raise
        if not _same_file(fd, lock):  # the previous holder removed the file we opened: open the one now there
            os.close(fd)
            continue
        info = {"pid": os.getpid(), "host": socket.gethostname(), "command": _command(),
                "since": time.strftime("%Y-%m-%d %H:%M:%S UTC", time.gmtime())}
        try:
            os.ftruncate(fd, 0)  # a killed holder's name may still be in it
            os.pwrite(fd, (json.dumps(info, sort_keys=True) + "\n").encode("utf-8"), 0)
        except OSError:  # a name we could not write only makes a refusal message vaguer
            pass
        _HELD.add(fd)
        return Claim(out, lock, fd)


def release(c: Claim) -> None:
    """Give the claim up: remove the lock file while still holding it, then close it."""
    if c.fd is None or c.fd not in _HELD:
        return
    try:
        if _same_file(c.fd, c.lock):
            os.unlink(c.lock)
    except OSError:
        pass
    finally:
        _HELD.discard(c.fd)
        os.close(c.fd)


@contextmanager
def claimed(out: str | Path, *, wait: bool = False, wait_s: float | None = None) -> Iterator[Claim]:
    c = claim(out, wait=wait, wait_s=wait_s)
    try:
        yield c
    finally:
        release(c)


def _forget_in_child() -> None:
    """A forked child (a scan's worker) drops its copies of the parent's claims: the claim then ends with the
    parent, even when the parent is killed while the child lives on."""
    for fd in list(_HELD):
        try:
            os.close(fd)
        except OSError:
            pass
    _HELD.clear()


if hasattr(os, "register_at_fork"):
    os.register_at_fork(after_in_child=_forget_in_child)


# ----------------------------------------------------------------------------- readers


def writer_active(out: str | Path) -> bool:
    """True while some process holds the claim on `out` (never creates the lock file)."""
    fcntl = _fcntl()
    if fcntl is None:
        return False
    try:
        fd = os.open(lock_path(out), os.O_RDONLY | getattr(os, "O_NOFOLLOW", 0) | getattr(os, "O_CLOEXEC", 0))
    except OSError:
        return False
    try:
        fcntl.flock(fd, fcntl.LOCK_SH | fcntl.LOCK_NB)
    except OSError as exc:
        return isinstance(exc, BlockingIOError)
    finally:
        os.close(fd)
    return False


def await_writer(out: str | Path, wait_s: float | None = None) -> bool:
    """While `out` is missing and a writer holds its claim, wait (at most `wait_s`, default `wait_seconds()`).
    True when `out` is there at the end."""
    out = Path(out)
    deadline = time.monotonic() + (wait_seconds() if wait_s is None else wait_s)
    pause = _POLL_S[0]
    while not os.path.lexists(out) and writer_active(out) and time.monotonic() < deadline:
        time.sleep(pause)
        pause = min(pause * 2, _POLL_S[1])
    return os.path.lexists(out)


def read_whole(folder: str | Path, read: Callable[[Callable[[str], object]], T], tries: int = 8) -> T:
    """`read(open_file)`, where `open_file(name)` opens a file of `folder` for reading in binary mode, every one
    through the same handle on the folder: all the files read come from one build even while a forced rebuild
    swaps another folder in. When a file is missing because the folder was swapped out meanwhile (and is being
    removed), `read` runs again on the folder now in place; a file missing from the folder still in place raises
    FileNotFoundError as usual."""
    folder = Path(folder)
    if os.open not in getattr(os, "supports_dir_fd", set()):  # no *at() calls here: plain paths
        return read(lambda name: open(folder / name, "rb"))
    attempt = 0
    while True:
        attempt += 1
        await_writer(folder)
        try:
            dfd = os.open(folder, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0) | getattr(os, "O_CLOEXEC", 0))
        except FileNotFoundError:  # swapped away again just now (no atomic exchange): wait for the next one
            if attempt >= tries or not writer_active(folder):
                raise
            continue
        try:
            return read(lambda name: open(name, "rb", opener=lambda p, flags: os.open(p, flags, dir_fd=dfd)))
        except FileNotFoundError:
            if attempt >= tries or _same_file(dfd, folder, follow=True):
                raise
        finally:
            os.close(dfd)
