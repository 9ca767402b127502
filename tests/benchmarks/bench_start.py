"""Start-up benchmark (run by hand): python tests/benchmarks/bench_start.py [--runs 5]

What an editor pays on every save: the wall time of a fresh process for
- `python -m seqgen explain physics.shallow-trap` (the code catalogue only),
- `python -m seqgen check sequences/na23_thermometry.yaml` (the small demo, the whole preflight),
- `python -c "import seqgen"` (the package face),
each the median of N fresh processes, and its ratio to the floor measured in the same run:
`python -c "import numpy"` (an interpreter that loads numpy, which every command needs);
then what typing costs in the language server (needs pygls): a cold `seqgen check` of the barrier demo (every
shot of its scan, a fresh process) against the server's re-check of it after a one-character edit (a digit
of a param changed, sent as didChange over stdio; the time until its diagnostics arrive, less the debounce),
the median of N edits, and the issue's target: at most 0.1 x.
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

COMMANDS = (
    ("import numpy (floor)", [sys.executable, "-c", "import numpy"]),
    ("explain physics.shallow-trap", [sys.executable, "-m", "seqgen", "explain", "physics.shallow-trap"]),
    ("check na23_thermometry.yaml", [sys.executable, "-m", "seqgen", "check", "sequences/na23_thermometry.yaml"]),
    ("import seqgen", [sys.executable, "-c", "import seqgen"]),
)
SCATTER = "sequences/na23_barrier_scatter.yaml"
COLD_CHECK = [sys.executable, "-m", "seqgen", "check", SCATTER]


def wall(cmd: list, env: dict) -> float:
    t0 = time.perf_counter()
    done = subprocess.run(cmd, cwd=ROOT, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    t1 = time.perf_counter()
    if done.returncode not in (0, 1):  # check exits 1 on error findings; anything else is a failed run
        raise SystemExit(f"{' '.join(cmd)} failed ({done.returncode}): {done.stderr.decode()[-500:]}")
    return t1 - t0


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=5, help="fresh processes per command (median)")
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
    for _, cmd in COMMANDS:  # one warm-up each: bytecode, the file cache and pint's unit cache are filled
        wall(cmd, env)
    times = {name: [] for name, _ in COMMANDS}
    for _ in range(runs):  # interleaved, so a slow moment of the machine hits every command alike
        for name, cmd in COMMANDS:
            times[name].append(wall(cmd, env))
    floor = statistics.median(times[COMMANDS[0][0]])
    print(f"median of {runs} fresh processes (python {sys.version.split()[0]}, {mode}):")
    for name, _ in COMMANDS:
        m = statistics.median(times[name])
        print(f"  {name:32s} {m:6.3f} s   {m / floor:5.1f} x floor")
    try:
        import pygls  # noqa: F401  (the language server's extra, seqgen[lsp])
    except ImportError:
        print("language server: pygls is not installed (pip install 'seqgen[lsp]'); re-check not measured")
        return
    cold = statistics.median([wall(COLD_CHECK, env) for _ in range(runs)])
    warm = asyncio.run(_recheck_times(max(runs, 5) * 2, env))
    m = statistics.median(warm)
    print(f"  {'check barrier demo (cold)':32s} {cold:6.3f} s")
    print(f"  {'language server re-check':32s} {m:6.3f} s   {m / cold:5.3f} x the cold check (target <= 0.1)")


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
