"""The model's records: frozen dataclasses that validate themselves, whatever made them.

Everything downstream (range analysis, circuit, reference model, report) reads these objects and
never the file, so a model is validated in exactly one place, whether it was read from a file
(:mod:`.file`), trained or built in Python.
"""

from dataclasses import dataclass, field, replace

from ..errors import InputError
from ..names import check_identifier

__all__ = ["MAX_FEATURES", "MAX_UNITS", "MAX_INPUT_BITS", "MAX_WEIGHT_BITS", "MAX_BIAS_BITS",
           "OPTIONAL_PORTS", "FeatureFormat", "Unit", "PortNames", "Model", "is_int"]

MAX_FEATURES = 4096
MAX_UNITS = 256
MAX_INPUT_BITS = 32
MAX_WEIGHT_BITS = 32
MAX_BIAS_BITS = 127


def is_int(value):
    """An integer and not a bool (TOML's true and false are bools, which Python counts as ints)."""
    return isinstance(value, int) and not isinstance(value, bool)


def _signed_range(bits):
    return -(1 << (bits - 1)), (1 << (bits - 1)) - 1


@dataclass(frozen=True)
class FeatureFormat:
    """One input feature: its raw code format and the range the hardware must handle.

    ``min``/``max`` default to the full range of the format; a tighter declared range gives
    narrower adders, and the circuit is only guaranteed for inputs inside it.
    """

    name: str
    bits: int
    signed: bool = False
    min: int | None = None
    max: int | None = None

    def __post_init__(self):
        check_identifier(self.name, "feature name")
        if not is_int(self.bits) or not 1 <= self.bits <= MAX_INPUT_BITS:
            raise ValueError(f"bits must be an integer from 1 to {MAX_INPUT_BITS}, "
                             f"not {self.bits!r}")
        if not isinstance(self.signed, bool):
            raise ValueError(f"signed must be true or false, not {self.signed!r}")
        code_lo, code_hi = self.code_range
        for key in ("min", "max"):
            value = getattr(self, key)
            if value is None:
                object.__setattr__(self, key, code_lo if key == "min" else code_hi)
            elif not is_int(value):
                raise ValueError(f"{key} must be an integer, not {value!r}")
            elif not code_lo <= value <= code_hi:
                kind = "signed" if self.signed else "unsigned"
                raise ValueError(f"{key} {value} is outside the {self.bits}-bit {kind} code "
                                 f"range [{code_lo}, {code_hi}]")
        if self.min > self.max:
            raise ValueError(f"min {self.min} is greater than max {self.max}")

    @property
    def code_range(self):
        """Every code the input port can carry, as ``(lo, hi)``."""
        if self.signed:
            return _signed_range(self.bits)
        return 0, (1 << self.bits) - 1

    @property
    def feature_range(self):
        """The declared range the hardware is sized for, as ``(lo, hi)``."""
        return self.min, self.max


@dataclass(frozen=True)
class Unit:
    """One threshold unit: ``y = 1 if weights . x + bias > 0 else 0``, all integers."""

    name: str
    weights: tuple
    bias: int = 0

    def __post_init__(self):
        check_identifier(self.name, "unit name")
        object.__setattr__(self, "weights", tuple(self.weights))
        lo, hi = _signed_range(MAX_WEIGHT_BITS)
        for index, weight in enumerate(self.weights):
            if not is_int(weight):
                raise ValueError(f"weights[{index}] must be an integer, not {weight!r}")
            if not lo <= weight <= hi:
                raise ValueError(f"weights[{index}] = {weight} does not fit in "
                                 f"{MAX_WEIGHT_BITS}-bit signed range [{lo}, {hi}]")
        if not is_int(self.bias):
            raise ValueError(f"bias must be an integer, not {self.bias!r}")
        lo, hi = _signed_range(MAX_BIAS_BITS + 1)
        if not lo <= self.bias <= hi:
            raise ValueError(f"bias {self.bias} does not fit in {MAX_BIAS_BITS + 1}-bit "
                             f"signed range")


@dataclass(frozen=True)
class PortNames:
    """Verilog names of the module's control and result ports. ``score = ""`` omits the score."""

    clock: str = "clk"
    reset: str = "rst"
    in_valid: str = "in_valid"
    in_ready: str = "in_ready"
    out_valid: str = "out_valid"
    out_ready: str = "out_ready"
    decision: str = "y"
    score: str = "score"
    sample: str = "sample"      # the serial architecture's one input, every feature in turn
    weight_write: str = "weight_write"        # loadable weights: the write port's strobe,
    weight_address: str = "weight_address"    # address,
    weight_data: str = "weight_data"          # and data
    out_of_range: str = "out_of_range"        # the input guard's flag (see guard.py)
    clock_enable: str = "ce"                  # the clock enable, when the design has one

    def __post_init__(self):
        for key, value in self.__dict__.items():
            if key == "score" and value == "":
                continue
            check_identifier(value, f"port name {key}")

    @property
    def has_score(self):
        return self.score != ""


# Ports only some architectures have: their names are checked when a design uses them.
OPTIONAL_PORTS = {"sample": "serial", "weight_write": "loadable weights",
                  "weight_address": "loadable weights", "weight_data": "loadable weights",
                  "out_of_range": "the out-of-range flag", "clock_enable": "the clock enable"}


@dataclass(frozen=True)
class Model:
    """A validated integer model: module name, input formats, units and port names."""

    module: str
    features: tuple
    units: tuple
    ports: PortNames = field(default_factory=PortNames)
    score_bits: int | None = None
    class_labels: tuple | None = None

    def __post_init__(self):
        check_identifier(self.module, "module name")
        object.__setattr__(self, "features", tuple(self.features))
        object.__setattr__(self, "units", tuple(self.units))
        if not 1 <= len(self.features) <= MAX_FEATURES:
            raise ValueError(f"a model needs 1 to {MAX_FEATURES} features, "
                             f"not {len(self.features)}")
        if not 1 <= len(self.units) <= MAX_UNITS:
            raise ValueError(f"a model needs 1 to {MAX_UNITS} [[unit]] tables, "
                             f"not {len(self.units)}")
        object.__setattr__(self, "class_labels", tuple(self.class_labels)
                           if self.class_labels is not None else None)
        if self.class_labels is not None:
            wanted = 2 if len(self.units) == 1 else len(self.units)
            if len(self.class_labels) != wanted or not all(is_int(v) for v in self.class_labels):
                raise ValueError(f"class_labels must be {wanted} integers (for one unit: the "
                                 f"label of decision 0, then of decision 1; for a bank: one per "
                                 f"unit), not {list(self.class_labels)!r}")
            if len(set(self.class_labels)) != len(self.class_labels):
                raise ValueError(f"class_labels must differ, not {list(self.class_labels)!r}")
        for index, unit in enumerate(self.units):
            if len(unit.weights) != len(self.features):
                raise ValueError(f"unit[{index}] has {len(unit.weights)} weights but the model "
                                 f"declares {len(self.features)} features")
        if self.score_bits is not None and (not is_int(self.score_bits)
                                            or not 1 <= self.score_bits <= 128):
            raise ValueError(f"score_bits must be an integer from 1 to 128, "
                             f"not {self.score_bits!r}")
        names = {}
        for key, value in self.ports.__dict__.items():
            if value and key not in OPTIONAL_PORTS:
                names.setdefault(value, f"port {key}")
                if names[value] != f"port {key}":
                    raise ValueError(f"port name {value!r} is used for both {names[value]} "
                                     f"and port {key}")
        for feature in self.features:
            if feature.name in names:
                raise ValueError(f"feature name {feature.name!r} clashes with "
                                 f"{names[feature.name]}; rename one of them")
            names[feature.name] = "a feature"
        if len(self.units) > 1 and self.ports.has_score:
            for unit in self.units:
                port = f"{self.ports.score}_{unit.name}"
                if port in names:
                    raise ValueError(f"score port {port!r} of unit {unit.name!r} clashes with "
                                     f"{names[port]}; rename one of them")
                names[port] = f"the score port of unit {unit.name}"
        unit_names = [unit.name for unit in self.units]
        if len(set(unit_names)) != len(unit_names):
            raise ValueError("unit names must differ")
        if self.module in names:
            raise ValueError(f"module name {self.module!r} is also a port name; rename one")

    def check_optional_ports(self, keys):
        """Refuse an optional port (``sample``, ``weight_*``) whose name a feature, another
        port or the module already has; ``keys`` are the optional ports a design uses."""
        taken = {value: f"port {key}" for key, value in self.ports.__dict__.items()
                 if value and key not in OPTIONAL_PORTS}
        taken.update({f.name: "a feature" for f in self.features})
        taken[self.module] = "the module name"
        for key in keys:
            value = getattr(self.ports, key)
            if value in taken:
                hint = " (or build without the out-of-range flag)" if key == "out_of_range" else ""
                raise InputError(f"port name {value!r} of {OPTIONAL_PORTS[key]} clashes with "
                                 f"{taken[value]}; rename one of them in [module.ports]{hint}",
                                 field=f"module.ports.{key}")
            taken[value] = f"port {key}"

    @property
    def is_bank(self):
        """Several units sharing the inputs, decided by argmax (ties to the lowest index)."""
        return len(self.units) > 1

    @property
    def labels(self):
        """Data label of each decision: [label of y=0, label of y=1], or one per unit."""
        if self.class_labels is not None:
            return self.class_labels
        return (0, 1) if not self.is_bank else tuple(range(len(self.units)))

    @property
    def unit(self):
        """The single unit of a one-unit model."""
        if self.is_bank:
            raise InputError(f"this model is a bank of {len(self.units)} units decided by argmax, "
                             f"so it has no single unit; read units[0] to "
                             f"units[{len(self.units) - 1}] instead", field="unit")
        return self.units[0]

    @property
    def feature_ranges(self):
        return tuple(feature.feature_range for feature in self.features)

    def with_module(self, name):
        """A copy with another module name; a bad name is refused as the field ``module``."""
        try:
            return replace(self, module=name)
        except ValueError as error:
            raise InputError(str(error), field="module") from None

    def with_score_bits(self, bits):
        """A copy with another score port width; a bad one is refused as ``score_bits``."""
        try:
            return replace(self, score_bits=bits)
        except ValueError as error:
            raise InputError(str(error), field="score_bits") from None
