"""Pictures of a shot: timeline plots, diff plots and the SVG of the preflight report.

`timeline_figure(shot, compiled, findings)` draws one lane per output, grouped
by device, in physical units (the output unit on a secondary axis where a
calibration maps one to the other). The solid step curve is what the channel
table makes the hardware output (after latency compensation and quantization);
the dashed curve is the intended value from the sequence's segments, i.e. when the output acts (a lane
whose latency shows in the window says its table is the command sent early). Outputs the shot never writes
get no lane unless `all_lanes` (one line names them). Block
spans are shaded and labelled in a strip at the top, findings are marked at
their sequence time by severity, and physics panels (trap depth and trap
frequencies along trap ramps, the falling cloud at each image) follow the
lanes where the shot has them.

`diff_figure(old, new)` overlays two versions and highlights the windows where
an output differs; `diff_windows` computes those windows from the two compiled
tables on the union of their change times.

Matplotlib is used without pyplot (no global state, no display needed): the
figures are plain `matplotlib.figure.Figure` objects rendered with Agg.
Modules by job: `layout` (look, label placement, figure rows and strips), `lanes`
(one lane per output), `panels` (physics panels; the one place that fetches physics predictions),
`timeline`, `diff` (two versions overlaid) and `files` (rendering and atomic saving).

Saving is atomic (temporary file, then rename) and deterministic (no dates in
the metadata, fixed SVG ids); an existing file is replaced only with force.
"""

from .diff import diff_figure, diff_windows
from .files import FORMATS, OutputExists, figure_bytes, format_of, save_figure, svg_text, write_atomic
from .lanes import decimate, hardware_series, intended_series, latency_note
from .layout import (
    SEVERITY_STYLE, PlotError, dense_hint, detail_window, parse_channels, parse_time, select_outputs, time_axis,
    written_outputs,
)
from .timeline import timeline_figure

__all__ = [
    "FORMATS", "SEVERITY_STYLE", "OutputExists", "PlotError", "dense_hint", "detail_window", "diff_figure",
    "diff_windows", "figure_bytes", "format_of", "hardware_series", "intended_series", "latency_note",
    "parse_channels", "parse_time", "save_figure", "select_outputs", "svg_text", "time_axis", "timeline_figure",
    "write_atomic", "written_outputs", "decimate",
]
