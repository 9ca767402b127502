"""The absorption-imaging probe: saturation, photons per atom, Doppler shift and recoil blur of an image.

Steady-state scattering rate and saturation intensity (the alkali D-line data compilations, e.g. Sodium D
Line Data); first-order Doppler shift; photon recoil (textbook)."""

from __future__ import annotations

import math
from dataclasses import dataclass

from .cache import per_shot_cache
from .species import species

TWO_PI = 2 * math.pi


def images(shot):
    return shot.actions("image")


@dataclass(frozen=True)
class ProbePrediction:
    """saturation s0, scattering rate (1/s), photons per atom, recoil velocity (m/s), Doppler shift after the
    probe (Hz and in natural linewidths), recoil blur (m) and the camera pixel in the atom plane (m or None)."""

    saturation: float
    rate: float
    photons: float
    recoil: float
    doppler_linewidths: float
    doppler_hz: float
    blur: float
    pixel: float | None = None


@per_shot_cache(lambda shot, act: ("state-probe", act.index, act.t0))
def probe_analysis(shot, act) -> ProbePrediction | None:
    """The probe of an image, or None (no species, no probe beam with a waist, no probe power, on/off probe)."""
    from ..physics import imaging as im
    from ..physics.kinematics import recoil_velocity

    sp = species(shot)
    setup = shot.rig.imaging.get(act.args["setup"])
    beam = shot.rig.beams.get(setup.probe_beam) if setup and setup.probe_beam else None
    power = act.args.get("probe_power")
    if sp is None or beam is None or not beam.waist_m or power is None:
        return None
    out = shot.rig.outputs.get(beam.power_channel)
    if out is not None and out.kind == "digital":
        return None  # on/off probe: its power is not known
    dur = act.args["duration"]
    gamma = TWO_PI * sp.d2_linewidth_hz
    s0 = float(im.saturation_parameter(power, beam.waist_m, sp.saturation_intensity_w_m2))
    rate = float(im.scattering_rate(gamma, s0, TWO_PI * act.args.get("detuning", 0.0)))
    n = float(im.photons_per_atom(rate, dur))
    v_rec = float(recoil_velocity(beam.wavelength_m, sp.mass_kg))
    pixel = None
    if setup.pixel_size_m and setup.magnification:
        pixel = float(im.pixel_size_object_plane(setup.pixel_size_m, setup.magnification))
    return ProbePrediction(s0, rate, n, v_rec,
                           float(im.doppler_shift_linewidths(n, v_rec, beam.wavelength_m, sp.d2_linewidth_hz)),
                           float(im.doppler_shift_after(n, v_rec, beam.wavelength_m)),
                           float(im.recoil_blur(n, v_rec, dur)), pixel)
