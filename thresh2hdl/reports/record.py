"""The build report as one typed record, and its JSON form (report.json).

``build_report`` (assemble.py) makes the record from the design; :meth:`Report.to_json` is
report.json's data and :func:`report_json` its text; :meth:`Report.from_json` reads a loaded
report.json back, older ones (without the keys added since) included, and refuses a value it
cannot show in one InputError naming the field. HTML, Markdown and the terminal read the record.

A lone unit and a bank are read alike: one sizing row per unit (:class:`UnitSizes`), the
overall figures worked out from the rows. A loaded report.json stays the app's to update and
write back as it is (its key order, and keys this version does not know); the record is how
the writers read it. Everything but ``timing`` is a function of the inputs alone, so two builds
of the same model give byte-identical report.json apart from that section.
"""

import json
from dataclasses import dataclass, field

from .design import Datapath, FeatureRow, Sizes
from .fields import Table, plain, present
from .estimates import read_estimates
from .sections import DataSummary, ProofSection, QuantizationLog, TrainingLog, VhdlSection

__all__ = ["REPORT_FORMAT", "SAFETY_CAUTION", "Report", "WeightPort", "LearningSection", "GuardSection",
           "ClockingSection", "StreamSection", "Verification", "Testbench", "report_json", "report_record"]

REPORT_FORMAT = 1

SAFETY_CAUTION = (
    "This is not a safety-rated function. Where its decision can act on the physical world (a "
    "shutdown trigger, a safety interlock), defer to the applicable functional-safety "
    "standards, local codes and licensed practice.")


@dataclass(frozen=True)
class LearningSection:
    """On-chip learning: the rule's constants, the update path's widths and its ports."""
    learning_rate: str          # eta, a power of two ("1/64")
    bias_step: int
    step_bits: int              # the widest feature step eta * x
    weight_sum_bits: int        # a weight's saturating adder
    bias_sum_bits: int
    delay_cycles: int           # updates of the samples in flight, not yet seen
    ports: tuple
    rule: str

    def to_json(self):
        return {"learning_rate": self.learning_rate, "bias_step": self.bias_step,
                "step_bits": self.step_bits, "weight_sum_bits": self.weight_sum_bits,
                "bias_sum_bits": self.bias_sum_bits, "delay_cycles": self.delay_cycles,
                "ports": list(self.ports), "rule": self.rule}

    @classmethod
    def from_json(cls, table):
        return cls(table.text("learning_rate"), table.natural("bias_step"),
                   table.count("step_bits"), table.count("weight_sum_bits"),
                   table.count("bias_sum_bits"), table.natural("delay_cycles"),
                   table.texts("ports"), table.text("rule"))


@dataclass(frozen=True)
class WeightPort:
    """The write port of loadable weights: widths, ranges, the address map and its ports."""
    weight_bits: int
    bias_bits: int
    weight_range: tuple
    bias_range: tuple
    data_bits: int
    addresses: int
    map: str
    ports: tuple
    form: str = "plain"      # or axi4-lite (hardware.WEIGHT_PORTS); older reports: plain

    def to_json(self):
        record = {"weight_bits": self.weight_bits, "bias_bits": self.bias_bits,
                  "weight_range": list(self.weight_range),
                  "bias_range": list(self.bias_range), "data_bits": self.data_bits,
                  "addresses": self.addresses, "map": self.map, "ports": list(self.ports)}
        # Written only when not plain, so that a plain port's record is what it was.
        return record if self.form == "plain" else {"form": self.form, **record}

    @classmethod
    def from_json(cls, table):
        return cls(table.count("weight_bits"), table.count("bias_bits"),
                   table.pair("weight_range"), table.pair("bias_range"),
                   table.count("data_bits"), table.natural("addresses"),
                   table.text("map"), table.texts("ports"), table.text("form", "plain"))


@dataclass(frozen=True)
class ClockingSection:
    """The reset and clock enable, when not the default (a synchronous, active-high reset
    and no enable: older reports and default builds have no section)."""
    reset: str                       # one of hardware.RESET_KINDS
    reset_port: str
    clock_enable_port: str | None

    def to_json(self):
        return {"reset": self.reset, "reset_port": self.reset_port,
                "clock_enable_port": self.clock_enable_port}

    @classmethod
    def from_json(cls, table):
        return cls(table.text("reset"), table.text("reset_port"),
                   table.text("clock_enable_port", null=True))


@dataclass(frozen=True)
class StreamSection:
    """The AXI4-Stream form: where each feature and result sits in the packed TDATA ports,
    ``(port, name, low bit, high bit of its bytes)`` (no section: the plain interface)."""
    interface: str
    lanes: tuple

    def to_json(self):
        return {"interface": self.interface,
                "lanes": [{"port": port, "name": name, "bits": [lo, hi]}
                          for port, name, lo, hi in self.lanes]}

    @classmethod
    def from_json(cls, table):
        return cls(table.text("interface"),
                   tuple((lane.text("port"), lane.text("name"), *lane.pair("bits"))
                         for lane in table.tables("lanes")))


@dataclass(frozen=True)
class GuardSection:
    """The input guard: what a code outside its declared range gives."""
    clamp: bool
    flag: bool
    needed: bool
    flag_port: str | None
    guarded_features: tuple
    declared_ranges: tuple
    port_ranges: tuple
    every_code_defined: bool
    changed_from_default: tuple
    statement: str

    def to_json(self):
        return {"clamp": self.clamp, "flag": self.flag, "needed": self.needed,
                "flag_port": self.flag_port, "guarded_features": list(self.guarded_features),
                "declared_ranges": [list(r) for r in self.declared_ranges],
                "port_ranges": [list(r) for r in self.port_ranges],
                "every_code_defined": self.every_code_defined,
                "changed_from_default": list(self.changed_from_default),
                "statement": self.statement}

    @classmethod
    def from_json(cls, table):
        return cls(table.flag("clamp"), table.flag("flag"), table.flag("needed"),
                   table.text("flag_port", null=True), table.texts("guarded_features"),
                   table.pairs("declared_ranges"), table.pairs("port_ranges"),
                   table.flag("every_code_defined"), table.texts("changed_from_default"),
                   table.text("statement"))


@dataclass(frozen=True)
class Testbench:
    file: str
    command: str                     # runs it in any Verilog-2001 simulator (Icarus here)

    def to_json(self):
        return {"file": self.file, "command": self.command}


@dataclass(frozen=True)
class Packaging:
    """The folder's files for a user's own flow: the FuseSoC core description (its file and
    VLNV) and the cocotb test module."""
    core_file: str
    core_name: str
    cocotb_test: str | None          # None: an older VHDL-only or AXI4-Stream folder

    def to_json(self):
        return {"core_file": self.core_file, "core_name": self.core_name,
                "cocotb_test": self.cocotb_test}

    @classmethod
    def from_json(cls, table):
        return cls(table.text("core_file"), table.text("core_name"),
                   table.text("cocotb_test", null=True))


@dataclass(frozen=True)
class Verification:
    """What the simulator found: vectors, cycles, mismatches and the first few of them."""
    vectors_checked: int
    mismatches: int
    simulator: str
    simulator_version: str
    cycles: int
    vector_groups: tuple             # (name, count) per kind of vector
    first_mismatches: tuple
    seed: int | None = None

    def to_json(self):
        return {"simulator": self.simulator, "simulator_version": self.simulator_version,
                "cycles": self.cycles, "vector_groups": [list(g) for g in self.vector_groups],
                **present([("seed", self.seed)]),
                "first_mismatches": list(self.first_mismatches)}

    @classmethod
    def from_json(cls, top, table):
        groups = table.value.get("vector_groups")
        if not (isinstance(groups, list) and all(
                isinstance(g, list) and len(g) == 2 and isinstance(g[0], str) and
                type(g[1]) is int for g in groups)):
            table.refuse("vector_groups", "a list of [name, count] pairs")
        return cls(top.natural("vectors_checked"),
                   top.natural("mismatches"), table.text("simulator"),
                   table.text("simulator_version"), table.natural("cycles"),
                   tuple(map(tuple, groups)), table.texts("first_mismatches"),
                   table.integer("seed", None))


@dataclass(frozen=True)
class Report:
    """One build's report: the module and its files, features, sizes, datapath, ports, input
    guard, verification, data, history, proofs, cost estimates and timing."""
    module: str
    verilog: str | None              # None: a VHDL-only build (``vhdl``)
    model_sha256: str
    tool_versions: dict
    features: tuple                  # FeatureRow
    sizes: Sizes
    datapath: Datapath
    latency_cycles: int
    verification: Verification
    testbench: Testbench
    caution: str = SAFETY_CAUTION
    packaging: Packaging | None = None       # older reports: no core file, no cocotb module
    instance_template: str | None = None
    register_stages: int | None = None       # older reports: the latency
    beats_per_result: int | None = None      # older reports: one
    weight_port: WeightPort | None = None
    learning: LearningSection | None = None  # None: no on-chip learning
    input_guard: GuardSection | None = None  # older reports were built without one
    clocking: ClockingSection | None = None  # None: synchronous active-high reset, no enable
    stream: StreamSection | None = None      # None: the plain interface
    data: DataSummary | None = None
    training: TrainingLog | None = None
    quantization: QuantizationLog | None = None
    proof: ProofSection | None = None
    netlist_proofs: dict = field(default_factory=dict)   # file name -> ProofSection
    estimates: dict = field(default_factory=dict)        # target -> CostEstimate
    timing: dict = field(default_factory=dict)
    report_format: int = REPORT_FORMAT
    hdl: str = "verilog"                     # verilog, vhdl or both
    vhdl: VhdlSection | None = None

    @property
    def design_files(self):
        """The design's files in the folder, Verilog first."""
        return [name for name in (self.verilog, self.vhdl and self.vhdl.file) if name]

    def to_json(self):
        """report.json's data, keys in the order written since the first version."""
        optional = lambda key, value: present([(key, value and value.to_json())])
        return {
            "report_format": self.report_format, "module": self.module,
            **present([("verilog", self.verilog)]),
            **({"hdl": self.hdl} if self.hdl != "verilog" else {}),
            **optional("vhdl", self.vhdl),
            **present([("instance_template", self.instance_template)]),
            "model_sha256": self.model_sha256, "tool_versions": dict(self.tool_versions),
            "features": [f.to_json() for f in self.features],
            **self.sizes.to_json(self.datapath.to_json()),
            "latency_cycles": self.latency_cycles,
            **present([("register_stages", self.register_stages),
                       ("beats_per_result", self.beats_per_result)]),
            "weight_port": self.weight_port and self.weight_port.to_json(),
            **optional("on_chip_learning", self.learning),
            **optional("input_guard", self.input_guard),
            **optional("clocking", self.clocking), **optional("stream", self.stream),
            "vectors_checked": self.verification.vectors_checked,
            "mismatches": self.verification.mismatches,
            "testbench": self.testbench.to_json(), **optional("packaging", self.packaging),
            "verification": self.verification.to_json(),
            "data": self.data and self.data.to_json(),
            **optional("training", self.training), **optional("quantization", self.quantization),
            **optional("proof", self.proof),
            "caution": self.caution, "timing": dict(self.timing),
            **({"estimates": {t: e.to_json() for t, e in self.estimates.items()}}
               if self.estimates else {}),
            **({"netlist_proofs": {n: p.to_json() for n, p in self.netlist_proofs.items()}}
               if self.netlist_proofs else {})}

    @classmethod
    def from_json(cls, data, source=None):
        """The record of a loaded report.json's data; ``source`` names the file in errors."""
        top = Table(data, "", source)
        features = tuple(FeatureRow(f.text("name"), f.count("bits"), f.flag("signed"))
                         for f in top.tables("features"))
        sizes = Sizes.from_json(top, len(features))
        versions = top.mapping("tool_versions", lambda v: isinstance(v, str), "texts")
        if "thresh2hdl" not in versions:
            top.refuse("tool_versions", "a table naming the thresh2hdl version")
        testbench = top.table("testbench")
        return cls(
            module=top.text("module"), verilog=top.text("verilog", None),
            hdl=top.text("hdl", "verilog"), vhdl=_section(top, "vhdl", VhdlSection),
            model_sha256=top.text("model_sha256"), tool_versions=versions, features=features,
            sizes=sizes, datapath=Datapath.from_json(top.table("tree"), sizes.is_bank),
            latency_cycles=top.count("latency_cycles"),
            verification=Verification.from_json(top, top.table("verification")),
            testbench=Testbench(testbench.text("file"), testbench.text("command")),
            packaging=_section(top, "packaging", Packaging),
            caution=top.text("caution"), instance_template=top.text("instance_template", None),
            register_stages=top.count("register_stages", None),
            beats_per_result=top.count("beats_per_result", None),
            weight_port=_section(top, "weight_port", WeightPort),
            learning=_section(top, "on_chip_learning", LearningSection),
            input_guard=_section(top, "input_guard", GuardSection),
            clocking=_section(top, "clocking", ClockingSection),
            stream=_section(top, "stream", StreamSection),
            data=_section(top, "data", DataSummary),
            training=_section(top, "training", TrainingLog),
            quantization=_section(top, "quantization", QuantizationLog),
            proof=_section(top, "proof", ProofSection),
            netlist_proofs={name: ProofSection.from_json(proof) for name, proof in
                            top.named_tables("netlist_proofs", None) or ()},
            estimates=read_estimates(top),
            timing=top.mapping("timing", lambda v: isinstance(v, (int, float)) and
                               not isinstance(v, bool), "numbers", {}),
            report_format=top.integer("report_format", REPORT_FORMAT))


def _section(top, key, kind):
    """An optional section: None where absent, null or empty (as every version has read it)."""
    table = top.table(key, None, null=True)
    return kind.from_json(table) if table is not None and table.value else None


def report_record(report, source=None):
    """``report`` as the record: itself, or read from report.json's data (an InputError naming
    ``source`` and the field where that data cannot be shown)."""
    return report if isinstance(report, Report) else Report.from_json(report, source)


def report_json(report):
    """report.json's text: of the record, or of report.json's data as loaded and updated."""
    data = report.to_json() if isinstance(report, Report) else report
    return json.dumps(plain(data), indent=2, sort_keys=False) + "\n"
