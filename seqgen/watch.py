"""`seqgen check FILE --watch`: check a sequence again whenever it, a file it uses or its rig changes, and say
what changed since the last check (the findings that appeared and those that went away).

The files are polled (modification time and size, standard library only), so it also works on network shares
that send no change notifications. A file being written when it is polled is seen again at the next poll: the
fingerprint is taken before each check, so a change during a check triggers the next one.
"""

from __future__ import annotations

import time
from dataclasses import dataclass
from pathlib import Path
from typing import Callable, Iterator

from .findings import Finding

__all__ = ["Change", "watch", "watched_files", "finding_key"]

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


def watch(path, check: Callable[[str], list], *, interval: float = POLL_S, sleep=time.sleep,
          max_checks: int | None = None) -> Iterator[Change]:
    """Check `path` now and after every change of its files; yield a Change per check (`max_checks`: stop
    after that many; `sleep`: how to wait between polls, replaceable in tests)."""
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
        sleep(interval)
