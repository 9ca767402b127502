"""The self-contained HTML preflight report (`seqgen check FILE --report report.html`).

The report is parsed with the standard library's html.parser (Python
documentation) and checked against the sources outside the report code: the
findings preflight returns, the text of the sequence files themselves (the
offending line), seqgen.check.CAUTION, and the rule that a self-contained page
names no network resource (no http://, https:// or protocol-relative // in any
src or href, HTML Living Standard: URLs in src/href are fetched). A headless
browser test loads the file in Debian's chromium, which must find the finding
rows in the DOM and log no console message (the page has no script, so any
console line is an error: a failed load or a parse problem).
"""

from __future__ import annotations

import os
import shutil
import subprocess
import tempfile
from html.parser import HTMLParser
from pathlib import Path

import pytest

from seqgen.check import CAUTION
from seqgen.cli import main
from seqgen.emit import report
from seqgen.findings import make
from seqgen.pipeline import Result, preflight

from .conftest import SEQUENCES

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
    from seqgen.check.physics import report_physics

    expected = {(r["block"], r["kind"], r["time_s"], tuple(r["items"])) for r in report_physics(res.shot)}
    assert page.physics_rows == len(expected) >= 1
    assert "<svg></svg>" in text


def test_text_is_escaped_and_report_works_without_a_shot():
    nasty = make("timing.overlap", "value <script>alert(1)</script> & more", None, hint="use <b>less</b>")
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
