"""What to build: :class:`UnitConfig`, validated once, and the limits it enforces.

Errors name the refused field by its :class:`UnitConfig` name (``split_bits``,
``loadable_weights``...) and never a command-line flag: the application layer maps field
names to its own options.
"""

from dataclasses import dataclass
from fractions import Fraction

from amaranth.hdl import signed, unsigned

from ..errors import InputError
from ..model import Model
from ..analysis import check_architecture, resolve_guard, signed_bits
from ..train import MAX_REGISTER_BITS, OnChipRule, parse_learning_rate
from .clocking import DEFAULT_RESET, RESET_KINDS, reset_is_low, reset_port
from .learning import LEARN_INPUTS, LEARN_OUTPUTS, LEARN_PREFIX
from .register_bus import AXI_LITE_DATA_BITS, WEIGHT_PORTS
from .stream import INTERFACES

__all__ = ["UnitConfig", "FULL_PIPELINE", "MAX_SERIAL_FEATURES", "sample_shape"]

MAX_SERIAL_FEATURES = 1024    # a sequencer's channels; keeps a verification chunk's cycles bounded
# ``pipeline`` asking for a register stage after every level, whatever the depth: resolved to
# the plan's ``levels`` when the design is planned (``plan.config.pipeline`` is the count).
FULL_PIPELINE = "full"
# The most bits a loadable register may declare, by field.
_MOST_BITS = {"weight_bits": 32, "bias_bits": 64}


def _is_int(value):
    return isinstance(value, int) and not isinstance(value, bool)


@dataclass(frozen=True)
class UnitConfig:
    """What to build: the model, register stages (or :data:`FULL_PIPELINE`), an optional
    wider score port, architecture."""

    model: Model
    pipeline: int | str = 1
    score_bits: int | None = None
    arch: str = "tree"
    loadable_weights: bool = False   # weights and biases in registers behind a write port
    weight_bits: int | None = None   # their declared signed widths (default: fewest for the
    bias_bits: int | None = None     # trained values); every width is sized for these
    split_bits: int | None = None    # adders wider than this are split into parts this wide,
                                     # each part later than the one below (shorter carry chains)
    carry_registers: int = 1         # registers on each carry from one part to the next
    clamp: bool | None = None        # the input guard (guard.py): clamp codes outside the
    range_flag: bool | None = None   # declared ranges, and/or flag them; None: the default
    share_terms: bool = False        # a shift-add bank's terms that several units need are
                                     # made once (analysis/shared.py)
    reset: str | None = None         # sync/async, active high/low (clocking.py); None: the
                                     # interface's default (sync-high; axi-stream sync-low)
    clock_enable: bool = False       # a clock enable port: every register holds while it is low
    interface: str = "plain"         # or axi-stream: the same design's ports in two streams
    weight_port: str = "plain"       # loadable weights' port: plain, or axi4-lite (read-back)
    on_chip_learning: bool = False   # the perceptron rule on the loadable registers
                                     # (learning.py); implies loadable weights
    learning_rate: object = 1        # eta, a power of two (1/64, "0.25", 2...): a shift
    bias_step: int | None = None     # the bias's move on a mistake (default: eta S^2, S half
                                     # the widest declared span, fit's bias input)
    dsp_products: int | None = None  # loadable tree: products written as multiplications (for
                                     # DSP blocks); the rest rows of partial products in the
                                     # tree (analysis/rows.py). None: every product whole

    def __post_init__(self):
        if not isinstance(self.model, Model):
            raise TypeError(f"model must be a Model, not {type(self.model).__name__}")
        self._check_basics()
        if self.on_chip_learning is True:
            object.__setattr__(self, "loadable_weights", True)
        for key in ("weight_bits", "bias_bits"):
            self._check_register_width(key)
        if self.loadable_weights and self.pipeline == 0:
            raise InputError("loadable weights are registers and need a clock; use 1 or more "
                             "register stages, not 0", field="pipeline")
        if self.loadable_weights and self.arch == "shiftadd":
            raise InputError("shiftadd recodes each constant weight into shifts and adds, so "
                             "its weights cannot be loaded; use the tree or serial architecture",
                             field="loadable_weights")
        self._check_split()
        self._check_sharing()
        self._check_clocking()
        self._check_weight_port()
        self._resolve_guard()
        self._check_serial()
        self._check_learning()
        self._check_dsp_products()

    def _check_basics(self):
        if self.pipeline != FULL_PIPELINE and (not _is_int(self.pipeline) or self.pipeline < 0):
            raise InputError(f"must be a non-negative integer or {FULL_PIPELINE!r}, not "
                             f"{self.pipeline!r}", field="pipeline")
        if self.score_bits is not None and (not isinstance(self.score_bits, int)
                                            or not 1 <= self.score_bits <= 128):
            raise InputError(f"must be an integer from 1 to 128, not {self.score_bits!r}",
                             field="score_bits")
        check_architecture(self.arch)
        if not isinstance(self.loadable_weights, bool):
            raise InputError(f"must be True or False, not {self.loadable_weights!r}",
                             field="loadable_weights")

    def _check_register_width(self, key):
        """``weight_bits`` / ``bias_bits``: only with loadable weights, at least the trained
        values' width (the default), at most :data:`_MOST_BITS`."""
        value, most = getattr(self, key), _MOST_BITS[key]
        if value is not None and not self.loadable_weights:
            raise InputError("applies only to loadable weights; turn them on or leave it unset",
                             field=key)
        if not self.loadable_weights:
            return
        units = self.model.units
        trained = [w for u in units for w in u.weights] if key == "weight_bits" else \
            [u.bias for u in units]
        needed = signed_bits(min(trained), max(trained))
        if value is None and needed > most:
            raise InputError(f"the trained values (from {min(trained)} to {max(trained)}) "
                             f"need {needed} bits, more than the {most} a loadable register "
                             f"may have", field=key)
        if value is None:
            value = max(needed, 2) if self.on_chip_learning else needed  # room to move
            object.__setattr__(self, key, value)
        if not _is_int(value) or not 1 <= value <= most:
            raise InputError(f"must be an integer from 1 to {most}, not {value!r}", field=key)
        if value < needed:
            raise InputError(f"{value} bits cannot hold the trained values (from "
                             f"{min(trained)} to {max(trained)}); the write port needs at "
                             f"least {needed}", field=key)

    def _check_split(self):
        if self.split_bits is not None:
            if not _is_int(self.split_bits) or not 2 <= self.split_bits <= 64:
                raise InputError(f"must be an integer from 2 to 64, not {self.split_bits!r}",
                                 field="split_bits")
            refusal = ("a serial design has no adder tree" if self.arch == "serial" else
                       "loadable weights are not split (constant weights only, for now)"
                       if self.loadable_weights else
                       "the split needs register stages: ask for 1 or more"
                       if self.pipeline == 0 else None)
            if refusal:
                raise InputError(f"cannot split the adders: {refusal}", field="split_bits")
        if not _is_int(self.carry_registers) or not 1 <= self.carry_registers <= 4:
            raise InputError(f"must be an integer from 1 to 4, not {self.carry_registers!r}",
                             field="carry_registers")
        if self.carry_registers != 1 and self.split_bits is None:
            raise InputError("applies only to split adders; split them or leave it at 1",
                             field="carry_registers")

    def _check_sharing(self):
        if not isinstance(self.share_terms, bool):
            raise InputError(f"must be True or False, not {self.share_terms!r}",
                             field="share_terms")
        if self.share_terms and not self.model.is_bank:
            raise InputError("a single unit has no other unit to share terms with; leave it "
                             "off", field="share_terms")
        if self.share_terms and self.arch != "shiftadd":
            raise InputError(f"terms are shared between shift-add sums, and the {self.arch} "
                             f"architecture has none; use shiftadd or leave it off",
                             field="share_terms")
        if self.share_terms and self.split_bits is not None:
            raise InputError("shared terms are not built with split adders (for now); leave "
                             "one of the two off", field="share_terms")

    def _check_clocking(self):
        if self.interface not in INTERFACES:
            raise InputError(f"must be one of {', '.join(INTERFACES)}, not "
                             f"{self.interface!r}", field="interface")
        stream = self.interface == "axi-stream"
        if self.reset is None:
            object.__setattr__(self, "reset", "sync-low" if stream else DEFAULT_RESET)
        if self.reset not in RESET_KINDS:
            raise InputError(f"must be one of {', '.join(RESET_KINDS)}, not {self.reset!r}",
                             field="reset")
        if not isinstance(self.clock_enable, bool):
            raise InputError(f"must be True or False, not {self.clock_enable!r}",
                             field="clock_enable")
        if stream and not reset_is_low(self.reset):
            raise InputError("AXI4-Stream's reset ARESETn is active low: use sync-low or "
                             "async-low", field="reset")
        if stream and self.clock_enable:
            raise InputError("the AXI4-Stream form has no clock enable: TVALID dropping in a "
                             "held cycle would break its rule that TVALID stays high until "
                             "taken; use the plain interface or no clock enable",
                             field="clock_enable")
        if stream and self.pipeline == 0:
            raise InputError("the AXI4-Stream form is clocked (ACLK, ARESETn): use 1 or more "
                             "register stages", field="interface")
        if self.pipeline == 0:
            if self.clock_enable:
                raise InputError("a combinational design (0 register stages) has no register "
                                 "to hold; use 1 or more register stages, or no clock enable",
                                 field="clock_enable")
            if self.reset != DEFAULT_RESET:
                raise InputError(f"a combinational design (0 register stages) has no reset; "
                                 f"use 1 or more register stages, or leave it {DEFAULT_RESET}",
                                 field="reset")
        if reset_is_low(self.reset) and not stream:
            model = self.model
            name = reset_port(self.reset, model.ports.reset)
            taken = {value for key, value in model.ports.__dict__.items() if value}
            taken |= {f.name for f in model.features} | {model.module}
            if name in taken:
                raise InputError(f"the active-low reset port {name!r} clashes with a port, "
                                 f"a feature or the module; rename the reset in "
                                 f"[module.ports]", field="module.ports.reset")

    def _check_weight_port(self):
        if self.weight_port not in WEIGHT_PORTS:
            raise InputError(f"must be one of {', '.join(WEIGHT_PORTS)}, not "
                             f"{self.weight_port!r}", field="weight_port")
        if self.weight_port == "plain":
            return
        if not self.loadable_weights:
            raise InputError(f"the {self.weight_port} port writes loadable weights, and these "
                             f"weights are constants; turn on loadable weights or use plain",
                             field="weight_port")
        if self.clock_enable:
            raise InputError("the AXI4-Lite port has no clock enable: a response's VALID "
                             "dropping in a held cycle would break its rule that VALID stays "
                             "high until taken; use the plain port or no clock enable",
                             field="clock_enable")
        widest = max(self.weight_bits, self.bias_bits)
        if widest > AXI_LITE_DATA_BITS:
            raise InputError(f"the AXI4-Lite port's words are {AXI_LITE_DATA_BITS} bits and "
                             f"a register here has {widest}; declare at most "
                             f"{AXI_LITE_DATA_BITS} bits or use the plain port",
                             field="bias_bits" if self.bias_bits == widest else "weight_bits")

    def _resolve_guard(self):
        for key in ("clamp", "range_flag"):
            if getattr(self, key) is not None and not isinstance(getattr(self, key), bool):
                raise InputError(f"must be True, False or None, not {getattr(self, key)!r}",
                                 field=key)
        guard = self.guard
        object.__setattr__(self, "clamp", guard.clamp)
        object.__setattr__(self, "range_flag", guard.flag)
        self.model.check_optional_ports(
            (["out_of_range"] if self.range_flag else [])
            + (["sample"] if self.arch == "serial" else [])
            + (["clock_enable"] if self.clock_enable else [])
            + (["weight_write", "weight_address", "weight_data"]
               if self.loadable_weights and self.weight_port == "plain" else []))

    def _check_serial(self):
        if self.arch == "serial" and len(self.model.features) > MAX_SERIAL_FEATURES:
            raise InputError(f"the serial architecture takes at most {MAX_SERIAL_FEATURES} "
                             f"features (one valid beat each), not "
                             f"{len(self.model.features)}; use tree or shiftadd", field="arch")
        if self.arch == "serial" and self.pipeline not in (1, FULL_PIPELINE):
            raise InputError(f"the serial architecture has exactly one register stage (the "
                             f"accumulator and its result), so it must be 1, not "
                             f"{self.pipeline}", field="pipeline")

    def _check_learning(self):
        if not isinstance(self.on_chip_learning, bool):
            raise InputError(f"must be True or False, not {self.on_chip_learning!r}",
                             field="on_chip_learning")
        shift = parse_learning_rate(self.learning_rate)
        object.__setattr__(self, "learning_rate", Fraction(2) ** shift)
        if not self.on_chip_learning:
            if shift != 0 or self.bias_step is not None:
                raise InputError("applies only to on-chip learning; turn it on or leave it "
                                 "unset", field="learning_rate" if shift else "bias_step")
            return
        refusal = ("the serial architecture is not built with it (for now); use tree"
                   if self.arch != "tree" else
                   "the AXI4-Lite port is not built with it (for now); use the plain port, "
                   "whose read-back the learning ports add"
                   if self.weight_port != "plain" else
                   "a clock enable is not built with it (for now); leave it off"
                   if self.clock_enable else
                   "the AXI4-Stream form is not built with it (for now); use plain"
                   if self.interface != "plain" else
                   f"a bank learns with one target bit per unit, at most {MAX_REGISTER_BITS} "
                   f"(for now), and this one has {len(self.model.units)}"
                   if len(self.model.units) > MAX_REGISTER_BITS else None)
        if refusal:
            raise InputError(f"cannot learn on chip: {refusal}", field="on_chip_learning")
        if self.bias_step is None:
            # As if the bias were a weight on a constant input S (half the widest declared
            # span, fit's bias input): the rule moves it by eta S, which moves the score by
            # eta S^2 (capped at the register's largest value).
            spans = [f.max - f.min + 1 for f in self.model.features]
            scale = max(1, max(spans) // 2) ** 2
            step = scale << shift if shift >= 0 else scale >> -shift
            most = (1 << (min(self.bias_bits, MAX_REGISTER_BITS) - 1)) - 1
            object.__setattr__(self, "bias_step", max(1, min(step, most)))
        rule = self.learning_rule      # validates the shift, the widths and the step
        rule.check_holds(self.model)
        names = {LEARN_PREFIX + name for name in LEARN_INPUTS + LEARN_OUTPUTS}
        taken = {value for value in self.model.ports.__dict__.values() if value}
        taken |= {f.name for f in self.model.features} | {self.model.module}
        clash = sorted(names & taken)
        if clash:
            raise InputError(f"the learning port {clash[0]!r} clashes with a port, a feature "
                             f"or the module; rename it", field="on_chip_learning")

    def _check_dsp_products(self):
        count = self.dsp_products
        if count is None:
            return
        if not _is_int(count) or count < 0:
            raise InputError(f"must be a non-negative integer, not {count!r}",
                             field="dsp_products")
        refusal = ("they are the products of loadable weights; turn loadable weights on"
                   if not self.loadable_weights else
                   "only the tree architecture multiplies in parallel; use tree"
                   if self.arch != "tree" else
                   "a bank is not built with it (for now); use it on one unit"
                   if self.model.is_bank else
                   "a row per weight bit needs a bit that adds: declare 2 or more weight bits"
                   if self.weight_bits < 2 and count < len(self.model.features) else None)
        if refusal:
            raise InputError(f"cannot write products as rows: {refusal}", field="dsp_products")

    @property
    def learning_shift(self):
        """``eta`` as its power of two (the update's shift)."""
        rate = self.learning_rate
        return rate.numerator.bit_length() - rate.denominator.bit_length()

    @property
    def learning_lag(self):
        """Cycles from an update or a write landing to the registers the datapath reads taking
        it: 1 in the form built for speed (``dsp_products``), whose update loop runs on copies
        of its own (short and local) that the datapath's registers follow a cycle later; else
        0. That form's read-back is registered too (:attr:`learning_read_latency`)."""
        return int(bool(self.on_chip_learning) and self.dsp_products is not None)

    @property
    def learning_write_latency(self):
        """Cycles a write through the port waits, registered, before it lands in the
        update's copies (where it wins over the update of that cycle): 1 in the form built
        for speed (the write's registers sit beside the copies, so the update's adders read
        only nearby flip-flops), else 0."""
        return self.learning_lag

    @property
    def learning_read_latency(self):
        """Cycles from ``learn_read_address`` to its register on ``learn_read_data``: 0, or
        2 in the form built for speed (a multiplexer in two registered steps)."""
        return 2 * self.learning_lag

    @property
    def learning_rule(self):
        """The update the registers make (:class:`~thresh2hdl.train.OnChipRule`), or None."""
        if not self.on_chip_learning:
            return None
        return OnChipRule(shift=self.learning_shift, bias_step=self.bias_step,
                          weight_bits=self.weight_bits, bias_bits=self.bias_bits)

    def _code_ranges(self):
        """What the port carrying each feature can hold: its own format, or (serial) the
        one sample bus."""
        if self.arch != "serial":
            return None
        shape = sample_shape(self.model)
        lo = -(1 << (shape.width - 1)) if shape.signed else 0
        hi = (1 << (shape.width - 1)) - 1 if shape.signed else (1 << shape.width) - 1
        return ((lo, hi),) * len(self.model.features)

    @property
    def guard(self):
        """The input guard as resolved for this design (see :mod:`thresh2hdl.analysis.guard`)."""
        return resolve_guard(self.model, clamp=self.clamp, flag=self.range_flag,
                             code_ranges=self._code_ranges())


def sample_shape(model):
    """The serial input's format: one bus that carries every feature's declared format."""
    unsigned_widths = [f.bits for f in model.features if not f.signed]
    signed_widths = [f.bits for f in model.features if f.signed]
    if not signed_widths:
        return unsigned(max(unsigned_widths))
    return signed(max(signed_widths + [w + 1 for w in unsigned_widths]))
