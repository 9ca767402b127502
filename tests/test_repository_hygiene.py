"""No tracked file names a path of one machine (a home folder, a work folder, a system temporary folder):
such a path means nothing on another machine, and points readers at files outside the repository.

The patterns below are written so that this file does not match itself (a character class such as `[k]`
breaks the literal text), and the examples are assembled at run time.
A path only counts where it starts a path: a relative path through a folder of the same name is fine.
"""

from pathlib import Path
import re
import subprocess

import pytest

ROOT = Path(__file__).resolve().parent.parent

MACHINE_PATH = re.compile(
    r"(?<![\w.~-])(?:"
    r"/wor[k]/"                   # the shared work folder of a development machine
    r"|/hom[e]/[^/\s\"']+"        # the home folder of a Linux user
    r"|/roo[t]/"                  # the super-user's home
    r"|/User[s]/[^/\s\"']+"       # macOS home folders
    r"|/tm[p]/"                   # the system temporary folder (tests use pytest's tmp_path instead)
    r"|[A-Za-z]:(?:\\\\|\\|/)User[s](?:\\\\|\\|/)"  # Windows home folders (also with doubled backslashes)
    r")",
    re.IGNORECASE,
)

# (file, text matched): why it is no machine path. Hostile inputs of robustness tests go here, each with its reason.
ALLOWED = {
    (".gitignore", "/" + "tmp/"): "an ignore pattern anchored at the repository root, not the system folder",
}


def _tracked_files():
    try:
        out = subprocess.run(["git", "ls-files", "-z"], cwd=ROOT, capture_output=True, check=True, timeout=60)
        names = [n for n in out.stdout.decode("utf-8").split("\0") if n]
    except (OSError, subprocess.SubprocessError):
        names = []
    if names:
        return names
    # not a git checkout (an unpacked source archive): every file but caches and build output
    skip = {".git", "__pycache__", ".pytest_cache", ".hypothesis", "build", ".venv", ".ci-venv"}
    return [p.relative_to(ROOT).as_posix() for p in ROOT.rglob("*")
            if p.is_file() and not skip.intersection(p.relative_to(ROOT).parts)
            and not any(part.endswith(".egg-info") for part in p.parts)]


def _text(path: Path):
    data = path.read_bytes()
    if b"\0" in data[:8192]:
        return None  # binary
    return data.decode("utf-8", errors="replace")


def machine_paths(text: str):
    return [m.group(0) for m in MACHINE_PATH.finditer(text)]


def test_the_pattern_finds_machine_paths_and_leaves_relative_ones():
    # the examples are assembled at run time so that this file holds none of them
    slash, back = "/", "\\"
    found = ["work/main/seqgen", "home/alice/notes.md", "root/.cache", "Users/bob/x", "tmp/seqgen-1/rig.yaml"]
    for tail in found:
        assert machine_paths(f"see {slash}{tail} for details"), tail
    assert machine_paths(f'path = "C:{back}Users{back}bob{back}seq.yaml"')
    assert machine_paths(f"C:{back * 2}Users{back * 2}bob")
    assert machine_paths(f"file://{slash}home{slash}alice{slash}x")
    for fine in ("sequences/rigs/na23_demo_rig.yaml", f"..{slash}work{slash}x", f"sequences{slash}root{slash}x.yaml", "a_tmp/x",
                 "tmp_path / 'rig.yaml'", "/dev/null", "/etc/hostname", "C:\\lab\\seq.yaml", "~/.config"):
        assert machine_paths(fine) == [], fine


def test_the_file_list_covers_the_repository():
    names = set(_tracked_files())
    assert {"README.md", "pyproject.toml", "tests/test_repository_hygiene.py"} <= names
    assert any(n.startswith("seqgen/") for n in names) and any(n.startswith("sequences/") for n in names)


def test_no_tracked_file_holds_a_machine_path():
    hits = []
    for name in _tracked_files():
        path = ROOT / name
        if not path.is_file():
            continue  # deleted in the working tree, not yet committed
        text = _text(path)
        if text is None:
            continue
        for number, line in enumerate(text.splitlines(), 1):
            hits += [f"{name}:{number}: {found}" for found in machine_paths(line) if (name, found) not in ALLOWED]
    assert not hits, "absolute machine paths (cite the publication or use a path relative to the repository):\n" + \
        "\n".join(hits)


@pytest.mark.parametrize("entry", sorted(ALLOWED))
def test_every_allowed_entry_is_still_needed(entry):
    name, found = entry
    text = _text(ROOT / name)
    assert text is not None and found in machine_paths(text), f"{entry} no longer occurs: remove it from ALLOWED"
