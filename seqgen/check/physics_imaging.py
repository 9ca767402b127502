"""Rules on the absorption-imaging probe: its D line, Doppler shift, recoil blur, exposure. They read
`seqgen.predict.imaging`."""

from __future__ import annotations

from ..codes import EXPOSURE_TOO_SHORT, IMAGING_BLUR, PROBE_DOPPLER, PROBE_OFF_RESONANCE
from ..findings import make
from ..predict.imaging import images, probe_analysis, probe_line
from ..predict.species import species
from ..textfmt import fmt_freq, fmt_length, fmt_time, outward
from .rules import rule


def _freq(f):
    return f"{f / 1e12:.4g} THz" if f >= 1e12 else fmt_freq(f)


@rule(PROBE_OFF_RESONANCE, stage="physics")
def probe_off_resonance(shot):
    for act in images(shot):
        line = probe_line(shot, act)
        if line is None or line.on_line:
            continue
        rep = probe_analysis(shot, act)
        setup = shot.rig.imaging[act.args["setup"]]
        scatter = (f"; it scatters {rep.photons:.3g} photons per atom" if rep else "")
        yield make(PROBE_OFF_RESONANCE, f"probe beam '{setup.probe_beam}' at {line.wavelength * 1e9:.7g} nm is "
                   f"{_freq(abs(line.detuning_hz))} {'blue' if line.detuning_hz > 0 else 'red'} of the "
                   f"{shot.sample.species} {line.line} line at {line.line_wavelength * 1e9:.7g} nm, "
                   f"{abs(line.detuning_linewidths):.3g} natural linewidths (limit {line.tolerance_hz / line.linewidth_hz:.3g})"
                   f"{scatter}", act.pos, block=act.block, time_s=act.t0,
                   hint=f"set the wavelength of '{setup.probe_beam}' to the {shot.sample.species} D2 line, "
                        f"{species(shot).d2_wavelength_m * 1e9:.10g} nm",
                   data={"detuning_hz": line.detuning_hz, "detuning_linewidths": line.detuning_linewidths})


@rule(PROBE_DOPPLER, stage="physics")
def probe_doppler(shot):
    for act in images(shot):
        rep = probe_analysis(shot, act)
        if rep and rep.doppler_linewidths > 1.0:
            yield make(PROBE_DOPPLER, f"{rep.photons:.3g} photons per atom (saturation {rep.saturation:.3g}) "
                       f"Doppler-shift the atoms by {fmt_freq(rep.doppler_hz)}, {rep.doppler_linewidths:.3g} natural "
                       f"linewidths, during the probe", act.pos, block=act.block, time_s=act.t0,
                       hint=f"shorten the probe to {fmt_time(act.args['duration'] / rep.doppler_linewidths * 0.5)} or lower its power",
                       data={"photons": rep.photons, "doppler_linewidths": rep.doppler_linewidths})


@rule(IMAGING_BLUR, stage="physics")
def imaging_blur(shot):
    for act in images(shot):
        rep = probe_analysis(shot, act)
        if rep and rep.pixel and rep.blur > rep.pixel:
            # blur grows as tau^(3/2) at fixed power
            t_ok = act.args["duration"] * (rep.pixel / rep.blur) ** (2 / 3) * 0.9
            yield make(IMAGING_BLUR, f"recoil blur {fmt_length(rep.blur, 3, unit='um')} ({rep.photons:.3g} photons per "
                       f"atom) exceeds one pixel, {fmt_length(rep.pixel, 3, unit='um')} in the atom plane", act.pos, block=act.block,
                       time_s=act.t0, hint=f"shorten the probe to about {fmt_time(t_ok)}",
                       data={"blur_m": rep.blur, "pixel_m": rep.pixel})


@rule(EXPOSURE_TOO_SHORT, stage="physics")
def exposure_too_short(shot):
    for act in images(shot):
        exp_s, dur = act.args.get("exposure"), act.args["duration"]
        if exp_s is not None and exp_s < dur * (1 - 1e-9):
            yield make(EXPOSURE_TOO_SHORT, f"camera exposure {fmt_time(exp_s)} is shorter than the probe pulse "
                       f"{fmt_time(dur)}", act.pos, block=act.block, time_s=act.t0,
                       hint=f"set exposure: {fmt_time(outward(dur))} or longer", data={"exposure_s": exp_s, "probe_s": dur})
