"""The model file: a versioned TOML schema, read into the records of :mod:`.records` and
written back so that reading gives an equal model.

The schema is documented in ``docs/model-format.md``; the key sets here are what the parser
accepts, and the documentation's example is checked against them.
"""

from pathlib import Path

from .. import readers
from ..errors import InputError
from .records import FeatureFormat, Model, PortNames, Unit, is_int

__all__ = ["MODEL_FORMAT", "parse_features", "parse_model", "load_toml", "load_model",
           "model_to_toml"]

MODEL_FORMAT = 1

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
    if data["model_format"] != MODEL_FORMAT or not is_int(data["model_format"]):
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
