"""Work shared between shots by content (trap minimisations, sampled ramps) never changes a result.

The caches make the shots of a scan cheap; these tests pin that a shot checked
and compiled after others (warm caches) gives exactly what a fresh process
(cold caches) gives, that the caches stay bounded, and that the one-pass trap
analysis equals the separate published-formula functions.
"""

import numpy as np
import pytest
from scipy import constants as sc

from seqgen.predict import held, report_rows
from seqgen.compile import tables
from seqgen.compile.tables import RAMP_CACHE, RampCache
from seqgen.physics import optical as o
from seqgen.physics.atoms import get_species
from seqgen.pipeline import clear_shared_caches, preflight
from seqgen.scan.plan import plan_scan
from seqgen.scan.run import run_scan

from .conftest import SEQUENCES

NA = get_species("Na23")
DEMO = SEQUENCES / "na23_barrier_scatter.yaml"


def _tables_bytes(compiled):
    return [(t.device, t.ticks.tobytes(), t.values.tobytes(), t.columns, dict(t.rows_per_segment))
            for t in compiled.tables]


def _findings(res):
    return [(f.code, f.severity, f.message, f.line) for f in res.findings]


def test_warm_caches_give_the_same_shot_as_a_cold_process():
    clear_shared_caches()
    cold = preflight(DEMO)
    assert held.cache_info().currsize > 0 and len(RAMP_CACHE._items) > 0
    warm = preflight(DEMO)
    assert _findings(warm) == _findings(cold)
    assert _tables_bytes(warm.compiled) == _tables_bytes(cold.compiled)
    # and the physics report (`show --physics`) reads the same numbers
    assert report_rows(warm.shot) == report_rows(cold.shot)


def test_a_scan_shot_equals_the_same_values_checked_alone(tmp_path):
    # a scan over the demo's time of flight: every shot's findings must equal a cold, single check
    text = DEMO.read_text(encoding="utf-8")
    lines = [("  tof: {value: 14 ms, scan: [11 ms, 14 ms]}" if ln.strip().startswith("tof:") else ln)
             for ln in text.splitlines()]
    for sub in ("rigs", "common"):
        (tmp_path / sub).mkdir()
        for f in (SEQUENCES / sub).glob("*.yaml"):
            (tmp_path / sub / f.name).write_bytes(f.read_bytes())
    scanned = tmp_path / "scan.yaml"
    scanned.write_text("\n".join(lines) + "\n", encoding="utf-8")
    scan = run_scan(plan_scan(scanned), jobs=1)  # in process: the second shot sees warm caches
    assert len(scan.shots) == 2
    for shot_result, tof in zip(scan.shots, ("11 ms", "14 ms")):
        single = tmp_path / f"single_{tof.split()[0]}.yaml"
        single.write_text(text.replace(text[text.index("  tof:"):].splitlines()[0], f"  tof: {tof}"), encoding="utf-8")
        clear_shared_caches()
        alone = preflight(single)
        assert [(f.code, f.message) for f in shot_result.findings] == [(f.code, f.message) for f in alone.findings]


def test_ramp_cache_stays_within_its_row_budget():
    cache = RampCache()
    cache.MAX_ROWS = 1000
    rows = 100
    for i in range(50):
        cache.put(("k", i), (np.arange(rows, dtype=np.int64), np.zeros(rows), 0.0, False))
        assert cache._rows == sum(len(v[0]) for v in cache._items.values()) <= 1000
    assert cache.get(("k", 49)) is not None and cache.get(("k", 0)) is None  # oldest dropped first
    big = cache.MAX_ROWS  # over an eighth of the budget: never kept
    cache.put(("big",), (np.arange(big, dtype=np.int64), np.zeros(big), 0.0, False))
    assert cache.get(("big",)) is None
    ticks = cache.get(("k", 49))[0]
    with pytest.raises(ValueError):
        ticks[0] = 5  # cached arrays are read-only: a caller cannot corrupt another shot's rows


def test_unhashable_ramp_inputs_bypass_the_cache():
    # a segment with a list table (never produced by resolve) still samples, just uncached
    from seqgen.model import Device, Output, Segment, SourcePos

    dev = Device("d", 1e6, 1, None, "hold", SourcePos(""))
    out = Output("o", "o", "d", "analog", "V", -10.0, 10.0, 16, 0.0, "V", (0,) * 7)
    seg = Segment("o", "ramp", 0.0, 1e-3, 0.0, 1.0, "b", "ramp", SourcePos(""), shape="table",
                  table=[[0.0, 0.0], [0.5, 0.8], [1.0, 1.0]])
    before = len(RAMP_CACHE._items)
    rt, rv, err, limited = tables.sampled_ramp(out, seg, 0.0, 0, 1000, dev, out.sample_tolerance, False)
    assert len(RAMP_CACHE._items) == before
    assert rv[0] == pytest.approx(0.0) and rv[-1] == pytest.approx(1.0)


def test_held_trap_equals_the_separate_functions_and_the_harmonic_formula():
    # one minimisation for both numbers must give what the two functions give apart
    beams = (o.GaussianBeam(2.0, 60e-6, 1064e-9, direction=(1, 0, 0)),
             o.GaussianBeam(1.0, 45e-6, 1064e-9, direction=(0, 1, 0)))
    depth, omegas = o.held_trap(NA, beams)
    assert depth == o.trap_escape(NA, beams).depth_j
    assert np.array_equal(omegas, o.trap_frequencies(NA, beams))
    # deep single beam, gravity a small correction: omega_r = sqrt(4 U0/(m w0^2)) (harmonic expansion of the
    # Gaussian profile, Adv. At. Mol. Opt. Phys. 42, 95 (2000)) to within the sag's softening (< 1 %)
    w0, p = 40e-6, 5.0
    single = o.GaussianBeam(p, w0, 1064e-9)
    u0 = -o.dipole_potential_per_intensity(NA, 1064e-9) * 2 * p / (np.pi * w0 ** 2)
    _, om = o.held_trap(NA, (single,))
    assert om[-1] == pytest.approx(np.sqrt(4 * u0 / (NA.mass_kg * w0 ** 2)), rel=1e-2)
    assert u0 / sc.k > 1e-5  # a deep trap (> 10 uK), so the comparison above is meaningful


def test_held_trap_reports_no_frequencies_when_gravity_wins():
    w0 = 40e-6
    weak = o.GaussianBeam(0.9 * o.minimum_power_to_hold(NA, w0, 1064e-9), w0, 1064e-9)
    assert o.held_trap(NA, (weak,)) == (0.0, None)


def test_beam_frame_matches_the_direct_paraxial_formula():
    # the precomputed frame must give I = 2P/(pi w(s)^2) exp(-2 r^2/w(s)^2), w(s) = w0 sqrt(1 + (s/z_R)^2),
    # z_R = pi w0^2 / lambda (paraxial Gaussian beam, any optics text), for a tilted beam
    k = np.array([1.0, 1.0, 0.2]) / np.linalg.norm([1.0, 1.0, 0.2])
    b = o.GaussianBeam(0.3, 25e-6, 1064e-9, direction=tuple(k), focus_m=(1e-5, -2e-5, 3e-6))
    rng = np.random.default_rng(7)
    pts = np.array(b.focus_m) + rng.normal(scale=[3e-3, 3e-3, 3e-5], size=(200, 3))
    d = pts - np.array(b.focus_m)
    s = d @ k
    r2 = np.sum(d ** 2, axis=1) - s ** 2
    zr = np.pi * 25e-6 ** 2 / 1064e-9
    ws = 25e-6 * np.sqrt(1 + (s / zr) ** 2)
    ref = 2 * 0.3 / (np.pi * ws ** 2) * np.exp(-2 * r2 / ws ** 2)
    assert b.intensity(pts) == pytest.approx(ref, rel=1e-9, abs=1e-12 * ref.max())


def _demo_with_tof(tmp_path, tof):
    text = DEMO.read_text(encoding="utf-8")
    for sub in ("rigs", "common"):
        (tmp_path / sub).mkdir(exist_ok=True)
        for f in (SEQUENCES / sub).glob("*.yaml"):
            (tmp_path / sub / f.name).write_bytes(f.read_bytes())
    path = tmp_path / f"tof_{tof.split()[0]}.yaml"
    path.write_text(text.replace(text[text.index("  tof:"):].splitlines()[0], f"  tof: {tof}"), encoding="utf-8")
    return path


def test_scan_shots_share_the_trap_minimisations_of_the_beams_they_play(tmp_path):
    # two shots that differ only in the time of flight play the same trap beams before the release: the
    # second shot's trap minimisations are all hits of the content-keyed cache (keyed on the played powers),
    # and its findings equal those of the same shot checked cold
    first, second = _demo_with_tof(tmp_path, "11 ms"), _demo_with_tof(tmp_path, "14 ms")
    clear_shared_caches()
    preflight(first)
    misses, hits = held.cache_info().misses, held.cache_info().hits
    warm = preflight(second)
    assert held.cache_info().misses == misses and held.cache_info().hits > hits
    clear_shared_caches()
    cold = preflight(second)
    assert _findings(warm) == _findings(cold)
    assert report_rows(warm.shot) == report_rows(cold.shot)


def test_scan_shots_share_the_condensate_scaling_integrations(tmp_path):
    # the trap history before the release and the release at the push are the same in two time-of-flight shots:
    # the second shot integrates no scaling equation of its own (content-keyed caches), and its physics rows
    # equal those of the same shot checked cold
    from seqgen.predict import release_by_content, scaling_by_content

    first, second = _demo_with_tof(tmp_path, "11 ms"), _demo_with_tof(tmp_path, "14 ms")
    clear_shared_caches()
    preflight(first)
    assert scaling_by_content.cache_info().currsize > 0 and release_by_content.cache_info().currsize > 0
    misses = (scaling_by_content.cache_info().misses, release_by_content.cache_info().misses)
    warm = preflight(second)
    assert (scaling_by_content.cache_info().misses, release_by_content.cache_info().misses) == misses
    clear_shared_caches()
    cold = preflight(second)
    assert report_rows(warm.shot) == report_rows(cold.shot)
