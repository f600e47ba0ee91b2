"""The build report: one data structure, written as report.json and summarised on the terminal.

Everything in the report but its ``timing`` section is a function of the inputs alone, so two
builds of the same model give byte-identical report.json apart from that section.
"""

import json
import re

import numpy as np

from ..cost import CELL_NAMES, LUT4_RULES, TARGETS, device_name, lut4_equivalents, needs_text
from ..emit import port_table

__all__ = ["SAFETY_CAUTION", "REPORT_FORMAT", "cost_text", "estimate_facts", "estimates_of",
           "report_json", "shortfall_text", "store_estimate", "summary_lines", "level_names",
           "stages_report", "node_table", "argmax_report", "unit_histograms"]

REPORT_FORMAT = 1

SAFETY_CAUTION = (
    "This is not a safety-rated function. Where its decision can act on the physical world (a "
    "shutdown trigger, a safety interlock), defer to the applicable functional-safety "
    "standards, local codes and licensed practice.")


def _jsonable(value):
    if isinstance(value, dict):
        return {str(k): _jsonable(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_jsonable(v) for v in value]
    if hasattr(value, "item"):       # numpy scalars
        return value.item()
    return value


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
        names += ["argmax"] * plan.argmax_levels
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
    parts = component.split_parts.get(node.name, 1)
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
    """The port, or its clamped value where the input guard clamps it (input_guard.py names
    it ``{feature}_clamped``; the serial sample ``sample_clamped``)."""
    guard = component.config.guard
    if not guard.clamp or not guard.needed or (feature is not None and feature not in guard.tight):
        return port
    name = "sample_clamped" if feature is None else \
        f"{component.config.model.features[feature].name}_clamped"
    return name if name in declared else port


def node_table(component, model, verilog_text):
    """Every datapath value of every unit, named as in the Verilog (a bank's units with
    ``u{index}_``), with its level and register stage in the one count, its children, and
    where ``verilog_text`` (the emitted module) holds it."""
    ports = {port.name for port in port_table(component, model)}
    declared = set(_DECLARED.findall(verilog_text))
    plan = component.bank
    units = plan.units if plan is not None else (component.analysis,)
    rows = []
    for index, analysis in enumerate(units):
        prefix = f"u{index}_" if model.is_bank else ""
        names = {node.index: prefix + node.name for node in analysis.nodes}
        for node in analysis.nodes:
            rows.append({
                "name": names[node.index],
                **({"unit": model.units[index].name} if model.is_bank else {}),
                "kind": node.kind, "level": node.level,
                "stage": component.level_stage(node.level),
                "range": [node.lo, node.hi], "bits": node.bits, "signed": node.is_signed,
                "sign": node.sign, "children": [names[c] for c in node.children],
                "verilog": _wire(node, names[node.index], component, model,
                                 index if model.is_bank else None, ports, declared)})
    return rows


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


def unit_histograms(model, scores, labels, bins=30):
    """For a bank: each unit's score on labelled rows, split into the rows of its own class and
    the rest (a unit should score its own class above the others)."""
    out = []
    for k, (unit, label) in enumerate(zip(model.units, model.labels)):
        column = np.asarray(scores[:, k], dtype=np.float64)
        own = labels == label
        edges = np.histogram_bin_edges(column, bins=bins)
        out.append({"unit": unit.name, "class_label": label,
                    "edges": [float(e) for e in edges],
                    "counts": {f"class {label}": np.histogram(column[own], edges)[0].tolist(),
                               "other classes": np.histogram(column[~own], edges)[0].tolist()}})
    return out


def report_json(report):
    return json.dumps(_jsonable(report), indent=2, sort_keys=False) + "\n"


def estimates_of(report):
    """Each target's cost estimate, in the order of TARGETS. Reports written before there was
    one per target have a single ``estimate``; it reads as its target's."""
    found = dict(report.get("estimates") or {})
    older = report.get("estimate")
    if older and older.get("target") not in found:
        found[older["target"]] = older
    order = {target: index for index, target in enumerate(TARGETS)}
    return {t: found[t] for t in sorted(found, key=lambda t: (order.get(t, len(order)), t))}


def store_estimate(report, figures):
    """Put ``figures`` in the report as its target's estimate, keeping the other targets'."""
    estimates = estimates_of(report)
    estimates[figures["target"]] = figures
    report.pop("estimate", None)
    report["estimates"] = estimates_of({"estimates": estimates})


def estimate_facts(figures):
    """An estimate's device name, LUT4 equivalents and rule, also for older reports'."""
    target = figures["target"]
    name = figures.get("device_name") or device_name(target, figures["device"].split())
    equivalents = figures.get("lut4_equivalents")
    if equivalents is None:
        equivalents = lut4_equivalents(target, figures["luts"], figures["carries"])
    return name, equivalents, figures.get("lut4_rule") or LUT4_RULES.get(target, "")


def shortfall_text(figures):
    """What a design that was not placed needs beyond the device, in words."""
    return needs_text(estimate_facts(figures)[0], figures.get("does_not_fit", []))


def cost_text(figures):
    """One estimate in a line: LUT4 equivalents first, the raw cell counts beside them."""
    _, equivalents, _ = estimate_facts(figures)
    lut, carry = CELL_NAMES.get(figures["target"], ("LUT", "carry"))
    text = (f"{equivalents:,} LUT4 equivalents ({figures['luts']:,} {lut}, "
            f"{figures['carries']:,} {carry}), {figures['flip_flops']:,} flip-flops, "
            f"{figures['dsps']} DSPs (multipliers "
            f"{'may use DSPs' if figures.get('dsp_inference') else 'in LUTs'}), ")
    text += f"fmax {figures['fmax_mhz']:.1f} MHz" if figures.get("placed", True) else \
        f"not placed: {shortfall_text(figures)}"
    guard = figures.get("input_guard")
    if guard:
        text += (f"; of which the input guard {guard['lut4_equivalents']:+,} LUT4 equivalents, "
                 f"{guard['flip_flops']:+,} flip-flops (synthesis of the same design without "
                 f"it: {guard['without_guard']['lut4_equivalents']:,})")
    return text


def levels_text(tree):
    """``6 levels (0 products, 1-4 adders, 5 bias and decision)``, from the report's tree."""
    runs = []
    for level, name in enumerate(tree.get("level_names", [])):
        if runs and runs[-1][0] == name:
            runs[-1][2] = level
        else:
            runs.append([name, level, level])
    parts = [f"{first}{'' if first == last else f'-{last}'} {name}" for name, first, last in runs]
    return _count(tree["levels"], "level") + (f" ({', '.join(parts)})" if parts else "")


def _count(number, noun):
    return f"{number} {noun}{'' if number == 1 else 's'}"


def stages_text(report):
    """The register stages and the levels each follows, in the levels' count."""
    tree = report["tree"]
    stages = tree.get("stages")
    if stages is None:
        return _count(report.get("register_stages", report["latency_cycles"]), "register stage")
    if not stages:
        return "no register stages (combinational)"
    if len(stages) == tree["levels"]:
        return f"{_count(len(stages), 'register stage')}, one after every level"
    spans = ", ".join(f"stage {s['stage']} after level" + (
        f" {s['levels'][0]}" if s["levels"][0] == s["levels"][1]
        else f"s {s['levels'][0]}-{s['levels'][1]}") for s in stages)
    return f"{_count(len(stages), 'register stage')} ({spans})"


def summary_lines(report):
    """The short form of the report, for the terminal."""
    lo, hi = report["score_range"]
    verification = report["verification"]
    lines = [
        f"module {report['module']}: {len(report['features'])} features -> "
        f"{report['verilog']}",
        f"  score range [{lo}, {hi}] needs {report['score_bits_min']} bits; port "
        f"{report['score_bits']} bits (headroom {report['headroom_bits']})",
        (f"  serial multiply-accumulate: {report.get('beats_per_result')} beats per result; "
         if report["tree"]["arch"] == "serial" else
         f"  datapath: {levels_text(report['tree'])}, {len(report['tree']['nodes'])} "
         f"nodes; {stages_text(report)}; ") + (f"{report['tree']['split_adders']} adders split "
                                               f"in {report['tree']['split_bits']}-bit parts; "
                                               if report["tree"].get("split_adders") else "")
        + f"latency {report['latency_cycles']} cycle(s)",
        f"  verified in {verification['simulator_version']}: {report['vectors_checked']} vectors over "
        f"{verification['cycles']} cycles, {report['mismatches']} mismatches",
    ]
    guard = report.get("input_guard")
    if guard and guard["needed"]:
        what = " and ".join(word for word, on in (("clamped", guard["clamp"]),
                                                  (f"flagged on {guard['flag_port']}",
                                                   guard["flag"])) if on)
        lines.append(f"  codes outside the declared ranges of "
                     f"{', '.join(guard['guarded_features'])}: "
                     + (f"{what}" if what else "NOT guarded (turned off): results for such "
                        "codes are not specified"))
    if report.get("data"):
        data = report["data"]
        lines.append(f"  accuracy on {data['file']}: {data['accuracy']:.4f} over {data['rows']} rows")
    proof = report.get("proof")
    if proof:
        lines.append(f"  proof of {proof['netlist']}: {proof['status']} ({proof['lemmas']} "
                     f"lemmas, {proof['solver']})")
        if proof["status"] != "proved":
            lines.append(f"  PROOF {proof['detail']}")
    for text in verification.get("first_mismatches", [])[:3]:
        lines.append(f"  MISMATCH {text}")
    lines.append(f"  caution: {SAFETY_CAUTION}")
    return lines


