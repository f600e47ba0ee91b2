"""A build's options, each declared once: its field, default, choices, flag and help.

:class:`BuildOptions` is what :func:`~thresh2hdl.app.building.build` takes; the command line
makes its options from these fields (``cli.py``), so a flag, its default, its choices and its
help cannot drift from the library's. The design's choices (pipeline, arch, widths, guard) are
validated by :class:`~thresh2hdl.hardware.UnitConfig` alone; the rest here.
"""

import os
from dataclasses import dataclass, field, fields
from typing import ClassVar

from ..analysis import ARCHITECTURES
from ..errors import InputError
from ..hardware import (DEFAULT_RESET, FULL_PIPELINE, INTERFACES, RESET_KINDS, WEIGHT_PORTS,
                        UnitConfig)
from ..proof import DEFAULT_TIMEOUT_S

__all__ = ["BuildOptions", "Flag", "HDLS", "SIMULATORS", "DEFAULT_VECTORS", "MAX_VECTORS",
           "build_flags", "check_timeout"]

SIMULATORS = ("auto", "amaranth", "verilator", "icarus")
DEFAULT_VECTORS = {"amaranth": 10_000, "icarus": 10_000, "verilator": 1_000_000, "ghdl": 10_000}
HDLS = ("verilog", "vhdl", "both")
MAX_VECTORS = 100_000_000


@dataclass(frozen=True)
class Flag:
    """How one option is given on the command line.

    ``kind``: ``int``, ``float``, ``text``, ``path`` (a file), ``pipeline`` (a count or
    :data:`FULL_PIPELINE`) or ``switch`` (``--name``, or ``--name/--no-name`` for a choice
    whose default is None); ``choices``: the allowed words, from the code's own constants.
    """

    flag: str
    help: str
    kind: str = "text"
    choices: tuple = ()
    show_default: bool = False

    @property
    def name(self):
        """The flag as an error names it (a switch's positive form)."""
        return self.flag.split("/")[0]


def _option(default, flag, help, **how):
    return field(default=default, metadata={"flag": Flag(flag, help, **how)})


@dataclass(frozen=True, kw_only=True)
class BuildOptions:
    """Choices for one build, each with its command-line flag (see :func:`build_flags`)."""

    FULL_PIPELINE: ClassVar[str] = FULL_PIPELINE   # pipeline: every level registered
    arch: str = _option(
        "tree", "--arch", "tree: constant multipliers into an adder tree; shiftadd: no "
        "multipliers, weights recoded in canonical signed digits; serial: one "
        "multiply-accumulate per clock, one feature per valid beat.",
        choices=ARCHITECTURES, show_default=True)
    pipeline: int | str = _option(
        1, "--pipeline", "Register stages: 0 is combinational, 1 registers the outputs, more "
        f"split the adder tree, {FULL_PIPELINE!r} puts one after every level (serial: must be "
        "1).", kind="pipeline", show_default=True)
    module: str | None = _option(
        None, "--module", "Verilog module name (default: the model file's).")
    score_bits: int | None = _option(
        None, "--score-bits", "Width of the score port; wider than needed gives headroom.",
        kind="int")
    split_bits: int | None = _option(   # see UnitConfig
        None, "--split-adders", "Split adders wider than this many bits into parts this wide, "
        "each part a register stage after the one below: shorter carry chains, higher fmax, "
        "more latency (one unit, tree or shiftadd, --pipeline 1 or more).", kind="int")
    carry_registers: int = _option(
        1, "--carry-registers", "Registers on each carry from one split part to the next (1 "
        "to 4): 2 shortens the carry's routes for a higher fmax, at one more cycle of latency "
        "per part.", kind="int", show_default=True)
    share_terms: bool = _option(
        False, "--share-terms", "A bank's sums of two shifted inputs that several units need "
        "are made once and shared (common sub-expressions; --arch shiftadd, constant weights): "
        "fewer adders.", kind="switch")
    loadable_weights: bool = _option(
        False, "--loadable-weights", "Weights and biases in registers, reset to the trained "
        "values, with a write port (strobe, address, data); widths sized for --weight-bits "
        "and --bias-bits.", kind="switch")
    weight_bits: int | None = _option(
        None, "--weight-bits", "Declared signed width of every loadable weight (default: the "
        "fewest that hold the trained weights).", kind="int")
    bias_bits: int | None = _option(
        None, "--bias-bits", "Declared signed width of every loadable bias (default: the "
        "fewest that hold the trained biases).", kind="int")
    weight_port: str = _option(
        "plain", "--weight-port", "The loadable weights' port: plain (strobe, address, data) "
        "or axi4-lite (an AXI4-Lite slave, 32-bit words, with read-back).",
        choices=WEIGHT_PORTS, show_default=True)
    on_chip_learning: bool = _option(
        False, "--on-chip-learning", "The perceptron rule in the fabric (loadable weights "
        "implied): an input with learn_enable high and its target on learn_target moves the "
        "weights by --learning-rate times its codes when its decision is wrong, each weight "
        "saturating at its declared width; learn_read_address/learn_read_data read them back.",
        kind="switch")
    learning_rate: str = _option(
        "1", "--learning-rate", "eta of the on-chip rule, a power of two (1/64, 0.25, 2): "
        "the update is a shift.", show_default=True)
    bias_step: int | None = _option(
        None, "--bias-step", "What the on-chip rule adds to or takes from a bias on a mistake "
        "(default: eta S^2, S half the widest declared input span: the bias learns as a weight "
        "on a constant input S, as fit trains it; capped at the register's largest value).",
        kind="int")
    dsp_products: int | None = _option(
        None, "--dsp-products", "Loadable weights, one unit, tree: only the first N products "
        "are written as multiplications (for the part's DSP blocks, estimate --dsp); each "
        "other product is a row of partial products per weight bit in the adder tree, "
        "registered level by level, and with on-chip learning the update is built for "
        "speed (default: every product a multiplication).", kind="int")
    clamp: bool | None = _option(       # the input guard (thresh2hdl.analysis.guard)
        None, "--clamp/--no-clamp", "Clamp each feature to its declared range before the "
        "arithmetic (default: on when some declared range is tighter than its port).",
        kind="switch")
    range_flag: bool | None = _option(
        None, "--range-flag/--no-range-flag", "An output bit, high with each result whose "
        "input had a feature outside its declared range (default: on when some declared range "
        "is tighter than its port).", kind="switch")
    reset: str | None = _option(
        None, "--reset", f"The reset: synchronous or asynchronous, active high or active low "
        f"(the port then named <reset>_n, e.g. rst_n); default {DEFAULT_RESET}, and sync-low "
        f"for the axi-stream interface.", choices=RESET_KINDS)
    clock_enable: bool = _option(
        False, "--clock-enable", "A clock enable port (ce): while it is low every register "
        "holds and in_ready and out_valid read 0.", kind="switch")
    interface: str = _option(
        "plain", "--interface", "plain: the handshake and one port per feature and result; "
        "axi-stream: the features in an AXI4-Stream slave's TDATA, the results in a master's "
        "(byte lanes), aclk and aresetn.", choices=INTERFACES, show_default=True)
    vectors: int | None = _option(      # None: sized to the simulator (DEFAULT_VECTORS)
        None, "--vectors", "Random vectors to verify, on top of the corner cases (default: "
        f"{DEFAULT_VECTORS['verilator']} with Verilator, {DEFAULT_VECTORS['icarus']} "
        "otherwise).", kind="int")
    hdl: str = _option(
        "verilog", "--hdl", "The language of the design file: verilog (Verilog-2001), vhdl "
        "(VHDL-2008, simulated and read back with GHDL) or both, each with its own "
        "self-checking testbench on the same vectors.", choices=HDLS, show_default=True)
    simulator: str = _option(
        "auto", "--simulator", "auto: Verilator if present, else Icarus, else Amaranth's "
        "simulator (which runs the Amaranth design, not the file).", choices=SIMULATORS,
        show_default=True)
    seed: int = _option(
        0, "--seed", "Seed of the random vectors and handshake gaps.", kind="int",
        show_default=True)
    force: bool = _option(False, "--force", "Replace a non-empty output folder.", kind="switch")
    data: str | None = _option(
        None, "--data", "CSV of labelled rows (columns named as the model's features): report "
        "accuracy and verify these rows too.", kind="path")
    label: str = _option(
        "label", "--label", "Name of the label column in --data.", show_default=True)
    prove: bool = _option(
        False, "--prove", "Also prove the Verilog equal to the model for every input in range "
        "(needs the prove extra: pip install 'thresh2hdl[prove]').", kind="switch")
    prove_timeout_s: float = _option(
        DEFAULT_TIMEOUT_S, "--prove-timeout", "Seconds the proof may take before it is "
        "reported undecided.", kind="float", show_default=True)

    def __post_init__(self):
        # The design's fields are UnitConfig's to judge (it is built before any output).
        for key in ("force", "prove"):
            if not isinstance(getattr(self, key), bool):
                raise InputError(f"must be True or False, not {getattr(self, key)!r}", field=key)
        _count(self.seed, "seed")
        if self.vectors is not None:
            _count(self.vectors, "vectors")
            if self.vectors > MAX_VECTORS:
                raise InputError(f"at most {MAX_VECTORS} vectors, not {self.vectors}",
                                 field="vectors")
        if self.hdl not in HDLS:
            raise InputError(f"must be one of {', '.join(HDLS)}, not {self.hdl!r}", field="hdl")
        if self.simulator not in SIMULATORS:
            raise InputError(f"must be one of {', '.join(SIMULATORS)}, not {self.simulator!r}",
                             field="simulator")
        check_timeout(self.prove_timeout_s, "prove_timeout_s")
        if self.data is not None and not isinstance(self.data, (str, os.PathLike)):
            raise InputError(f"must be the path of a CSV file, not {self.data!r}", field="data")
        if not isinstance(self.label, str):
            raise InputError(f"must be the name of a column, not {self.label!r}", field="label")

    def unit_config(self):
        """The keyword arguments of UnitConfig, beside the model: the design's choices."""
        return {f.name: getattr(self, f.name) for f in fields(UnitConfig) if f.name != "model"}


def _count(value, key):
    if not isinstance(value, int) or isinstance(value, bool) or value < 0:
        raise InputError(f"must be a non-negative integer, not {value!r}", field=key)


def check_timeout(value, key="timeout_s"):
    """A proof's timeout: seconds, more than none and at most a day."""
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not 0 < value <= 86400:
        raise InputError(f"must be a number of seconds in (0, 86400], not {value!r}", field=key)


def build_flags():
    """Each option's field and its :class:`Flag`, in the order the command line lists them."""
    return [(f, f.metadata["flag"]) for f in fields(BuildOptions)]
