"""The absorption-imaging probe: which D line it addresses and how far from it, saturation, photons per atom,
Doppler shift and recoil blur of an image.

Steady-state scattering rate with its Lorentzian detuning factor and the saturation intensity (the alkali
D-line data compilations, e.g. Sodium D Line Data and Rubidium 87 D Line Data; Laser Cooling and Trapping,
Springer (1999) (from memory)); first-order Doppler shift; photon recoil (textbook)."""

from __future__ import annotations

import math
from dataclasses import dataclass

from .cache import per_shot_cache
from .pushes import played_power
from .split import split_components
from .species import species
from .states import populations

TWO_PI = 2 * math.pi
# A probe farther than this from its nearest D line is off resonance: 3 natural linewidths (common practice,
# no source), but never less than the step of a wavelength written to 1 pm (0.001 nm), half of it either way:
# a rig names the line it is locked to with a rounded wavelength (589.158 nm for the sodium D2 line at
# 589.1583 nm is 0.28 GHz away) and the lock, not the digits, sets the frequency.
OFF_RESONANCE_LINEWIDTHS = 3.0
WAVELENGTH_ROUNDING_M = 0.5e-12


def images(shot):
    return shot.actions("image")


@dataclass(frozen=True)
class ProbeLine:
    """The D line nearest the probe beam's wavelength: its name ("D1"/"D2"), wavelength (m) and linewidth
    Gamma/2pi (Hz); the beam's detuning from it (Hz, + blue) and the tolerance (Hz) within which the probe
    counts as locked to it; on_line: |detuning| <= tolerance; the beam's wavelength (m)."""

    line: str
    line_wavelength: float
    linewidth_hz: float
    detuning_hz: float
    tolerance_hz: float
    on_line: bool
    wavelength: float

    @property
    def detuning_linewidths(self) -> float:
        return self.detuning_hz / self.linewidth_hz


@per_shot_cache(lambda shot, act: ("probe-line", act.index, act.t0))
def probe_line(shot, act) -> ProbeLine | None:
    """The probe's nearest D line and detuning, or None (no species, no probe beam)."""
    from ..physics import imaging as im

    sp = species(shot)
    setup = shot.rig.imaging.get(act.args["setup"])
    beam = shot.rig.beams.get(setup.probe_beam) if setup and setup.probe_beam else None
    if sp is None or beam is None or not beam.wavelength_m:
        return None
    lines = (("D1", sp.d1_wavelength_m, sp.d1_linewidth_hz), ("D2", sp.d2_wavelength_m, sp.d2_linewidth_hz))
    name, lam0, width = min(lines, key=lambda ln: abs(im.optical_detuning_hz(beam.wavelength_m, ln[1])))
    delta = float(im.optical_detuning_hz(beam.wavelength_m, lam0))
    tol = max(OFF_RESONANCE_LINEWIDTHS * width, float(im.wavelength_step_hz(lam0, WAVELENGTH_ROUNDING_M)))
    return ProbeLine(name, lam0, width, delta, tol, abs(delta) <= tol, beam.wavelength_m)


@dataclass(frozen=True)
class ProbePrediction:
    """saturation s0, scattering rate (1/s), photons per atom, recoil velocity (m/s), Doppler shift after the
    probe (Hz and in natural linewidths), recoil blur (m), the camera pixel in the atom plane (m or None) and
    the detuning (Hz) the scattering rate was computed at: the image's `detuning`, plus the beam's detuning
    from its D line when it is off that line (see ProbeLine)."""

    saturation: float
    rate: float
    photons: float
    recoil: float
    doppler_linewidths: float
    doppler_hz: float
    blur: float
    pixel: float | None = None
    detuning_hz: float = 0.0


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
    power = played_power(shot, beam, act.t0, act.t0 + dur, power)  # as the hardware plays it during the pulse
    s0 = float(im.saturation_parameter(power, beam.waist_m, sp.saturation_intensity_w_m2))
    line = probe_line(shot, act)
    # off its line the two-level rate falls with the Lorentzian 1/(1 + s + 4 Delta^2/Gamma^2); on it the
    # image's `detuning` (from the locked resonance) is the whole detuning
    detuning = act.args.get("detuning", 0.0) + (line.detuning_hz if line and not line.on_line else 0.0)
    rate = float(im.scattering_rate(gamma, s0, TWO_PI * detuning))
    n = float(im.photons_per_atom(rate, dur))
    v_rec = float(recoil_velocity(beam.wavelength_m, sp.mass_kg))
    pixel = None
    if setup.pixel_size_m and setup.magnification:
        pixel = float(im.pixel_size_object_plane(setup.pixel_size_m, setup.magnification))
    return ProbePrediction(s0, rate, n, v_rec,
                           float(im.doppler_shift_linewidths(n, v_rec, beam.wavelength_m, sp.d2_linewidth_hz)),
                           float(im.doppler_shift_after(n, v_rec, beam.wavelength_m)),
                           float(im.recoil_blur(n, v_rec, dur)), pixel, float(detuning))


@dataclass(frozen=True)
class ImagedLevel:
    """What a state-selective probe (the setup's `imaged_F`) finds at an image: F; levels (the species' ground
    levels); held ((state, fraction), ...): the populated components at the image (the forward model's
    `split.split_components`, above the detection floor), most populated first; lit: the fraction of the atoms among
    them in level F; faint ((state, fraction), ...): states of level F below the detection floor; possible: a
    barrier's modulation may have put atoms in level F (its fraction is not followed)."""

    F: int
    levels: tuple
    held: tuple
    lit: float
    faint: tuple
    possible: bool


@per_shot_cache(lambda shot, act: ("imaged-level", act.index, act.t0))
def imaged_level(shot, act) -> ImagedLevel | None:
    """The imaged level of a state-selective image and what it holds, or None (no `imaged_F`, no species, no
    populated component, or a component whose state is unknown)."""
    sp = species(shot)
    setup = shot.rig.imaging.get(act.args.get("setup"))
    if sp is None or setup is None or setup.imaged_F is None:
        return None
    comps = split_components(shot, act)
    if comps is None or not comps.components or any(c.state is None for c in comps.components):
        return None
    held: dict = {}
    for c in comps.components:
        held[c.state] = held.get(c.state, 0.0) + c.fraction
    f = setup.imaged_F
    pop = populations(shot, act.t0)
    i = sp.nuclear_spin
    return ImagedLevel(f, (int(round(i - 0.5)), int(round(i + 0.5))),
                       tuple(sorted(held.items(), key=lambda kv: -kv[1])),
                       float(sum(x for st, x in held.items() if st[0] == f)),
                       tuple((st, x) for st, x in comps.empty if st is not None and st[0] == f),
                       bool(pop is not None and any(st[0] == f for st in pop.possible)))
