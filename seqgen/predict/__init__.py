"""Stage 4a: per-shot physics predictions, as frozen typed results, cached per shot (and, for the trap
minimisations, by content across shots). Predictions carry numbers, not findings: the rules of
`seqgen.check` read them and decide what to report; `report_rows` turns them into the physics notes that
`show --physics`, the plot and the HTML report print.

Modules by subject, each importing only those before it: cache, played (what the hardware plays: the
compiled tables read back in physical units, which every prediction reads), species, traps, states, magnetic,
pushes, cloud, barrier, imaging, images (the optical depth each image records), text (words for the numbers),
report.
"""

from __future__ import annotations

from .barrier import BarrierPrediction, analyse as barrier_analysis, cloud_along_path, incident_velocity
from .cache import clear_shot_cache, per_shot_cache
from .cloud import scaling_by_content
from .barrier import release_by_content
from .cloud import (CloudAtImage, ImagePrediction, Separation, SizeUnknown, cloud_at_image, image_prediction,
                    separation_analysis)
from .imaging import ProbePrediction, probe_analysis
from .images import ImagedComponent, PredictedImage, predicted_image, predicted_images
from .magnetic import HoldPrediction, hold_analysis
from .played import INTENDED, PLAYED, Track, clear_physical, compiled_shot, played, played_source
from .pushes import Components, PushPrediction, components_at, push_analysis
from .report import PhysicsRow, report_rows
from .split import REFLECTED, TRANSMITTED, SheetHit, sheet_hits, split_components
from .species import LevelProblem, gaussian_beams, species
from .states import (BarrierDrive, Interferometer, Populations, PulsePrediction, SweepPrediction,
                     barrier_drive_analysis, interferometer_analysis, interferometers, populated_states,
                     populations, pulse_analysis, state_fractions, sweep_analysis)
from .traps import (HeldTrap, TrapStage, TrapWrite, held, trap_stage, trap_stage_prediction, trap_writes,
                    write_prediction)

__all__ = [
    "BarrierDrive", "BarrierPrediction", "CloudAtImage", "Components", "HeldTrap", "HoldPrediction",
    "INTENDED", "ImagePrediction", "ImagedComponent", "PredictedImage", "predicted_image", "predicted_images", "Interferometer", "PLAYED", "Track", "LevelProblem", "PhysicsRow", "Populations", "ProbePrediction", "PulsePrediction",
    "PushPrediction", "Separation", "SizeUnknown", "SweepPrediction", "TrapStage",
    "barrier_analysis", "barrier_drive_analysis", "clear_caches", "cloud_along_path", "cloud_at_image",
    "compiled_shot", "components_at", "gaussian_beams", "held", "hold_analysis", "image_prediction", "incident_velocity",
    "interferometer_analysis", "interferometers", "per_shot_cache", "played", "played_source", "populated_states", "populations",
    "probe_analysis", "pulse_analysis", "push_analysis", "report_rows", "separation_analysis", "species",
    "state_fractions", "sweep_analysis", "trap_stage", "trap_stage_prediction", "trap_writes", "write_prediction", "TrapWrite",
    "REFLECTED", "TRANSMITTED", "SheetHit", "sheet_hits", "split_components",
]


def clear_caches() -> None:
    """Drop the per-shot analyses (of this thread) and the content-keyed trap minimisations."""
    clear_shot_cache()
    clear_physical()
    held.cache_clear()
    scaling_by_content.cache_clear()
    release_by_content.cache_clear()
