"""The self-contained HTML preflight report (`seqgen check FILE --report report.html`).

The report is parsed with the standard library's html.parser (Python
documentation) and checked against the sources outside the report code: the
findings preflight returns, the text of the sequence files themselves (the
offending line), seqgen.check.CAUTION, and the rule that a self-contained page
names no network resource (no http://, https:// or protocol-relative // in any
src or href, HTML Living Standard: URLs in src/href are fetched). A headless
browser test loads the file in Debian's chromium, which must find the finding
rows in the DOM and log no console message (the page has no script, so any
console line is an error: a failed load or a parse problem). The scan section of a
scanned sequence is checked against the YAML written in the test, the rig file's
minimum interval and the run order README "Parameter scans" documents (hashlib SHA-256).
"""

from __future__ import annotations

import os
import shutil
import subprocess
import tempfile
from html.parser import HTMLParser
from pathlib import Path

import pytest
import yaml

from seqgen.check import CAUTION
from seqgen.cli import main
from seqgen.emit import report
from seqgen.findings import make
from seqgen.pipeline import Result, preflight

from .conftest import SEQUENCES, readme_shuffled_order
from seqgen.codes import ALL, Code

def _code(slug):
    """The catalogue's code, or a stand-in of a made-up slug (severity error, as an unknown code had)."""
    return ALL.get(slug) or Code(slug, "error", stage="test")


FAULT = SEQUENCES / "faults" / "overlap.yaml"  # two error findings with lines and times
DEMO = SEQUENCES / "na23_thermometry.yaml"  # a sample and physics-level actions: physics notes


class _Page(HTMLParser):
    """Collects what the tests look at: finding rows, their source snippets, URLs, tags."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.tags: list[str] = []
        self.urls: list[tuple[str, str, str]] = []
        self.rows: list[dict] = []
        self.physics_rows = 0
        self._row = None
        self._in_hit = 0
        self._in_style = False
        self.style = ""
        self.text: list[str] = []
        self.ids: set[str] = set()

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        self.tags.append(tag)
        if "id" in a:
            self.ids.add(a["id"])
        for k, v in attrs:
            if k in ("src", "href", "xlink:href", "srcset", "action", "data", "poster") and v:
                self.urls.append((tag, k, v))
        cls = (a.get("class") or "").split()
        if tag == "tr" and "finding" in cls:
            self._row = {"code": a.get("data-code"), "line": int(a.get("data-line") or 0), "hit": "", "text": ""}
            self.rows.append(self._row)
        if tag == "tr" and "physics-note" in cls:
            self.physics_rows += 1
        if tag == "span" and "hit" in cls:
            self._in_hit = 1
        elif self._in_hit and tag == "span":
            self._in_hit += 1
        if tag == "style":
            self._in_style = True

    def handle_endtag(self, tag):
        if tag == "tr":
            self._row = None
        if tag == "span" and self._in_hit:
            self._in_hit -= 1
        if tag == "style":
            self._in_style = False

    def handle_data(self, data):
        self.text.append(data)
        if self._in_style:
            self.style += data
        if self._row is not None:
            self._row["text"] += data
            if self._in_hit:
                self._row["hit"] += data


def _parse(text: str) -> _Page:
    p = _Page()
    p.feed(text)
    p.close()
    return p


def _no_network(page: _Page, text: str):
    for tag, attr, url in page.urls:
        assert not url.lower().startswith(("http://", "https://", "//", "ftp://")), (tag, attr, url)
    assert "script" not in page.tags and "link" not in page.tags and "iframe" not in page.tags
    assert "@import" not in page.style and "url(" not in page.style


@pytest.fixture(scope="module")
def fault_report(tmp_path_factory):
    res = preflight(FAULT)
    out = tmp_path_factory.mktemp("report") / "overlap.html"
    report.write_report(out, res, str(FAULT.relative_to(SEQUENCES.parent)))
    return res, out


def test_every_finding_has_a_row_with_its_source_line_and_fix(fault_report):
    res, out = fault_report
    page = _parse(out.read_text(encoding="utf-8"))
    assert len(page.rows) == len(res.findings) >= 2
    source = {}
    for f, row in zip(res.findings, page.rows):
        assert row["code"] == f.code and row["line"] == f.line
        assert f.message in row["text"] and f.hint in row["text"]
        # the highlighted line is the file's own line, read here independently
        lines = source.setdefault(f.file, Path(f.file).read_text(encoding="utf-8").splitlines())
        assert row["hit"].strip() == f"{f.line}{lines[f.line - 1]}".strip()
    assert CAUTION in " ".join(page.text)
    assert {"summary", "findings", "physics", "timeline", "caution"} <= page.ids


def test_report_is_self_contained(fault_report):
    _, out = fault_report
    text = out.read_text(encoding="utf-8")
    page = _parse(text)
    _no_network(page, text)
    assert "svg" in page.tags  # the timeline, inline
    assert "style" in page.tags  # the CSS, inline
    # every internal reference of the inline SVG points into the page itself
    assert all(u.startswith("#") for t, k, u in page.urls if k in ("href", "xlink:href") and t == "use")


def test_physics_notes_and_timeline_for_a_demo():
    res = preflight(DEMO)
    text = report.render_report(res, str(DEMO), svg="<svg></svg>")
    page = _parse(text)
    assert not [f for f in res.findings if f.severity == "error"]  # the demo is clean
    assert len(page.rows) == len(res.findings)
    # one row per physics prediction the checks report (dedupe of identical rows aside)
    from seqgen.predict import report_rows

    expected = {(r.block, r.kind, r.time_s, r.items) for r in report_rows(res.shot)}
    assert page.physics_rows == len(expected) >= 1
    assert "<svg></svg>" in text


def test_text_is_escaped_and_report_works_without_a_shot():
    nasty = make(_code("timing.overlap"), "value <script>alert(1)</script> & more", None, hint="use <b>less</b>")
    text = report.render_report(Result(findings=[nasty]), "x.yaml")
    page = _parse(text)
    assert "script" not in page.tags
    assert "value &lt;script&gt;alert(1)&lt;/script&gt; &amp; more" in text
    assert "use &lt;b&gt;less&lt;/b&gt;" in text and len(page.rows) == 1
    assert "could not be resolved" in text


def test_report_is_deterministic(fault_report, tmp_path):
    res, out = fault_report
    again = report.write_report(tmp_path / "again.html", res, str(FAULT.relative_to(SEQUENCES.parent)))
    assert again.read_bytes() == out.read_bytes()


def test_cli_check_report_refuses_to_overwrite(tmp_path, capsys):
    out = tmp_path / "r.html"
    assert main(["check", str(FAULT), "--report", str(out)]) == 1  # the fault's errors
    assert out.exists() and "report written" in capsys.readouterr().out
    before = out.stat().st_mtime_ns
    assert main(["check", str(FAULT), "--report", str(out)]) == 2
    assert "--force" in capsys.readouterr().err and out.stat().st_mtime_ns == before
    assert main(["check", str(FAULT), "--report", str(out), "--force"]) == 1
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".")]  # no temporary file left behind


# --- headless browser ------------------------------------------------------------------------------------------

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
_FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
          "--disable-component-update", "--disable-sync", "--no-first-run", "--enable-logging=stderr", "--v=0"]


def _chromium(*args, timeout=120):
    with tempfile.TemporaryDirectory() as profile:
        return subprocess.run([CHROMIUM, *_FLAGS, f"--user-data-dir={profile}", *args], capture_output=True,
                              text=True, timeout=timeout, env={**os.environ, "HOME": profile})


def _console(stderr: str) -> list[str]:
    return [ln for ln in stderr.splitlines() if ":CONSOLE" in ln or "Uncaught" in ln]


@pytest.mark.skipif(CHROMIUM is None, reason="chromium is not installed (apt-get install chromium): "
                                              "browser test skipped")
def test_report_in_a_headless_browser(fault_report, tmp_path):
    res, out = fault_report
    # the console check must be able to fail: a page that logs an error is seen as such
    control = tmp_path / "control.html"
    control.write_text('<!DOCTYPE html><p>x</p><script>console.error("control")</script>', encoding="utf-8")
    assert _console(_chromium("--dump-dom", control.as_uri()).stderr)

    run = _chromium("--dump-dom", out.resolve().as_uri())
    assert run.returncode == 0, run.stderr[-2000:]
    assert not _console(run.stderr), _console(run.stderr)
    dom = _parse(run.stdout)
    assert len(dom.rows) == len(res.findings)
    assert [r["code"] for r in dom.rows] == [f.code for f in res.findings]

    shot = tmp_path / "report.png"
    run = _chromium(f"--screenshot={shot}", "--window-size=1280,1600", out.resolve().as_uri())
    assert run.returncode == 0, run.stderr[-2000:]
    data = shot.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n" and len(data) > 10_000  # PNG signature (RFC 2083); not blank


# --- scanned sequences: the scan section ------------------------------------------------------------------------
# Expected values come from the YAML written here (read back with PyYAML), the demo rig file's minimum interval
# of ao_main (timing.ramp-too-fast fires for a ramp shorter than it, README "What preflight checks") and the run
# order README "Parameter scans" documents for `order: shuffled`: written positions sorted by
# sha256("seqgen-order:<seed>:<i>") (hashlib, FIPS 180-4), the first written param varying slowest.

RIG = SEQUENCES / "rigs" / "na23_demo_rig.yaml"
SCANNED = """seqgen: 1
rig: rig.yaml
params:
  ramp_time: {value: 1 us, scan: [1 us, 2 us, 5 us]}
  level: {value: 0.2 W, scan: [0.1 W, 0.3 W]}
scan: {order: shuffled, seed: 11}
blocks:
  - name: a
    at: 0 s
    actions:
      - ramp: {channel: guide_power, to: level, over: ramp_time}
      - hold: {duration: 1 ms}
      - set: {channel: guide_power, value: 0 W}
"""


class _ScanPage(HTMLParser):
    """Rows of the scan section: shots (their cells), finding codes (their attributes), plan params."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.shots: list[dict] = []
        self.codes: list[dict] = []
        self.params: list[str] = []
        self._cells = None
        self._row = None

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        cls = (a.get("class") or "").split()
        if tag == "tr" and "shot" in cls:
            self._row = {"index": int(a["data-index"]), "cells": [], "base": "base-shot" in cls}
            self.shots.append(self._row)
        elif tag == "tr" and "scan-code" in cls:
            self._row = {"code": a["data-code"], "shots": [int(x) for x in a["data-shots"].split()], "cells": []}
            self.codes.append(self._row)
        elif tag == "tr" and "scan-param" in cls:
            self.params.append(a["data-param"])
            self._row = None
        elif tag == "td" and self._row is not None:
            self._cells = []

    def handle_endtag(self, tag):
        if tag == "td" and self._cells is not None and self._row is not None:
            self._row["cells"].append("".join(self._cells).strip())
            self._cells = None
        elif tag == "tr":
            self._row = None

    def handle_data(self, data):
        if self._cells is not None:
            self._cells.append(data)


def _q(text: str) -> float:
    value, unit = text.split()
    return float(value) * {"us": 1e-6, "ms": 1e-3, "s": 1.0, "W": 1.0, "mW": 1e-3}[unit]


def _expected_shots(path):
    """[(ramp_time, level, written position)] in run order, from the YAML and the README's rules."""
    doc = yaml.safe_load(Path(path).read_text(encoding="utf-8"))
    ramps = [_q(v) for v in doc["params"]["ramp_time"]["scan"]]
    levels = [_q(v) for v in doc["params"]["level"]["scan"]]
    written = [(r, lv) for r in ramps for lv in levels]
    seed = doc["scan"]["seed"]
    order = readme_shuffled_order(seed, len(written))
    return [(*written[i], i) for i in order]


@pytest.fixture(scope="module")
def scanned_report(tmp_path_factory):
    from seqgen.scan.plan import plan_scan
    from seqgen.scan.run import run_scan
    from seqgen.show import shot_choice

    folder = tmp_path_factory.mktemp("scanned")
    shutil.copy(RIG, folder / "rig.yaml")
    path = folder / "scanned.yaml"
    path.write_text(SCANNED, encoding="utf-8")
    scan = run_scan(plan_scan(path), jobs=1)
    base = preflight(path, sources=scan.sources)
    choice = shot_choice(scan.plan, None, base.shot)
    text = report.render_report(base, str(path), svg="<svg></svg>", scan=scan, choice=choice)
    return path, scan, base, choice, text


def test_scan_section_lists_every_shot_in_run_order_with_pass_or_fail(scanned_report):
    path, scan, _, _, text = scanned_report
    page = _ScanPage()
    page.feed(text)
    want = _expected_shots(path)
    min_interval = _q(yaml.safe_load(RIG.read_text(encoding="utf-8"))["devices"]["ao_main"]["min_interval"])
    assert [r["index"] for r in page.shots] == list(range(len(want)))
    for row, (ramp, level, written) in zip(page.shots, want):
        # cells: shot, written order (shuffled), ramp_time, level, result, errors, warnings, notes, accepted
        index, wpos, r_text, l_text, result, errors = row["cells"][:6]
        assert int(wpos) == written and _q(r_text) == pytest.approx(ramp) and _q(l_text) == pytest.approx(level)
        assert result == ("fail" if ramp < min_interval else "pass")
        assert (int(errors) > 0) == (ramp < min_interval)
    fast = [i for i, (ramp, _, _) in enumerate(want) if ramp < min_interval]
    code = next(c for c in page.codes if c["code"] == "timing.ramp-too-fast")
    assert code["shots"] == fast and code["cells"][2] == f"{len(fast)} of {len(want)}"
    # the param range that bounds the firing shots: the scan values below the minimum interval
    assert "ramp_time <= 1 us" in code["cells"][3]
    assert page.params == list(yaml.safe_load(SCANNED)["params"])
    good = len(want) - len(fast)
    assert f"{good} of {len(want)} shots pass" in text and "seed 11" in text


def test_scan_section_comes_before_the_base_shots_details(scanned_report):
    path, scan, base, choice, text = scanned_report
    page = _parse(text)
    assert {"scan", "summary", "findings", "physics", "timeline", "caution", "shot-choice"} <= page.ids
    assert text.index('id="summary"') < text.index('id="scan"') < text.index('id="base-shot"') < text.index(
        'id="findings"')
    # the base shot is every scanned param at its written value: (1 us, 0.2 W = 200 mW)
    doc = yaml.safe_load(SCANNED)["params"]
    assert choice.index is None and [q.value for q in choice.values] == pytest.approx(
        [_q(doc["ramp_time"]["value"]), _q(doc["level"]["value"])])
    para = text[text.index('id="shot-choice"'):].split("</p>")[0]
    assert "base shot" in para and "ramp_time = 1 us" in para and "level = 200 mW" in para
    assert len(page.rows) == len(base.findings)  # the detailed findings are the base shot's
    _no_network(page, text)
    assert "script" not in page.tags


def test_scanned_report_from_the_cli_is_deterministic_and_self_contained(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    shutil.copy(RIG, tmp_path / "rig.yaml")
    seq = tmp_path / "s.yaml"
    seq.write_text(SCANNED, encoding="utf-8")
    a, b = tmp_path / "a.html", tmp_path / "b.html"
    assert main(["check", str(seq), "--report", str(a), "--jobs", "1"]) == 1  # some shots have errors
    assert main(["check", str(seq), "--report", str(b), "--jobs", "2"]) == 1  # same bytes with two workers
    assert a.read_bytes() == b.read_bytes()
    text = a.read_text(encoding="utf-8")
    page = _parse(text)
    _no_network(page, text)
    assert "svg" in page.tags and {"scan", "timeline-full"} <= page.ids
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".")]  # written atomically: no leftovers


def test_large_scan_lists_failing_shots_first(scanned_report, monkeypatch):
    path, scan, base, choice, _ = scanned_report
    monkeypatch.setattr(report, "MAX_SHOT_ROWS", 2)
    page = _ScanPage()
    page.feed(report.render_report(base, str(path), scan=scan, choice=choice))
    failing = [r.index for r in scan.shots if not r.ok]
    assert [r["index"] for r in page.shots] == sorted(failing)[:2]


def test_report_of_one_shot_names_it(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    shutil.copy(RIG, tmp_path / "rig.yaml")
    seq = tmp_path / "s.yaml"
    seq.write_text(SCANNED, encoding="utf-8")
    out = tmp_path / "one.html"
    want = _expected_shots(seq)
    n = next(i for i, (ramp, _, _) in enumerate(want) if ramp == pytest.approx(5e-6))  # a shot that passes
    assert main(["check", str(seq), "--shot", str(n), "--report", str(out)]) == 0
    text = out.read_text(encoding="utf-8")
    para = text[text.index('id="shot-choice"'):].split("</p>")[0]
    assert f"shot {n} of the {len(want)} shots" in para and "ramp_time = 5 us" in para
    assert 'id="scan"' not in text  # only this shot was preflighted


@pytest.mark.skipif(CHROMIUM is None, reason="chromium is not installed (apt-get install chromium): "
                                              "browser test skipped")
def test_scanned_report_in_a_headless_browser(scanned_report, tmp_path):
    path, _, _, _, text = scanned_report
    out = tmp_path / "scan.html"
    out.write_text(text, encoding="utf-8")
    run = _chromium("--dump-dom", out.resolve().as_uri())
    assert run.returncode == 0, run.stderr[-2000:]
    assert not _console(run.stderr), _console(run.stderr)
    dom = _ScanPage()
    dom.feed(run.stdout)
    assert [r["index"] for r in dom.shots] == list(range(len(_expected_shots(path))))
