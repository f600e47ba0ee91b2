"""The model description file: a versioned TOML schema, loaded once into frozen dataclasses.

Everything downstream (range analysis, circuit, reference model, report) reads these objects and
never the file, so a model is validated in exactly one place. The schema is documented in
``docs/model-format.md``.
"""

from dataclasses import dataclass, field, replace
from pathlib import Path

from .. import readers
from ..errors import InputError
from ..names import check_identifier

__all__ = ["MODEL_FORMAT", "MAX_FEATURES", "MAX_UNITS", "MAX_INPUT_BITS", "MAX_WEIGHT_BITS",
           "MAX_BIAS_BITS", "FeatureFormat", "Unit", "PortNames", "Model", "load_model",
           "parse_model", "parse_features", "load_toml", "model_to_toml"]

MODEL_FORMAT = 1
MAX_FEATURES = 4096
MAX_UNITS = 256
MAX_INPUT_BITS = 32
MAX_WEIGHT_BITS = 32
MAX_BIAS_BITS = 127


def _is_int(value):
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
        if not _is_int(self.bits) or not 1 <= self.bits <= MAX_INPUT_BITS:
            raise ValueError(f"bits must be an integer from 1 to {MAX_INPUT_BITS}, "
                             f"not {self.bits!r}")
        if not isinstance(self.signed, bool):
            raise ValueError(f"signed must be true or false, not {self.signed!r}")
        code_lo, code_hi = self.code_range
        for key in ("min", "max"):
            value = getattr(self, key)
            if value is None:
                object.__setattr__(self, key, code_lo if key == "min" else code_hi)
            elif not _is_int(value):
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
            if not _is_int(weight):
                raise ValueError(f"weights[{index}] must be an integer, not {weight!r}")
            if not lo <= weight <= hi:
                raise ValueError(f"weights[{index}] = {weight} does not fit in "
                                 f"{MAX_WEIGHT_BITS}-bit signed range [{lo}, {hi}]")
        if not _is_int(self.bias):
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
                  "out_of_range": "the out-of-range flag"}


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
            if len(self.class_labels) != wanted or not all(_is_int(v) for v in self.class_labels):
                raise ValueError(f"class_labels must be {wanted} integers (for one unit: the "
                                 f"label of decision 0, then of decision 1; for a bank: one per "
                                 f"unit), not {list(self.class_labels)!r}")
            if len(set(self.class_labels)) != len(self.class_labels):
                raise ValueError(f"class_labels must differ, not {list(self.class_labels)!r}")
        for index, unit in enumerate(self.units):
            if len(unit.weights) != len(self.features):
                raise ValueError(f"unit[{index}] has {len(unit.weights)} weights but the model "
                                 f"declares {len(self.features)} features")
        if self.score_bits is not None and (not _is_int(self.score_bits)
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
                hint = " (or build with --no-range-flag)" if key == "out_of_range" else ""
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
            raise InputError(f"this is a bank of {len(self.units)} units; building banks is not "
                             f"supported yet (one [[unit]] per model for now)", field="unit")
        return self.units[0]

    @property
    def feature_ranges(self):
        return tuple(feature.feature_range for feature in self.features)

    def with_module(self, name):
        """A copy with another module name (the ``--module`` option)."""
        try:
            return replace(self, module=name)
        except ValueError as error:
            raise InputError(str(error), field="--module") from None

    def with_score_bits(self, bits):
        try:
            return replace(self, score_bits=bits)
        except ValueError as error:
            raise InputError(str(error), field="--score-bits") from None


_TOP_KEYS = {"model_format", "module", "feature", "unit", "class_labels"}
_MODULE_KEYS = {"name", "score_bits", "ports"}
_FEATURE_KEYS = {"name", "bits", "signed", "min", "max"}
_UNIT_KEYS = {"name", "weights", "bias"}


def _check_keys(table, allowed, source, where):
    if not isinstance(table, dict):
        raise InputError(f"must be a table, not {type(table).__name__}", source=source, field=where)
    unknown = sorted(set(table) - allowed)
    if unknown:
        raise InputError(f"unknown key {unknown[0]!r}; allowed keys are "
                         f"{', '.join(sorted(allowed))}", source=source, field=where)


def _build(factory, kwargs, source, where):
    try:
        return factory(**kwargs)
    except ValueError as error:
        raise InputError(str(error), source=source, field=where) from None


def parse_features(features_data, *, source):
    """The ``[[feature]]`` tables of a model (or input-formats) file, validated."""
    if not isinstance(features_data, list) or not features_data:
        raise InputError("missing [[feature]] tables; declare one per input", source=source,
                         field="feature")
    features = []
    for index, table in enumerate(features_data):
        where = f"feature[{index}]"
        _check_keys(table, _FEATURE_KEYS, source, where)
        if "bits" not in table:
            raise InputError("missing key 'bits'", source=source, field=where)
        kwargs = dict(table)
        kwargs.setdefault("name", f"x{index}")
        features.append(_build(FeatureFormat, kwargs, source, where))
    seen = {}
    for index, feature in enumerate(features):
        if feature.name in seen:
            raise InputError(f"name {feature.name!r} is already used by feature[{seen[feature.name]}]",
                             source=source, field=f"feature[{index}]")
        seen[feature.name] = index

    return tuple(features)


def parse_model(data, *, source="<model>"):
    """Validate a model given as a parsed TOML document (a dict) and return a :class:`Model`."""
    _check_keys(data, _TOP_KEYS, source, "top level")
    if "model_format" not in data:
        raise InputError(f"missing key 'model_format'; add 'model_format = {MODEL_FORMAT}' at "
                         f"the top", source=source)
    if data["model_format"] != MODEL_FORMAT or not _is_int(data["model_format"]):
        raise InputError(f"this version reads model_format {MODEL_FORMAT}, not "
                         f"{data['model_format']!r}", source=source, field="model_format")

    module = data.get("module", {})
    _check_keys(module, _MODULE_KEYS, source, "module")
    ports_table = module.get("ports", {})
    _check_keys(ports_table, set(PortNames.__dataclass_fields__), source, "module.ports")
    ports = _build(PortNames, ports_table, source, "module.ports")

    features = parse_features(data.get("feature"), source=source)

    units_data = data.get("unit")
    if not isinstance(units_data, list) or not units_data:
        raise InputError("missing [[unit]] table with weights and bias", source=source,
                         field="unit")
    units = []
    for index, table in enumerate(units_data):
        where = f"unit[{index}]"
        _check_keys(table, _UNIT_KEYS, source, where)
        if "weights" not in table:
            raise InputError("missing key 'weights'", source=source, field=where)
        if not isinstance(table["weights"], list):
            raise InputError("weights must be an array of integers", source=source,
                             field=f"{where}.weights")
        kwargs = dict(table)
        kwargs.setdefault("name", "unit" if len(units_data) == 1 else f"unit{index}")
        units.append(_build(Unit, kwargs, source, where))

    labels = data.get("class_labels")
    if labels is not None and not isinstance(labels, list):
        raise InputError("class_labels must be an array of integers", source=source,
                         field="class_labels")
    kwargs = dict(module=module.get("name", "thresh_unit"), features=features, units=units,
                  ports=ports, score_bits=module.get("score_bits"), class_labels=labels)
    return _build(Model, kwargs, source, "module")


def load_toml(path, what="model file"):
    """Read a TOML file; a missing, unreadable, malformed or too deeply nested file, or one
    holding a number no field can hold, is one :class:`InputError` (see :mod:`.readers`)."""
    return readers.load_toml(path, what)


def load_model(path):
    """Read and validate a model file; every problem is an :class:`InputError` naming the field."""
    return parse_model(load_toml(path), source=Path(path))


def _toml_value(value):
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, str):
        return '"' + value.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(_toml_value(item) for item in value) + "]"
    raise TypeError(f"cannot write {value!r} as TOML")


def model_to_toml(model, *, comment=None):
    """Write a model in the file format, so that ``parse_model`` reads back an equal model."""
    lines = []
    if comment:
        lines += [f"# {line}".rstrip() for line in comment.splitlines()]
    lines += [f"model_format = {MODEL_FORMAT}"]
    if model.class_labels is not None:
        lines.append(f"class_labels = {_toml_value(model.class_labels)}")
    lines += ["", "[module]",
              f"name = {_toml_value(model.module)}"]
    if model.score_bits is not None:
        lines.append(f"score_bits = {model.score_bits}")
    defaults = PortNames()
    changed = {key: value for key, value in model.ports.__dict__.items()
               if getattr(defaults, key) != value}
    if changed:
        lines += ["", "[module.ports]"]
        lines += [f"{key} = {_toml_value(value)}" for key, value in changed.items()]
    for feature in model.features:
        lines += ["", "[[feature]]", f"name = {_toml_value(feature.name)}",
                  f"bits = {feature.bits}", f"signed = {_toml_value(feature.signed)}"]
        if feature.feature_range != feature.code_range:
            lines += [f"min = {feature.min}", f"max = {feature.max}"]
    for unit in model.units:
        lines += ["", "[[unit]]", f"name = {_toml_value(unit.name)}",
                  f"weights = {_toml_value(unit.weights)}", f"bias = {unit.bias}"]
    return "\n".join(lines) + "\n"
