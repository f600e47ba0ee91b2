"""The ``thresh2hdl`` command. Each command is a thin layer over a library call.

Exit codes, in this one place: 0 success, 1 the hardware disagreed with the reference model
(in simulation, or a confirmed counterexample of a proof), 2 bad input or a missing tool,
3 a proof left undecided (a timeout, say), 4 an internal error (a bug: please report it),
130 interrupted.
"""

import sys

import click

from ..cost import DEVICES, TARGETS
from ..errors import EXIT_INPUT, EXIT_INTERNAL, InputError, ThreshError
from ..hardware import FULL_PIPELINE
from ..proof import DEFAULT_TIMEOUT_S
from ..reports import cost_text
from ..train import DEFAULT_MAX_WEIGHT_BITS, KEEP, RULES, FitOptions, choice_lines, digits_line
from .building import build, demo_model
from .checking import check
from .estimating import estimate_folder
from .explore_command import explore_options, run_explore
from .fit import fit_csv, quantize_npz
from .fit_fabric import fabric_options, fit_in_fabric
from .options import SIMULATORS, BuildOptions, build_flags
from .progress import Progress
from .proving import prove

__all__ = ["main"]


class _PipelineType(click.ParamType):
    """A count of register stages, or the word for one after every level."""

    name = "pipeline"

    def get_metavar(self, *args, **kwargs):
        return f"N|{FULL_PIPELINE}"

    def convert(self, value, param, ctx):
        if isinstance(value, int) or value == FULL_PIPELINE:
            return value
        try:
            return int(value)
        except ValueError:
            self.fail(f"{value!r} is not a number of register stages or {FULL_PIPELINE!r}",
                      param, ctx)


def _click_option(field, how):
    """The click option of one build option, from its one declaration (options.py)."""
    settings = {"default": field.default, "help": how.help}
    if how.show_default:
        settings["show_default"] = True
    if how.choices:
        settings["type"] = click.Choice(list(how.choices))
    elif how.kind == "switch":
        if "/" not in how.flag:         # else click's --name/--no-name, default None
            settings["is_flag"] = True
    elif how.kind != "text":
        settings["type"] = {"int": int, "float": float, "path": click.Path(dir_okay=False),
                            "pipeline": _PipelineType()}[how.kind]
    return click.option(how.flag, field.name, **settings)


def _build_options(command):
    """The options every command that builds takes (`build` and `demo` share them): the
    output folder, then each of BuildOptions' fields."""
    options = [click.option("--out", "out_dir", type=click.Path(file_okay=True, dir_okay=True),
                            required=True, help="Output folder (created; must be empty or "
                            "absent unless --force).")]
    options += [_click_option(field, how) for field, how in build_flags()]
    for option in reversed(options):
        command = option(command)
    return command


def _options(kwargs):
    """BuildOptions from a building command's keyword arguments (named as its fields)."""
    return BuildOptions(**{field.name: kwargs[field.name] for field, _ in build_flags()})


class _WeightBits(click.ParamType):
    """``--weight-bits``: a number of bits, or ``full``."""

    name = "B|full"

    def convert(self, value, param, ctx):
        if value == "full" or isinstance(value, int):
            return value
        try:
            return int(value)
        except ValueError:
            self.fail(f"{value!r} is neither a number of bits nor 'full'", param, ctx)


class _Progress(Progress):
    """Progress of the long steps on stderr, so that a run never sits silent: a line per step,
    and for a long simulation a percentage updated in place on a terminal, or a line at each
    quarter in a log (CI), not a flood. An error still ends stderr as its one line."""

    def __init__(self, terminal=None):
        self.terminal = sys.stderr.isatty() if terminal is None else terminal
        self.quarters = {}

    def __call__(self, done, total, text="simulating"):
        if total < 8192 and text == "simulating":     # a few seconds in Amaranth at most
            return
        percent = done * 100 // max(total, 1)
        if self.terminal:
            click.echo(f"\r  {text} {percent:3d}%", err=True, nl=done >= total)
            return
        quarter = percent // 25
        if quarter < self.quarters.get(text, 0):
            self.quarters[text] = 0              # the same step again (the next chunk)
        if quarter > self.quarters.get(text, 0):
            self.quarters[text] = quarter
            click.echo(f"  {text}: {percent}%", err=True)

    def note(self, text):
        click.echo(f"  {text}", err=True)


def _progress():
    return _Progress()


def _run_build(model, kwargs):
    result = build(model, kwargs["out_dir"], _options(kwargs), progress=_progress())
    for line in result.summary():
        click.echo(line)
    click.echo(f"wrote {result.out_dir}")


def flags_named(error, params):
    """``error`` with its field named as the command line names it: the library names a
    field as its keyword (``split_bits``), a command's option of that name is a flag
    (``--split-adders``). A field already a flag, or no option's, or in a file, stays."""
    flags = {}
    for param in params:
        if isinstance(param, click.Option):
            flag = next((o for o in param.opts if o.startswith("--")), param.opts[0])
            flags[flag.lstrip("-").replace("-", "_")] = flag    # --module: module
            flags[param.name] = flag                             # split_bits: --split-adders
    field = error.field
    if not isinstance(error, InputError) or error.source is not None or field not in flags:
        return error
    message = str(error).removeprefix(f"{field}: ")
    return InputError(message, field=flags[field])


class _Command(click.Command):
    """A command whose errors name its options by their flags (the one place they are
    mapped; see :func:`flags_named`)."""

    def invoke(self, ctx):
        try:
            return super().invoke(ctx)
        except InputError as error:
            named = flags_named(error, self.params)
            if named is error:
                raise
            raise named from None


class _Group(click.Group):
    command_class = _Command


@click.group(cls=_Group, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(package_name="thresh2hdl")
def cli():
    """Turn a trained threshold unit into sized, verified Verilog."""


@cli.command("build")
@click.argument("model_file", type=click.Path(dir_okay=True))
@_build_options
def build_command(model_file, **kwargs):
    """Build, verify and report the model in MODEL_FILE (TOML, see docs/model-format.md)."""
    _run_build(model_file, kwargs)


@cli.command("demo")
@_build_options
def demo_command(**kwargs):
    """Run the whole flow on the embedded synthetic pump-vibration scenario."""
    _run_build(demo_model(), kwargs)


_MAX_DIGITS_HELP = ("At most K nonzero canonical signed digits per weight (the adders of each "
                    "product with --arch shiftadd); default: no budget.")
_DIGIT_BUDGET_HELP = ("At most N nonzero canonical signed digits over all the weights, dropped "
                      "where the training decisions lose least; default: no budget.")


@cli.command("fit")
@click.argument("data_file", type=click.Path())
@click.option("--out", "out_path", type=click.Path(), required=True,
              help="Model file to write (a <name>.fit.json training log goes beside it).")
@click.option("--label", default="label", show_default=True, help="Label column.")
@click.option("--input-bits", type=int, default=None,
              help="Code width of every feature column (the ADC's bits).")
@click.option("--signed", is_flag=True, help="With --input-bits: two's complement codes.")
@click.option("--formats", "formats_file", type=click.Path(), default=None,
              help="TOML file of [[feature]] tables declaring each column's format.")
@click.option("--rule", type=click.Choice(RULES), default="classic",
              show_default=True, help="classic: w += (y - y_hat) x; symmetric: w += s x when s z <= 0.")
@click.option("--keep", type=click.Choice(KEEP), default=None,
              help="Which weights to keep (default pocket: the epoch's with the best training "
              "accuracy).")
@click.option("--epochs", type=int, default=100, show_default=True)
@click.option("--all-epochs", is_flag=True, help="Run every epoch, even after one with no mistakes.")
@click.option("--no-shuffle", is_flag=True, help="Visit rows in file order.")
@click.option("--seed", type=int, default=0, show_default=True)
@click.option("--holdout", type=float, default=0.0, show_default=True,
              help="Fraction of rows held out to measure accuracy.")
@click.option("--weight-bits", type=_WeightBits(), default=None,
              help="Bring the weights into B-bit signed range, or 'full' to keep full "
              f"precision (default: at most {DEFAULT_MAX_WEIGHT_BITS} bits).")
@click.option("--max-digits", type=int, default=None, help=_MAX_DIGITS_HELP)
@click.option("--digit-budget", type=int, default=None, help=_DIGIT_BUDGET_HELP)
@click.option("--module", "module_name", default="thresh_unit", show_default=True)
@click.option("--force", is_flag=True, help="Replace existing output files.")
@fabric_options
def fit_command(data_file, out_path, label, input_bits, signed, formats_file, rule, keep, epochs,
                all_epochs, no_shuffle, seed, holdout, weight_bits, max_digits, digit_budget,
                module_name, force, start_file, learning_rate, bias_bits, bias_step, latency):
    """Train integer threshold units on raw codes in DATA_FILE (CSV with a header)."""
    if start_file is not None:
        for line in fit_in_fabric(data_file, out_path, start_file, label=label,
                                  learning_rate=learning_rate, weight_bits=weight_bits,
                                  bias_bits=bias_bits, bias_step=bias_step, latency=latency,
                                  epochs=epochs, until_clean=not all_epochs, force=force)[3]:
            click.echo(line)
        return
    budget = {"weight_bits": None, "max_weight_bits": None} if weight_bits == "full" else \
        {"weight_bits": weight_bits}
    options = FitOptions(rule=rule, keep=keep or "pocket", epochs=epochs,
                         until_clean=not all_epochs, shuffle=not no_shuffle, seed=seed,
                         holdout=holdout, max_digits=max_digits, digit_budget=digit_budget,
                         **budget)
    model, log = fit_csv(data_file, out_path, label=label, input_bits=input_bits,
                         signed=signed, formats_file=formats_file, options=options,
                         module=module_name, force=force)
    for warning in log.warnings:
        click.echo(f"warning: {warning}", err=True)
    kind = f"bank of {len(model.units)} units" if model.is_bank else "one unit"
    click.echo(f"trained {kind}: epochs {log.epochs_run}, train accuracy {log.train_accuracy:.4f}"
               + (f", held-out {log.holdout_accuracy:.4f}" if log.holdout_accuracy is not None
                  else ""))
    for line in choice_lines(options, log, keep_given=keep is not None):
        click.echo(line)
    click.echo(f"wrote {out_path}")


@cli.command("quantize")
@click.argument("float_file", type=click.Path())
@click.option("--out", "out_path", type=click.Path(), required=True,
              help="Model file to write (a <name>.quantize.json log goes beside it).")
@click.option("--bits", type=int, default=None, help="Signed bits per weight (2..32).")
@click.option("--data", "data_file", type=click.Path(), default=None,
              help="CSV of labelled raw-code rows to choose the scale on and refine with.")
@click.option("--label", default="label", show_default=True, help="Label column of --data.")
@click.option("--sweep", is_flag=True, help="Try 2..12 bits, then budgets of digits in all, and "
              "recommend the fewest close enough.")
@click.option("--tolerance", type=float, default=0.01, show_default=True,
              help="How far below the float model a recommended width may be.")
@click.option("--refine-epochs", type=int, default=20, show_default=True)
@click.option("--max-digits", type=int, default=None, help=_MAX_DIGITS_HELP)
@click.option("--digit-budget", type=int, default=None, help=_DIGIT_BUDGET_HELP)
@click.option("--module", "module_name", default="thresh_unit", show_default=True)
@click.option("--seed", type=int, default=0, show_default=True)
@click.option("--force", is_flag=True, help="Replace existing output files.")
def quantize_command(float_file, out_path, bits, data_file, label, sweep, tolerance,
                     refine_epochs, max_digits, digit_budget, module_name, seed, force):
    """Fold a float model (FLOAT_FILE, .npz) onto raw codes as integer weights."""
    result = quantize_npz(float_file, out_path, bits=bits, data_path=data_file, label=label,
                          sweep=sweep, tolerance=tolerance, refine_epochs=refine_epochs,
                          module=module_name, seed=seed, force=force, max_digits=max_digits,
                          digit_budget=digit_budget)
    for b, agreement, accuracy, digits in result.sweep:
        extra = f", accuracy {accuracy:.4f}" if accuracy is not None else ""
        click.echo(f"  {b:2d} bits: agreement {agreement:.4f}{extra}, signed digits {digits}")
    if result.recommended_bits is not None:
        click.echo(f"recommended: {result.recommended_bits} bits")
    for n, agreement, accuracy, digits in result.digit_sweep:
        extra = f", accuracy {accuracy:.4f}" if accuracy is not None else ""
        click.echo(f"  at most {n} digits in all: agreement {agreement:.4f}{extra}, signed "
                   f"digits {digits}")
    if result.digit_sweep:
        n = result.recommended_digit_budget
        click.echo(f"recommended: at most {n} signed digits in all (--digit-budget {n})"
                   if n is not None else "recommended: no budget in all (none tried was close "
                   "enough)")
    extra = f", accuracy {result.accuracy:.4f} (float {result.float_accuracy:.4f})" \
        if result.accuracy is not None else ""
    click.echo(f"{result.bits}-bit weights: agreement with the float model "
               f"{result.agreement:.4f} on {result.rows_source}{extra}")
    click.echo(digits_line(result.digits_per_unit, result.max_digits, result.digit_budget))
    click.echo(f"wrote {out_path}")


# The simulators that run a Verilog file (Amaranth's runs the Amaranth design only).
_VERILOG_SIMULATORS = [name for name in SIMULATORS if name != "amaranth"]


@cli.command("check")
@click.argument("out_dir", type=click.Path())
@click.option("--netlist", type=click.Path(), default=None,
              help="Verify this Verilog file (same module and ports) instead of the folder's.")
@click.option("--simulator", type=click.Choice(_VERILOG_SIMULATORS), default="auto",
              show_default=True)
@click.option("--vectors", type=int, default=None,
              help="Random vectors (default: 1000000 with Verilator, 10000 with Icarus).")
@click.option("--seed", type=int, default=0, show_default=True)
def check_command(out_dir, netlist, simulator, vectors, seed):
    """Re-verify the Verilog of build folder OUT_DIR against its model."""
    result = check(out_dir, netlist=netlist, simulator=simulator, vectors=vectors, seed=seed,
                   progress=_progress())
    click.echo(f"{result.netlist}: {result.vectors_checked} vectors in {result.simulator_version}"
               f", {result.mismatches} mismatches")


@cli.command("estimate")
@click.argument("out_dir", type=click.Path())
@click.option("--device", default=None, metavar="NAME",
              help=f"The FPGA part: {', '.join(DEVICES)} (default: the target's first, "
              "else up5k).")
@click.option("--target", type=click.Choice(list(TARGETS)), default=None,
              help="The family: ice40 (default part up5k: UP5K, sg48) or ecp5 (ecp5-25: "
              "LFE5U-25F, CABGA256); with --device, a check that the part is of it.")
@click.option("--dsp/--no-dsp", default=None,
              help="Let synthesis put multipliers into DSP blocks, or not (default: without "
              "on ice40, with on ecp5).")
def estimate_command(out_dir, device, target, dsp):
    """Synthesise and place-and-route OUT_DIR's Verilog; add the cost to its report.json.

    Exit code 2 when the design does not fit the device (its synthesis figures are kept)."""
    figures = estimate_folder(out_dir, target=target, device=device, dsp=dsp,
                              progress=_progress())
    click.echo(f"{figures['device_id']} {figures['device_name']}: {cost_text(figures)} "
               f"({figures['tool_versions']['yosys'].split(' (')[0]}, "
               f"{figures['tool_versions']['nextpnr']})")


@cli.command("prove")
@click.argument("out_dir", type=click.Path())
@click.option("--netlist", type=click.Path(), default=None,
              help="Prove this Verilog file (same module and ports) instead of the folder's; "
              "recorded in the report by its file name.")
@click.option("--timeout", "timeout_s", type=float, default=DEFAULT_TIMEOUT_S,
              show_default=True,
              help="Seconds before the proof is reported undecided (exit code 3).")
@click.option("--simulator", type=click.Choice(_VERILOG_SIMULATORS), default="auto",
              show_default=True, help="Where a counterexample is re-run to confirm it.")
def prove_command(out_dir, netlist, timeout_s, simulator):
    """Prove OUT_DIR's Verilog equal to its model for every input in the declared ranges."""
    result = prove(out_dir, netlist=netlist, timeout_s=timeout_s, simulator=simulator,
                   progress=_progress())
    click.echo(result.summary())


@cli.command("explore")
@explore_options
def explore_command(**kwargs):
    """Explore a grid of designs on labelled rows (DATA_FILE, CSV): train or quantize, build,
    verify, place and score each point; write the front and the recommended build folder."""
    run_explore(kwargs, _progress())


def _fail(message, code):
    click.echo(f"thresh2hdl: error: {message}", err=True)
    sys.exit(code)


def main(argv=None):
    """Entry point: runs the command and maps every outcome to one line and an exit code."""
    try:
        cli.main(args=argv, prog_name="thresh2hdl", standalone_mode=False)
    except click.exceptions.Abort:
        _fail("interrupted", 130)
    except KeyboardInterrupt:
        _fail("interrupted", 130)
    except click.ClickException as error:
        _fail(error.format_message().replace("\n", " "), EXIT_INPUT)
    except ThreshError as error:
        _fail(str(error).replace("\n", " "), error.exit_code)
    except Exception as error:  # a bug; the user still gets one line
        _fail(f"internal error ({type(error).__name__}: {error}); please report it with the "
              f"model file", EXIT_INTERNAL)
    sys.exit(0)


if __name__ == "__main__":
    main()
