"""``thresh2hdl fit --in-fabric``: what a unit built with ``--on-chip-learning`` learns from a
CSV of labelled rows fed in file order, predicted on the host bit for bit.

The rule's constants (eta, the bias step, the registers' widths) are resolved exactly as
``build`` resolves them, by :class:`~thresh2hdl.hardware.UnitConfig`, so that the same
options give the same registers on both sides.
"""

import json
from pathlib import Path

import click

from ..errors import InputError
from ..hardware import UnitConfig
from ..model import dataset_for_model, load_model, model_to_toml, read_csv
from ..outdir import write_files
from ..train import fit_on_chip
from .fit import check_outputs, log_path_for

__all__ = ["fit_in_fabric", "fabric_options"]


def fit_in_fabric(data_path, out_path, start_path, *, label="label", learning_rate="1",
                  weight_bits=None, bias_bits=None, bias_step=None, latency=1, epochs=20,
                  until_clean=True, force=False):
    """Run the on-chip rule over ``data_path``'s rows, in file order, epoch after epoch, from
    ``start_path``'s weights (the model the hardware is built from); write the registers
    after the last epoch as ``out_path`` and the log beside it. ``latency``: the build's
    delay in cycles (its report's ``delay_cycles``: the latency, plus the learning lag of the
    form built for speed; rows fed back to back do not see the updates of that many rows
    before them); each epoch ends with the pipeline drained. ``weight_bits`` ``"full"``: the
    default. Returns ``(model, log, rule, summary lines)``."""
    if not isinstance(latency, int) or isinstance(latency, bool) or not 0 <= latency <= 4096:
        raise InputError(f"must be an integer from 0 to 4096 (the build's delay_cycles), "
                         f"not {latency!r}", field="latency")
    out_path = Path(out_path)
    check_outputs(out_path, "fit", (data_path, start_path))
    start = load_model(start_path)
    config = UnitConfig(start, on_chip_learning=True, learning_rate=learning_rate,
                        weight_bits=None if weight_bits == "full" else weight_bits, bias_bits=bias_bits, bias_step=bias_step)
    rule = config.learning_rule
    dataset = dataset_for_model(read_csv(data_path, label=label), start)
    model, log = fit_on_chip(dataset, start, rule, epochs=epochs, until_clean=until_clean,
                             delay=latency)
    record = {"data": Path(data_path).name, "rows": len(dataset),
              "start_model": Path(start_path).name,
              "options": {"in_fabric": True, "learning_rate": str(rule.learning_rate),
                          "bias_step": rule.bias_step, "weight_bits": rule.weight_bits,
                          "bias_bits": rule.bias_bits, "latency": latency, "epochs": epochs,
                          "until_clean": until_clean},
              "mistakes_per_epoch": [log.mistakes_per_epoch],
              "epochs_run": [len(log.mistakes_per_epoch)],
              "train_accuracy": log.train_accuracy, "holdout_accuracy": None}
    comment = (f"Learned by thresh2hdl fit --in-fabric on {Path(data_path).name} "
               f"({len(dataset)} rows) from {Path(start_path).name}; train accuracy "
               f"{log.train_accuracy:.4f}")
    write_files({out_path: model_to_toml(model, comment=comment),
                 log_path_for(out_path, "fit"): json.dumps(record, indent=2) + "\n"},
                force=force)
    summary = [f"learned in fabric order: {len(log.mistakes_per_epoch)} epoch(s), mistakes "
               f"{log.mistakes_per_epoch}, train accuracy {log.train_accuracy:.4f} (eta "
               f"{rule.learning_rate}, bias step {rule.bias_step}, registers "
               f"{rule.weight_bits}/{rule.bias_bits} bits)", f"wrote {out_path}"]
    return model, log, rule, summary


def fabric_options(command):
    """The fit command's options of the in-fabric mode (its click layer)."""
    for option in reversed([
            click.option("--in-fabric", "start_file", type=click.Path(), default=None,
                         help="Learn as a unit built from START_FILE with --on-chip-learning "
                         "does: rows in file order, saturating registers (--weight-bits, "
                         "--bias-bits), the same --learning-rate and --bias-step."),
            click.option("--learning-rate", default="1", show_default=True,
                         help="With --in-fabric."),
            click.option("--bias-bits", type=int, default=None, help="With --in-fabric."),
            click.option("--bias-step", type=int, default=None, help="With --in-fabric."),
            click.option("--latency", type=int, default=1, show_default=True,
                         help="With --in-fabric: the build's delay_cycles (report.json, "
                         "on_chip_learning: latency_cycles, plus 1 with --dsp-products).")]):
        command = option(command)
    return command
