"""The cost of a build folder's Verilog on an FPGA part, written into its report."""

from dataclasses import replace

from ..cost import choose_device, estimate_cost, synthesis_figures
from ..emit import emit_verilog, port_table
from ..errors import DoesNotFitError
from ..hardware import make_component
from ..outdir import write_files
from ..readers import read_text
from ..reports import store_estimate
from .folder import load_folder, report_files
from .languages import verilog_of
from .progress import progress_of

__all__ = ["estimate_folder"]


def estimate_folder(out_dir, *, target=None, device=None, dsp=None, progress=None):
    """Cost of a build folder's Verilog on a part (``device``: a name of DEVICES; ``target``
    alone: its family's default part); written into its report.json beside the other
    devices'. ``dsp``: multipliers into DSP blocks (None: the family's custom; see
    estimate_cost). A design larger than the device is recorded unplaced, then refused.
    ``progress``: a :class:`~thresh2hdl.app.progress.Progress`."""
    part = choose_device(device, target)        # a bad name is refused before any work
    progress = progress_of(progress)
    folder = load_folder(out_dir)
    model, component, report = folder.model, folder.component, folder.report
    text = read_text(folder.verilog, "Verilog file") if folder.verilog else \
        verilog_of(folder.vhdl, model, port_table(component, model))   # GHDL's reading
    target = part.family
    try:
        figures, failure = estimate_cost(text, model.module, port_table(component, model),
                                         device=part.key, progress=progress.note,
                                         dsp=dsp), None
    except DoesNotFitError as error:
        figures, failure = error.figures, error
    guard = component.config.guard
    if guard.needed and (guard.clamp or guard.flag):
        # The guard's cost: the same design without it, synthesised the same way.
        progress.note("synthesising the same design without the input guard, for its cost")
        bare = make_component(replace(component.config, clamp=False, range_flag=False))
        plain = synthesis_figures(emit_verilog(bare, model), model.module, target=target,
                                  dsp=dsp)
        figures["input_guard"] = {
            "lut4_equivalents": figures["lut4_equivalents"] - plain["lut4_equivalents"],
            "flip_flops": figures["flip_flops"] - plain["flip_flops"], "without_guard": plain}
    store_estimate(report, figures)
    write_files(report_files(folder.path, report), force=True)
    if failure is not None:
        raise DoesNotFitError(f"{folder.path}: {failure} (the synthesis figures are in "
                              f"report.json, marked not placed)", figures=figures) from None
    return figures
