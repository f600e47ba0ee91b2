"""The ``thresh2hdl`` command. Each command is a thin layer over a library call.

Exit codes, in this one place: 0 success, 1 the hardware disagreed with the reference model,
2 bad input or a missing tool, 4 an internal error (a bug: please report it), 130 interrupted.
"""

import sys

import click

from .errors import EXIT_INPUT, EXIT_INTERNAL, ThreshError
from .flow import BuildOptions, build, demo_model

__all__ = ["main"]


def _build_options(command):
    """The options every command that builds takes (`build` and `demo` share them)."""
    options = [
        click.option("--out", "out_dir", type=click.Path(file_okay=True, dir_okay=True),
                     required=True, help="Output folder (created; must be empty or absent "
                     "unless --force)."),
        click.option("--pipeline", type=int, default=1, show_default=True,
                     help="Register stages: 0 is combinational, 1 registers the outputs, more "
                     "split the adder tree."),
        click.option("--module", "module_name", default=None,
                     help="Verilog module name (default: the model file's)."),
        click.option("--score-bits", type=int, default=None,
                     help="Width of the score port; wider than needed gives headroom."),
        click.option("--vectors", type=int, default=10_000, show_default=True,
                     help="Random vectors to verify, on top of the corner cases."),
        click.option("--seed", type=int, default=0, show_default=True,
                     help="Seed of the random vectors and handshake gaps."),
        click.option("--force", is_flag=True, help="Replace a non-empty output folder."),
    ]
    for option in reversed(options):
        command = option(command)
    return command


def _options(kwargs):
    return BuildOptions(pipeline=kwargs["pipeline"], module=kwargs["module_name"],
                        score_bits=kwargs["score_bits"], vectors=kwargs["vectors"],
                        seed=kwargs["seed"], force=kwargs["force"])


def _progress():
    """A progress callback for long simulations, drawn only on an interactive terminal."""
    if not sys.stderr.isatty():
        return None
    def show(done, total):
        if total > 20_000:
            click.echo(f"\r  simulating {done * 100 // total:3d}%", err=True, nl=done >= total)
    return show


def _run_build(model, kwargs):
    result = build(model, kwargs["out_dir"], _options(kwargs), progress=_progress())
    for line in result.summary():
        click.echo(line)
    click.echo(f"wrote {result.out_dir}")


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
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
