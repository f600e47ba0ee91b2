"""The report's tables read from the design: what each level holds, the register stages,
every datapath value named as the Verilog names it, the argmax's comparisons, and a bank's
per-unit score histograms."""

import re

import numpy as np

from ..analysis import shared_name
from ..emit import port_table
from .sections import Histogram, UnitHistogram

__all__ = ["level_names", "stages_report", "node_table", "argmax_report", "shared_report",
           "unit_histograms", "NO_WIRE"]


def level_names(component):
    """What each level holds (level 0 first), as ``component.levels`` counts them."""
    if component.levels == 1 and component.analysis.arch == "serial":
        return ["multiply-accumulate"]
    plan = component.bank
    units = plan.units if plan is not None else (component.analysis,)
    adders = max(unit.tree_levels for unit in units)
    has_bias = any(node.kind == "bias" for unit in units for node in unit.nodes)
    last = ("bias" if has_bias else "scores") if plan is not None else \
        ("bias and decision" if has_bias else "decision")
    names = ["products"] + ["adders"] * adders + [last]
    if plan is not None:
        names += ["argmax comparisons", "argmax selections"] * (plan.argmax_levels // 2)
    return names


def stages_report(component):
    """Each register stage and the levels it follows (first and last)."""
    return [{"stage": k + 1, "levels": [first, last]}
            for k, (first, last) in enumerate(component.stage_levels)]


_DECLARED = re.compile(r"^\s*(?:\(\*[^*]*\*\)\s*)?(?:input|output|wire|reg)\s+(?:(?:wire|reg)\s+)?"
                       r"(?:signed\s+)?(?:\[[^\]]*\]\s*)?([A-Za-z_]\w*)", re.M)
NO_WIRE = "no wire of its own"


def _wire(node, name, component, model, unit_index, ports, declared):
    """Where the emitted Verilog holds a node's value: its own wire (the writer, verilog.py,
    names a wire after the design's signal, with ``_1``.. on a clash with a port), an input
    shifted (a power-of-two product is wiring), an output port (the score, combinational), the
    parts of a split adder (below the top, the low bits of the part's sum, whose top bit is
    the carry), or nothing (a value nothing reads)."""
    analysis = component.analysis if unit_index is None else component.bank.units[unit_index]
    low, high = analysis.score_range
    if not (analysis.has_score or analysis.loadable or model.is_bank) and (low > 0 or high <= 0):
        return "none: the decision is the same for every input, so nothing reads it"
    if node.kind == "product" and node.magnitude > 0 and not node.magnitude & (node.magnitude - 1):
        shift = node.magnitude.bit_length() - 1
        feature = _guarded_input(component, model.features[node.feature].name, node.feature,
                                 declared)
        return f"{feature} << {shift}" if shift else feature
    if component.latency == 0 and node.index == analysis.score_node and model.ports.has_score:
        return model.ports.score if unit_index is None else \
            f"{model.ports.score}_{model.units[unit_index].name}"
    if analysis.arch == "serial" and node.name == "sample":
        return _guarded_input(component, model.ports.sample, None, declared)
    if analysis.arch == "serial" and node.name == "magnitude":
        magnitudes = {abs(w) for w in analysis.weights}
        if len(magnitudes) == 1:
            return f"the constant {magnitudes.pop()}"      # the same for every beat
    if analysis.arch == "serial" and len(model.features) == 1 and node.name == "accumulator":
        # one beat: the sum starts from the bias (a register, named after what it feeds, when
        # loadable)
        return f"{name}_in" if analysis.loadable else f"the constant {analysis.bias}"
    parts = component.split_parts.get(name, 1)
    if parts > 1:
        bits = component.config.split_bits
        found = [f"{name}_p{j}" if f"{name}_p{j}" in declared else
                 f"{name}_p{j}_sum[{bits - 1}:0]" for j in range(parts)
                 if {f"{name}_p{j}", f"{name}_p{j}_sum"} & declared]
        return ", ".join(found) if found else NO_WIRE
    wire, serial = name, 1
    while wire in ports:
        wire, serial = f"{name}_{serial}", serial + 1
    return wire if wire in declared else NO_WIRE


def _guarded_input(component, port, feature, declared):
    """The port, or its clamped value where the input guard clamps it (input_guard.py names it
    ``{feature}_clamped``; the serial sample ``sample_clamped``)."""
    guard = component.config.guard
    if not guard.clamp or not guard.needed or (feature is not None and feature not in guard.tight):
        return port
    name = "sample_clamped" if feature is None else \
        f"{component.config.model.features[feature].name}_clamped"
    return name if name in declared else port


def node_table(component, model, verilog_text):
    """Every datapath value of every unit, named as in the Verilog (a bank's units with
    ``u{index}_``, a shared term by its own name, in each unit that reads it), with its
    level and register stage in the one count, its children, and where ``verilog_text``
    (the emitted module) holds it."""
    ports = {port.name for port in port_table(component, model)}
    declared = set(_DECLARED.findall(verilog_text))
    plan = component.bank
    units = plan.units if plan is not None else (component.analysis,)
    rows = []
    for index, analysis in enumerate(units):
        prefix = f"u{index}_" if model.is_bank else ""
        names = {node.index: node.wire_name(prefix) for node in analysis.nodes}
        places = {}
        for node in analysis.nodes:
            places[node.index] = _scaled_place(node, places) if node.kind == "scaled" else \
                _wire(node, names[node.index], component, model,
                      index if model.is_bank else None, ports, declared)
            rows.append({
                "name": names[node.index],
                **({"unit": model.units[index].name} if model.is_bank else {}),
                "kind": node.kind, "level": node.level,
                "stage": component.level_stage(node.level),
                "range": [node.lo, node.hi], "bits": node.bits, "signed": node.is_signed,
                "sign": node.sign, "children": [names[c] for c in node.children],
                "verilog": places[node.index]})
    return rows


def _scaled_place(node, places):
    """A scaled node is wiring: its child's wire, shifted."""
    child, shift = places[node.children[0]], node.magnitude.bit_length() - 1
    if not shift or child == NO_WIRE or child.startswith("none"):
        return child
    return f"{child} << {shift}" if child.isidentifier() else f"({child}) << {shift}"


def argmax_report(component, model):
    """The argmax's comparisons as planned: which scores (or earlier winners) each takes and
    their classes, its level and register stage; a tie goes to the left input, whose classes
    are the lower indices."""
    plan = component.bank
    if plan is None:
        return []
    serial = plan.units[0].arch == "serial"
    comparisons = []

    def score_name(i, analysis):
        if serial:
            return f"u{i}_score_r1"
        if analysis.score_node is None:
            return f"u{i}_score_const"
        return f"u{i}_{analysis.nodes[analysis.score_node].name}"

    def merge(level, name, left, right):
        comparisons.append({
            "name": name, "level": None if serial else level,
            "stage": None if serial else component.level_stage(level),
            "left": left[1], "right": right[1], "left_classes": left[2],
            "right_classes": right[2], "ties_to": "left",
            "verilog": f"{name}_score, {name}_class"})
        return name, f"winner of {name}", left[2] + right[2]

    plan.tournament([(f"class{i}", f"{unit.name}'s score {score_name(i, analysis)}",
                      [str(label)]) for i, (unit, label, analysis) in
                     enumerate(zip(model.units, model.labels, plan.units))], merge)
    if comparisons:     # the last one's class goes straight to the decision
        comparisons[-1]["verilog"] = f"the decision {model.ports.decision}"
    return comparisons


def shared_report(component, model):
    """A bank's shared terms (None when it shares none): each one's definition, width, exact
    range and the units that read it; and the adders with and without sharing."""
    sharing = component.bank.sharing if component.bank is not None else None
    if sharing is None:
        return None
    nodes = {node.name: node for unit in component.bank.units for node in unit.nodes
             if node.shared}
    names = [f.name for f in model.features]
    terms = []
    for index, definition in enumerate(sharing.definition(names)):
        node = nodes[shared_name(index)]
        terms.append({"name": node.name, "definition": definition, "bits": node.bits,
                      "range": [node.lo, node.hi],
                      "units": [model.units[u].name for u in sharing.users(index)]})
    return {"adders_with": sharing.adders_with, "adders_without": sharing.adders_without,
            "terms": terms}


def unit_histograms(model, scores, labels, bins=30):
    """For a bank: each unit's score on labelled rows, split into the rows of its own class and
    the rest (a unit should score its own class above the others)."""
    out = []
    for k, (unit, label) in enumerate(zip(model.units, model.labels)):
        column = np.asarray(scores[:, k], dtype=np.float64)
        own = labels == label
        edges = np.histogram_bin_edges(column, bins=bins)
        out.append(UnitHistogram(unit.name, label, Histogram(
            tuple(float(e) for e in edges),
            {f"class {label}": tuple(np.histogram(column[own], edges)[0].tolist()),
             "other classes": tuple(np.histogram(column[~own], edges)[0].tolist())})))
    return out
