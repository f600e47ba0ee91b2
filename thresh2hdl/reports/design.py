"""The design's part of the report: features, one sizing row per unit (a lone unit's and a
bank's alike) and the datapath tree with its levels, register stages and nodes."""

from dataclasses import dataclass

from ..train import digits_per_unit
from .fields import present

__all__ = ["FeatureRow", "UnitSizes", "Sizes", "Stage", "Node", "Comparison", "SplitAdders",
           "SharedTerm", "SharedTerms", "Datapath"]


@dataclass(frozen=True)
class FeatureRow:
    name: str
    bits: int
    signed: bool

    def to_json(self):
        return {"name": self.name, "bits": self.bits, "signed": self.signed}


@dataclass(frozen=True)
class UnitSizes:
    """One unit's sizing row: a lone unit's, or each of a bank's (which has a name and a
    class)."""
    weights: tuple
    bias: int
    score_range: tuple
    score_bits_min: int
    score_bits: int
    headroom_bits: int
    witness_min: tuple
    witness_max: tuple
    name: str | None = None
    class_label: object = None

    @property
    def signed_digits(self):
        """Nonzero canonical signed digits of the weights, summed: the adders of the products
        in ``shiftadd``, computed from the weights (so a report of any version has them)."""
        return digits_per_unit([self.weights])[0]

    def to_json(self):
        return {"name": self.name, "class_label": self.class_label,
                "weights": list(self.weights), "bias": self.bias,
                "score_range": list(self.score_range), "score_bits_min": self.score_bits_min,
                "score_bits": self.score_bits, "headroom_bits": self.headroom_bits,
                "signed_digits": self.signed_digits,
                "witness_min": list(self.witness_min), "witness_max": list(self.witness_max)}

    @classmethod
    def from_json(cls, table, features, bank):
        weights = table.integers("weights")
        if len(weights) != features:
            table.refuse("weights", f"{features} integers, one per feature")
        return cls(weights, table.integer("bias"), table.pair("score_range"),
                   table.count("score_bits_min"), table.count("score_bits"),
                   table.integer("headroom_bits"), table.integers("witness_min"),
                   table.integers("witness_max"), table.text("name") if bank else None,
                   table.label("class_label") if bank else None)


@dataclass(frozen=True)
class Sizes:
    """The sizing rows, one per unit, and what the units share; a bank's overall figures are
    the widest over its units."""
    feature_ranges: tuple
    score_port: bool
    units: tuple                     # UnitSizes
    class_bits: int | None = None    # a bank's class output

    @property
    def is_bank(self):
        return self.units[0].name is not None

    @property
    def score_range(self):
        return (min(u.score_range[0] for u in self.units),
                max(u.score_range[1] for u in self.units))

    @property
    def score_bits_min(self):
        return max(u.score_bits_min for u in self.units)

    @property
    def score_bits(self):
        return max(u.score_bits for u in self.units)

    @property
    def headroom_bits(self):
        return min(u.headroom_bits for u in self.units)

    @property
    def signed_digits(self):
        """The weights' nonzero signed digits in all (each unit's: ``units[i].signed_digits``)."""
        return sum(u.signed_digits for u in self.units)

    def to_json(self, tree):
        """The sizing keys of report.json, with the datapath's ``tree`` in its place."""
        first = self.units[0]
        common = {"feature_ranges": [list(r) for r in self.feature_ranges],
                  "score_port": self.score_port, "score_range": list(self.score_range),
                  "score_bits_min": self.score_bits_min, "score_bits": self.score_bits,
                  "headroom_bits": self.headroom_bits, "signed_digits": self.signed_digits}
        if not self.is_bank:
            return {"weights": list(first.weights), "bias": first.bias, **common,
                    "witness_min": list(first.witness_min),
                    "witness_max": list(first.witness_max), "tree": tree}
        return {"weights": [list(u.weights) for u in self.units],
                "bias": [u.bias for u in self.units], **common,
                **present([("class_bits", self.class_bits)]), "tree": tree,
                "units": [u.to_json() for u in self.units]}

    @classmethod
    def from_json(cls, table, features):
        bank = bool(table.value.get("units"))
        units = (tuple(UnitSizes.from_json(row, features, True) for row in table.tables("units"))
                 if bank else (UnitSizes.from_json(table, features, False),))
        return cls(table.pairs("feature_ranges"), table.flag("score_port"), units,
                   table.count("class_bits", None) if bank else None)


@dataclass(frozen=True)
class Stage:
    """A register stage and the levels it follows (first and last)."""
    stage: int
    first: int
    last: int

    def to_json(self):
        return {"stage": self.stage, "levels": [self.first, self.last]}


@dataclass(frozen=True)
class Node:
    """A datapath value, named as in the Verilog, with its level, register stage, exact
    range and width, operands, and where the emitted Verilog holds it."""
    name: str
    kind: str
    level: int
    stage: int | None
    range: tuple
    bits: int
    signed: bool
    sign: int = 1
    children: tuple = ()
    verilog: str | None = None       # older reports: absent
    unit: str | None = None          # a bank's unit

    def to_json(self):
        return {"name": self.name, **present([("unit", self.unit)]), "kind": self.kind,
                "level": self.level, "stage": self.stage, "range": list(self.range),
                "bits": self.bits, "signed": self.signed, "sign": self.sign,
                "children": list(self.children), "verilog": self.verilog}

    @classmethod
    def from_json(cls, table):
        return cls(table.text("name"), table.text("kind"), table.count("level"),
                   table.count("stage", None, null=True), table.pair("range"),
                   table.integer("bits", low=1, high=1 << 16), table.flag("signed"),
                   table.integer("sign", 1), table.texts("children", ()),
                   table.text("verilog", None), table.text("unit", None))


@dataclass(frozen=True)
class Comparison:
    """One comparison of a bank's argmax: its inputs and their classes (a tie to the left)."""
    name: str
    level: int | None                # None for the serial bank, after the scores
    stage: int | None
    left: str
    right: str
    left_classes: tuple
    right_classes: tuple
    ties_to: str
    verilog: str

    def to_json(self):
        return {"name": self.name, "level": self.level, "stage": self.stage,
                "left": self.left, "right": self.right,
                "left_classes": list(self.left_classes),
                "right_classes": list(self.right_classes), "ties_to": self.ties_to,
                "verilog": self.verilog}

    @classmethod
    def from_json(cls, table):
        return cls(table.text("name"), table.count("level", None, null=True),
                   table.count("stage", None, null=True), table.text("left"),
                   table.text("right"), table.texts("left_classes"),
                   table.texts("right_classes"), table.text("ties_to"), table.text("verilog"))


@dataclass(frozen=True)
class SplitAdders:
    """The adders split into parts (``split_bits`` None: none split); older reports lack the
    other keys (None), and a bank's older reports all of them."""
    split_bits: int | None
    carry_registers: int | None = None
    result_parts: int | None = None
    split_adders: int | None = None

    def to_json(self):
        return {"split_bits": self.split_bits, "carry_registers": self.carry_registers,
                "result_parts": self.result_parts, "split_adders": self.split_adders}


@dataclass(frozen=True)
class SharedTerm:
    """A term several units of a shift-add bank share: its definition, width, exact range and
    the units that read it (directly or inside another shared term)."""
    name: str
    definition: str
    bits: int
    range: tuple
    units: tuple

    def to_json(self):
        return {"name": self.name, "definition": self.definition, "bits": self.bits,
                "range": list(self.range), "units": list(self.units)}

    @classmethod
    def from_json(cls, table):
        return cls(table.text("name"), table.text("definition"),
                   table.integer("bits", low=1, high=1 << 16), table.pair("range"),
                   table.texts("units"))


@dataclass(frozen=True)
class SharedTerms:
    """A bank's shared terms and its adders with and without them (the bias aside)."""
    adders_with: int
    adders_without: int
    terms: tuple

    def to_json(self):
        return {"adders_with": self.adders_with, "adders_without": self.adders_without,
                "terms": [t.to_json() for t in self.terms]}

    @classmethod
    def from_json(cls, table):
        return cls(table.count("adders_with"), table.count("adders_without"),
                   tuple(map(SharedTerm.from_json, table.tables("terms"))))


@dataclass(frozen=True)
class Datapath:
    """The datapath: its levels (the one count, from 0), the register stages after them and
    every node; the split adders and, for a bank, the argmax."""
    arch: str
    levels: int
    nodes: tuple
    level_names: tuple | None = None     # older reports: None
    stages: tuple | None = None          # older reports: None
    split: SplitAdders | None = None
    argmax_levels: int | None = None
    argmax: tuple | None = None          # a bank's comparisons
    shared: SharedTerms | None = None    # a bank's shared terms, when it shares them

    def to_json(self):
        stages = {} if self.stages is None else {
            "stages": [s.to_json() for s in self.stages],
            "register_after_levels": [s.last for s in self.stages]}
        return {"arch": self.arch, "levels": self.levels,
                **present([("level_names", None if self.level_names is None
                            else list(self.level_names))]),
                **stages, "nodes": [n.to_json() for n in self.nodes],
                **(self.split.to_json() if self.split else {}),
                **({} if self.argmax is None else {
                    "argmax_levels": self.argmax_levels,
                    "argmax": [c.to_json() for c in self.argmax]}),
                **({} if self.shared is None else {"shared_terms": self.shared.to_json()})}

    @classmethod
    def from_json(cls, table, bank):
        stages = table.tables("stages", None)
        if stages is not None:
            stages = tuple(Stage(s.count("stage"), *s.pair("levels")) for s in stages)
        argmax = table.tables("argmax", None) if bank else None
        shared = table.table("shared_terms", None) if bank else None
        return cls(table.text("arch"), table.count("levels"),
                   tuple(map(Node.from_json, table.tables("nodes"))),
                   table.texts("level_names", None), stages,
                   SplitAdders(
                       table.count("split_bits", None, null=True),
                       table.count("carry_registers", None), table.count("result_parts", None),
                       table.count("split_adders", None)),
                   table.count("argmax_levels", None) if bank else None,
                   None if argmax is None else tuple(map(Comparison.from_json, argmax)),
                   None if shared is None else SharedTerms.from_json(shared))
