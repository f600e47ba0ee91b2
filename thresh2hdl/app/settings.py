"""What a build folder recorded: the settings that rebuild its design (its own record, or an
older folder's report keys), checked key by key, and the training or quantization log beside a
model file."""

import json
from dataclasses import asdict, dataclass, fields as dataclass_fields
from pathlib import Path

from ..errors import InputError
from ..hardware import DEFAULT_RESET, INTERFACES, RESET_KINDS, WEIGHT_PORTS
from ..readers import load_json, shorten

__all__ = ["BuildSettings", "SETTINGS_FILE", "SETTINGS_FORMAT", "read_build_settings",
           "read_history", "read_report", "read_settings"]

SETTINGS_FILE = "build_settings.json"
SETTINGS_FORMAT = 1      # the layout of SETTINGS_FILE
MAX_SETTING = 1 << 16    # a bound on every recorded count, far above any design's


@dataclass(frozen=True, kw_only=True)
class BuildSettings:
    """What rebuilds a build folder's design: the :class:`~thresh2hdl.hardware.UnitConfig`
    choices as the build resolved them (a ``full`` pipeline as its count, the guard and the
    loadable widths as chosen), the module name, and the latency they gave, so that a version
    which would time them otherwise refuses the folder rather than judge its Verilog a cycle
    off. ``build`` writes it as :data:`SETTINGS_FILE`; check, prove and estimate read it."""

    module: str
    pipeline: int
    score_bits: int | None
    arch: str
    loadable_weights: bool
    weight_bits: int | None
    bias_bits: int | None
    split_bits: int | None
    carry_registers: int
    clamp: bool
    range_flag: bool
    share_terms: bool
    reset: str = DEFAULT_RESET       # written only when not the default, so that a default
    clock_enable: bool = False       # build's record is what it was before these existed
    interface: str = "plain"
    weight_port: str = "plain"
    on_chip_learning: bool = False
    learning_rate: str = "1"
    bias_step: int | None = None
    dsp_products: int | None = None
    latency_cycles: int

    @classmethod
    def of(cls, component, module):
        """The settings of a planned component (its config as resolved)."""
        config = component.config
        values = {key: getattr(config, key) for key in _DESIGN}
        values["learning_rate"] = str(values["learning_rate"])
        return cls(module=module, latency_cycles=component.latency, **values)

    def unit_config(self):
        """The keyword arguments of UnitConfig, beside the model, that rebuild the design."""
        return {key: getattr(self, key) for key in _DESIGN}

    def to_json(self):
        """The record's file text: the fields in order, no paths, no times."""
        record = {key: value for key, value in asdict(self).items()
                  if key not in _ADDED_LATER or value != _ADDED_LATER[key] or key == "share_terms"}
        return json.dumps({"settings_format": SETTINGS_FORMAT, **record}, indent=2) + "\n"


def _integer(value, optional=False):
    return (value is None and optional) or (type(value) is int and 0 <= value <= MAX_SETTING)


# Each field of the record: what it must be, and the test.
_RECORD = {
    "module": ("a module name", lambda v: isinstance(v, str) and v != ""),
    "pipeline": (f"an integer from 0 to {MAX_SETTING}", _integer),
    "score_bits": (f"an integer from 0 to {MAX_SETTING} or null", lambda v: _integer(v, True)),
    "arch": ("a text", lambda v: isinstance(v, str)),
    "loadable_weights": ("true or false", lambda v: isinstance(v, bool)),
    "weight_bits": (f"an integer from 0 to {MAX_SETTING} or null", lambda v: _integer(v, True)),
    "bias_bits": (f"an integer from 0 to {MAX_SETTING} or null", lambda v: _integer(v, True)),
    "split_bits": (f"an integer from 0 to {MAX_SETTING} or null", lambda v: _integer(v, True)),
    "carry_registers": (f"an integer from 0 to {MAX_SETTING}", _integer),
    "clamp": ("true or false", lambda v: isinstance(v, bool)),
    "range_flag": ("true or false", lambda v: isinstance(v, bool)),
    "share_terms": ("true or false", lambda v: isinstance(v, bool)),
    "reset": (f"one of {', '.join(RESET_KINDS)}", lambda v: v in RESET_KINDS),
    "clock_enable": ("true or false", lambda v: isinstance(v, bool)),
    "interface": (f"one of {', '.join(INTERFACES)}", lambda v: v in INTERFACES),
    "weight_port": (f"one of {', '.join(WEIGHT_PORTS)}", lambda v: v in WEIGHT_PORTS),
    "on_chip_learning": ("true or false", lambda v: isinstance(v, bool)),
    "learning_rate": ("a power of two as text (\"1/64\")", lambda v: isinstance(v, str)),
    "bias_step": ("an integer from 1 to 2^31 - 1 or null",
                  lambda v: v is None or (type(v) is int and 1 <= v < 1 << 31)),
    "dsp_products": (f"an integer from 0 to {MAX_SETTING} or null",
                     lambda v: _integer(v, True)),
    "latency_cycles": (f"an integer from 0 to {MAX_SETTING}", _integer),
}
# Fields a record written before they existed lacks, with the value its design had.
_ADDED_LATER = {"share_terms": False, "reset": DEFAULT_RESET, "clock_enable": False,
                "interface": "plain", "weight_port": "plain", "on_chip_learning": False,
                "learning_rate": "1", "bias_step": None, "dsp_products": None}
_DESIGN = tuple(f.name for f in dataclass_fields(BuildSettings) if f.name not in ("module",
                                                                       "latency_cycles"))


def read_settings(path):
    """A folder's :data:`SETTINGS_FILE` as :class:`BuildSettings`, checked field by field; an
    edited or damaged record is one InputError naming the file and the field."""
    data = load_json(path, "build settings")
    if not isinstance(data, dict):
        raise InputError("is not a build settings record (a JSON object); rebuild the folder",
                         source=path)
    if data.get("settings_format") != SETTINGS_FORMAT:
        _refuse(path, "settings_format", f"{SETTINGS_FORMAT} (this version's layout)",
                data.get("settings_format"), "rebuild the folder with this version")
    data = {**_ADDED_LATER, **data}
    unknown = sorted(set(data) - set(_RECORD) - {"settings_format"})
    if unknown:
        raise InputError("is not a build setting; remove it or rebuild the folder", source=path,
                         field=shorten(unknown[0]))
    for key, (wanted, test) in _RECORD.items():
        if key not in data or not test(data[key]):
            got = shorten(json.dumps(data[key])) if key in data else "missing"
            raise InputError(f"must be {wanted}, not {got}; rebuild the folder", source=path,
                             field=key)
    return BuildSettings(**{key: data[key] for key in _RECORD})


def read_report(path):
    """A build folder's report.json: a JSON object, within the readers' limits."""
    report = load_json(path, "report")
    if not isinstance(report, dict):
        raise InputError("is not a build report (a JSON object); rebuild the folder", source=path)
    return report


def _refuse(source, where, wanted, value, what="rebuild the folder"):
    got = "missing" if value is None else f"{shorten(value)}"
    raise InputError(f"must be {wanted}, not {got}; {what}", source=source, field=where)


def read_build_settings(path):
    """A build folder's report.json, and the settings in it that rebuild the design, checked
    key by key: ``(report, settings for UnitConfig, recorded latency)``. For folders built
    before :data:`SETTINGS_FILE` was written."""
    report = read_report(path)

    def integer(where, value, optional=False):
        if value is None and optional:
            return None
        if type(value) is not int or not 0 <= value <= 1 << 16:
            _refuse(path, where, "an integer from 0 to 65536", value)
        return value

    def table(where):
        value = report.get(where)
        if value is not None and not isinstance(value, dict):
            _refuse(path, where, "a table", value)
        return value or {}

    tree, port, guard = table("tree"), table("weight_port"), table("input_guard")
    latency = integer("latency_cycles", report.get("latency_cycles"))
    units = report.get("units")
    if units:
        if not isinstance(units, list) or not all(isinstance(u, dict) for u in units):
            _refuse(path, "units", "a list of tables", units)
        bits = [(integer(f"units[{k}].score_bits", u.get("score_bits")),
                 integer(f"units[{k}].score_bits_min", u.get("score_bits_min")))
                for k, u in enumerate(units)]
        # One width for all units, wider than needed: the build asked for it (--score-bits).
        score_bits = bits[0][0] if len({b for b, _ in bits}) == 1 and bits[0][0] != bits[0][1] \
            else None
    else:
        score_bits = integer("score_bits", report.get("score_bits"))
    arch = tree.get("arch", "tree")
    if not isinstance(arch, str):
        _refuse(path, "tree.arch", "a text", arch)
    verilog = report.get("verilog")
    if not isinstance(verilog, str) or Path(verilog).name != verilog or \
            not verilog.endswith(".v"):
        _refuse(path, "verilog", "the name of a .v file in the folder", verilog)
    settings = {"pipeline": integer("register_stages", report.get("register_stages", latency)),
                "score_bits": score_bits, "arch": arch,
                "split_bits": integer("tree.split_bits", tree.get("split_bits"), True),
                "carry_registers": integer("tree.carry_registers",
                                           tree.get("carry_registers", 1)),
                "loadable_weights": bool(port),
                "weight_bits": integer("weight_port.weight_bits", port.get("weight_bits"), True),
                "bias_bits": integer("weight_port.bias_bits", port.get("bias_bits"), True),
                "share_terms": False,      # older folders: built before terms were shared,
                "reset": DEFAULT_RESET, "clock_enable": False,    # or resets were chosen,
                "interface": "plain", "weight_port": "plain"}     # or streams made
    # A folder from before the input guard was built without one.
    for key, option in (("clamp", "clamp"), ("flag", "range_flag")):
        value = guard.get(key, False)
        if not isinstance(value, bool):
            _refuse(path, f"input_guard.{key}", "true or false", value)
        settings[option] = value
    return report, settings, latency


def _is_number(value, optional=False):
    return (value is None and optional) or \
        (isinstance(value, (int, float)) and not isinstance(value, bool))


def _is_counts(value):
    return isinstance(value, list) and all(
        isinstance(row, list) and all(type(v) is int for v in row) for row in value)


def _is_sweep(value):
    return isinstance(value, list) and all(
        isinstance(row, dict) and type(row.get("bits")) is int and _is_number(row.get("agreement"))
        and _is_number(row.get("accuracy"), True) for row in value)


# The fields of a fit or quantize log that a report shows, and the test each must pass.
_HISTORY = {
    "fit": ("training", {
        "mistakes_per_epoch": ("lists of mistake counts", _is_counts),
        "epochs_run": ("a list of epoch counts",
                       lambda v: isinstance(v, list) and all(type(n) is int for n in v)),
        "train_accuracy": ("a number", _is_number),
        "holdout_accuracy": ("a number or null", lambda v: _is_number(v, True))}),
    "quantize": ("quantization", {
        "bits": ("an integer", lambda v: type(v) is int),
        "agreement_with_float": ("a number", _is_number),
        "accuracy": ("a number or null", lambda v: _is_number(v, True)),
        "float_accuracy": ("a number or null", lambda v: _is_number(v, True)),
        "sweep": ("a list of {bits, agreement, accuracy} tables", _is_sweep),
        "recommended_bits": ("an integer or null", lambda v: v is None or type(v) is int)}),
}


def read_history(model_path):
    """The training or quantization log written beside a model file (``<stem>.fit.json``,
    ``<stem>.quantize.json``), as the report's ``training``/``quantization`` sections."""
    model_path = Path(model_path)
    history = {}
    for kind, (key, fields) in _HISTORY.items():
        log = model_path.with_name(f"{model_path.stem}.{kind}.json")
        if not log.is_file():
            continue
        data = load_json(log, f"{kind} log")
        if not isinstance(data, dict):
            raise InputError(f"is not a {kind} log (a JSON object); make it again with "
                             f"thresh2hdl {kind}, or delete it", source=log)
        for field, (wanted, test) in fields.items():
            if not test(data.get(field)):
                _refuse(log, field, wanted, data.get(field),
                        f"make it again with thresh2hdl {kind}, or delete it")
        history[key] = {field: data.get(field) for field in fields}
        history[key]["log"] = log.name
    return history
