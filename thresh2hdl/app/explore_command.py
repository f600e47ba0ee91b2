"""The ``explore`` command's options and what it prints; ``cli.py`` registers it.

Grid options take comma-separated lists (``--archs tree,shiftadd --pipelines 1,2,3``); the
word ``none`` stands for "no split" or "no budget", ``own`` for the starting point's own
weights. A constraint picks the recommended point; ``--device`` alone also narrows the grid to
that part.
"""

import click

from ..analysis import ARCHITECTURES
from ..cost import DEVICES
from ..errors import InputError
from ..explore import DEFAULT_GRID, Constraints, Grid
from .exploring import EXPLORE_VECTORS, explore
from .explore_point import SIMULATOR_TOOLS

__all__ = ["explore_options", "run_explore"]


def _shown(values):
    return ",".join("none" if v is None else str(v) for v in values)


def _listed(text, field, words=(), numbers=True):
    """A grid axis from its option's text: a tuple of whole numbers, ``words`` (``none`` /
    ``own`` are None) or names."""
    if text is None:
        return getattr(DEFAULT_GRID, field)
    values = []
    for item in (part.strip() for part in text.split(",")):
        if not item:
            continue
        if item.lower() in words:
            values.append(None)
        elif numbers:
            try:
                values.append(int(item))
            except ValueError:
                raise InputError(f"{item!r} is not a whole number"
                                 + (f" or {'/'.join(words)}" if words else ""),
                                 field=field) from None
        else:
            values.append(item.lower())
    return tuple(values)


_GRID_OPTIONS = [
    ("--weight-bits", "weight_bits", "Signed bits a weight (own: the start's own choice).",
     ("own",)),
    ("--digit-budgets", "digit_budgets", "Nonzero signed digits over all the weights "
     "(none: no budget).", ("none",)),
    ("--archs", "archs", f"Architectures: {', '.join(ARCHITECTURES)}.", ()),
    ("--pipelines", "pipelines", "Register stages.", ()),
    ("--splits", "split_bits", "Split adders wider than this (none: no split).", ("none",)),
    ("--devices", "devices", f"FPGA parts: {', '.join(DEVICES)} (default: --device's, else "
     f"{_shown(DEFAULT_GRID.devices)}).", ()),
    ("--placement-seeds", "placement_seeds", "nextpnr placement seeds.", ()),
]


def explore_options(command):
    """Every option of ``explore``, on ``command``."""
    options = [
        click.argument("data_file", type=click.Path(), required=False),
        click.option("--out", "out_dir", type=click.Path(), required=True,
                     help="Folder of the results (created; an earlier exploration's folder "
                     "is resumed: its finished points are reused)."),
        click.option("--start", type=click.Path(), default=None,
                     help="A float model (.npz) to quantize or an integer model file (.toml); "
                     "default: fit on DATA_FILE."),
        click.option("--demo", is_flag=True, help="Start from the embedded synthetic pump "
                     "scenario (without DATA_FILE: on synthetic labelled rows)."),
        click.option("--label", default="label", show_default=True, help="Label column."),
        click.option("--input-bits", type=int, default=None,
                     help="Code width of every feature column, for fit."),
        click.option("--signed", is_flag=True, help="With --input-bits: two's complement."),
    ]
    for flag, field, text, _ in _GRID_OPTIONS:
        shown = "" if field == "devices" else f" [default: {_shown(getattr(DEFAULT_GRID, field))}]"
        options.append(click.option(flag, field, default=None, metavar="LIST",
                                    help=text + shown))
    options += [
        click.option("--min-accuracy", type=float, default=None,
                     help="Recommend only points at least this accurate on the held-out rows."),
        click.option("--min-fmax", "min_fmax_mhz", type=float, default=None,
                     help="Recommend only points closing this clock (MHz)."),
        click.option("--device", default=None, metavar="NAME",
                     help="Recommend only points on this part."),
        click.option("--max-latency-ns", type=float, default=None,
                     help="Recommend only points whose result follows its input within this."),
        click.option("--holdout", type=float, default=0.25, show_default=True,
                     help="Share of the rows held out to score every point on."),
        click.option("--seed", type=int, default=0, show_default=True,
                     help="Seed of the held-out split, training and the verification vectors."),
        click.option("--vectors", type=int, default=EXPLORE_VECTORS, show_default=True,
                     help="Random vectors each point is verified on, besides its corner cases "
                     "(fewer than a build's)."),
        click.option("--simulator", type=click.Choice(list(SIMULATOR_TOOLS)), default="icarus",
                     show_default=True, help="Where each point is verified."),
        click.option("--workers", type=int, default=None,
                     help="Processes of the local pool (default: one per core)."),
        click.option("--scheduler", default=None, metavar="ADDRESS",
                     help="Run on the Dask cluster of this scheduler (tcp://host:8786) "
                     "instead of the local pool."),
    ]
    for option in reversed(options):
        command = option(command)
    return command


def run_explore(kwargs, progress):
    """Run the command: the grid from its options, the exploration, the lines it prints."""
    if kwargs["demo"] and kwargs["start"] is not None:
        raise InputError("give --start or --demo, not both", field="--demo")
    axes = {field: _listed(kwargs[field], field, words, numbers=field not in
                           ("archs", "devices"))
            for _, field, _, words in _GRID_OPTIONS}
    if kwargs["devices"] is None and kwargs["device"] is not None:
        axes["devices"] = (kwargs["device"].lower(),)
    grid = Grid(**axes)
    constraints = Constraints(min_accuracy=kwargs["min_accuracy"],
                              min_fmax_mhz=kwargs["min_fmax_mhz"], device=kwargs["device"],
                              max_latency_ns=kwargs["max_latency_ns"])
    result = explore(kwargs["data_file"], kwargs["out_dir"], grid,
                     start="demo" if kwargs["demo"] else kwargs["start"],
                     constraints=constraints, scheduler=kwargs["scheduler"],
                     workers=kwargs["workers"], vectors=kwargs["vectors"],
                     simulator=kwargs["simulator"], holdout=kwargs["holdout"],
                     seed=kwargs["seed"], label=kwargs["label"],
                     input_bits=kwargs["input_bits"], signed=kwargs["signed"],
                     progress=progress)
    summary, best = result.summary, result.recommended
    click.echo(f"{len(summary['points'])} point(s) finished of {summary['grid_points']} "
               f"({result.computed} task(s) run, {result.reused} from the cache; "
               f"{len(summary['failed'])} failed, {len(summary['skipped'])} skipped) on "
               f"{summary['run']['where']}")
    click.echo(f"front: {len(summary['front'])} point(s) of accuracy against logic cells, "
               f"results per second and latency")
    click.echo(f"recommended: {best['arch']}, pipeline {best['pipeline']}, "
               f"{'split ' + str(best['split_bits']) + ', ' if best['split_bits'] else ''}"
               f"{best['device']} seed {best['placement_seed']}: accuracy "
               f"{best['accuracy']:.4f}, {best['logic_cells']} logic cells, "
               f"{best['fmax_mhz']:.1f} MHz, latency {best['latency_ns']:.1f} ns")
    click.echo(f"wrote {result.out_dir / 'front.html'} (and front.json, front.csv, "
               f"recommended/)")
