"""A Result and a scan summary show themselves in a notebook (`_repr_html_`): findings, caution, timeline.

The expected codes and lines come from the fault files' own `# expect:` headers and the scan's values from
the file's `scan:` entry, not from the code under test. The HTML is parsed with the standard library's parser.
"""

from html.parser import HTMLParser
from pathlib import Path

import seqgen

ROOT = Path(__file__).resolve().parents[1]
FAULT = ROOT / "sequences" / "faults" / "hard_limit.yaml"
SCANNED = ROOT / "sequences" / "faults" / "scan_ramp_too_fast.yaml"


class _Parse(HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags: list[str] = []
        self.attrs: list[tuple] = []
        self.text: list[str] = []
        self.rows = 0

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        self.attrs.extend(attrs)
        self.rows += tag == "tr"

    def handle_data(self, data):
        self.text.append(data)


def _parse(html: str) -> _Parse:
    p = _Parse()
    p.feed(html)
    p.close()
    return p


def _expect(path: Path) -> tuple[str, int]:
    head = path.read_text().splitlines()[0].split("expect:")[1]
    code, _, line = head.partition("@")
    return code.strip(), int(line) if line.strip() else 0


def _no_network_no_script(p: _Parse):
    assert "script" not in p.tags and "iframe" not in p.tags
    for name, value in p.attrs:  # an SVG's xmlns names a namespace; nothing is loaded from it
        if name in ("src", "href", "xlink:href") and value:
            assert not value.startswith(("http:", "https:", "//")), (name, value)


def test_result_html_lists_every_finding_with_caution_and_timeline():
    code, line = _expect(FAULT)
    res = seqgen.preflight(FAULT)
    html = res._repr_html_()
    p = _parse(html)
    text = " ".join(p.text)
    assert code in text and f"{FAULT.name}:{line}:" in text.replace(str(FAULT.parent) + "/", "")
    assert p.rows == len(res.findings) + 1  # a header row, then one row per finding
    assert seqgen.CAUTION[:60] in text
    assert "svg" in p.tags  # the timeline, inline
    _no_network_no_script(p)


def test_unresolved_result_says_so_without_timeline():
    res = seqgen.preflight(ROOT / "sequences" / "faults" / "anchor_cycle.yaml")
    assert res.shot is None
    p = _parse(res._repr_html_())
    text = " ".join(p.text)
    assert "could not be resolved" in text and _expect(ROOT / "sequences" / "faults" / "anchor_cycle.yaml")[0] in text
    assert "svg" not in p.tags and seqgen.CAUTION[:60] in text


def test_scan_summary_shows_one_row_per_shot_and_where_codes_fire():
    code, _ = _expect(SCANNED)
    scan = seqgen.run_scan(seqgen.plan_scan(SCANNED), jobs=1)
    summ = seqgen.scan_summary(scan)
    written = ["1 us", "2 us", "3 us", "5 us", "10 us"]  # the file's scan: list
    assert summ.shots == len(written)
    p = _parse(summ._repr_html_())
    text = " ".join(p.text)
    assert code in text and seqgen.CAUTION[:60] in text
    for value in written:
        assert f"ramp_time = {value}" in text
    # header + one row per code, header + one row per shot
    assert p.rows == 1 + len(summ.codes) + 1 + len(written)
    assert summ.passing == sum(1 for r in summ.rows if r[2]) and 0 < summ.passing < len(written)
    _no_network_no_script(p)
    assert summ.text.startswith(str(SCANNED)) or SCANNED.name in summ.text


def test_a_scanned_files_result_says_it_is_the_base_shot():
    scanned = ROOT / "sequences" / "na23_barrier_scatter.yaml"
    assert "scan:" in scanned.read_text(encoding="utf-8")
    text = " ".join(_parse(seqgen.preflight(scanned)._repr_html_()).text)
    assert "base shot" in text
    plain = ROOT / "sequences" / "na23_thermometry.yaml"
    assert "base shot" not in " ".join(_parse(seqgen.preflight(plain)._repr_html_()).text)
