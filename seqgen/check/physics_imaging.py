"""Rules on the absorption-imaging probe: its D line, Doppler shift, recoil blur, exposure. They read
`seqgen.predict.imaging`."""

from __future__ import annotations

from ..codes import EXPOSURE_TOO_SHORT, IMAGING_BLUR, NOTHING_IMAGED, PROBE_DOPPLER, PROBE_OFF_RESONANCE
from ..findings import make
from ..predict.imaging import imaged_level, images, probe_analysis, probe_line
from ..predict.species import species
from ..textfmt import fmt_freq, fmt_length, fmt_pct, fmt_state, fmt_time, outward
from .rules import rule
from .ticks import duration_text


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
                       hint=f"shorten the probe to {duration_text(shot, act, act.args['duration'] / rep.doppler_linewidths * 0.5, 'down')} or lower its power",
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
                       time_s=act.t0, hint=f"shorten the probe to about {duration_text(shot, act, t_ok, 'down')}",
                       data={"blur_m": rep.blur, "pixel_m": rep.pixel})


@rule(NOTHING_IMAGED, stage="physics")
def nothing_imaged(shot):
    for act in images(shot):
        lvl = imaged_level(shot, act)
        if lvl is None or lvl.lit > 0 or lvl.possible:
            continue
        name = act.args["setup"]
        held = ", ".join(f"{fmt_state(*st)} ({fmt_pct(x)})" for st, x in lvl.held)
        faint = ("; below the detection floor in it: " + ", ".join(f"{fmt_state(*st)} ({fmt_pct(x, 2)})" for st, x in lvl.faint)
                 if lvl.faint else "")
        level = (f"F={lvl.F}" if lvl.F in lvl.levels else
                 f"F={lvl.F}, no ground level of {shot.sample.species} (F = {lvl.levels[0]} or {lvl.levels[1]})")
        target = lvl.held[0][0][0]
        move = (f"; or move the atoms to F={lvl.F} before the image (a repump pulse, or a clock pulse or sweep from "
                f"F={target} to F={lvl.F})" if lvl.F in lvl.levels else "")
        yield make(NOTHING_IMAGED, f"setup '{name}' images only {level} (imaged_F: {lvl.F}, no repumper), but no atoms "
                   f"are in it at the image: they are in {held}{faint}; the probe misses them and the picture is blank",
                   act.pos, block=act.block, time_s=act.t0,
                   hint=f"image the populated level: in the rig, setup '{name}', e.g. 'imaged_F: {target}' (or drop "
                        f"imaged_F for a repumped probe){move}",
                   data={"imaged_F": lvl.F, "setup_line": shot.rig.imaging[name].pos.line,
                         "states": [list(st) for st, _ in lvl.held]})


@rule(EXPOSURE_TOO_SHORT, stage="physics")
def exposure_too_short(shot):
    for act in images(shot):
        exp_s, dur = act.args.get("exposure"), act.args["duration"]
        if exp_s is not None and exp_s < dur * (1 - 1e-9):
            yield make(EXPOSURE_TOO_SHORT, f"camera exposure {fmt_time(exp_s)} is shorter than the probe pulse "
                       f"{fmt_time(dur)}", act.pos, block=act.block, time_s=act.t0,
                       hint=f"set exposure: {duration_text(shot, act, outward(dur), 'up')} or longer", data={"exposure_s": exp_s, "probe_s": dur})
