"""Start-up benchmark (run by hand): python tests/benchmarks/bench_start.py [--runs 7]

What an editor pays on every save, as issue 17 ("Fast start") asks it to be measured, all in one run. The wall
time of a fresh process, the median of N, for
- `python -m seqgen explain physics.shallow-trap` (the code catalogue only) and `python -m seqgen --help`,
  each against the floor `python -c "import numpy, yaml"` (target <= 1.5 x);
- a cold `python -m seqgen check sequences/na23_thermometry.yaml` (the small demo, the whole preflight) against
  the floor `python -c "import numpy, scipy.optimize, yaml"` (target <= 1.5 x);
- `python -c "import seqgen"` (the package face), against the first floor, for information;
then what typing costs in the language server (needs pygls): a cold `seqgen check` of the barrier demo (every
shot of its scan, a fresh process) against the server's re-check of it after a one-character edit (a digit
of a param changed, sent as didChange over stdio; the time until its diagnostics arrive, less the debounce),
the median of N edits (target <= 0.1 x).
"Cold" means a fresh process; the caches a first run leaves on disk (bytecode, pint's unit cache and seqgen's
file of pint's answers, the trap minimisations, the long sampled ramps and the atom data's schema check of
seqgen.physics.stored) are kept, as an installed seqgen keeps them: one warm-up run of every command fills them
before the timed runs. The same check with an empty cache
folder each time (a first run ever, bytecode kept) is printed for information.
The checkout is put first on PYTHONPATH, so the numbers are those of this tree, not an installed seqgen.
Compiled bytecode is kept (as for an installed package) in a temporary folder removed at the end, also where
PYTHONDONTWRITEBYTECODE is set; --as-is runs the commands in the environment as it is.
"""

from __future__ import annotations

import argparse
import asyncio
import os
import statistics
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]

PY = sys.executable
FLOOR_START = ("import numpy, yaml (floor)", [PY, "-c", "import numpy, yaml"])
FLOOR_CHECK = ("import numpy, scipy.optimize, yaml (floor)", [PY, "-c", "import numpy, scipy.optimize, yaml"])
TARGET = 1.5  # the target for a command over its floor
EMPTY = "check, first run ever (empty caches)"  # run with an empty cache folder each time: pint's units, traps
# (name, command, its floor, the target or None: printed for information)
COMMANDS = (
    ("explain physics.shallow-trap", [PY, "-m", "seqgen", "explain", "physics.shallow-trap"], FLOOR_START, TARGET),
    ("--help", [PY, "-m", "seqgen", "--help"], FLOOR_START, TARGET),
    ("import seqgen", [PY, "-c", "import seqgen"], FLOOR_START, None),
    ("check na23_thermometry.yaml", [PY, "-m", "seqgen", "check", "sequences/na23_thermometry.yaml"], FLOOR_CHECK,
     TARGET),
    (EMPTY, [PY, "-m", "seqgen", "check", "sequences/na23_thermometry.yaml"], FLOOR_CHECK, None),
)
SCATTER = "sequences/na23_barrier_scatter.yaml"
COLD_CHECK = [sys.executable, "-m", "seqgen", "check", SCATTER]


def wall(cmd: list, env: dict, empty_cache: bool = False) -> float:
    if empty_cache:  # a new, empty per-user cache folder: nothing kept from an earlier run
        with tempfile.TemporaryDirectory(prefix="seqgen-bench-cache-") as folder:
            return wall(cmd, dict(env, XDG_CACHE_HOME=folder))
    t0 = time.perf_counter()
    done = subprocess.run(cmd, cwd=ROOT, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    t1 = time.perf_counter()
    if done.returncode not in (0, 1):  # check exits 1 on error findings; anything else is a failed run
        raise SystemExit(f"{' '.join(cmd)} failed ({done.returncode}): {done.stderr.decode()[-500:]}")
    return t1 - t0


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=7, help="fresh processes per command (median)")
    ap.add_argument("--as-is", action="store_true", help="keep the environment's bytecode settings")
    args = ap.parse_args()
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(ROOT)] + [p for p in os.environ.get("PYTHONPATH", "")
                                                                         .split(os.pathsep) if p]))
    pycache = None
    if not args.as_is:
        pycache = tempfile.mkdtemp(prefix="seqgen-bench-pyc-")
        env.pop("PYTHONDONTWRITEBYTECODE", None)
        env["PYTHONPYCACHEPREFIX"] = pycache
    try:
        run(args.runs, env, "bytecode kept" if pycache else "environment as is")
    finally:
        if pycache:
            shutil.rmtree(pycache, ignore_errors=True)


def run(runs: int, env: dict, mode: str) -> None:
    timed = [FLOOR_START, FLOOR_CHECK] + [(name, cmd) for name, cmd, _, _ in COMMANDS]
    for _, cmd in timed:  # one warm-up each: bytecode, the file cache and pint's unit cache are filled
        wall(cmd, env)
    times = {name: [] for name, _ in timed}
    for _ in range(runs):  # interleaved, so a slow moment of the machine hits every command alike
        for name, cmd in timed:
            times[name].append(wall(cmd, env, empty_cache=name == EMPTY))
    med = {name: statistics.median(t) for name, t in times.items()}
    print(f"median of {runs} fresh processes (python {sys.version.split()[0]}, {mode}):")
    for floor in (FLOOR_START, FLOOR_CHECK):
        print(f"  {floor[0]:44s} {med[floor[0]]:6.3f} s")
    for name, _, floor, target in COMMANDS:
        ratio = med[name] / med[floor[0]]
        aim = f"(target <= {target})" if target else "(for information)"
        print(f"  {name:44s} {med[name]:6.3f} s   {ratio:5.2f} x {floor[1][-1]!r} {aim}")
    try:
        import pygls  # noqa: F401  (the language server's extra, seqgen[lsp])
    except ImportError:
        print("language server: pygls is not installed (pip install 'seqgen[lsp]'); re-check not measured")
        return
    cold = statistics.median([wall(COLD_CHECK, env) for _ in range(runs)])
    warm = asyncio.run(_recheck_times(max(runs, 5) * 2, env))
    m = statistics.median(warm)
    print(f"  {'check barrier demo (cold)':44s} {cold:6.3f} s")
    print(f"  {'language server re-check':44s} {m:6.3f} s   {m / cold:5.3f} x the cold check (target <= 0.1)")


async def _recheck_times(edits: int, env: dict) -> list:
    """Seconds from a one-character didChange of the barrier demo to its diagnostics, less the debounce."""
    from lsprotocol import types as lsp
    from pygls.lsp.client import LanguageClient
    from pygls.uris import from_fs_path

    sys.path.insert(0, str(ROOT))  # this checkout's seqgen, as the server runs it
    from seqgen.lsp.server import DEBOUNCE_S

    client = LanguageClient("bench", "1")
    arrived: asyncio.Queue = asyncio.Queue()

    @client.feature(lsp.TEXT_DOCUMENT_PUBLISH_DIAGNOSTICS)
    def diagnostics(params):
        arrived.put_nowait(time.perf_counter())

    await client.start_io(sys.executable, "-m", "seqgen", "language-server", env=env, cwd=str(ROOT))
    await client.initialize_async(lsp.InitializeParams(capabilities=lsp.ClientCapabilities()))
    client.initialized(lsp.InitializedParams())
    uri = from_fs_path(str(ROOT / SCATTER))
    text = (ROOT / SCATTER).read_text(encoding="utf-8")
    client.text_document_did_open(lsp.DidOpenTextDocumentParams(text_document=lsp.TextDocumentItem(
        uri=uri, language_id="yaml", version=1, text=text)))
    await asyncio.wait_for(arrived.get(), 120)
    lines = text.split("\n")
    row = next(i for i, x in enumerate(lines) if x.startswith("  sheet_time: 20 ms"))
    col = lines[row].index("20") + 1  # the second digit: 20 ms <-> 21 ms, a param every later block reads
    out = []
    for k in range(edits + 1):
        t0 = time.perf_counter()
        client.text_document_did_change(lsp.DidChangeTextDocumentParams(
            text_document=lsp.VersionedTextDocumentIdentifier(uri=uri, version=k + 2),
            content_changes=[lsp.TextDocumentContentChangePartial(
                range=lsp.Range(start=lsp.Position(line=row, character=col),
                                end=lsp.Position(line=row, character=col + 1)), text="1" if k % 2 == 0 else "0")]))
        t1 = await asyncio.wait_for(arrived.get(), 120)
        if k:  # the first edit warms what opening did not (the base shot alone)
            out.append(t1 - t0 - DEBOUNCE_S)
    await client.shutdown_async(None)
    client.exit(None)
    await client.stop()
    return out


if __name__ == "__main__":
    main()
