"""`seqgen check FILE --watch`: check a sequence again whenever it, a file it uses or its rig changes, and say
what changed since the last check (the findings that appeared and those that went away).

With watchfiles installed (`pip install 'seqgen[watch]'`) the watch waits for the operating system's change
notifications on the files' folders, so a save is checked at once; it still compares the files' modification
times and sizes after every wake-up and at least every 2 s, so a change the notifications miss (a network
share, a change between two waits) is checked too. Without watchfiles the files are polled twice a second
(standard library only). The fingerprint is taken before each check, so a change during a check triggers the
next one.
"""

from __future__ import annotations

import time
from dataclasses import dataclass
from pathlib import Path
from typing import Callable, Iterator

from .findings import Finding

__all__ = ["Change", "watch", "watched_files", "finding_key", "event_wait"]

POLL_S = 0.5  # between looks at the files: a save shows up within half a second


@dataclass(frozen=True)
class Change:
    """One check of a watch: every finding, and those new or resolved since the previous check (all of them
    are new at the first check)."""

    findings: tuple
    new: tuple
    resolved: tuple
    first: bool


def watched_files(path) -> tuple:
    """The sequence, the files it uses and its rig (as far as they can be read), else the sequence alone."""
    from .load.yamlsrc import LoadError
    from .resolve.sources import load_sources

    files = [Path(path)]
    try:
        src = load_sources(path)
    except LoadError:
        return tuple(files)
    files += [Path(doc.file) for doc, *_ in src.used]
    if src.rig is not None:
        files.append(Path(src.rig.file))
    return tuple(dict.fromkeys(files))


def _fingerprint(files) -> tuple:
    out = []
    for f in files:
        try:
            st = f.stat()
            out.append((str(f), st.st_mtime_ns, st.st_size))
        except OSError:  # missing for now (an editor replacing the file): a change like any other
            out.append((str(f), None, None))
    return tuple(out)


def finding_key(f: Finding) -> tuple:
    """What makes a finding the same one across two checks: its code, place and message."""
    return (f.code, f.file, f.line, f.column, f.message)


EVENT_TIMEOUT_MS = 2000  # the longest wait for a notification before the files are compared anyway


def event_wait(files, timeout_ms: int = EVENT_TIMEOUT_MS) -> set:
    """Wait for watchfiles to report a change of one of `files`, at most `timeout_ms`; the changed paths (empty
    after a timeout). Raises ImportError without watchfiles, OSError when a folder cannot be watched."""
    import watchfiles

    names = {str(Path(f).resolve()) for f in files}
    folders = sorted({str(Path(f).resolve().parent) for f in files})
    for changes in watchfiles.watch(*folders, watch_filter=lambda _kind, p: str(Path(p).resolve()) in names,
                                    debounce=50, rust_timeout=timeout_ms, yield_on_timeout=True, recursive=False):
        return {p for _kind, p in changes}
    return set()


def _waiter(interval: float):
    """How to wait for the next look at the files: notifications when watchfiles is installed, else a poll."""
    try:
        import watchfiles  # noqa: F401  (optional: seqgen[watch])
    except ImportError:
        return lambda files: time.sleep(interval)

    def wait(files):
        try:
            event_wait(files)
        except OSError:  # a folder gone or not watchable: poll instead
            time.sleep(interval)
    return wait


def watch(path, check: Callable[[str], list], *, interval: float = POLL_S, sleep=None,
          max_checks: int | None = None) -> Iterator[Change]:
    """Check `path` now and after every change of its files; yield a Change per check (`max_checks`: stop
    after that many; `sleep(interval)`: how to wait between looks, replaceable in tests; default: change
    notifications with watchfiles, else polling every `interval` seconds)."""
    wait = _waiter(interval) if sleep is None else (lambda _files: sleep(interval))
    seen: dict = {}
    printed = None
    checks = 0
    files = watched_files(path)
    while max_checks is None or checks < max_checks:
        now = _fingerprint(files)
        if now != printed:
            printed = now
            findings = tuple(check(str(path)))
            watched = watched_files(path)  # a changed `use:` or `rig:` changes what is watched
            if watched != files:
                files, printed = watched, _fingerprint(watched)
            keys = {finding_key(f): f for f in findings}
            new = tuple(f for k, f in keys.items() if k not in seen)
            resolved = tuple(f for k, f in seen.items() if k not in keys)
            yield Change(findings, new, resolved, checks == 0)
            seen = keys
            checks += 1
            continue
        wait(files)
