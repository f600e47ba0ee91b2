"""The report's sections that other stages hand in: the data's accuracy and histograms, the
training or quantization log, proofs (the cost estimates, one per device, are in
estimates.py).

Each is a frozen record with ``to_json`` (its part of report.json, keys in the order written
since the first version) and ``from_json`` (from a loaded report's table, see fields.Table).
"""

from dataclasses import dataclass

from .fields import present

__all__ = ["Histogram", "UnitHistogram", "DataSummary", "TrainingLog", "SweepRow",
           "QuantizationLog", "Counterexample", "ProofSection", "VhdlSection"]


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
    method_kind: str | None = None           # older reports: absent (the value lemmas)

    def to_json(self):
        return {"status": self.status, "netlist": self.netlist,
                **present([("netlist_sha256", self.netlist_sha256)]),
                "statement": self.statement, "method": self.method,
                **present([("method_kind", self.method_kind)]), "lemmas": self.lemmas,
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
                   example and Counterexample.from_json(example),
                   table.text("method_kind", None))


@dataclass(frozen=True)
class VhdlSection:
    """The VHDL file of a build (``--hdl vhdl`` or ``both``): its files, GHDL's lint, and its
    own simulation when the Verilog was the one verified first (``both``)."""
    file: str
    package: str
    testbench: str
    command: str
    lint: str
    simulator_version: str | None = None
    vectors_checked: int | None = None
    mismatches: int | None = None
    first_mismatches: tuple = ()

    def to_json(self):
        return {"file": self.file, "package": self.package, "testbench": self.testbench,
                "command": self.command, "lint": self.lint,
                **present([("simulator_version", self.simulator_version),
                           ("vectors_checked", self.vectors_checked),
                           ("mismatches", self.mismatches)]),
                **({"first_mismatches": list(self.first_mismatches)}
                   if self.simulator_version else {})}

    @classmethod
    def from_json(cls, table):
        return cls(table.text("file"), table.text("package"), table.text("testbench"),
                   table.text("command"), table.text("lint"),
                   table.text("simulator_version", None), table.natural("vectors_checked", None),
                   table.natural("mismatches", None), tuple(table.texts("first_mismatches", ())))
