"""`seqgen simulate`: the push-and-barrier stage in time, beside the stationary model of the barrier checks.

The solver itself is tested against closed forms in tests/test_gpe.py; here the command, its outputs, and the
agreement with the stationary single-atom model where that model holds."""

import json
import math
from pathlib import Path

import pytest
from scipy.constants import hbar

from seqgen.cli import main

from .conftest import SEQUENCES

DEMO = SEQUENCES / "na23_barrier_scatter.yaml"
FEW = Path(__file__).parent / "data" / "simulate_few_atoms.yaml"


def _json(capsys, *argv):
    code = main(["simulate", *map(str, argv), "--json"])
    captured = capsys.readouterr()
    assert "Traceback" not in captured.err
    return code, json.loads(captured.out)


def test_non_interacting_simulation_agrees_with_the_stationary_model_where_it_holds(capsys):
    # 500 atoms: the checks' velocity spread is close to the packet's, the path is free (sample.trap_frequencies),
    # every atom meets the sheet while it is on: single atoms crossing a static sheet, the stationary model's case
    code, doc = _json(capsys, FEW, "--interactions", "off")
    assert code == 0
    sim, st = doc["simulated"], doc["stationary"]
    assert 0.2 < st["transmitted"] < 0.8  # a sheet that tells: neither opaque nor transparent
    assert sim["transmitted"] == pytest.approx(st["transmitted"], abs=0.01)
    assert sim["rotation_rad"] == pytest.approx(st["rotation_rad"], rel=0.03)
    assert sim["precession_rad"] == pytest.approx(st["precession_rad"], rel=0.03)
    assert sim["alignment_rad"] == pytest.approx(st["alignment_rad"], rel=0.05)
    assert sim["missed_sheet"] < 1e-3
    assert sim["transmitted"] + sim["reflected"] == pytest.approx(1.0, abs=1e-9)
    # the stationary model over the simulated packet's own momenta: the crossing adds nothing to it
    assert sim["transmitted"] == pytest.approx(doc["stationary_over_simulated_packet"]["transmitted"], abs=2e-3)
    conv = doc["convergence"]
    assert conv["transmitted_change"] < 1e-3 and conv["rotation_change_rad"] < 1e-4
    assert doc["comparison"]["disagrees"] is False and doc["findings"] == []
    assert doc["numerics"]["norm_error"] < 1e-9
    assert doc["caution"].startswith("Preflight reduces mistakes")


def test_demo_with_interactions_shows_and_explains_the_difference(capsys):
    code = main(["simulate", str(DEMO), "--no-convergence"])
    out = capsys.readouterr().out
    assert code == 0
    assert "stationary (checks)" in out and "stationary (simulated packet)" in out
    assert "from the energies the packet meets the sheet with" in out and "in the crossing itself" in out
    assert "beyond the 1D regime" in out  # 6e4 atoms fill more than the guide's transverse ground state
    assert out.rstrip().splitlines()[-1].startswith("caution: ")
    code, doc = _json(capsys, DEMO, "--no-convergence")
    model, sim, st = doc["model"], doc["simulated"], doc["stationary"]
    assert model["interactions"] is True
    # g1D = 2 hbar omega_perp a (Phys. Rev. Lett. 81, 938 (1998)), times nothing else
    assert model["g1d_j_m"] == pytest.approx(2 * hbar * model["omega_perp_rad_s"] * model["scattering_length_m"],
                                             rel=1e-12)
    assert model["mu_1d_over_hbar_omega_perp"] == pytest.approx(
        model["mu_1d_peak_j"] / (hbar * model["omega_perp_rad_s"]), rel=1e-12)
    assert model["mu_1d_over_hbar_omega_perp"] > 1
    assert 0.0 < sim["transmitted"] < 1.0 and sim["rotation_rad"] > 0
    assert sim["transmitted"] + sim["reflected"] == pytest.approx(1.0, abs=1e-9)
    # the difference from the checks, split into its parts
    packet = doc["stationary_over_simulated_packet"]["transmitted"]
    assert (sim["transmitted"] - st["transmitted"]) == pytest.approx(
        (packet - st["transmitted"]) + (sim["transmitted"] - packet), abs=1e-12)
    course = doc["time_course"]
    assert course["t_s"][0] == 0.0 and course["t_s"][-1] == pytest.approx(doc["numerics"]["t_end_s"])
    assert course["transmitted"][-1] == pytest.approx(sim["transmitted"])
    assert course["transmitted"][0] == 0.0


def test_a_disagreement_is_a_finding_with_its_reason(capsys):
    # the demo without interactions: a narrow ground-state packet meets the sheet with far less energy spread
    # than the checks assume for the released condensate
    code, doc = _json(capsys, DEMO, "--interactions", "off", "--no-convergence")
    assert code == 0
    assert doc["comparison"]["disagrees"] is True
    assert "velocity_spread" in [r["name"] for r in doc["comparison"]["reasons"]]
    (f,) = doc["findings"]
    assert f["code"] == "physics.barrier-simulation-disagrees" and f["severity"] == "warning"
    assert f["line"] == 37 and f["block"] == "scatter" and f["hint"]
    assert main(["explain", "physics.barrier-simulation-disagrees"]) == 0
    assert "Phys. Rev. Lett. 81, 938 (1998)" in capsys.readouterr().out


def test_a_scanned_shot(capsys):
    code, doc = _json(capsys, DEMO, "--shot", "1", "--interactions", "off", "--no-convergence")
    assert code == 0
    assert doc["scan"]["shot"] == 1 and doc["scan"]["shots"] == 3
    assert main(["simulate", str(DEMO), "--shot", "7", "--no-convergence"]) == 2
    assert "has 3 shot(s)" in capsys.readouterr().err


def test_nothing_to_simulate_is_a_clear_message(capsys):
    assert main(["simulate", str(SEQUENCES / "na23_thermometry.yaml")]) == 2
    err = capsys.readouterr().err
    assert "no barrier" in err and "Traceback" not in err
    assert main(["simulate", "no/such/file.yaml"]) == 2
    assert main(["simulate", str(SEQUENCES / "faults" / "overlap.yaml")]) in (1, 2)
    assert "Traceback" not in capsys.readouterr().err


def test_output_folder_pictures_and_json_are_deterministic(tmp_path, capsys):
    out = tmp_path / "sim"
    args = ["simulate", str(FEW), "--interactions", "off", "--no-convergence", "-o", str(out)]
    assert main(args) == 0
    files = sorted(p.name for p in out.iterdir())
    assert files == ["density_initial.png", "density_initial.svg", "density_partner.png", "density_partner.svg",
                     "simulation.json"]
    first = {p.name: p.read_bytes() for p in out.iterdir()}
    assert first["density_initial.png"].startswith(b"\x89PNG\r\n\x1a\n")
    assert b"<svg" in first["density_partner.svg"] and b"Date" not in first["density_partner.svg"]
    doc = json.loads(first["simulation.json"])
    assert doc["caution"] and doc["simulated"]["transmitted"] > 0
    capsys.readouterr()
    assert main(args) == 2  # refuses to overwrite
    assert "--force" in capsys.readouterr().err
    assert main(args + ["--force"]) == 0
    doc2 = json.loads((out / "simulation.json").read_bytes())
    for name, data in first.items():
        if name != "simulation.json":
            assert (out / name).read_bytes() == data, name  # same input, same bytes
    doc["numerics"].pop("seconds"), doc2["numerics"].pop("seconds")  # wall time: the one thing that varies
    assert doc == doc2


def test_the_time_course_reads_the_spin_only_once_atoms_are_across(capsys):
    _, doc = _json(capsys, FEW, "--interactions", "off", "--no-convergence")
    course = doc["time_course"]
    first = next(i for i, v in enumerate(course["transmitted"]) if v > 1e-3)
    assert all(v is None for v in course["precession_rad"][: max(first - 5, 0)])
    assert math.isfinite(course["precession_rad"][-1])


def _variant(tmp_path, old, new):
    """The few-atom fixture with `old` replaced by `new`, beside copies of the rig and the file it uses."""
    import shutil

    shutil.copy(SEQUENCES / "rigs" / "na23_demo_rig.yaml", tmp_path / "rig.yaml")
    (tmp_path / "common").mkdir(exist_ok=True)
    shutil.copy(SEQUENCES / "common" / "na23_prep.yaml", tmp_path / "common" / "na23_prep.yaml")
    text = FEW.read_text(encoding="utf-8").replace("../../sequences/rigs/na23_demo_rig.yaml", "rig.yaml")
    text = text.replace("../../sequences/common/na23_prep.yaml", "common/na23_prep.yaml")
    assert old in text
    path = tmp_path / "variant.yaml"
    path.write_text(text.replace(old, new), encoding="utf-8")
    return path


def test_a_crossing_too_large_to_simulate_is_refused_in_one_line(tmp_path, capsys):
    path = _variant(tmp_path, "sheet_time: 20 ms", "sheet_time: 5 s")
    assert main(["simulate", str(path)]) == 2
    err = capsys.readouterr().err
    assert "time steps" in err and "bring the sheet closer" in err and "Traceback" not in err


def test_a_thermal_sample_is_not_simulated(tmp_path, capsys):
    path = _variant(tmp_path, "condensed: true", "condensed: false")
    assert main(["simulate", str(path)]) == 2
    assert "not a condensate" in capsys.readouterr().err


def test_a_shot_with_error_findings_is_not_simulated(capsys):
    """What a shot with errors would play is not what the sequence means: like a build, simulate refuses (exit 1)
    and prints the errors; with --json an object says so. The fault's expected code is its file's own header."""
    fault = SEQUENCES / "faults" / "hard_limit.yaml"
    code = fault.read_text(encoding="utf-8").splitlines()[0].split("expect:")[1].split("@")[0].strip()
    assert main(["simulate", str(fault)]) == 1
    captured = capsys.readouterr()
    assert code in captured.out and "caution" in captured.out and "error finding" in captured.err
    assert main(["simulate", str(fault), "--json"]) == 1
    doc = json.loads(capsys.readouterr().out)
    assert doc["simulated"] is None and code in {f["code"] for f in doc["findings"]} and doc["caution"]


def test_nothing_to_simulate_with_json_is_an_object_with_the_caution(capsys):
    assert main(["simulate", str(SEQUENCES / "na23_thermometry.yaml"), "--json"]) == 2
    doc = json.loads(capsys.readouterr().out)
    assert doc["simulated"] is None and doc["reason"] == "no_barrier" and doc["caution"]


def test_an_existing_output_is_refused_before_simulating(tmp_path, capsys):
    out = tmp_path / "sim"
    out.mkdir()
    (out / "simulation.json").write_text("{}", encoding="utf-8")
    assert main(["simulate", str(FEW), "--interactions", "off", "-o", str(out)]) == 2
    assert "--force" in capsys.readouterr().err
    assert (out / "simulation.json").read_text(encoding="utf-8") == "{}"  # nothing overwritten
