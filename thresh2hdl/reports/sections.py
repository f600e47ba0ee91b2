"""The report's sections that other stages hand in: the data's accuracy and histograms, the
training or quantization log, proofs, and cost estimates (one per target).

Each is a frozen record with ``to_json`` (its part of report.json, keys in the order written
since the first version) and ``from_json`` (from a loaded report's table, see fields.Table).
"""

from dataclasses import dataclass

from ..cost import LUT4_RULES, TARGETS, device_name, lut4_equivalents, needs_text
from .fields import present

__all__ = ["Histogram", "UnitHistogram", "DataSummary", "TrainingLog", "SweepRow",
           "QuantizationLog", "Counterexample", "ProofSection", "Shortfall", "GuardCost",
           "CostEstimate", "estimates_of", "read_estimates", "store_estimate"]


@dataclass(frozen=True)
class Histogram:
    """Counts per series (a class, or a unit's own class against the rest) over shared edges."""
    edges: tuple
    counts: dict            # series label -> counts, one per bin

    def to_json(self):
        return {"edges": list(self.edges), "counts": {k: list(v) for k, v in self.counts.items()}}

    @classmethod
    def from_json(cls, table):
        edges = table.numbers("edges", at_least=2)
        counts = table.mapping("counts", lambda v: isinstance(v, list) and len(v) == len(
            edges) - 1 and all(type(n) is int for n in v), f"{len(edges) - 1} counts")
        if not counts:
            table.refuse("counts", "a table of at least one series")
        return cls(edges, {k: tuple(v) for k, v in counts.items()})


@dataclass(frozen=True)
class UnitHistogram:
    """A bank unit's score on its own class's rows and on the others'."""
    unit: str
    class_label: object
    histogram: Histogram

    def to_json(self):
        return {"unit": self.unit, "class_label": self.class_label, **self.histogram.to_json()}

    @classmethod
    def from_json(cls, table):
        return cls(table.text("unit"), table.label("class_label"), Histogram.from_json(table))


@dataclass(frozen=True)
class DataSummary:
    """Accuracy of the integer model on labelled rows, per class and as a confusion table."""
    file: str
    rows: int
    accuracy: float
    per_class: dict             # label text -> {"rows", "correct", "predicted"}
    labels: tuple               # the confusion table's classes, in order
    confusion: tuple            # rows: true class; columns: decided class
    score_seen: tuple | None = None
    histogram: Histogram | None = None          # a lone unit's, per class
    unit_histograms: tuple | None = None        # a bank's, per unit

    def to_json(self):
        return {"file": self.file, "rows": self.rows, "accuracy": self.accuracy,
                "per_class": {k: dict(v) for k, v in self.per_class.items()},
                "confusion": {"labels": list(self.labels),
                              "rows_true_columns_predicted": [list(r) for r in self.confusion]},
                **present([("score_seen", None if self.score_seen is None
                            else list(self.score_seen)),
                           ("histogram", self.histogram and self.histogram.to_json()),
                           ("unit_histograms", None if self.unit_histograms is None else
                            [h.to_json() for h in self.unit_histograms])])}

    @classmethod
    def from_json(cls, table):
        per_class = table.mapping("per_class", lambda v: isinstance(v, dict) and all(
            type(n) is int for n in v.values()), "tables of counts")
        confusion = table.table("confusion")
        counts = confusion.value.get("rows_true_columns_predicted")
        if not (isinstance(counts, list) and all(isinstance(r, list) and all(
                type(n) is int for n in r) for r in counts)):
            confusion.refuse("rows_true_columns_predicted", "lists of counts")
        histogram = table.table("histogram", None)
        histograms = table.tables("unit_histograms", None)
        return cls(table.text("file"), table.natural("rows"),
                   table.number("accuracy"),
                   {k: dict(v) for k, v in per_class.items()}, confusion.labels("labels"),
                   tuple(tuple(r) for r in counts), table.pair("score_seen", None, number=True),
                   histogram and Histogram.from_json(histogram),
                   None if histograms is None else tuple(map(UnitHistogram.from_json,
                                                             histograms)))


@dataclass(frozen=True)
class TrainingLog:
    """What ``thresh2hdl fit`` logged beside the model: mistakes per epoch and accuracies."""
    mistakes_per_epoch: tuple        # one list per unit
    epochs_run: tuple
    train_accuracy: float
    holdout_accuracy: float | None
    log: str                         # the log's file name

    def to_json(self):
        return {"mistakes_per_epoch": [list(c) for c in self.mistakes_per_epoch],
                "epochs_run": list(self.epochs_run), "train_accuracy": self.train_accuracy,
                "holdout_accuracy": self.holdout_accuracy, "log": self.log}

    @classmethod
    def from_json(cls, table):
        curves = table.value.get("mistakes_per_epoch", [])
        if not (isinstance(curves, list) and all(isinstance(c, list) and all(
                type(n) is int for n in c) for c in curves)):
            table.refuse("mistakes_per_epoch", "lists of mistake counts")
        return cls(tuple(map(tuple, curves)), table.integers("epochs_run", ()),
                   table.number("train_accuracy"), table.number("holdout_accuracy", None,
                                                                null=True), table.text("log"))


@dataclass(frozen=True)
class SweepRow:
    bits: int
    agreement: float
    accuracy: float | None

    def to_json(self):
        return {"bits": self.bits, "agreement": self.agreement, "accuracy": self.accuracy}


@dataclass(frozen=True)
class QuantizationLog:
    """What ``thresh2hdl quantize`` logged beside the model: the bits chosen and the sweep."""
    bits: int
    agreement_with_float: float
    accuracy: float | None
    float_accuracy: float | None
    sweep: tuple                     # SweepRow per width tried
    recommended_bits: int | None
    log: str

    def to_json(self):
        return {"bits": self.bits, "agreement_with_float": self.agreement_with_float,
                "accuracy": self.accuracy, "float_accuracy": self.float_accuracy,
                "sweep": [row.to_json() for row in self.sweep],
                "recommended_bits": self.recommended_bits, "log": self.log}

    @classmethod
    def from_json(cls, table):
        sweep = tuple(SweepRow(row.count("bits"), row.number("agreement"),
                               row.number("accuracy", None, null=True))
                      for row in table.tables("sweep", ()))
        if len({row.accuracy is None for row in sweep}) > 1:
            table.refuse("sweep", "rows that all have an accuracy, or none", "a mix")
        return cls(table.count("bits"), table.number("agreement_with_float"),
                   table.number("accuracy", None, null=True),
                   table.number("float_accuracy", None, null=True), sweep,
                   table.count("recommended_bits", None, null=True), table.text("log"))


@dataclass(frozen=True)
class Counterexample:
    """An input on which a netlist's outputs differ from the model's, confirmed in a
    simulator, and the file it was written to."""
    vector: dict
    file: str
    confirmed_in: str
    mismatch: str

    def to_json(self):
        return {"vector": dict(self.vector), "file": self.file,
                "confirmed_in": self.confirmed_in, "mismatch": self.mismatch}

    @classmethod
    def from_json(cls, table):
        return cls(table.mapping("vector", lambda v: type(v) is int, "integers", {}),
                   table.text("file"), table.text("confirmed_in"), table.text("mismatch"))


@dataclass(frozen=True)
class ProofSection:
    """A proof of one Verilog file against the model (``thresh2hdl prove``)."""
    status: str                      # proved, counterexample or undecided
    netlist: str
    statement: str
    method: str
    lemmas: int
    solver: str
    yosys: str
    arithmetic_bits: int
    timeout_s: float
    detail: str
    netlist_sha256: str | None = None        # older reports: absent
    failing_lemmas: tuple | None = None
    counterexample: Counterexample | None = None

    def to_json(self):
        return {"status": self.status, "netlist": self.netlist,
                **present([("netlist_sha256", self.netlist_sha256)]),
                "statement": self.statement, "method": self.method, "lemmas": self.lemmas,
                "solver": self.solver, "yosys": self.yosys,
                "arithmetic_bits": self.arithmetic_bits, "timeout_s": self.timeout_s,
                "detail": self.detail,
                **present([("failing_lemmas", None if self.failing_lemmas is None
                            else list(self.failing_lemmas))]),
                "counterexample": self.counterexample and self.counterexample.to_json()}

    @classmethod
    def from_json(cls, table):
        example = table.table("counterexample", None, null=True)
        return cls(table.text("status"), table.text("netlist"), table.text("statement"),
                   table.text("method"), table.natural("lemmas"),
                   table.text("solver"),
                   table.text("yosys"), table.count("arithmetic_bits"),
                   table.number("timeout_s"), table.text("detail"),
                   table.text("netlist_sha256", None), table.texts("failing_lemmas", None),
                   example and Counterexample.from_json(example))


@dataclass(frozen=True)
class Shortfall:
    """What a design that was not placed needs beyond the device, for one resource."""
    resource: str
    cell: str | None
    needed: int
    available: int

    def to_json(self):
        return {"resource": self.resource, **present([("cell", self.cell)]),
                "needed": self.needed, "available": self.available}


@dataclass(frozen=True)
class GuardCost:
    """The input guard's cost: the estimate less the same design synthesised without it."""
    lut4_equivalents: int
    flip_flops: int
    without_guard: dict             # the synthesis figures of the design without it

    def to_json(self):
        return {"lut4_equivalents": self.lut4_equivalents, "flip_flops": self.flip_flops,
                "without_guard": dict(self.without_guard)}


@dataclass(frozen=True)
class CostEstimate:
    """One target's synthesis and place-and-route figures (``thresh2hdl estimate``). Older
    reports lack the device's name, the LUT4 equivalents and their rule: they are worked
    out from the device and the cell counts (``device_name``, ``equivalents``, ``rule``)."""
    target: str
    device: str
    luts: int
    carries: int
    flip_flops: int
    dsps: int
    fmax_mhz: float | None           # None when not placed
    tool_versions: dict              # yosys, nextpnr
    device_name: str | None = None
    lut4_equivalents: int | None = None
    lut4_rule: str | None = None
    dsp_inference: bool | None = None
    placed: bool | None = None       # older reports: absent, and placed
    cells: dict | None = None
    method: str | None = None
    does_not_fit: tuple | None = None
    input_guard: GuardCost | None = None

    @property
    def name(self):
        return self.device_name or device_name(self.target, self.device.split())

    @property
    def equivalents(self):
        if self.lut4_equivalents is not None:
            return self.lut4_equivalents
        return lut4_equivalents(self.target, self.luts, self.carries)

    @property
    def rule(self):
        return self.lut4_rule or LUT4_RULES.get(self.target, "")

    @property
    def is_placed(self):
        return self.placed is None or self.placed

    def shortfall_text(self):
        """What a design that was not placed needs beyond the device, in words."""
        return needs_text(self.name, [s.to_json() for s in self.does_not_fit or ()])

    def to_json(self):
        return {"target": self.target, "device": self.device, **present([
            ("device_name", self.device_name), ("lut4_equivalents", self.lut4_equivalents),
            ("lut4_rule", self.lut4_rule)]), "luts": self.luts, "carries": self.carries,
            "flip_flops": self.flip_flops, "dsps": self.dsps,
            **present([("dsp_inference", self.dsp_inference), ("placed", self.placed)]),
            "fmax_mhz": self.fmax_mhz, **present([
                ("cells", self.cells), ("tool_versions", dict(self.tool_versions)),
                ("method", self.method),
                ("does_not_fit", None if self.does_not_fit is None else
                 [s.to_json() for s in self.does_not_fit]),
                ("input_guard", self.input_guard and self.input_guard.to_json())])}

    @classmethod
    def from_json(cls, table):
        placed = table.flag("placed", None)
        guard = table.table("input_guard", None, null=True)
        versions = table.table("tool_versions")
        missing = table.tables("does_not_fit", None)
        return cls(
            table.text("target"), table.text("device"), table.count("luts"),
            table.count("carries"), table.count("flip_flops"), table.count("dsps"),
            table.number("fmax_mhz", None, null=True) if placed is False else
            table.number("fmax_mhz"),
            {"yosys": versions.text("yosys"), "nextpnr": versions.text("nextpnr")},
            table.text("device_name", None), table.count("lut4_equivalents", None),
            table.text("lut4_rule", None), table.flag("dsp_inference", None), placed,
            table.mapping("cells", lambda v: type(v) is int, "counts", None),
            table.text("method", None),
            None if missing is None else tuple(Shortfall(
                m.text("resource"), m.text("cell", None), m.integer("needed"),
                m.integer("available")) for m in missing),
            guard and GuardCost(guard.integer("lut4_equivalents"), guard.integer("flip_flops"),
                                _without_guard(guard)))


def _without_guard(guard):
    figures = guard.table("without_guard")
    figures.count("lut4_equivalents")
    return dict(figures.value)


def _in_target_order(found):
    order = {target: index for index, target in enumerate(TARGETS)}
    return {t: found[t] for t in sorted(found, key=lambda t: (order.get(t, len(order)), t))}


def estimates_of(report):
    """A report.json's estimates by target, in the order of TARGETS, as its tables. Reports
    written before there was one per target have a single ``estimate``; it reads as its
    target's."""
    found = dict(report.get("estimates") or {})
    older = report.get("estimate")
    if older and older.get("target") not in found:
        found[older["target"]] = older
    return _in_target_order(found)


def read_estimates(table):
    """:func:`estimates_of` for a loaded report: ``{target: CostEstimate}``."""
    found = {name: CostEstimate.from_json(figures)
             for name, figures in table.named_tables("estimates", None) or ()}
    older = table.table("estimate", None, null=True)
    if older is not None and older.value:
        estimate = CostEstimate.from_json(older)
        found.setdefault(estimate.target, estimate)
    return _in_target_order(found)


def store_estimate(report, figures):
    """Put ``figures`` in a report.json's data as its target's estimate, keeping the other
    targets'."""
    estimates = estimates_of(report)
    estimates[figures["target"]] = figures
    report.pop("estimate", None)
    report["estimates"] = estimates_of({"estimates": estimates})
